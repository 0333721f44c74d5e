//! `plan`: collision-free reference paths for episodes — RRT* and bidirectional RRT* in joint space,
//! shortcutting, resampling to K waypoints, replanning after scenario events.
//!
//! Entry points: [`plan_path`] (what episodes use), [`plan_detailed`] (the same with everything the search
//! produced, for drawing and metrics) and [`replan`] (after a goal jump or an obstacle move).
//!
//! Determinism: given the same environment, start, goal, `PlanSpec` and RNG state, the result is identical —
//! unless the wall-clock budget `PlanSpec::time_budget_ms` runs out, which is the only non-deterministic
//! path; it sets `PlanReport::timed_out` (and logs a warning).
//!
//! Fallback: when no collision-free goal configuration exists, the start is in collision, or the search
//! finds no path within budget, the path is the straight joint-space line from the start to the best goal
//! configuration (the collision-free one nearest the start, else the nearest inverse-kinematics solution,
//! else the damped-least-squares configuration closest to the goal), resampled to K waypoints, with
//! `ReferencePath::fallback` set. It may collide; runs count it in their metrics.

pub mod bi_rrt_star;
pub mod command;
pub mod connectivity;
pub mod draw;
pub mod grid_index;
pub mod ik;
pub mod learned;
pub mod path;
pub mod planner;
pub mod rrt_star;
pub mod smooth;
pub mod space;
pub mod spec;
pub mod tree;

pub use learned::path_collides;
pub use path::{Polyline, Projection, ReferencePath};
pub use planner::{Budget, Planner, Problem, Search};
pub use space::{ArmSpace, ConfigSpace, DiscPlane};
pub use spec::PlanSpec;

use crate::sim::{ArmEnv, JointVec, MAX_JOINTS};
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use space::distance;
use std::time::{Duration, Instant};

/// Every planner, keyed by `Planner::name` (the TOML `plan.planner`). A new planner is one file plus one
/// line here.
pub static PLANNERS: &[&dyn Planner] = &[&rrt_star::RrtStar, &bi_rrt_star::BiRrtStar];

/// The planner registered under `name`; None for a name no planner has (`PlanSpec::validate` rejects it).
pub fn planner_by_name(name: &str) -> Option<&'static dyn Planner> {
    PLANNERS.iter().copied().find(|p| p.name() == name)
}

/// The listing of `termwise planners`.
pub fn describe_planners() -> String {
    let mut s = String::from(
        "Reference-path planners. Pick one with [plan] planner = \"<name>\" in the experiment file.\n\n",
    );
    for p in PLANNERS {
        s.push_str(&format!("{:<14} {}\n", p.name(), p.summary()));
    }
    s
}

/// Smallest clearance margin the planner works with, m: a start closer than twice this to contact gets the
/// fallback (edge checks advance by at least the margin, so it bounds their cost).
pub const MIN_MARGIN: f64 = 1e-4;

/// Why a fallback path was returned.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FallbackReason {
    /// The start configuration collides, is within `2 * MIN_MARGIN` of contact, or lies outside the joint
    /// bounds.
    StartBlocked,
    /// No inverse-kinematics solution keeps the clearance margin (or the goal is out of reach).
    NoFreeGoalConfiguration,
    /// The search used its budget without reaching a goal configuration.
    NotFound,
    /// `PlanSpec::planner` names no registered planner (a spec built in code without `validate`): no search
    /// ran, rather than a silent substitute.
    UnknownPlanner,
}

/// Everything one planning call produced.
#[derive(Clone, Debug)]
pub struct PlanReport {
    /// The reference path handed to the episode.
    pub path: ReferencePath,
    /// The full joint-space path after shortcutting (start first); its straight edges are certified
    /// collision-free unless `path.fallback`. The waypoints lie on it.
    pub route: Vec<JointVec>,
    /// Collision-free goal configurations the search aimed at (nearest to the start first).
    pub goal_configs: Vec<JointVec>,
    /// Length of the route in joint space, rad.
    pub cost: f64,
    /// Length of the search's path before shortcutting, rad (0 when no search ran).
    pub search_cost: f64,
    /// Samples drawn by the search (0 when the straight line to the nearest goal configuration was free).
    pub iterations: usize,
    /// Tree nodes at the end of the search.
    pub nodes: usize,
    /// The wall-clock budget stopped the search (the result may differ between machines).
    pub timed_out: bool,
    /// Clearance margin actually used, m (the spec's, lowered to half the start clearance when the start is
    /// closer than that to an obstacle).
    pub margin: f64,
    /// Why `path.fallback` is set.
    pub fallback_reason: Option<FallbackReason>,
    /// Tree edges (when requested).
    pub tree: Vec<(JointVec, JointVec)>,
    /// Number of joints.
    pub n: usize,
}

