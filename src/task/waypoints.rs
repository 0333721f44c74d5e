//! Where an episode's waypoints come from (`[waypoints]`): the planner (replanning after scenario events), a
//! learned waypoint model queried every few control steps (`plan::learned`), and deliberately degraded
//! references — Gaussian noise on the waypoints, stale waypoints (replanned only every T seconds, or never after
//! the start), fewer waypoints. So a study can ask whether the waypoint reward terms still help when the
//! waypoints are noisy, stale or learned. Every source's reference path is checked against the obstacles when
//! it is handed over (`reference_collisions`).

use crate::config::ConfigError;
use crate::plan::ik::{damped_least_squares, DlsSettings};
use crate::plan::learned::WaypointModel;
use crate::plan::{PlanSpec, ReferencePath};
use crate::sim::{ArmEnv, Scenario, MAX_JOINTS};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::path::Path;
use std::sync::Arc;

/// Largest `waypoints.noise`, m (the arms here reach under a metre).
pub const MAX_NOISE: f64 = 1.0;

/// The `[waypoints]` settings. Every field has a default: the planner, replanning at every event, exact and all
/// K waypoints (what runs did before the section existed; a file without it keeps its run hashes).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct WaypointSpec {
    /// "planner" (RRT*/bi-RRT* at the start and after scenario events) or "learned" (a model written by
    /// `termwise waypoint-model`). Default "planner".
    pub source: String,
    /// The learned model's folder, relative to the experiment file (source = "learned" only).
    pub model: String,
    /// Learned source: control steps between two queries of the model (1 = every step; 0 = at the start and
    /// after scenario events only, like the planner). Default 1.
    pub every: usize,
    /// Planner source: when the reference follows a scenario event: "events" (at once, default), "periodic"
    /// (at most once per `period` seconds: an event waits for the next due time) or "never" (the start's
    /// path is kept for the whole episode).
    pub refresh: String,
    /// Seconds between two refreshes with refresh = "periodic". Default 0.5.
    pub period: f64,
    /// Standard deviation of Gaussian noise added to each intermediate waypoint's effector position, m
    /// (the start and the goal waypoint stay exact). The waypoint's joints are moved by damped least
    /// squares to the noisy position, so the joint and effector waypoints stay consistent. Default 0.
    pub noise: f64,
    /// Keep only this many of the K waypoints (evenly spaced along the path, start and goal included); the
    /// observation repeats the last one in its K slots. Default: all K.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub keep: Option<usize>,
}

impl Default for WaypointSpec {
    fn default() -> Self {
        WaypointSpec {
            source: "planner".into(),
            model: String::new(),
            every: 1,
            refresh: "events".into(),
            period: 0.5,
            noise: 0.0,
            keep: None,
        }
    }
}

/// When the planner's reference follows scenario events.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Refresh {
    Events,
    Periodic(f64),
    Never,
}

/// A validated waypoint source, with its learned model loaded (shared by every episode of a variant).
#[derive(Clone, Debug)]
pub struct WaypointSource {
    pub spec: WaypointSpec,
    pub refresh: Refresh,
    pub model: Option<Arc<WaypointModel>>,
}

impl Default for WaypointSource {
    fn default() -> Self {
        WaypointSource {
            spec: WaypointSpec::default(),
            refresh: Refresh::Events,
            model: None,
        }
    }
}

