//! The learner's environment adapter: a training `Episode` whose starts come from the run's reset
//! curriculum, with the tallies all environments of one run share.

use super::episode::Episode;
use crate::curriculum::Curriculum;
use crate::learn::{Environment, Transition};
use crate::sim::ArmEnv;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::sync::{Arc, Mutex};

/// What the environments of one run share: the curriculum, the step counter and training-episode tallies.
pub struct RunShared {
    pub curriculum: Box<dyn Curriculum>,
    pub env_steps: u64,
    pub episodes: u64,
    pub successes: u64,
    /// Training draws rejected because no collision-free path joined start and goal.
    pub redraws: u64,
    /// Training episodes that still had no such path after `MAX_REDRAWS` draws.
    pub unsolved: u64,
}

impl RunShared {
    /// Fresh tallies around a run's curriculum.
    pub fn new(curriculum: Box<dyn Curriculum>) -> RunShared {
        RunShared {
            curriculum,
            env_steps: 0,
            episodes: 0,
            successes: 0,
            redraws: 0,
            unsolved: 0,
        }
    }
}

/// A training environment: an `Episode` whose starts come from the run's curriculum.
pub struct TaskEnv {
    ep: Episode,
    rng: ChaCha8Rng,
    shared: Arc<Mutex<RunShared>>,
}

impl TaskEnv {
    pub fn new(ep: Episode, seed: u64, shared: Arc<Mutex<RunShared>>) -> TaskEnv {
        TaskEnv {
            ep,
            rng: ChaCha8Rng::seed_from_u64(seed),
            shared,
        }
    }
}

impl Environment for TaskEnv {
    fn obs_dim(&self) -> usize {
        self.ep.obs_dim()
    }
    fn act_dim(&self) -> usize {
        self.ep.act_dim()
    }
    fn reset(&mut self, obs: &mut [f32]) {
        let shared = self.shared.clone();
        let mut draw = |sim: &ArmEnv, rng: &mut ChaCha8Rng| {
            let mut sh = shared.lock().expect("run state lock");
            let steps = sh.env_steps;
            let mut probe = sim.clone();
            let n_obs = probe.scenario().obstacles.len();
            let rate = probe.scenario().events.goal_jump_rate;
            probe.set_difficulty(n_obs, rate);
            sh.curriculum.draw(&probe, steps, rng)
        };
        let r = self.ep.begin_feasible(&mut draw, &mut self.rng);
        {
            let mut sh = self.shared.lock().expect("run state lock");
            sh.redraws += r.redraws as u64;
            sh.unsolved += r.unsolved as u64;
        }
        self.ep.observe(obs);
    }
    fn step(&mut self, action: &[f32], obs: &mut [f32]) -> Transition {
        let (now, r, terminal) = self.ep.step(action);
        self.ep.observe(obs);
        let truncated = !terminal && now.timed_out;
        let mut sh = self.shared.lock().expect("run state lock");
        sh.env_steps += 1;
        if terminal || truncated {
            sh.episodes += 1;
            sh.successes += now.reached_goal as u64;
            let steps = sh.env_steps;
            sh.curriculum.feedback(now.reached_goal, steps);
        }
        Transition {
            reward: r as f32,
            terminated: terminal,
            truncated,
        }
    }
}