/// Plan a reference path from `start_q` to the task-space `goal` among `env`'s current obstacles.
/// See the module docs for determinism and the fallback.
pub fn plan_path(
    env: &ArmEnv,
    start_q: &[f64],
    goal: [f64; 2],
    spec: &PlanSpec,
    rng: &mut ChaCha8Rng,
) -> ReferencePath {
    plan_detailed(env, start_q, goal, spec, rng, false).path
}

/// Replan from the environment's current state to its current goal (after `StepReport::goal_jumped` or
/// `StepReport::obstacle_moved`), and mark the obstacles' positions as planned for.
pub fn replan(env: &mut ArmEnv, spec: &PlanSpec, rng: &mut ChaCha8Rng) -> ReferencePath {
    let n = env.n();
    let q = env.state().q;
    let path = plan_path(env, &q[..n], env.goal(), spec, rng);
    env.mark_planned();
    path
}

/// Goal configurations for a task-space goal: closed form for two links, damped least squares from the
/// start and `spec.ik_seeds - 1` random seeds otherwise. Returns all solutions within the joint bounds
/// (deduplicated), or when there are none, the damped-least-squares configuration closest to the goal
/// as the only element of the second vector.
pub fn goal_configurations(
    space: &ArmSpace,
    env: &ArmEnv,
    start: &JointVec,
    goal: [f64; 2],
    spec: &PlanSpec,
    rng: &mut ChaCha8Rng,
) -> (Vec<JointVec>, Vec<JointVec>) {
    let arm = &env.scenario().arm;
    let n = arm.n();
    let mut lo = [0.0; MAX_JOINTS];
    let mut hi = [0.0; MAX_JOINTS];
    for i in 0..n {
        (lo[i], hi[i]) = space.bounds(i);
    }
    let inside = |q: &JointVec| (0..n).all(|i| q[i] >= lo[i] && q[i] <= hi[i]);
    let mut sols: Vec<JointVec> = Vec::new();
    let mut best_effort = (*start, f64::INFINITY);
    if n == 2 {
        for s in ik::two_link(arm.links[0].length, arm.links[1].length, goal) {
            let q = [s[0], s[1], 0.0, 0.0, 0.0, 0.0];
            if inside(&q) {
                sols.push(q);
            }
        }
    }
    if n != 2 || sols.is_empty() {
        let settings = ik::DlsSettings {
            tolerance: spec.ik_tolerance * 0.01,
            ..ik::DlsSettings::default()
        };
        for k in 0..spec.ik_seeds {
            let mut seed = *start;
            if k > 0 {
                for i in 0..n {
                    seed[i] = lo[i] + (hi[i] - lo[i]) * rng.gen::<f64>();
                }
            }
            for i in 0..n {
                seed[i] = seed[i].clamp(lo[i], hi[i]);
            }
            let (q, res) = ik::damped_least_squares(arm, goal, &seed, &lo, &hi, &settings);
            if res < best_effort.1 {
                best_effort = (q, res);
            }
            if res <= spec.ik_tolerance && !sols.iter().any(|s| distance(s, &q, n) < 1e-3) {
                sols.push(q);
            }
        }
    }
    if sols.is_empty() {
        (sols, vec![best_effort.0])
    } else {
        (sols, Vec::new())
    }
}

