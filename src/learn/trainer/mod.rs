//! The trainer owns one run's loop: E environments, the policy and value networks, the
//! optimisers and the run's single seeded RNG. `iterate` does one rollout (fused plain-Rust
//! forward) and one PPO update (candle autograd + plain-Rust Adam); metrics go to an observer.

use std::path::Path;
use std::time::Instant;

use rand::seq::SliceRandom;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

use super::adam::{clip_global_norm, global_norm, scale_all, Adam, AdamParams};
use super::buffer::RolloutBuffer;
use super::checkpoint;
use super::config::PpoConfig;
use super::env::Environment;
use super::error::LearnError;
use super::fused::{self, BatchForward, FusedWorkspace};
use super::gaussian::{fill_standard_normal, log_prob};
use super::mlp::Mlp;
use super::normalize::{ObsNormalizer, RewardScaler, RunningMoments};
use super::observer::{EpisodeEnd, IterationStats, Observer};
use super::policy::{Policy, Scratch};
use super::ppo::{loss_and_grads, Minibatch, MinibatchResult};
use super::threads::pin_kernel_threads;

mod rollout;
mod update;

/// Orthogonal-initialisation gains (common practice): sqrt(2) on hidden layers, 0.01 on the
/// policy-mean output (near-zero initial means), 1 on the value output.
const HIDDEN_GAIN: f32 = std::f32::consts::SQRT_2;
const POLICY_OUT_GAIN: f32 = 0.01;
const VALUE_OUT_GAIN: f32 = 1.0;

/// One PPO run.
pub struct Trainer {
    cfg: PpoConfig,
    envs: Vec<Box<dyn Environment>>,
    rng: ChaCha8Rng,
    policy: Policy,
    critic: Mlp,
    policy_opt: Adam,
    value_opt: Adam,
    obs_stats: RunningMoments,
    reward_scaler: Option<RewardScaler>,
    raw_obs: Vec<f32>,
    buf: RolloutBuffer,
    ep_return: Vec<f64>,
    ep_len: Vec<u64>,
    env_steps: u64,
    iteration: u64,
    obs_dim: usize,
    act_dim: usize,
    /// Update buffers, reused across minibatches and iterations.
    minibatch: Minibatch,
    fused_ws: FusedWorkspace,
    result: MinibatchResult,
    /// Rollout buffers: the normalised observations of all environments at one step (E x obs)
    /// and the batched policy and value passes over them.
    step_obs: Vec<f32>,
    step_actor: BatchForward,
    step_critic: BatchForward,
    perm: Vec<usize>,
}

/// Per-rollout tallies.
#[derive(Default)]
struct RolloutTally {
    episodes: u64,
    return_sum: f64,
    length_sum: f64,
    terminated: u64,
    std_sum: f64,
}

impl Trainer {
    /// Validate `cfg`, initialise the networks from `seed` and reset every environment.
    /// `envs.len()` must equal `cfg.num_envs` and all must agree on their sizes.
    pub fn new(
        cfg: PpoConfig,
        mut envs: Vec<Box<dyn Environment>>,
        seed: u64,
    ) -> Result<Trainer, LearnError> {
        pin_kernel_threads();
        cfg.validate()?;
        if envs.len() != cfg.num_envs {
            return Err(LearnError::EnvShape(format!(
                "num_envs is {} but {} environments were given",
                cfg.num_envs,
                envs.len()
            )));
        }
        let (obs_dim, act_dim) = (envs[0].obs_dim(), envs[0].act_dim());
        if obs_dim == 0 || act_dim == 0 {
            return Err(LearnError::EnvShape(
                "zero-length observation or action".into(),
            ));
        }
        if let Some(i) = envs
            .iter()
            .position(|e| e.obs_dim() != obs_dim || e.act_dim() != act_dim)
        {
            return Err(LearnError::EnvShape(format!(
                "environment {i} has sizes ({}, {}), environment 0 has ({obs_dim}, {act_dim})",
                envs[i].obs_dim(),
                envs[i].act_dim()
            )));
        }
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let sd = cfg.state_dependent_std;
        let mut sizes = vec![obs_dim];
        sizes.extend(&cfg.hidden);
        sizes.push(if sd { 2 * act_dim } else { act_dim });
        let mut actor = Mlp::orthogonal(&sizes, HIDDEN_GAIN, POLICY_OUT_GAIN, &mut rng);
        let log_std = if sd {
            let out = actor.layers.last_mut().expect("at least one layer");
            out.b[act_dim..].fill(cfg.init_log_std as f32);
            Vec::new()
        } else {
            vec![cfg.init_log_std as f32; act_dim]
        };
        *sizes.last_mut().expect("sizes") = 1;
        let critic = Mlp::orthogonal(&sizes, HIDDEN_GAIN, VALUE_OUT_GAIN, &mut rng);
        let policy = Policy {
            actor,
            log_std,
            act_dim,
            norm: ObsNormalizer::identity(obs_dim),
        };
        let adam = AdamParams {
            beta1: cfg.adam_beta1,
            beta2: cfg.adam_beta2,
            epsilon: cfg.adam_epsilon,
        };
        let policy_opt = Adam::new(&policy_sizes(&policy), adam);
        let value_opt = Adam::new(
            &critic.tensors().iter().map(|t| t.len()).collect::<Vec<_>>(),
            adam,
        );
        let mut raw_obs = vec![0.0; cfg.num_envs * obs_dim];
        for (env, o) in envs.iter_mut().zip(raw_obs.chunks_mut(obs_dim)) {
            env.reset(o);
        }
        let reward_scaler = cfg
            .scale_rewards
            .then(|| RewardScaler::new(cfg.num_envs, cfg.gamma, cfg.reward_clip));
        Ok(Trainer {
            buf: RolloutBuffer::new(cfg.num_envs, cfg.rollout_steps, obs_dim, act_dim),
            ep_return: vec![0.0; cfg.num_envs],
            ep_len: vec![0; cfg.num_envs],
            obs_stats: RunningMoments::new(obs_dim),
            cfg,
            envs,
            rng,
            policy,
            critic,
            policy_opt,
            value_opt,
            reward_scaler,
            raw_obs,
            env_steps: 0,
            iteration: 0,
            obs_dim,
            act_dim,
            minibatch: Minibatch::default(),
            fused_ws: FusedWorkspace::default(),
            step_obs: Vec::new(),
            step_actor: BatchForward::default(),
            step_critic: BatchForward::default(),
            result: fused::empty_result(),
            perm: Vec::new(),
        })
    }

