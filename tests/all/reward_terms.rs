//! Reward terms and the composer on hand-worked cases: projection geometry for the path terms, each term's
//! value and sign, per-term bookkeeping, potential telescoping over a simulated episode, the `[reward]`
//! table's error messages, and the `termwise terms` listing.

use std::sync::Arc;
use termwise::plan::{Polyline, ReferencePath};
use termwise::reward::{registry, Composer, RewardSpec};
use termwise::sim::{ArmEnv, Scenario, StepReport, MAX_JOINTS};

/// A report at effector `ee` with goal `goal`, at rest, no contact.
fn report(ee: [f64; 2], goal: [f64; 2]) -> StepReport {
    StepReport {
        t: 0.0,
        steps: 0,
        q: [0.0; MAX_JOINTS],
        dq: [0.0; MAX_JOINTS],
        ddq: [0.0; MAX_JOINTS],
        action: [0.0; MAX_JOINTS],
        prev_action: [0.0; MAX_JOINTS],
        ee,
        ee_prev: ee,
        ee_vel: [0.0; 2],
        goal,
        goal_dist: (ee[0] - goal[0]).hypot(ee[1] - goal[1]),
        min_clearance: 1.0,
        obstacle_clearance: 1.0,
        collided: false,
        reached_goal: false,
        timed_out: false,
        steps_left: 100,
        goal_jumped: false,
        obstacle_moved: false,
    }
}

/// The L-shaped path (0,0) -> (1,0) -> (1,1), length 2 m.
fn l_path() -> ReferencePath {
    ReferencePath {
        joints: vec![[0.0; MAX_JOINTS]; 3],
        points: vec![[0.0, 0.0], [1.0, 0.0], [1.0, 1.0]],
        fallback: false,
    }
}

fn spec(toml: &str) -> RewardSpec {
    RewardSpec::from_toml_str(toml, "test.toml").expect("valid reward table")
}

#[test]
fn path_terms_on_hand_worked_geometry() {
    // Hand-worked Euclidean geometry (orthogonal projection of a point on a segment, clamped to its ends):
    // (0.4, 0.3) projects to (0.4, 0): distance 0.3, arc length 0.4.
    // (1.5, 0.6) projects to (1, 0.6) on the second leg: distance 0.5, arc length 1 + 0.6 = 1.6.
    let s = spec(
        "[reward.waypoint_distance]\nweight = 2.0\nscale = 1.5\n\
         [reward.waypoint_progress]\nscale = 3.0\n",
    );
    let mut c = Composer::new(&s, 0.99);
    assert_eq!(c.names(), ["waypoint_distance", "waypoint_progress"]);
    let goal = [1.0, 1.0];
    let path = l_path();
    let a = report([0.4, 0.3], goal);
    let b = report([1.5, 0.6], goal);
    c.reset(&a, Some(&path));
    let total = c.step(&a, &b);
    // distance: -weight * scale * 0.5 = -2 * 1.5 * 0.5 = -1.5; progress: +3 * (1.6 - 0.4) = +3.6.
    assert!((c.terms()[0] - (-1.5)).abs() < 1e-12, "{:?}", c.terms());
    assert!((c.terms()[1] - 3.6).abs() < 1e-12, "{:?}", c.terms());
    assert!((total - 2.1).abs() < 1e-12);
    // Moving back gives negative progress: 3 * (0.4 - 1.6) = -3.6; distance back at 0.3: -2 * 1.5 * 0.3 = -0.9.
    c.step(&b, &a);
    assert!((c.terms()[1] + 3.6).abs() < 1e-12);
    assert!((c.terms()[0] + 0.9).abs() < 1e-12);
    // Episode sums: distance -1.5 - 0.9 = -2.4; progress 3.6 - 3.6 = 0.
    assert!((c.episode_sums()[0] + 2.4).abs() < 1e-12);
    assert!(c.episode_sums()[1].abs() < 1e-12);
    // Cross-check against the planner's own projection, `Polyline::project`.
    let pl = Polyline {
        points: &path.points,
    };
    let (pa, pb) = (pl.project(a.ee), pl.project(b.ee));
    assert!((3.0 * (pb.along - pa.along) - 3.6).abs() < 1e-12);
    // Without a path the path terms are 0.
    c.set_path(None);
    assert_eq!(c.step(&a, &b), 0.0);
}

