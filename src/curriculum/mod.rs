//! `curriculum`: reset curricula that decide each training episode's start state, goal and difficulty, with
//! feedback from episode outcomes. A new curriculum is one file plus one line in `REGISTRY`.

mod along_path;
mod reverse;
mod staged;
mod uniform;

pub use along_path::AlongPath;
pub use reverse::Reverse;
pub use staged::{Stage, Staged};
pub use uniform::Uniform;

use crate::config::ConfigError;
use crate::sim::{ArmEnv, ArmState};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::collections::VecDeque;

/// What a curriculum decides for one training episode.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EpisodeDraw {
    /// Start state (at rest unless the curriculum says otherwise).
    pub start: ArmState,
    /// Goal point, m.
    pub goal: [f64; 2],
    /// How many of the scenario's obstacles are active.
    pub obstacles: usize,
    /// Random goal jumps per second.
    pub jump_rate: f64,
    /// Start from a random waypoint of the reference path (at rest) instead of `start`.
    pub start_on_path: bool,
}

/// A reset curriculum.
///
/// ```
/// use termwise::curriculum::{Curriculum, Uniform};
/// let c = Uniform::default();
/// assert_eq!(c.name(), "uniform");
/// assert_eq!(c.level(), 1.0);
/// ```
pub trait Curriculum: Send {
    /// The TOML name.
    fn name(&self) -> &'static str;
    /// Draw the next training episode. `env` is rewound to t = 0 with all scenario obstacles active;
    /// `env_steps` is the run's environment step count so far.
    fn draw(&mut self, env: &ArmEnv, env_steps: u64, rng: &mut ChaCha8Rng) -> EpisodeDraw;
    /// Feedback when an episode ends.
    fn feedback(&mut self, _success: bool, _env_steps: u64) {}
    /// Current difficulty in [0, 1] (1 = the full task).
    fn level(&self) -> f64;
}

/// The scenario's full-difficulty episode: uniform random start and goal, every obstacle, the scenario's jump rate.
pub fn full_task_draw(env: &ArmEnv, rng: &mut ChaCha8Rng) -> EpisodeDraw {
    EpisodeDraw {
        start: env.sample_start(rng),
        goal: env.sample_goal(rng),
        obstacles: env.scenario().obstacles.len(),
        jump_rate: env.scenario().events.goal_jump_rate,
        start_on_path: false,
    }
}

/// Success rate over the most recent episodes (fixed window).
#[derive(Clone, Debug)]
pub struct SuccessWindow {
    window: usize,
    recent: VecDeque<bool>,
}

impl SuccessWindow {
    pub fn new(window: usize) -> Self {
        SuccessWindow {
            window: window.max(1),
            recent: VecDeque::with_capacity(window.max(1)),
        }
    }
    pub fn push(&mut self, success: bool) {
        if self.recent.len() == self.window {
            self.recent.pop_front();
        }
        self.recent.push_back(success);
    }
    /// Success rate once the window is full, else None.
    pub fn rate(&self) -> Option<f64> {
        (self.recent.len() == self.window)
            .then(|| self.recent.iter().filter(|s| **s).count() as f64 / self.window as f64)
    }
    pub fn clear(&mut self) {
        self.recent.clear();
    }
}

/// Most episodes in a curriculum's success window (`window`).
pub const MAX_WINDOW: usize = 100_000;
/// Most stages of the `staged` curriculum.
pub const MAX_STAGES: usize = 100;

/// The `[curriculum]` table: `kind` plus the parameters of that kind (others are rejected).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct CurriculumSpec {
    /// Which curriculum: `uniform`, `along-path`, `reverse` or `staged`. Default `uniform`.
    #[serde(default = "default_kind")]
    pub kind: String,
    /// along-path: probability of starting on the reference path at step 0. Default 0.5.
    pub path_start_probability: Option<f64>,
    /// along-path: environment steps over which that probability decays linearly to 0; 0 = constant. Default 0.
    pub decay_steps: Option<u64>,
    /// reverse: initial joint-space radius around the goal configuration, rad. Default 0.3.
    pub start_radius: Option<f64>,
    /// reverse: radius added each time the recent success rate passes the threshold, rad. Default 0.3.
    pub radius_step: Option<f64>,
    /// reverse: largest radius, rad (then starts are uniform). Default 3.0.
    pub max_radius: Option<f64>,
    /// reverse, staged: recent success rate that widens the radius / advances the stage. Default 0.7.
    pub success_threshold: Option<f64>,
    /// reverse, staged: number of recent episodes in the success rate. Default 40.
    pub window: Option<usize>,
    /// staged: the stages, easiest first.
    pub stages: Option<Vec<Stage>>,
}

