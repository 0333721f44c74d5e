//! `along-path`: with probability p an episode starts at rest on a random waypoint of its reference path, so
//! the policy sees states near the goal early; p is constant or decays linearly with environment steps.

use super::{
    build_from, check_unit, default_params, full_task_draw, Curriculum, CurriculumInfo,
    CurriculumParams, EpisodeDraw, ParamError,
};
use crate::sim::ArmEnv;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Registry entry.
pub const INFO: CurriculumInfo = CurriculumInfo {
    name: "along-path",
    meaning: "with probability p start at rest on a random waypoint of the reference path; p constant or decaying",
    params: &[
        ("path_start_probability", "p at step 0"),
        ("decay_steps", "env steps for p to decay linearly to 0 (0 = constant)"),
    ],
    defaults: default_params::<AlongPathParams>,
    build: build_from::<AlongPathParams>,
};

/// Parameters of `along-path`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct AlongPathParams {
    /// Probability of starting on the reference path at step 0, in [0, 1]. Default 0.5.
    pub path_start_probability: f64,
    /// Environment steps over which that probability decays linearly to 0; 0 = constant. Default 0.
    pub decay_steps: u64,
}

impl Default for AlongPathParams {
    fn default() -> Self {
        AlongPathParams {
            path_start_probability: 0.5,
            decay_steps: 0,
        }
    }
}

impl CurriculumParams for AlongPathParams {
    fn validate(&self) -> Result<(), ParamError> {
        check_unit("path_start_probability", self.path_start_probability)
    }
    fn build(self) -> Box<dyn Curriculum> {
        Box::new(AlongPath::new(
            self.path_start_probability,
            self.decay_steps,
        ))
    }
}

/// Starts on the reference path with a scheduled probability.
#[derive(Clone, Debug)]
pub struct AlongPath {
    p0: f64,
    decay_steps: u64,
    last_steps: u64,
}

impl AlongPath {
    /// `p0`: probability at step 0; `decay_steps`: steps to decay linearly to 0 (0 = constant).
    pub fn new(p0: f64, decay_steps: u64) -> Self {
        AlongPath {
            p0,
            decay_steps,
            last_steps: 0,
        }
    }

    /// The probability of a path start after `env_steps` steps.
    pub fn probability(&self, env_steps: u64) -> f64 {
        if self.decay_steps == 0 {
            self.p0
        } else {
            self.p0 * (1.0 - env_steps as f64 / self.decay_steps as f64).max(0.0)
        }
    }
}

impl Curriculum for AlongPath {
    fn name(&self) -> &'static str {
        "along-path"
    }
    fn draw(&mut self, env: &ArmEnv, env_steps: u64, rng: &mut ChaCha8Rng) -> EpisodeDraw {
        self.last_steps = env_steps;
        let mut d = full_task_draw(env, rng);
        d.start_on_path = rng.gen::<f64>() < self.probability(env_steps);
        d
    }
    /// Level 1 - p/p0: 0 while most starts are on the path, 1 once only full-task starts remain.
    fn level(&self) -> f64 {
        if self.p0 <= 0.0 {
            1.0
        } else {
            1.0 - self.probability(self.last_steps) / self.p0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn linear_decay_schedule() {
        let c = AlongPath::new(0.6, 1000);
        assert_eq!(c.probability(0), 0.6);
        assert!((c.probability(500) - 0.3).abs() < 1e-12);
        assert_eq!(c.probability(2000), 0.0);
        assert_eq!(AlongPath::new(0.4, 0).probability(1_000_000), 0.4);
    }
}