#[test]
fn remaining_path_potential_on_hand_worked_geometry() {
    // Phi = -(remaining path). At (0.4, 0.3): remaining 2 - 0.4 = 1.6; at (1.5, 0.6): 0.4 (goal at the path end).
    // F = gamma * (-0.4) - (-1.6) = 1.6 - 0.4 gamma (Ng et al. 1999, shaping F = gamma Phi(s') - Phi(s)).
    let gamma = 0.9;
    let mut c = Composer::new(
        &spec("[reward.potential]\nphi = \"remaining-path\"\n"),
        gamma,
    );
    let path = l_path();
    let a = report([0.4, 0.3], [1.0, 1.0]);
    let mut b = report([1.5, 0.6], [1.0, 1.0]);
    c.reset(&a, Some(&path));
    let f = c.step(&a, &b);
    assert!((f - (1.6 - 0.4 * gamma)).abs() < 1e-12, "{f}");
    // The goal jumps to (1, 2) during the step: the remaining length gains the leg from the path end (1,1) to
    // the new goal, 1 m: Phi(s') = -1.4, F = 1.6 - 1.4 gamma.
    b.goal = [1.0, 2.0];
    b.goal_dist = (0.5f64).hypot(1.4);
    let f = c.step(&a, &b);
    assert!((f - (1.6 - 1.4 * gamma)).abs() < 1e-12, "{f}");
    // Reaching the goal is terminal: Phi(s') = 0, F = -Phi(s) = 1.6.
    let mut done = report([1.0, 0.98], [1.0, 1.0]);
    done.reached_goal = true;
    assert!(c.ends_episode(&done));
    let f = c.step(&a, &done);
    assert!((f - 1.6).abs() < 1e-12, "{f}");
    // goal-distance potential: Phi = -|ee - goal|: from (0.4, 0.3) (distance hypot(0.6, 0.7)) to (1.5, 0.6)
    // (distance hypot(0.5, 0.4)).
    let mut c = Composer::new(
        &spec("[reward.potential]\nphi = \"goal-distance\"\n"),
        gamma,
    );
    let b = report([1.5, 0.6], [1.0, 1.0]);
    c.reset(&a, None);
    let f = c.step(&a, &b);
    let expect = -gamma * 0.5f64.hypot(0.4) + 0.6f64.hypot(0.7);
    assert!((f - expect).abs() < 1e-12);
}

#[test]
fn simple_terms_values_and_signs() {
    // Values worked by hand from each term's documented formula (termwise's own definitions).
    let s = spec(
        "[reward.goal]\nbonus = 5\ndense = 0.5\n\
         [reward.time]\nweight = 2\ncost = 0.01\n\
         [reward.acceleration]\njoint = 0.01\naction_change = 0.1\n\
         [reward.collision]\npenalty = 3\n",
    );
    let mut c = Composer::new(&s, 0.99);
    assert_eq!(c.names(), ["goal", "time", "acceleration", "collision"]);
    assert_eq!(s.term_names(), c.names());
    let prev = report([0.0, 0.0], [0.3, 0.4]);
    let mut now = report([0.0, 0.0], [0.3, 0.4]); // goal distance 0.5 (3-4-5 triangle)
    now.ddq[0] = 3.0;
    now.ddq[1] = -4.0; // sum of squares 25
    now.action[0] = 1.0;
    now.prev_action[0] = 0.5;
    now.action[1] = -2.0;
    now.prev_action[1] = -1.0; // changes 0.5, -1: sum of squares 1.25
    c.reset(&prev, None);
    let total = c.step(&prev, &now);
    let want = [-0.25, -0.02, -(0.01 * 25.0 + 0.1 * 1.25), 0.0];
    for (got, w) in c.terms().iter().zip(want) {
        assert!((got - w).abs() < 1e-12, "{:?} vs {want:?}", c.terms());
    }
    assert!((total - want.iter().sum::<f64>()).abs() < 1e-12);
    // Arrival pays the bonus; contact costs the penalty and (terminate defaults to true) ends the episode.
    now.reached_goal = true;
    c.step(&prev, &now);
    assert!((c.terms()[0] - (5.0 - 0.25)).abs() < 1e-12);
    now.reached_goal = false;
    now.collided = true;
    assert!(c.ends_episode(&now));
    c.step(&prev, &now);
    assert!((c.terms()[3] + 3.0).abs() < 1e-12);
    // Episode sums are the sums of the three steps' weighted values; reset clears them.
    assert!((c.episode_sums()[1] + 0.06).abs() < 1e-12);
    assert!((c.episode_total() - c.episode_sums().iter().sum::<f64>()).abs() < 1e-12);
    c.reset(&prev, None);
    assert!(c.episode_sums().iter().all(|&v| v == 0.0));
}

