//! End-to-end checks of the classical baseline in the shipped scenarios: it reaches seeded random goals along
//! hand-made straight joint-space paths within the 2 s horizon (acceleration and torque mode), avoids obstacles
//! when its path does, replans after goal jumps from a moving state, and tracks tightly in the simulator.
#![allow(clippy::needless_range_loop)]

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::sync::Arc;
use termwise::control::{BaselineSpec, TimeScaling, Tracker};
use termwise::plan::ReferencePath;
use termwise::sim::{ArmEnv, ArmState, JointVec, Scenario, MAX_JOINTS};
use termwise::task::trajectory::trajectory_metrics;

fn scenario(file: &str, edits: &[(&str, &str)]) -> Arc<Scenario> {
    let path = format!(
        "{}/experiments/scenarios/{file}",
        env!("CARGO_MANIFEST_DIR")
    );
    let mut src = std::fs::read_to_string(&path).expect("scenario file");
    for (from, to) in edits {
        assert!(src.contains(from), "{from} not in {file}");
        src = src.replace(from, to);
    }
    Arc::new(Scenario::from_toml_str(&src, &path).expect("valid scenario"))
}

/// K waypoints evenly spaced on the straight joint-space line from a to b.
fn straight_path(sc: &Scenario, a: &JointVec, b: &JointVec, k: usize) -> ReferencePath {
    let n = sc.n();
    let joints: Vec<JointVec> = (0..k)
        .map(|j| {
            let s = j as f64 / (k - 1) as f64;
            let mut q = [0.0; MAX_JOINTS];
            for i in 0..n {
                q[i] = a[i] + s * (b[i] - a[i]);
            }
            q
        })
        .collect();
    let points = joints.iter().map(|q| sc.arm.effector(q)).collect();
    ReferencePath {
        joints,
        points,
        fallback: false,
    }
}

/// Smallest clearance along the straight segment a -> b (200 samples).
fn line_clearance(env: &ArmEnv, a: &JointVec, b: &JointVec) -> f64 {
    (0..=200)
        .map(|j| {
            let s = j as f64 / 200.0;
            let mut q = [0.0; MAX_JOINTS];
            for i in 0..env.n() {
                q[i] = a[i] + s * (b[i] - a[i]);
            }
            env.clearances(&q).0
        })
        .fold(f64::INFINITY, f64::min)
}

struct Outcome {
    /// Control step at which the effector first came within the goal tolerance.
    reached: Option<usize>,
    collided: bool,
    /// Largest |q_ref - q| over the episode, rad.
    max_error: f64,
    /// Configurations visited, one per control step (start included).
    visited: Vec<JointVec>,
}

/// Run one episode: follow a straight path to `goal_q`; on a goal jump replan from the current (moving) state to
/// the elbow-matching inverse-kinematics solution of the new goal.
fn episode(
    sc: &Arc<Scenario>,
    spec: &BaselineSpec,
    start: ArmState,
    goal_q: JointVec,
    seed: u64,
) -> Outcome {
    let mut env = ArmEnv::new(sc.clone());
    let goal = sc.arm.effector(&goal_q);
    env.reset(start, goal, seed);
    let mut tracker = Tracker::new(spec, sc);
    tracker.follow(
        &straight_path(sc, &start.q, &goal_q, 16),
        &start.q,
        &start.dq,
        0.0,
    );
    let mut u = [0.0; MAX_JOINTS];
    let mut out = Outcome {
        reached: None,
        collided: false,
        max_error: 0.0,
        visited: vec![start.q],
    };
    let n = sc.n();
    for _ in 0..sc.horizon {
        let s = *env.state();
        let t = env.time();
        let r = tracker.reference(t).expect("following");
        for i in 0..n {
            out.max_error = out.max_error.max((r.q[i] - s.q[i]).abs());
        }
        tracker.action(&sc.arm, &s.q, &s.dq, t, &mut u);
        // What the study's runner hands the env: normalised, then scaled back by the env's limits.
        let lim = env.action_limits().to_vec();
        let normalised: Vec<f64> = (0..n).map(|i| u[i] / lim[i]).collect();
        assert!(normalised.iter().all(|x| x.abs() <= 1.0));
        let phys: Vec<f64> = (0..n).map(|i| normalised[i] * lim[i]).collect();
        let rep = env.step(&phys);
        out.visited.push(rep.q);
        out.collided |= rep.collided;
        if rep.reached_goal && out.reached.is_none() {
            out.reached = Some(rep.steps);
        }
        if rep.goal_jumped {
            let q_new = two_link_ik(sc, rep.goal, &rep.q);
            out.reached = None;
            tracker.follow(
                &straight_path(sc, &rep.q, &q_new, 16),
                &rep.q,
                &rep.dq,
                rep.t,
            );
        }
    }
    out
}

