//! Reference paths for the arm: every returned path is collision-free when re-checked at ten times the
//! planner's resolution, waypoints are evenly spaced along it, IK goals are reached, results are
//! deterministic per seed, fallbacks are flagged, and replanning starts from the current state.

// Waypoint checks index joints of several waypoints in lockstep.
#![allow(clippy::needless_range_loop)]

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::path::Path;
use std::sync::Arc;
use termwise::plan::{
    plan_detailed, plan_path, replan, ArmSpace, FallbackReason, PlanReport, PlanSpec,
};
use termwise::sim::{ArmEnv, ArmState, JointVec, Scenario};

fn env(file: &str) -> ArmEnv {
    let sc = Scenario::load(Path::new(&format!("experiments/scenarios/{file}"))).unwrap();
    ArmEnv::new(Arc::new(sc))
}

fn spec() -> PlanSpec {
    PlanSpec {
        // A generous wall-clock budget keeps the tests on the deterministic path.
        time_budget_ms: 60_000.0,
        ..PlanSpec::default()
    }
}

/// Walk every route edge with steps of at most margin / 10 of arm motion (the planner's edge checks advance
/// by at least the margin) and return the smallest clearance seen.
fn fine_min_clearance(env: &ArmEnv, r: &PlanReport) -> f64 {
    let n = r.n;
    let space = ArmSpace::new(env, r.margin);
    let mut worst = f64::INFINITY;
    for w in r.route.windows(2) {
        let steps = (space.motion_bound(&w[0], &w[1]) / (r.margin / 10.0))
            .ceil()
            .max(1.0) as usize;
        for k in 0..=steps {
            let t = k as f64 / steps as f64;
            let q: Vec<f64> = (0..n).map(|i| w[0][i] + t * (w[1][i] - w[0][i])).collect();
            worst = worst.min(env.clearances(&q).0);
        }
    }
    worst
}

fn dist(a: &JointVec, b: &JointVec, n: usize) -> f64 {
    (0..n).map(|i| (a[i] - b[i]).powi(2)).sum::<f64>().sqrt()
}

fn check_paths(file: &str, planner: &str, goals: usize) -> (usize, usize) {
    let e = env(file);
    let n = e.n();
    let start = e.scenario().start_q.clone();
    let mut grng = ChaCha8Rng::seed_from_u64(21);
    let sp = PlanSpec {
        planner: planner.into(),
        ..spec()
    };
    let (mut found, mut fallback) = (0, 0);
    for k in 0..goals {
        let goal = e.sample_goal(&mut grng);
        let mut rng = ChaCha8Rng::seed_from_u64(k as u64);
        let r = plan_detailed(&e, &start, goal, &sp, &mut rng, false);
        let j = &r.path.joints;
        assert_eq!(j.len(), sp.waypoints);
        assert_eq!(r.path.points.len(), sp.waypoints);
        assert_eq!(&j[0][..n], &start[..]);
        // The effector points are the forward kinematics of the joint waypoints.
        for (q, p) in j.iter().zip(&r.path.points) {
            let f = e.scenario().arm.effector(&q[..n]);
            assert!((f[0] - p[0]).abs() < 1e-12 && (f[1] - p[1]).abs() < 1e-12);
        }
        if r.path.fallback {
            fallback += 1;
            assert_eq!(
                r.fallback_reason,
                Some(FallbackReason::NotFound),
                "goal {goal:?}"
            );
            continue;
        }
        found += 1;
        assert!(r.fallback_reason.is_none() && !r.timed_out);
        // The goal configuration puts the effector on the goal (IK tolerance 1e-4 m).
        let tip = r.path.points[sp.waypoints - 1];
        assert!(
            (tip[0] - goal[0]).hypot(tip[1] - goal[1]) < 1e-4,
            "{tip:?} {goal:?}"
        );
        let c = fine_min_clearance(&e, &r);
        assert!(c >= 0.0, "{file} goal {goal:?}: clearance {c} on the route");
        // Waypoints evenly spaced along the route: consecutive waypoints are never farther apart (in a
        // straight line) than the arc length between them, which is cost / (K - 1).
        let gap = r.cost / (sp.waypoints - 1) as f64;
        for w in j.windows(2) {
            assert!(dist(&w[0], &w[1], n) <= gap + 1e-9);
        }
        // Shortcutting never lengthens the search's path.
        assert!(r.iterations == 0 || r.cost <= r.search_cost + 1e-9);
    }
    (found, fallback)
}

#[test]
fn two_link_paths_are_collision_free_at_ten_times_finer_resolution() {
    for planner in ["rrt-star", "bi-rrt-star"] {
        let (found, _) = check_paths("table-2link-4obs.toml", planner, 40);
        // About half of the random goals lie in the start's free region of this scenario (the obstacles
        // split the joint space); the planner must find most of those.
        assert!(found >= 15, "{planner}: {found}");
    }
}

#[test]
fn three_link_paths_are_collision_free_at_ten_times_finer_resolution() {
    for planner in ["rrt-star", "bi-rrt-star"] {
        let (found, fallback) = check_paths("table-3link.toml", planner, 25);
        assert!(
            found >= 22,
            "{planner}: {found} found, {fallback} fallbacks"
        );
    }
}

