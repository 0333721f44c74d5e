//! `uniform`: every training episode is the full task (random start within the joint limits, random
//! reachable goal), the reference point every other curriculum is compared with.

use super::{full_task_draw, Curriculum, EpisodeDraw};
use crate::sim::ArmEnv;
use rand_chacha::ChaCha8Rng;

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