/// Closed-form inverse kinematics of the planar two-link arm by the law of cosines (hand-worked; the standard
/// two-link solution, cited from memory), choosing the elbow solution nearer to `near`; checked below by forward
/// kinematics.
fn two_link_ik(sc: &Scenario, p: [f64; 2], near: &JointVec) -> JointVec {
    let (l1, l2) = (sc.arm.links[0].length, sc.arm.links[1].length);
    let c2 = ((p[0] * p[0] + p[1] * p[1] - l1 * l1 - l2 * l2) / (2.0 * l1 * l2)).clamp(-1.0, 1.0);
    let mut best = [0.0; MAX_JOINTS];
    let mut best_d = f64::INFINITY;
    for sign in [1.0, -1.0] {
        let q2 = sign * c2.acos();
        let q1 = p[1].atan2(p[0]) - (l2 * q2.sin()).atan2(l1 + l2 * q2.cos());
        // Wrap joint 1 to the representation nearest the current angle, within its limits.
        let mut q1w = q1;
        while q1w - near[0] > std::f64::consts::PI {
            q1w -= 2.0 * std::f64::consts::PI;
        }
        while q1w - near[0] < -std::f64::consts::PI {
            q1w += 2.0 * std::f64::consts::PI;
        }
        for cand in [
            q1w,
            q1w - 2.0 * std::f64::consts::PI,
            q1w + 2.0 * std::f64::consts::PI,
        ] {
            let l = &sc.arm.links;
            if cand < l[0].q_min || cand > l[0].q_max || q2 < l[1].q_min || q2 > l[1].q_max {
                continue;
            }
            let d = (cand - near[0]).abs().max((q2 - near[1]).abs());
            if d < best_d {
                best_d = d;
                best = [0.0; MAX_JOINTS];
                best[0] = cand;
                best[1] = q2;
            }
        }
    }
    let e = sc.arm.effector(&best);
    assert!((e[0] - p[0]).hypot(e[1] - p[1]) < 1e-9, "IK missed {p:?}");
    best
}

/// Seeded random start/goal pairs (start from `sample_start`, goal configuration collision-free, goal point its
/// effector); when `min_clearance` is set only pairs whose straight line keeps that clearance are kept.
fn pairs(
    sc: &Arc<Scenario>,
    count: usize,
    seed: u64,
    min_clearance: Option<f64>,
) -> Vec<(ArmState, JointVec)> {
    let env = ArmEnv::new(sc.clone());
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut out = Vec::new();
    while out.len() < count {
        let start = env.sample_start(&mut rng);
        let goal_q = env.sample_start(&mut rng).q;
        if let Some(c) = min_clearance {
            if line_clearance(&env, &start.q, &goal_q) < c {
                continue;
            }
        }
        out.push((start, goal_q));
    }
    out
}

/// (success rate, collisions, mean time to the goal over successes in s).
fn success_rate(
    sc: &Arc<Scenario>,
    spec: &BaselineSpec,
    pairs: &[(ArmState, JointVec)],
) -> (f64, usize, f64) {
    let mut ok = 0;
    let mut collisions = 0;
    let mut steps = 0;
    for (k, (start, goal_q)) in pairs.iter().enumerate() {
        let o = episode(sc, spec, *start, *goal_q, k as u64);
        if let (Some(s), false) = (o.reached, o.collided) {
            ok += 1;
            steps += s;
        }
        collisions += o.collided as usize;
    }
    let mean_time = steps as f64 * sc.control_dt() / ok.max(1) as f64;
    (ok as f64 / pairs.len() as f64, collisions, mean_time)
}