fn default_kind() -> String {
    "uniform".into()
}

impl Default for CurriculumSpec {
    fn default() -> Self {
        CurriculumSpec {
            kind: default_kind(),
            path_start_probability: None,
            decay_steps: None,
            start_radius: None,
            radius_step: None,
            max_radius: None,
            success_threshold: None,
            window: None,
            stages: None,
        }
    }
}

/// One registered curriculum: its TOML name, meaning and parameters (name, default, meaning).
pub struct CurriculumInfo {
    pub name: &'static str,
    pub meaning: &'static str,
    pub params: &'static [(&'static str, &'static str, &'static str)],
    build: fn(&CurriculumSpec) -> Box<dyn Curriculum>,
}

/// Every built-in curriculum.
pub const REGISTRY: &[CurriculumInfo] = &[
    CurriculumInfo {
        name: "uniform",
        meaning: "start and goal drawn uniformly from the scenario's joint limits and reachable, collision-free goals",
        params: &[],
        build: |_| Box::new(Uniform),
    },
    CurriculumInfo {
        name: "along-path",
        meaning: "with probability p start at rest on a random waypoint of the reference path; p constant or decaying",
        params: &[
            ("path_start_probability", "0.5", "p at step 0"),
            ("decay_steps", "0", "env steps for p to decay linearly to 0 (0 = constant)"),
        ],
        build: |s| Box::new(AlongPath::new(s.path_start_probability.unwrap_or(0.5), s.decay_steps.unwrap_or(0))),
    },
    CurriculumInfo {
        name: "reverse",
        meaning: "starts within a joint-space radius of the goal configuration, widening when recent success passes a threshold (Florensa et al. 2017)",
        params: &[
            ("start_radius", "0.3", "initial radius, rad"),
            ("radius_step", "0.3", "radius added per widening, rad"),
            ("max_radius", "3.0", "largest radius, rad"),
            ("success_threshold", "0.7", "recent success rate that widens the radius"),
            ("window", "40", "episodes in the recent success rate"),
        ],
        build: |s| {
            Box::new(Reverse::new(
                s.start_radius.unwrap_or(0.3),
                s.radius_step.unwrap_or(0.3),
                s.max_radius.unwrap_or(3.0),
                s.success_threshold.unwrap_or(0.7),
                s.window.unwrap_or(40),
            ))
        },
    },
    CurriculumInfo {
        name: "staged",
        meaning: "difficulty stages (obstacle count, goal distance, goal-jump rate) advanced when recent success passes a threshold",
        params: &[
            ("stages", "3 stages", "list of {obstacles, goal_distance (m), jump_rate (1/s)}, easiest first"),
            ("success_threshold", "0.7", "recent success rate that advances a stage"),
            ("window", "40", "episodes in the recent success rate"),
        ],
        build: |s| {
            Box::new(Staged::new(
                s.stages.clone().unwrap_or_else(Staged::default_stages),
                s.success_threshold.unwrap_or(0.7),
                s.window.unwrap_or(40),
            ))
        },
    },
];