#[test]
fn weight_zero_turns_a_term_off_but_collision_still_ends_when_asked() {
    let s = spec("[reward.collision]\nweight = 0\n[reward.time]\ncost = 0.1\n");
    assert_eq!(s.term_names(), ["time"]);
    let c = Composer::new(&s, 0.99);
    let mut now = report([0.0, 0.0], [1.0, 0.0]);
    now.collided = true;
    assert!(c.ends_episode(&now), "terminate is honoured with weight 0");
    let s = spec("[reward.collision]\nterminate = false\n");
    assert!(!Composer::new(&s, 0.99).ends_episode(&now));
    // No collision table: contact does not end the episode; the goal always does.
    let c = Composer::new(&spec("[reward.time]\n"), 0.99);
    assert!(!c.ends_episode(&now));
    now.reached_goal = true;
    assert!(c.ends_episode(&now));
}

#[test]
fn potential_telescopes_over_a_simulated_episode() {
    // Ng, Harada & Russell 1999 (proof of Theorem 1): sum_t gamma^t F_t = gamma^T Phi(s_T) - Phi(s_0), and
    // = -Phi(s_0) when s_T is terminal (Phi = 0 there). Run the simulator on the benchmark scenario.
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/table-2link-4obs.toml"
    );
    let sc =
        Arc::new(Scenario::from_toml_str(&std::fs::read_to_string(path).unwrap(), path).unwrap());
    let env = ArmEnv::new(sc.clone());
    let first = env.last_report();
    let goal = first.goal;
    let ref_path = ReferencePath {
        joints: vec![[0.0; MAX_JOINTS]; 3],
        points: vec![first.ee, [0.6, 0.2], goal],
        fallback: false,
    };
    let gamma = 0.97;
    for phi in ["remaining-path", "goal-distance"] {
        let s = spec(&format!("[reward.potential]\nphi = \"{phi}\"\n"));
        let mut c = Composer::new(&s, gamma);
        c.reset(&first, Some(&ref_path));
        let mut env2 = env.clone();
        let mut prev = first;
        let mut disc = 0.0;
        let mut g = 1.0;
        let polyline = Polyline {
            points: &ref_path.points,
        };
        let phi_of = |r: &StepReport| match phi {
            "remaining-path" => {
                let p = polyline.project(r.ee);
                -((p.length - p.along)
                    + (goal[0] - ref_path.points[2][0]).hypot(goal[1] - ref_path.points[2][1]))
            }
            _ => -r.goal_dist,
        };
        let phi0 = phi_of(&first);
        let mut last = first;
        for k in 0..150 {
            let s = (k as f64 * 0.05).sin();
            let now = env2.step(&[4.0 * s, -3.0 * s]);
            disc += g * c.step(&prev, &now);
            g *= gamma;
            prev = now;
            last = now;
            if c.ends_episode(&now) {
                break;
            }
        }
        let end = if c.ends_episode(&last) {
            0.0
        } else {
            phi_of(&last)
        };
        let expect = g * end - phi0;
        assert!((disc - expect).abs() < 1e-9, "{phi}: {disc} vs {expect}");
    }
}