#[test]
fn reaches_random_goals_in_acceleration_mode() {
    // reach-2link: acceleration control, 200 steps of 10 ms, tolerance 5 cm, no obstacles.
    let sc = scenario("reach-2link.toml", &[]);
    let p = pairs(&sc, 30, 11, None);
    for kind in [TimeScaling::Trapezoid, TimeScaling::Quintic] {
        let spec = BaselineSpec {
            time_scaling: kind,
            ..BaselineSpec::default()
        };
        let (rate, _, time) = success_rate(&sc, &spec, &p);
        eprintln!(
            "reach-2link acceleration {kind:?}: success rate {rate:.3} over {} pairs, mean time to goal {time:.2} s",
            p.len()
        );
        if kind == TimeScaling::Trapezoid {
            assert!(rate >= 0.9, "success rate {rate}");
        }
    }
}

#[test]
fn reaches_random_goals_in_torque_mode() {
    let sc = scenario(
        "reach-2link.toml",
        &[("control = \"acceleration\"", "control = \"torque\"")],
    );
    let p = pairs(&sc, 30, 11, None);
    let (rate, _, time) = success_rate(&sc, &BaselineSpec::default(), &p);
    eprintln!(
        "reach-2link torque trapezoid: success rate {rate:.3} over {} pairs, mean time to goal {time:.2} s",
        p.len()
    );
    assert!(rate >= 0.9, "success rate {rate}");
}

#[test]
fn reaches_goals_among_obstacles_without_collision_along_clear_lines() {
    // table-2link-4obs: only pairs whose straight joint line keeps 2 cm clearance (the check is whether tracking
    // stays close enough to the path to inherit its clearance).
    let sc = scenario("table-2link-4obs.toml", &[]);
    let p = pairs(&sc, 30, 5, Some(0.02));
    let (rate, collisions, time) = success_rate(&sc, &BaselineSpec::default(), &p);
    eprintln!(
        "table-2link-4obs acceleration trapezoid: success rate {rate:.3}, collisions {collisions}, mean time to goal {time:.2} s"
    );
    assert_eq!(collisions, 0);
    assert!(rate >= 0.9, "success rate {rate}");
}

#[test]
fn replans_after_goal_jumps_from_a_moving_state() {
    // Goal jumps at 0.5 s (arm moving at speed); horizon lengthened to 3 s so the second reach fits.
    let sc = scenario(
        "reach-2link.toml",
        &[
            ("horizon = 200", "horizon = 300"),
            ("[start]", "[events]\ngoal_jump_times = [0.5]\n\n[start]"),
        ],
    );
    let p = pairs(&sc, 30, 23, None);
    let (rate, _, time) = success_rate(&sc, &BaselineSpec::default(), &p);
    eprintln!("reach-2link with a goal jump at 0.5 s: success rate {rate:.3}, mean time to goal {time:.2} s");
    assert!(rate >= 0.9, "success rate {rate}");
}

#[test]
fn tracking_error_in_the_simulator_is_small() {
    // In the simulator (10 ms zero-order-hold control step, RK4 physics at 1 ms) the PD on acceleration and the
    // computed torque (exact model, gravity on) both keep the joints within 1e-3 rad of a quintic reference;
    // the continuous-time law's exactness is checked in `control::tracker` against the closed-form error ODE.
    for (mode, gravity) in [("acceleration", "0.0"), ("torque", "9.81")] {
        let sc = scenario(
            "reach-2link.toml",
            &[
                (
                    "control = \"acceleration\"",
                    &format!("control = \"{mode}\""),
                ),
                ("gravity = 0.0", &format!("gravity = {gravity}")),
            ],
        );
        let spec = BaselineSpec {
            time_scaling: TimeScaling::Quintic,
            ..BaselineSpec::default()
        };
        let p = pairs(&sc, 10, 3, None);
        let mut worst = 0.0f64;
        for (k, (start, goal_q)) in p.iter().enumerate() {
            let o = episode(&sc, &spec, *start, *goal_q, k as u64);
            worst = worst.max(o.max_error);
            let m = trajectory_metrics(&sc.arm, &o.visited, sc.control_dt());
            assert!(
                m.peak_acceleration
                    <= sc.arm.links.iter().map(|l| l.acc_max).fold(0.0, f64::max) * 1.05
            );
        }
        eprintln!("{mode} mode (gravity {gravity}): max tracking error {worst:.2e} rad");
        assert!(worst < 1e-3, "{mode}: max tracking error {worst}");
    }
}

