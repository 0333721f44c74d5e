//! Where waypoints come from (`[waypoints]`): degraded planner references (fewer, noisy, stale) and their
//! settings' errors, checked on the two-link scene of the moving-goal study.

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::path::Path;
use termwise::plan::ReferencePath;
use termwise::study::experiment;
use termwise::task::begin_eval;
use termwise::task::waypoints::{keep_evenly, Refresh, WaypointSource, WaypointSpec};

/// A two-link moving-goal experiment (goal jump at 0.3 s) with `extra` appended to its base.
fn experiment_with(extra: &str) -> Result<experiment::Experiment, String> {
    let text = format!(
        r#"
[study]
name = "sources"
seeds = 1
budget = 2048
eval_episodes = 4

[scenario]
file = "scenarios/table-2link-2obs.toml"
[scenario.events]
goal_jump_times = [0.3]

[plan]
clearance_margin = 0.02

[reward.goal]
bonus = 5.0
[reward.waypoint_progress]
weight = 2.0
{extra}
"#
    );
    experiment::parse(&text, Path::new("experiments/sources.toml")).map_err(|e| e.to_string())
}

#[test]
fn fewer_waypoints_keep_evenly_spaced_indices_with_start_and_goal() {
    // round(i (K-1) / (k-1)) for i = 0..k, worked by hand: K = 5, k = 3 -> 0, 2, 4; K = 6, k = 4 -> 0, 1.67 -> 2,
    // 3.33 -> 3, 5; k = 2 -> the start and the goal.
    let path = |k: usize| ReferencePath {
        joints: (0..k).map(|i| [i as f64; 6]).collect(),
        points: (0..k).map(|i| [i as f64, 0.0]).collect(),
        fallback: false,
    };
    let picked = |p: ReferencePath| p.points.iter().map(|x| x[0] as usize).collect::<Vec<_>>();
    assert_eq!(picked(keep_evenly(path(5), 3)), vec![0, 2, 4]);
    assert_eq!(picked(keep_evenly(path(6), 4)), vec![0, 2, 3, 5]);
    assert_eq!(picked(keep_evenly(path(5), 2)), vec![0, 4]);
    assert_eq!(picked(keep_evenly(path(5), 5)), vec![0, 1, 2, 3, 4]);
    // Joints follow the same picks.
    let kept = keep_evenly(path(6), 4);
    assert_eq!(kept.joints[1][0], 2.0);
}

#[test]
fn noisy_waypoints_move_by_the_stated_standard_deviation_and_stay_consistent() {
    let exp = experiment_with("[waypoints]\nnoise = 0.03\n").unwrap();
    let v = &exp.variants[0];
    let clean = experiment_with("").unwrap();
    let (mut noisy_ep, mut clean_ep) = (v.episode(), clean.variants[0].episode());
    let arm = &v.scenario.arm;
    let (mut sum_sq, mut count) = (0.0, 0usize);
    for j in 0..60 {
        begin_eval(&mut noisy_ep, 1000, j);
        begin_eval(&mut clean_ep, 1000, j);
        let (a, b) = (&noisy_ep.path, &clean_ep.path);
        let last = a.points.len() - 1;
        // The start and the goal waypoint stay exact (the same draw and plan: noise has its own stream).
        assert_eq!(a.points[0], b.points[0]);
        assert_eq!(a.points[last], b.points[last]);
        for k in 1..last {
            // Joints and effector waypoints agree: the point is the arm's effector at the noisy joints.
            let fk = arm.effector(&a.joints[k][..2]);
            assert!(
                (fk[0] - a.points[k][0]).abs() < 1e-12 && (fk[1] - a.points[k][1]).abs() < 1e-12
            );
            for d in 0..2 {
                let e = a.points[k][d] - b.points[k][d];
                sum_sq += e * e;
                count += 1;
            }
        }
    }
    // Sample variance of N(0, sigma^2) displacements: (N-1) s^2 / sigma^2 is chi-square with N-1 degrees of
    // freedom (any statistics handbook, e.g. Montgomery & Runger, Applied Statistics and Probability for
    // Engineers, 2014, sec. 8.3); for N = 360 its 0.1% and 99.9% points are about 0.78 N and 1.24 N (normal
    // approximation, from memory). Damped least squares lands within 1e-6 m of reachable targets, so the
    // observed spread is the drawn one.
    let ratio = sum_sq / count as f64 / (0.03 * 0.03);
    assert_eq!(count, 360);
    assert!((0.78..1.24).contains(&ratio), "variance ratio {ratio}");
}