/// `plan_path` with the whole report; `keep_tree` keeps the search trees for drawing.
pub fn plan_detailed(
    env: &ArmEnv,
    start_q: &[f64],
    goal: [f64; 2],
    spec: &PlanSpec,
    rng: &mut ChaCha8Rng,
    keep_tree: bool,
) -> PlanReport {
    let began = Instant::now();
    let n = env.n();
    assert_eq!(start_q.len(), n, "start_q must have one angle per joint");
    let mut start = [0.0; MAX_JOINTS];
    start[..n].copy_from_slice(start_q);
    let start_clear = env.clearances(&start[..n]).0;
    let margin = spec.clearance_margin.min(0.5 * start_clear).max(0.0);
    let space = ArmSpace::new(env, margin.max(MIN_MARGIN));
    // Free joints may have wound past +-pi: plan with the wrapped angle, add the turns back at the end.
    let mut offset = [0.0; MAX_JOINTS];
    for i in 0..n {
        let (lo, hi) = space.bounds(i);
        if start[i] < lo || start[i] > hi {
            let w = ik::wrap_angle(start[i]);
            if w >= lo && w <= hi {
                offset[i] = start[i] - w;
                start[i] = w;
            }
        }
    }
    let (mut free, unfree) = {
        let (sols, best_effort) = goal_configurations(&space, env, &start, goal, spec, rng);
        let (free, mut blocked): (Vec<_>, Vec<_>) =
            sols.into_iter().partition(|q| space.config_free(q));
        blocked.extend(best_effort);
        (free, blocked)
    };
    let by_distance =
        |a: &JointVec, b: &JointVec| distance(a, &start, n).total_cmp(&distance(b, &start, n));
    free.sort_by(by_distance);
    let mut report = PlanReport {
        path: ReferencePath {
            joints: Vec::new(),
            points: Vec::new(),
            fallback: false,
        },
        route: Vec::new(),
        goal_configs: free.clone(),
        cost: 0.0,
        search_cost: 0.0,
        iterations: 0,
        nodes: 0,
        timed_out: false,
        margin,
        fallback_reason: None,
        tree: Vec::new(),
        n,
    };
    let fallback_target = free.first().copied().or_else(|| {
        let mut u = unfree.clone();
        u.sort_by(by_distance);
        u.first().copied()
    });
    let route = if margin < MIN_MARGIN || !space.within_bounds(&start) {
        report.fallback_reason = Some(FallbackReason::StartBlocked);
        None
    } else if free.is_empty() {
        report.fallback_reason = Some(FallbackReason::NoFreeGoalConfiguration);
        None
    } else if space.edge_free(&start, &free[0]) {
        // The nearest goal configuration in a straight line: no path to any goal can be shorter.
        Some(vec![start, free[0]])
    } else {
        'search: {
            let budget = Budget {
                iterations: spec.iterations,
                deadline: Some(began + Duration::from_secs_f64(spec.time_budget_ms * 1e-3)),
                step: spec.step,
                goal_bias: spec.goal_bias,
                rewire_factor: spec.rewire_factor,
                keep_tree,
            };
            let Some(planner) = planner_by_name(&spec.planner) else {
                tracing::error!(
                    "unknown planner {:?} (known: {}); the path is the straight-line fallback",
                    spec.planner,
                    PLANNERS
                        .iter()
                        .map(|p| p.name())
                        .collect::<Vec<_>>()
                        .join(", ")
                );
                report.fallback_reason = Some(FallbackReason::UnknownPlanner);
                break 'search None;
            };
            let problem = Problem {
                start,
                goals: free.clone(),
            };
            let found = planner.search(&space, &problem, &budget, rng);
            report.iterations = found.iterations;
            report.nodes = found.nodes;
            report.timed_out = found.timed_out;
            report.tree = found.edges;
            if found.timed_out {
                tracing::warn!(
                "planning stopped by the {} ms time budget after {} of {} iterations; the result depends on machine speed",
                spec.time_budget_ms,
                found.iterations,
                spec.iterations
            );
            }
            match found.path {
                Some(p) => {
                    report.search_cost = found.cost;
                    let p = smooth::shortcut_vertices(&space, &p);
                    Some(smooth::shortcut_random(
                        &space,
                        p,
                        spec.shortcut_passes,
                        rng,
                    ))
                }
                None => {
                    report.fallback_reason = Some(FallbackReason::NotFound);
                    None
                }
            }
        }
    };
    let route = match route {
        Some(r) => r,
        None => {
            report.path.fallback = true;
            vec![start, fallback_target.unwrap_or(start)]
        }
    };
    let mut joints = smooth::resample(&route, spec.waypoints, n);
    report.cost = planner::path_cost(&route, n);
    let mut route = route;
    for q in joints.iter_mut().chain(route.iter_mut()) {
        for i in 0..n {
            q[i] += offset[i];
        }
    }
    for q in report.goal_configs.iter_mut() {
        for i in 0..n {
            q[i] += offset[i];
        }
    }
    let arm = &env.scenario().arm;
    report.path.points = joints.iter().map(|q| arm.effector(&q[..n])).collect();
    report.path.joints = joints;
    report.route = route;
    report
}