impl WaypointSpec {
    /// Check every setting against the variant's scenario and planner, and load the learned model (folder
    /// relative to `base`, the experiment file's folder). Errors name the key as `waypoints.<field>`.
    pub fn resolve(
        &self,
        scenario: &Scenario,
        plan: &PlanSpec,
        base: &Path,
        origin: &str,
        src: &str,
    ) -> Result<WaypointSource, ConfigError> {
        let at =
            |key: &str, msg: String| ConfigError::at(origin, src, &format!("waypoints.{key}"), msg);
        let err = |key: &str, msg: String| Err(at(key, msg));
        if !(self.noise.is_finite() && (0.0..=MAX_NOISE).contains(&self.noise)) {
            return err(
                "noise",
                format!(
                    "must be a standard deviation in [0, {MAX_NOISE}] m, got {}",
                    self.noise
                ),
            );
        }
        if let Some(k) = self.keep {
            if k < 2 || k > plan.waypoints {
                return err(
                    "keep",
                    format!(
                        "must be between 2 (start and goal) and plan.waypoints ({}), got {k}",
                        plan.waypoints
                    ),
                );
            }
        }
        let refresh = match self.refresh.as_str() {
            "events" => Refresh::Events,
            "never" => Refresh::Never,
            "periodic" => {
                if !(self.period.is_finite() && self.period > 0.0 && self.period <= 3600.0) {
                    return err(
                        "period",
                        format!(
                            "must be a number of seconds in (0, 3600], got {}",
                            self.period
                        ),
                    );
                }
                Refresh::Periodic(self.period)
            }
            other => {
                return err(
                    "refresh",
                    format!(
                        "unknown refresh {other:?}; choose \"events\", \"periodic\" or \"never\""
                    ),
                )
            }
        };
        let model = match self.source.as_str() {
            "planner" => {
                if !self.model.is_empty() {
                    return err(
                        "model",
                        "is for source = \"learned\"; the planner source takes no model".into(),
                    );
                }
                None
            }
            "learned" => {
                if self.refresh != "events" {
                    return err(
                        "refresh",
                        "is for the planner source; the learned source is refreshed by `every`"
                            .into(),
                    );
                }
                if self.every > 1_000_000 {
                    return err(
                        "every",
                        format!("must be at most 1000000 control steps, got {}", self.every),
                    );
                }
                if self.model.is_empty() {
                    return err(
                        "model",
                        "source = \"learned\" needs the model's folder (written by `termwise waypoint-model`)"
                            .into(),
                    );
                }
                let dir = base.join(&self.model);
                let m = WaypointModel::load(&dir).map_err(|e| {
                    at(
                        "model",
                        format!("cannot use the model in {}: {e}", dir.display()),
                    )
                })?;
                if let Err(why) = m.check_fits(scenario, plan) {
                    return err(
                        "model",
                        format!(
                            "the model in {} does not fit this variant: {why}",
                            dir.display()
                        ),
                    );
                }
                Some(Arc::new(m))
            }
            other => {
                return err(
                    "source",
                    format!("unknown source {other:?}; choose \"planner\" or \"learned\""),
                )
            }
        };
        Ok(WaypointSource {
            spec: self.clone(),
            refresh,
            model,
        })
    }
}

impl WaypointSource {
    /// Whether the reference should be renewed at control step `steps` (time `t`, s), given whether a scenario
    /// event is waiting and when the reference was last renewed (`renewed_at`, s).
    pub fn due(&self, pending: bool, steps: usize, t: f64, renewed_at: f64) -> bool {
        if self.model.is_some() {
            let every = self.spec.every;
            return pending || (every > 0 && steps % every == 0);
        }
        match self.refresh {
            Refresh::Events => pending,
            Refresh::Never => false,
            // A small tolerance: control steps are multiples of dt, accumulated in floating point.
            Refresh::Periodic(p) => pending && t - renewed_at >= p - 1e-9,
        }
    }

    /// Degrade a reference path as the settings say: keep fewer waypoints, then add noise to the intermediate
    /// ones. Draws from `rng` only when `noise` > 0.
    pub fn degrade(
        &self,
        env: &ArmEnv,
        path: ReferencePath,
        rng: &mut ChaCha8Rng,
    ) -> ReferencePath {
        let path = match self.spec.keep {
            Some(k) => keep_evenly(path, k),
            None => path,
        };
        if self.spec.noise > 0.0 {
            add_noise(env, path, self.spec.noise, rng)
        } else {
            path
        }
    }
}

/// The waypoints `round(i (K-1) / (k-1))`, i = 0..k: k of K, evenly spaced by index, first and last kept.
pub fn keep_evenly(path: ReferencePath, k: usize) -> ReferencePath {
    let total = path.joints.len();
    if k >= total || total < 2 {
        return path;
    }
    let pick = |i: usize| ((i * (total - 1)) as f64 / (k - 1) as f64).round() as usize;
    ReferencePath {
        joints: (0..k).map(|i| path.joints[pick(i)]).collect(),
        points: (0..k).map(|i| path.points[pick(i)]).collect(),
        fallback: path.fallback,
    }
}

/// Move each intermediate waypoint's effector position by isotropic Gaussian noise of standard deviation
/// `sigma` (m) and its joints by damped least squares from the planned joints to that position (within the
/// joint limits; the effector waypoint is where those joints put the effector, so an unreachable draw lands
/// on the nearest reachable point).
fn add_noise(
    env: &ArmEnv,
    mut path: ReferencePath,
    sigma: f64,
    rng: &mut ChaCha8Rng,
) -> ReferencePath {
    let arm = &env.scenario().arm;
    let n = arm.n();
    let (mut lo, mut hi) = ([0.0; MAX_JOINTS], [0.0; MAX_JOINTS]);
    for (i, l) in arm.links.iter().enumerate() {
        lo[i] = l.q_min;
        hi[i] = l.q_max;
    }
    let dls = DlsSettings {
        max_iterations: 30,
        ..DlsSettings::default()
    };
    let last = path.joints.len().saturating_sub(1);
    for k in 1..last {
        let p = path.points[k];
        let target = [
            p[0] + sigma * super::probe::normal(rng),
            p[1] + sigma * super::probe::normal(rng),
        ];
        let (q, _) = damped_least_squares(arm, target, &path.joints[k], &lo, &hi, &dls);
        path.joints[k] = q;
        path.points[k] = arm.effector(&q[..n]);
    }
    path
}