#[test]
fn stale_waypoints_ignore_a_goal_jump_that_the_planner_follows() {
    let at_jump = |extra: &str| {
        let exp = experiment_with(extra).unwrap();
        let mut ep = exp.variants[0].episode();
        begin_eval(&mut ep, 1000, 0);
        let first_goal = *ep.path.points.last().unwrap();
        // Hold still until the jump at 0.3 s (30 control steps), and 40 steps more.
        let mut jumped_at = None;
        for s in 0..70 {
            let (now, _, _) = ep.step(&[0.0, 0.0]);
            if now.goal_jumped {
                jumped_at = Some(s);
            }
        }
        assert!(jumped_at.is_some(), "the goal jumps at 0.3 s");
        (
            first_goal,
            *ep.path.points.last().unwrap(),
            ep.sim.goal(),
            ep.replans(),
        )
    };
    let (first, last, goal, replans) = at_jump("");
    assert_ne!(first, last);
    assert!((last[0] - goal[0]).hypot(last[1] - goal[1]) < 0.05);
    assert_eq!(replans, 1);
    let (first, last, _, replans) = at_jump("[waypoints]\nrefresh = \"never\"\n");
    assert_eq!(first, last, "a never-refreshed path keeps the old goal");
    assert_eq!(replans, 0);
}

#[test]
fn periodic_refresh_waits_for_its_due_time() {
    let src = WaypointSource {
        spec: WaypointSpec::default(),
        refresh: Refresh::Periodic(0.5),
        model: None,
    };
    // Renewed at 0.2 s: an event at 0.4 s waits; at 0.7 s (0.5 s later) it is due; nothing pending, nothing due.
    assert!(!src.due(true, 40, 0.4, 0.2));
    assert!(src.due(true, 70, 0.7, 0.2));
    assert!(!src.due(false, 70, 0.7, 0.2));
    let events = WaypointSource::default();
    assert!(events.due(true, 1, 0.01, 0.0));
    assert!(!events.due(false, 1, 0.01, 0.0));
    let never = WaypointSource {
        refresh: Refresh::Never,
        ..WaypointSource::default()
    };
    assert!(!never.due(true, 100, 10.0, 0.0));
}

#[test]
fn the_planner_source_is_unchanged_by_an_empty_section_and_seeds_noise_separately() {
    // An explicit default section and no section give the same episodes, paths and rewards.
    let a = experiment_with("").unwrap();
    let b = experiment_with("[waypoints]\nsource = \"planner\"\n").unwrap();
    let (mut ea, mut eb) = (a.variants[0].episode(), b.variants[0].episode());
    for j in 0..5 {
        begin_eval(&mut ea, 1000, j);
        begin_eval(&mut eb, 1000, j);
        assert_eq!(ea.path, eb.path);
    }
    let mut rng = ChaCha8Rng::seed_from_u64(3);
    for _ in 0..50 {
        let act = [rand::Rng::gen_range(&mut rng, -1.0..1.0f32), 0.3];
        assert_eq!(ea.step(&act).1.to_bits(), eb.step(&act).1.to_bits());
    }
}

#[test]
fn bad_waypoint_settings_are_refused_with_the_key_named() {
    let cases = [
        ("[waypoints]\nsource = \"oracle\"\n", "waypoints.source"),
        ("[waypoints]\nkeep = 1\n", "waypoints.keep"),
        ("[waypoints]\nkeep = 9\n", "waypoints.keep"),
        ("[waypoints]\nnoise = -0.1\n", "waypoints.noise"),
        (
            "[waypoints]\nrefresh = \"sometimes\"\n",
            "waypoints.refresh",
        ),
        (
            "[waypoints]\nrefresh = \"periodic\"\nperiod = 0\n",
            "waypoints.period",
        ),
        ("[waypoints]\nsource = \"learned\"\n", "waypoints.model"),
        ("[waypoints]\nmodel = \"models/x\"\n", "waypoints.model"),
        (
            "[waypoints]\nsource = \"learned\"\nmodel = \"no/such/folder\"\n",
            "waypoints.model",
        ),
        ("[waypoints]\nspeed = 1\n", "speed"),
    ];
    for (extra, key) in cases {
        let e = experiment_with(extra).expect_err(extra);
        assert!(e.contains(key), "{extra}: {e}");
    }
}