#[test]
fn unknown_term_lists_known_terms_and_nearest() {
    let e = RewardSpec::from_toml_str("[reward.colision]\npenalty = 1\n", "exp.toml").unwrap_err();
    let msg = e.to_string();
    assert_eq!(e.path, "reward.colision");
    assert_eq!(e.line, Some(1));
    assert!(msg.contains("did you mean `collision`?"), "{msg}");
    for t in registry() {
        assert!(msg.contains(t.name), "{msg}");
    }
    let e = RewardSpec::from_toml_str("[reward.goal]\nbonsu = 1\n", "exp.toml").unwrap_err();
    assert_eq!(e.path, "reward.goal.bonsu");
    assert_eq!(e.line, Some(2));
    assert!(e.message.contains("did you mean `bonus`?"), "{e}");
}

#[test]
fn bad_values_name_their_key_path() {
    let cases = [
        ("[reward.time]\ncost = nan\n", "reward.time.cost", "finite"),
        (
            "[reward.time]\nweight = -1.0\n",
            "reward.time.weight",
            "must be >= 0",
        ),
        (
            "[reward.goal]\nbonus = -3\n",
            "reward.goal.bonus",
            "must be >= 0",
        ),
        (
            "[reward.collision]\nterminate = 1\n",
            "reward.collision.terminate",
            "true or false",
        ),
        (
            "[reward.potential]\nphi = \"goal-distanse\"\n",
            "reward.potential.phi",
            "did you mean `goal-distance`",
        ),
        (
            "[reward.acceleration]\njoint = \"big\"\n",
            "reward.acceleration.joint",
            "must be a number",
        ),
        ("[reward]\ntime = 3\n", "reward.time", "must be a table"),
        (
            "[reward.potential]\nweight = inf\n",
            "reward.potential.weight",
            "finite",
        ),
    ];
    for (src, path, needle) in cases {
        let e = RewardSpec::from_toml_str(src, "exp.toml").unwrap_err();
        assert_eq!(e.path, path, "{src}");
        assert!(e.to_string().contains(needle), "{src}: {e}");
        assert!(e.line.is_some(), "{src}: {e}");
    }
    // A negative weight is allowed where the sign convention says so: a scaled potential is a potential.
    let s = spec("[reward.potential]\nweight = -0.5\n");
    assert_eq!(s.present[0].weight, -0.5);
}

#[test]
fn terms_command_lists_the_registry() {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_termwise"))
        .arg("terms")
        .output()
        .expect("run termwise terms");
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(registry().len(), 7);
    for t in registry() {
        assert!(text.contains(&format!("[reward.{}]", t.name)), "{text}");
        for p in t.params {
            assert!(
                text.contains(p.name) && text.contains(p.meaning),
                "{}",
                p.name
            );
        }
    }
}

#[test]
fn ending_on_contact_charges_the_forgone_steps_so_crashing_early_does_not_pay() {
    // termwise's own rule (the collision term's doc): with remaining_cost = c the terminating contact step costs
    // penalty + c * steps_left. Worked by hand: time cost 0.01 per step, horizon 300. A policy that crashes at step
    // 10 collects 10 * -0.01 - 1 - 0.01 * 290 = -4.0; one that wanders to the horizon collects 300 * -0.01 = -3.0.
    // Without the charge the crash would collect -1.1 and beat wandering.
    let s = spec(
        "[reward.time]\ncost = 0.01\n[reward.collision]\npenalty = 1\nremaining_cost = 0.01\n",
    );
    let mut c = Composer::new(&s, 0.99);
    let prev = report([0.0, 0.0], [1.0, 0.0]);
    c.reset(&prev, None);
    let mut now = report([0.0, 0.0], [1.0, 0.0]);
    for k in 1..10 {
        now.steps_left = 300 - k;
        c.step(&prev, &now);
    }
    now.steps_left = 290;
    now.collided = true;
    c.step(&prev, &now);
    assert!(c.ends_episode(&now));
    assert!(
        (c.episode_total() + 4.0).abs() < 1e-12,
        "{}",
        c.episode_total()
    );
    // The charge applies only when contact ends the episode.
    let s = spec("[reward.collision]\npenalty = 1\nremaining_cost = 0.01\nterminate = false\n");
    let mut c = Composer::new(&s, 0.99);
    c.reset(&prev, None);
    c.step(&prev, &now);
    assert!((c.episode_total() + 1.0).abs() < 1e-12);
}