    /// Environment steps taken so far.
    pub fn env_steps(&self) -> u64 {
        self.env_steps
    }

    /// Iterations completed so far.
    pub fn iteration(&self) -> u64 {
        self.iteration
    }

    /// The current policy with its frozen observation normalisation (after a divergence: the
    /// last good one). Clone it to evaluate on other environment instances.
    pub fn policy(&self) -> &Policy {
        &self.policy
    }

    /// The value network.
    pub fn value_network(&self) -> &Mlp {
        &self.critic
    }

    /// The settings of this run.
    pub fn config(&self) -> &PpoConfig {
        &self.cfg
    }

    /// The training environments (e.g. for a curriculum to inspect).
    pub fn envs_mut(&mut self) -> &mut [Box<dyn Environment>] {
        &mut self.envs
    }

    /// Write the current weights and normalisation statistics to `path` (safetensors) and a
    /// JSON sidecar beside it; see [`checkpoint::save`].
    pub fn save_checkpoint(&self, path: &Path) -> Result<(), LearnError> {
        self.save_checkpoint_for(path, None)
    }

    /// [`Trainer::save_checkpoint`] with a record of what the policy is trained for (task, observation
    /// layout, configuration), written into the sidecar so a replay can refuse a mismatch.
    pub fn save_checkpoint_for(
        &self,
        path: &Path,
        trained_for: Option<&checkpoint::TrainedFor>,
    ) -> Result<(), LearnError> {
        checkpoint::save(
            path,
            &checkpoint::CheckpointParts {
                policy: &self.policy,
                critic: &self.critic,
                obs_stats: &self.obs_stats,
                config: &self.cfg,
                env_steps: self.env_steps,
                iteration: self.iteration,
                trained_for,
            },
        )
    }

    /// One iteration: a rollout of `rollout_steps` steps in every environment, GAE, and the PPO
    /// update. On a non-finite loss, gradient or weight the weights are restored to their state
    /// before this update and `LearnError::Diverged` is returned.
    pub fn iterate(&mut self, observer: &mut dyn Observer) -> Result<IterationStats, LearnError> {
        let t0 = Instant::now();
        let lr = self.learning_rate();
        let tally = self.rollout(observer)?;
        self.buf
            .compute_advantages(self.cfg.gamma as f32, self.cfg.gae_lambda as f32);
        let t1 = Instant::now();
        let saved = (
            self.policy.clone(),
            self.critic.clone(),
            self.policy_opt.clone(),
            self.value_opt.clone(),
        );
        let mut stats = match self.update(lr) {
            Ok(s) => s,
            Err(e) => {
                (self.policy, self.critic, self.policy_opt, self.value_opt) = saved;
                return Err(e);
            }
        };
        if self.cfg.normalize_obs {
            self.policy.norm = ObsNormalizer::from_moments(&self.obs_stats, self.cfg.obs_clip);
        }
        let t2 = Instant::now();
        let n = tally.episodes as f64;
        let per_ep = |x: f64| if tally.episodes > 0 { x / n } else { f64::NAN };
        stats.iteration = self.iteration;
        stats.env_steps = self.env_steps;
        stats.learning_rate = lr;
        stats.explained_variance = self.buf.explained_variance();
        stats.action_std = tally.std_sum / (self.buf.len() * self.act_dim) as f64;
        stats.episodes = tally.episodes;
        stats.mean_episode_return = per_ep(tally.return_sum);
        stats.mean_episode_length = per_ep(tally.length_sum);
        stats.terminated_fraction = per_ep(tally.terminated as f64);
        stats.rollout_seconds = (t1 - t0).as_secs_f64();
        stats.update_seconds = (t2 - t1).as_secs_f64();
        stats.steps_per_second = self.buf.len() as f64 / (t2 - t0).as_secs_f64();
        self.iteration += 1;
        observer.on_iteration(&stats);
        Ok(stats)
    }
}

fn policy_sizes(p: &Policy) -> Vec<usize> {
    let mut v: Vec<usize> = p.actor.tensors().iter().map(|t| t.len()).collect();
    if !p.log_std.is_empty() {
        v.push(p.log_std.len());
    }
    v
}

fn policy_tensors_mut(p: &mut Policy) -> Vec<&mut [f32]> {
    let mut v = p.actor.tensors_mut();
    if !p.log_std.is_empty() {
        v.push(&mut p.log_std[..]);
    }
    v
}