#[test]
fn computed_torque_offset_decays_in_the_simulator_as_the_gains_imply() {
    // The computed-torque law applied through the simulator (torque mode, gravity on, control every 1 ms, RK4)
    // from an initial offset: each joint's error follows the closed-form solution of e'' + kd e' + kp e = 0
    // (Spong, Hutchinson & Vidyasagar, "Robot Modeling and Control", 2006, sec. 8.3), up to the sampling
    // error of a 1 ms zero-order hold (a few per cent of the offset).
    let sc = scenario(
        "reach-2link.toml",
        &[
            ("control = \"acceleration\"", "control = \"torque\""),
            ("gravity = 0.0", "gravity = 9.81"),
            ("substeps = 10", "substeps = 1"),
            ("horizon = 200", "horizon = 2000"),
            // Torque limits raised so the law is never clipped (the closed form assumes it is not).
            ("tau_max = 18.0", "tau_max = 200.0"),
            ("tau_max = 8.0", "tau_max = 200.0"),
        ],
    );
    let (kp, kd): ([f64; 2], [f64; 2]) = ([400.0, 100.0], [40.0, 8.0]); // critically damped, and zeta = 0.4
    let mut kpv = [0.0; MAX_JOINTS];
    let mut kdv = [0.0; MAX_JOINTS];
    kpv[..2].copy_from_slice(&kp);
    kdv[..2].copy_from_slice(&kd);
    let desired = |t: f64| {
        let mut r = termwise::control::RefSample {
            q: [0.0; MAX_JOINTS],
            dq: [0.0; MAX_JOINTS],
            ddq: [0.0; MAX_JOINTS],
        };
        r.q[0] = 0.4 + 0.8 * (2.0 * t).sin();
        r.dq[0] = 1.6 * (2.0 * t).cos();
        r.ddq[0] = -3.2 * (2.0 * t).sin();
        r.q[1] = -0.5 + 0.6 * (3.1 * t).cos();
        r.dq[1] = -0.6 * 3.1 * (3.1 * t).sin();
        r.ddq[1] = -0.6 * 3.1 * 3.1 * (3.1 * t).cos();
        r
    };
    let e0 = [0.1, -0.08];
    let d0 = desired(0.0);
    let mut start = ArmState::at_rest(&[d0.q[0] - e0[0], d0.q[1] - e0[1]]);
    start.dq[..2].copy_from_slice(&d0.dq[..2]);
    let mut env = ArmEnv::new(sc.clone());
    env.reset(start, [0.3, 0.3], 0);
    let mut worst_dev = 0.0f64;
    for _ in 0..2000 {
        let s = *env.state();
        let t = env.time();
        let d = desired(t);
        for i in 0..2 {
            // Closed form with e(0) = e0, e'(0) = 0 (velocities start on the reference).
            let wn = kp[i].sqrt();
            let zeta = kd[i] / (2.0 * wn);
            let want = if zeta == 1.0 {
                e0[i] * (1.0 + wn * t) * (-wn * t).exp()
            } else {
                let wd = wn * (1.0 - zeta * zeta).sqrt();
                e0[i] * (-zeta * wn * t).exp() * ((wd * t).cos() + zeta * wn / wd * (wd * t).sin())
            };
            worst_dev = worst_dev.max((d.q[i] - s.q[i] - want).abs());
        }
        let tau = termwise::control::computed_torque(
            &sc.arm,
            &kpv,
            &kdv,
            &s.q,
            &s.dq,
            &desired(t + 0.0005),
        );
        env.step(&tau[..2]);
    }
    eprintln!("largest deviation from the closed-form error: {worst_dev:.2e} rad (offset 0.1 rad)");
    assert!(worst_dev < 5e-3, "{worst_dev}");
    let s = *env.state();
    let d = desired(env.time());
    assert!((d.q[0] - s.q[0]).abs() < 1e-3 && (d.q[1] - s.q[1]).abs() < 1e-3);
}
