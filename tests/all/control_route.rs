//! The tracking controller on the quickstart's evaluation episodes: clean success in every episode, no contact,
//! and the measurement behind `baseline.clearance`'s default (how far any joint point of the arm strays from
//! where the timed reference puts it).

use std::path::Path;
use termwise::control::RouteFollower;
use termwise::sim::MAX_JOINTS;
use termwise::study::experiment;
use termwise::task::begin_eval;

#[test]
fn the_controller_reaches_every_quickstart_goal_without_contact_and_within_its_clearance() {
    let exp = experiment::load(Path::new("experiments/quickstart.toml")).unwrap();
    let v = exp
        .variants
        .iter()
        .find(|v| v.name == "tracking-controller")
        .unwrap();
    let mut ep = v.episode();
    let n = v.scenario.n();
    let arm = &v.scenario.arm;
    let mut worst_dev: f64 = 0.0;
    let (mut clean, mut contact) = (0, 0);
    for j in 0..exp.study.eval_episodes as u64 {
        begin_eval(&mut ep, exp.study.eval_seed, j);
        let mut f = RouteFollower::new(&v.baseline, &v.plan, &v.scenario);
        let mut u = [0.0; MAX_JOINTS];
        let mut action = vec![0f32; n];
        loop {
            f.action(&ep.sim, &mut u);
            // Tracking deviation: the largest distance between a joint point of the arm and the same point of
            // the reference configuration at this instant.
            if let Some(r) = f.reference(ep.sim.time()) {
                let (mut a, mut b) = ([[0.0; 2]; MAX_JOINTS + 1], [[0.0; 2]; MAX_JOINTS + 1]);
                arm.joint_points(&ep.sim.state().q[..n], &mut a);
                arm.joint_points(&r.q[..n], &mut b);
                for k in 1..=n {
                    worst_dev = worst_dev.max((a[k][0] - b[k][0]).hypot(a[k][1] - b[k][1]));
                }
            }
            for i in 0..n {
                action[i] = (u[i] / ep.sim.action_limits()[i]) as f32;
            }
            let (now, _, terminal) = ep.step(&action);
            if terminal || now.timed_out {
                break;
            }
        }
        let m = ep.metrics();
        clean += m.success as usize;
        contact += m.collided as usize;
    }
    eprintln!(
        "controller: clean success {clean}/{}, episodes with contact {contact}, largest tracking deviation {worst_dev:.4} m",
        exp.study.eval_episodes
    );
    // The bar: clean success >= 0.97 and no episode with contact.
    assert!(
        clean as f64 >= 0.97 * exp.study.eval_episodes as f64,
        "clean success {clean}"
    );
    assert_eq!(contact, 0);
    // The default clearance must cover the tracking deviation measured here.
    assert!(worst_dev < v.baseline.clearance, "deviation {worst_dev} m");
}