#[test]
fn plans_are_deterministic_per_seed() {
    let e = env("table-2link-4obs.toml");
    let goal = [-0.2, 0.5];
    let a = plan_path(
        &e,
        &[0.3, 0.8],
        goal,
        &spec(),
        &mut ChaCha8Rng::seed_from_u64(4),
    );
    let b = plan_path(
        &e,
        &[0.3, 0.8],
        goal,
        &spec(),
        &mut ChaCha8Rng::seed_from_u64(4),
    );
    assert_eq!(a, b);
    assert!(!a.fallback);
}

#[test]
fn straight_line_when_it_is_free() {
    // The scenario's own goal is reachable in a straight joint-space line: the planner returns exactly that
    // (the shortest possible path to the nearest goal configuration), with equally spaced waypoints.
    let e = env("table-2link-4obs.toml");
    let r = plan_detailed(
        &e,
        &[0.3, 0.8],
        [0.35, 0.45],
        &spec(),
        &mut ChaCha8Rng::seed_from_u64(0),
        false,
    );
    assert!(!r.path.fallback && r.iterations == 0 && r.route.len() == 2);
    let j = &r.path.joints;
    for k in 0..5 {
        for i in 0..2 {
            let want = j[0][i] + (j[4][i] - j[0][i]) * k as f64 / 4.0;
            assert!((j[k][i] - want).abs() < 1e-12);
        }
    }
}

#[test]
fn fallbacks_are_flagged_straight_lines() {
    let e = env("table-2link-4obs.toml");
    // Out of reach (reach 0.75 m): no IK solution, straight line toward the closest configuration.
    let r = plan_detailed(
        &e,
        &[0.3, 0.8],
        [0.0, -0.85],
        &spec(),
        &mut ChaCha8Rng::seed_from_u64(0),
        false,
    );
    assert!(r.path.fallback);
    assert_eq!(
        r.fallback_reason,
        Some(FallbackReason::NoFreeGoalConfiguration)
    );
    // Reachable but walled off: link 1 cannot pass the discs at (-0.35, 0.4) and (0.45, -0.25)
    // (worked by hand: their distance to link 1 is below link radius + disc radius at those angles), so the
    // goal configurations with |q1| ~ 2.59 for the goal (-0.6, 0) cannot be reached.
    let r = plan_detailed(
        &e,
        &[0.3, 0.8],
        [-0.6, 0.0],
        &spec(),
        &mut ChaCha8Rng::seed_from_u64(0),
        false,
    );
    assert!(r.path.fallback && r.fallback_reason == Some(FallbackReason::NotFound));
    assert_eq!(r.iterations, spec().iterations);
    // The fallback is the straight joint-space line, evenly resampled.
    let j = &r.path.joints;
    for k in 0..5 {
        for i in 0..2 {
            let want = j[0][i] + (j[4][i] - j[0][i]) * k as f64 / 4.0;
            assert!((j[k][i] - want).abs() < 1e-12);
        }
    }
    // A start in collision: fallback without a search.
    let inside = [-0.507, 0.0]; // pointing straight through the disc at (0.45, -0.25)
    assert!(e.clearances(&inside).0 < 0.0);
    let r = plan_detailed(
        &e,
        &inside,
        [0.35, 0.45],
        &spec(),
        &mut ChaCha8Rng::seed_from_u64(0),
        false,
    );
    assert_eq!(r.fallback_reason, Some(FallbackReason::StartBlocked));
}

#[test]
fn replan_starts_from_the_current_state_after_obstacles_move() {
    // A disc moving through the workspace; after it moves past the replan margin the episode asks for a new
    // path from where the arm is now.
    let src = std::fs::read_to_string("experiments/scenarios/table-2link-4obs.toml").unwrap()
        + "\n[[obstacle]]\nshape = \"disc\"\ncenter = [-0.1, -0.55]\nradius = 0.06\nmotion = \"linear\"\nvelocity = [0.5, 0.0]\n";
    let sc = Scenario::from_toml_str(&src, "moving.toml").unwrap();
    let mut e = ArmEnv::new(Arc::new(sc));
    e.reset(ArmState::at_rest(&[0.3, 0.8]), [-0.2, 0.5], 0);
    let mut moved = false;
    for _ in 0..30 {
        let r = e.step(&[1.0, -1.0]);
        moved |= r.obstacle_moved;
    }
    assert!(moved, "the disc moved beyond the margin");
    let q = e.state().q;
    let path = replan(&mut e, &spec(), &mut ChaCha8Rng::seed_from_u64(3));
    assert_eq!(&path.joints[0][..2], &q[..2]);
    let tip = path.points[path.points.len() - 1];
    assert!((tip[0] + 0.2).hypot(tip[1] - 0.5) < 1e-4 || path.fallback);
    // mark_planned was called: the next step reports no move (the disc moves 5 mm per step < 0.05 m margin).
    assert!(!e.step(&[0.0, 0.0]).obstacle_moved);
}
