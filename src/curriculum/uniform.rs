//! `uniform`: every training episode is the full task (random start within the joint limits, random
//! reachable goal), the reference point every other curriculum is compared with.

use super::{
    build_from, default_params, full_task_draw, Curriculum, CurriculumInfo, CurriculumParams,
    EpisodeDraw, ParamError,
};
use crate::sim::ArmEnv;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

/// Registry entry.
pub const INFO: CurriculumInfo = CurriculumInfo {
    name: "uniform",
    meaning: "start and goal drawn uniformly from the scenario's joint limits and reachable, collision-free goals",
    params: &[],
    defaults: default_params::<UniformParams>,
    build: build_from::<UniformParams>,
};

/// `uniform` has no parameters.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct UniformParams {}

impl CurriculumParams for UniformParams {
    fn validate(&self) -> Result<(), ParamError> {
        Ok(())
    }
    fn build(self) -> Box<dyn Curriculum> {
        Box::new(Uniform)
    }
}

/// No curriculum: the full task from the first episode.
#[derive(Clone, Debug, Default)]
pub struct Uniform;

impl Curriculum for Uniform {
    fn name(&self) -> &'static str {
        "uniform"
    }
    fn draw(&mut self, env: &ArmEnv, _env_steps: u64, rng: &mut ChaCha8Rng) -> EpisodeDraw {
        full_task_draw(env, rng)
    }
    fn level(&self) -> f64 {
        1.0
    }
}