impl CurriculumSpec {
    /// Check the kind and its parameters; `prefix` is the key path of the table (e.g. `curriculum`).
    pub fn validate(&self, origin: &str, src: &str, prefix: &str) -> Result<(), ConfigError> {
        let err = |k: &str, m: String| ConfigError::at(origin, src, &format!("{prefix}.{k}"), m);
        let info = REGISTRY
            .iter()
            .find(|c| c.name == self.kind)
            .ok_or_else(|| {
                let names: Vec<_> = REGISTRY.iter().map(|c| c.name).collect();
                let hint = crate::reward::nearest(&self.kind, &names)
                    .map(|n| format!(" (did you mean `{n}`?)"))
                    .unwrap_or_default();
                err(
                    "kind",
                    format!(
                        "unknown curriculum `{}`{hint}; known: {}",
                        self.kind,
                        names.join(", ")
                    ),
                )
            })?;
        let given: [(&str, bool); 8] = [
            (
                "path_start_probability",
                self.path_start_probability.is_some(),
            ),
            ("decay_steps", self.decay_steps.is_some()),
            ("start_radius", self.start_radius.is_some()),
            ("radius_step", self.radius_step.is_some()),
            ("max_radius", self.max_radius.is_some()),
            ("success_threshold", self.success_threshold.is_some()),
            ("window", self.window.is_some()),
            ("stages", self.stages.is_some()),
        ];
        for (k, set) in given {
            if set && !info.params.iter().any(|p| p.0 == k) {
                let allowed: Vec<_> = info.params.iter().map(|p| p.0).collect();
                return Err(err(
                    k,
                    format!(
                        "does not apply to curriculum `{}` (its keys: {})",
                        self.kind,
                        if allowed.is_empty() {
                            "none".to_string()
                        } else {
                            allowed.join(", ")
                        }
                    ),
                ));
            }
        }
        let unit = |k: &str, v: Option<f64>| -> Result<(), ConfigError> {
            match v {
                Some(x) if !(0.0..=1.0).contains(&x) || x.is_nan() => {
                    Err(err(k, format!("must be in [0, 1], got {x}")))
                }
                _ => Ok(()),
            }
        };
        unit("path_start_probability", self.path_start_probability)?;
        unit("success_threshold", self.success_threshold)?;
        for (k, v) in [
            ("start_radius", self.start_radius),
            ("radius_step", self.radius_step),
            ("max_radius", self.max_radius),
        ] {
            if let Some(x) = v {
                if !(x.is_finite() && x > 0.0) {
                    return Err(err(
                        k,
                        format!("must be a finite number > 0 (rad), got {x}"),
                    ));
                }
            }
        }
        if let (Some(a), Some(b)) = (self.start_radius, self.max_radius) {
            if a > b {
                return Err(err(
                    "start_radius",
                    format!("start_radius ({a}) must be <= max_radius ({b})"),
                ));
            }
        }
        if let Some(w) = self.window {
            if w == 0 || w > MAX_WINDOW {
                return Err(err(
                    "window",
                    format!("must be in 1..={MAX_WINDOW} episodes, got {w}"),
                ));
            }
        }
        if let Some(stages) = &self.stages {
            if stages.is_empty() || stages.len() > MAX_STAGES {
                return Err(err(
                    "stages",
                    format!("needs 1 to {MAX_STAGES} stages, got {}", stages.len()),
                ));
            }
            for (i, s) in stages.iter().enumerate() {
                if !(s.goal_distance.is_finite() && s.goal_distance > 0.0) {
                    return Err(err(
                        &format!("stages[{i}].goal_distance"),
                        format!("must be > 0 m, got {}", s.goal_distance),
                    ));
                }
                let max_rate = crate::sim::scenario::MAX_GOAL_JUMP_RATE;
                if !(s.jump_rate.is_finite() && (0.0..=max_rate).contains(&s.jump_rate)) {
                    return Err(err(
                        &format!("stages[{i}].jump_rate"),
                        format!(
                            "must be in [0, {max_rate}] jumps per second, got {}",
                            crate::config::num(s.jump_rate)
                        ),
                    ));
                }
            }
        }
        Ok(())
    }

    /// Build the curriculum (call `validate` first).
    pub fn build(&self) -> Box<dyn Curriculum> {
        let info = REGISTRY
            .iter()
            .find(|c| c.name == self.kind)
            .expect("validated curriculum kind");
        (info.build)(self)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn validation_rejects_foreign_and_bad_keys() {
        let mut s = CurriculumSpec {
            kind: "uniform".into(),
            start_radius: Some(0.5),
            ..Default::default()
        };
        let e = s
            .validate("x.toml", "", "curriculum")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("curriculum.start_radius") && e.contains("does not apply"),
            "{e}"
        );
        s = CurriculumSpec {
            kind: "backwards".into(),
            ..Default::default()
        };
        let e = s
            .validate("x.toml", "", "curriculum")
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("known: uniform, along-path, reverse, staged"),
            "{e}"
        );
        s = CurriculumSpec {
            kind: "along-path".into(),
            path_start_probability: Some(1.5),
            ..Default::default()
        };
        assert!(s.validate("x.toml", "", "curriculum").is_err());
        s = CurriculumSpec {
            kind: "reverse".into(),
            start_radius: Some(0.2),
            ..Default::default()
        };
        assert!(s.validate("x.toml", "", "curriculum").is_ok());
    }

    #[test]
    fn success_window_rate() {
        let mut w = SuccessWindow::new(4);
        for s in [true, false, true] {
            w.push(s);
        }
        assert_eq!(w.rate(), None);
        w.push(true);
        assert_eq!(w.rate(), Some(0.75));
        w.push(false); // window now false, true, true, false
        assert_eq!(w.rate(), Some(0.5));
    }
}
