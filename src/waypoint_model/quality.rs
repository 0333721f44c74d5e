//! The waypoint model's quality on held-out rows (drawn with their own seed, never trained on): waypoint error
//! against the planner in the workspace, how often its paths collide next to the planner's own, and the time
//! per query against the time per plan on one core.

use super::dataset::DataSet;
use crate::plan::learned::{path_collides, WaypointModel, COLLISION_MARGIN};
use crate::plan::{plan_path, PlanSpec, ReferencePath};
use crate::sim::{Arm, ArmEnv, JointVec, MAX_JOINTS};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::time::Instant;

/// Model queries timed per held-out row (the row's time is their mean; the figure is the median over rows).
pub const QUERY_REPEATS: usize = 200;

/// The quality figures of one held-out set (an entry of quality.json).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Quality {
    /// What the set is.
    pub set: String,
    /// Held-out rows.
    pub rows: usize,
    /// Mean over rows and waypoints 1..K-1 of the effector distance between the model's and the planner's
    /// waypoint, m.
    pub waypoint_error_mean_m: f64,
    /// 95th percentile of the same distances (Hyndman & Fan type 7), m.
    pub waypoint_error_p95_m: f64,
    /// Mean of the same distances per waypoint k = 1..K-1, m.
    pub waypoint_error_mean_by_waypoint_m: Vec<f64>,
    /// Mean distance from the model's last waypoint's effector to the goal, m.
    pub final_goal_distance_mean_m: f64,
    /// Share of the model's paths (the joint-space polyline q -> w1 -> ... -> wK-1) that come closer to contact
    /// than `collision_margin_m` (`plan::learned::path_collides`).
    pub model_collision_fraction: f64,
    /// The same for the planner's K waypoints joined by straight joint-space segments (its route between
    /// waypoints is certified free; the straight polyline through the waypoints may cut corners).
    pub planner_collision_fraction: f64,
    pub collision_margin_m: f64,
    /// Median over rows of the time of one model query (`WaypointModel::predict`), ms.
    pub ms_per_query_median: f64,
    /// Median and mean over rows of the time of one `plan::plan_path` call with the variant's settings, ms.
    pub ms_per_plan_median: f64,
    pub ms_per_plan_mean: f64,
    /// 95th percentile over rows of the time per plan (the searches; most rows need only the straight line), ms.
    pub ms_per_plan_p95: f64,
    /// `ms_per_plan_median / ms_per_query_median`.
    pub speedup_median: f64,
}

/// Effector distances between `predicted` and `planner` waypoints k = 1..K-1 (joint configurations, first n
/// entries used), appended to `out`, m. Forward kinematics: `sim::Arm::effector`.
pub fn waypoint_errors(
    arm: &Arm,
    predicted: &[JointVec],
    planner: &[JointVec],
    out: &mut Vec<f64>,
) {
    let n = arm.n();
    for (p, w) in predicted.iter().zip(planner).skip(1) {
        out.push(crate::sim::geometry::dist(
            arm.effector(&p[..n]),
            arm.effector(&w[..n]),
        ));
    }
}

/// The planner's path of a row (start configuration first) as a `ReferencePath`.
fn planner_path(arm: &Arm, q: &[f64], target: &[f64]) -> ReferencePath {
    let n = arm.n();
    let mut joints = Vec::with_capacity(1 + target.len() / n);
    let mut first = [0.0; MAX_JOINTS];
    first[..n].copy_from_slice(&q[..n]);
    joints.push(first);
    for w in target.chunks_exact(n) {
        let mut j = [0.0; MAX_JOINTS];
        j[..n].copy_from_slice(w);
        joints.push(j);
    }
    ReferencePath {
        points: joints.iter().map(|j| arm.effector(&j[..n])).collect(),
        joints,
        fallback: false,
    }
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    crate::analysis::stats::quantile_sorted(v, 0.5)
}

/// Assess `model` on the held-out rows of `held` with the planner settings `plan` (for the planner's timing).
pub fn assess(model: &WaypointModel, held: &DataSet, plan: &PlanSpec, set: &str) -> Quality {
    let l = &held.layout;
    let n = l.joints;
    let k = l.waypoints;
    let mut errors = Vec::with_capacity(held.rows.len() * (k - 1));
    let mut by_k = vec![0.0; k - 1];
    let (mut goal_dist, mut model_hits, mut planner_hits) = (0.0, 0usize, 0usize);
    let (mut query_ms, mut plan_ms) = (Vec::new(), Vec::new());
    let mut env: Option<(usize, ArmEnv)> = None;
    for (i, r) in held.rows.iter().enumerate() {
        if env.as_ref().map(|(s, _)| *s) != Some(r.scene) {
            env = Some((r.scene, ArmEnv::new(held.scenes[r.scene].clone())));
        }
        let env = &env.as_ref().expect("set above").1;
        let arm = &env.scenario().arm;
        let q = &r.input[..n];
        let goal = [r.input[n], r.input[n + 1]];
        let predicted = model.predict(env, q, goal);
        let reference = planner_path(arm, q, &r.target);
        let before = errors.len();
        waypoint_errors(arm, &predicted.joints, &reference.joints, &mut errors);
        for (s, e) in by_k.iter_mut().zip(&errors[before..]) {
            *s += e;
        }
        goal_dist += crate::sim::geometry::dist(predicted.points[k - 1], goal);
        model_hits += path_collides(env, &predicted) as usize;
        planner_hits += path_collides(env, &reference) as usize;
        let t = Instant::now();
        for _ in 0..QUERY_REPEATS {
            std::hint::black_box(model.predict(env, std::hint::black_box(q), goal));
        }
        query_ms.push(t.elapsed().as_secs_f64() * 1e3 / QUERY_REPEATS as f64);
        let mut rng = ChaCha8Rng::seed_from_u64(i as u64);
        let t = Instant::now();
        std::hint::black_box(plan_path(env, q, goal, plan, &mut rng));
        plan_ms.push(t.elapsed().as_secs_f64() * 1e3);
    }
    let rows = held.rows.len().max(1) as f64;
    let mean_err = errors.iter().sum::<f64>() / errors.len().max(1) as f64;
    errors.sort_by(f64::total_cmp);
    let p95 = crate::analysis::stats::quantile_sorted(&errors, 0.95);
    let plan_mean = plan_ms.iter().sum::<f64>() / rows;
    let (qm, pm) = (median(&mut query_ms), median(&mut plan_ms));
    let plan_p95 = crate::analysis::stats::quantile_sorted(&plan_ms, 0.95);
    Quality {
        set: set.into(),
        rows: held.rows.len(),
        waypoint_error_mean_m: mean_err,
        waypoint_error_p95_m: p95,
        waypoint_error_mean_by_waypoint_m: by_k.iter().map(|s| s / rows).collect(),
        final_goal_distance_mean_m: goal_dist / rows,
        model_collision_fraction: model_hits as f64 / rows,
        planner_collision_fraction: planner_hits as f64 / rows,
        collision_margin_m: COLLISION_MARGIN,
        ms_per_query_median: qm,
        ms_per_plan_median: pm,
        ms_per_plan_mean: plan_mean,
        ms_per_plan_p95: plan_p95,
        speedup_median: pm / qm,
    }
}