#[test]
fn the_learned_source_ends_on_the_goal_and_starts_at_the_arm() {
    // The shipped model of the moving-goal scene: its last waypoint is moved onto the goal by damped least
    // squares, so the effector waypoint there is the goal (every evaluation goal is reachable within the joint
    // limits); the first waypoint is the arm's own configuration.
    let exp =
        experiment_with("[waypoints]\nsource = \"learned\"\nmodel = \"../models/moving-goal\"\n")
            .unwrap();
    let mut ep = exp.variants[0].episode();
    for j in 0..20 {
        begin_eval(&mut ep, 1000, j);
        let goal = ep.sim.goal();
        let q = ep.sim.state().q;
        let p = &ep.path;
        assert_eq!(p.joints.len(), 5);
        assert_eq!(&p.joints[0][..2], &q[..2]);
        let end = *p.points.last().unwrap();
        assert!(
            (end[0] - goal[0]).hypot(end[1] - goal[1]) < 1e-4,
            "episode {j}: ends {end:?}, goal {goal:?}"
        );
        // Learned every step: the reference follows the arm.
        ep.step(&[0.5, -0.5]);
        assert_eq!(&ep.path.joints[0][..2], &ep.sim.state().q[..2]);
    }
}

#[test]
fn a_step_is_paid_on_the_reference_the_policy_acted_on() {
    // Progress along the reference (the waypoint_progress term: weight x scale x change of the effector's arc
    // length along the path) is measured on the path observed before the step, though the learned source
    // renews the path after every step (rooted at the arm's new configuration, where progress would be 0).
    let text = r#"
[study]
name = "paid"
seeds = 1
budget = 2048
[scenario]
file = "scenarios/table-2link-2obs.toml"
[plan]
clearance_margin = 0.02
[reward.waypoint_progress]
weight = 1.0
[waypoints]
source = "learned"
model = "../models/moving-goal"
"#;
    let exp = experiment::parse(text, Path::new("experiments/paid.toml")).unwrap();
    let mut ep = exp.variants[0].episode();
    let mut paid = 0.0;
    for j in 0..5 {
        begin_eval(&mut ep, 1000, j);
        for _ in 0..20 {
            let seen = ep.path.clone();
            let before = ep.sim.last_report().ee;
            let (now, r, _) = ep.step(&[0.6, -0.4]);
            let line = seen.polyline();
            let progress = line.project(now.ee).along - line.project(before).along;
            assert!(
                (r - progress).abs() < 1e-12,
                "reward {r}, progress on the seen path {progress}"
            );
            // The reference the policy sees next starts at the arm.
            assert_eq!(&ep.path.joints[0][..2], &now.q[..2]);
            paid += r.abs();
        }
    }
    assert!(paid > 0.1, "the term pays: {paid}");
}

#[test]
fn a_rebuilt_model_makes_the_runs_that_used_the_old_one_stale() {
    // The configuration hash of a learned-source variant covers the model's description and weights, not only
    // its folder name: the same folder with a different model gives another hash, the same model the same one.
    let dir = std::env::temp_dir().join(format!("termwise-rebuilt-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    for f in ["model.json", "model.safetensors"] {
        std::fs::copy(Path::new("models/moving-goal").join(f), dir.join(f)).unwrap();
    }
    let extra = format!(
        "[waypoints]\nsource = \"learned\"\nmodel = \"{}\"\n",
        dir.display()
    );
    let hash = || {
        let exp = experiment_with(&extra).unwrap();
        exp.config_hash(&exp.variants[0], 0)
    };
    let first = hash();
    assert_eq!(hash(), first);
    let json = std::fs::read_to_string(dir.join("model.json")).unwrap();
    let changed = json.replacen("\"best_epoch\": ", "\"best_epoch\": 1", 1);
    assert_ne!(json, changed);
    std::fs::write(dir.join("model.json"), changed).unwrap();
    assert_ne!(hash(), first);
    let _ = std::fs::remove_dir_all(&dir);
}
