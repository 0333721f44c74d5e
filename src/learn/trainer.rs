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

    fn learning_rate(&self) -> f64 {
        let frac = if self.cfg.lr_decay_steps > 0 {
            (1.0 - self.env_steps as f64 / self.cfg.lr_decay_steps as f64).max(0.0)
        } else {
            1.0
        };
        self.cfg.learning_rate * frac
    }

    fn value_of(critic: &Mlp, norm_obs: &[f32], sc: &mut Scratch) -> f32 {
        let mut v = [0.0f32];
        critic.forward(norm_obs, &mut sc.s0, &mut sc.s1, &mut v);
        v[0]
    }

    fn rollout(&mut self, observer: &mut dyn Observer) -> Result<RolloutTally, LearnError> {
        let (o_dim, a_dim) = (self.obs_dim, self.act_dim);
        let width = self.policy.actor.max_width().max(self.critic.max_width());
        let mut sc = Scratch::new(o_dim, width, self.policy.actor.output_dim());
        let mut log_std = vec![0.0f32; a_dim];
        let mut noise = vec![0.0f32; a_dim];
        let mut sample = vec![0.0f32; a_dim];
        let mut clipped = vec![0.0f32; a_dim];
        let mut final_norm = vec![0.0f32; o_dim];
        let mut tally = RolloutTally::default();
        let n_env = self.cfg.num_envs;
        let out_dim = self.policy.actor.output_dim();
        self.step_obs.resize(n_env * o_dim, 0.0);
        self.step_actor.prepare(&self.policy.actor);
        self.step_critic.prepare(&self.critic);
        for t in 0..self.cfg.rollout_steps {
            // Normalise every environment's observation (the statistics stay frozen during the
            // rollout), then run the policy and value networks over all of them in one batch.
            for e in 0..n_env {
                let raw = &self.raw_obs[e * o_dim..(e + 1) * o_dim];
                if raw.iter().any(|x| !x.is_finite()) {
                    return Err(LearnError::Diverged {
                        iteration: self.iteration,
                        reason: format!("environment {e} returned a non-finite observation"),
                    });
                }
                if self.cfg.normalize_obs {
                    self.obs_stats.push(raw);
                }
                let norm = &mut self.step_obs[e * o_dim..(e + 1) * o_dim];
                self.policy.norm.apply(raw, norm);
                let i = self.buf.index(e, t);
                self.buf.obs[i * o_dim..(i + 1) * o_dim].copy_from_slice(norm);
            }
            let means = self
                .step_actor
                .run_prepared(&self.policy.actor, &self.step_obs, n_env);
            let values = self
                .step_critic
                .run_prepared(&self.critic, &self.step_obs, n_env);
            for e in 0..n_env {
                let i = self.buf.index(e, t);
                let raw = &mut self.raw_obs[e * o_dim..(e + 1) * o_dim];
                let out = &means[e * out_dim..(e + 1) * out_dim];
                self.policy.log_std_into(out, &mut log_std);
                let value = values[e];
                fill_standard_normal(&mut self.rng, &mut noise);
                for k in 0..a_dim {
                    let std = log_std[k].exp();
                    tally.std_sum += std as f64;
                    sample[k] = out[k] + std * noise[k];
                    clipped[k] = sample[k].clamp(-1.0, 1.0);
                }
                self.buf.log_probs[i] = log_prob(&sample, &out[..a_dim], &log_std);
                self.buf.actions[i * a_dim..(i + 1) * a_dim].copy_from_slice(&sample);
                self.buf.values[i] = value;
                let tr = self.envs[e].step(&clipped, raw);
                let done = tr.terminated || tr.truncated;
                self.env_steps += 1;
                self.ep_return[e] += tr.reward as f64;
                self.ep_len[e] += 1;
                self.buf.rewards[i] = match &mut self.reward_scaler {
                    Some(s) => s.scale(e, tr.reward, done),
                    None => tr.reward,
                };
                self.buf.terminated[i] = tr.terminated;
                self.buf.truncated[i] = tr.truncated && !tr.terminated;
                self.buf.cut_values[i] = 0.0;
                if self.buf.truncated[i] {
                    // Time limit: bootstrap from V(final observation) (Pardo et al. 2018).
                    if raw.iter().any(|x| !x.is_finite()) {
                        return Err(LearnError::Diverged {
                            iteration: self.iteration,
                            reason: format!("environment {e} returned a non-finite observation"),
                        });
                    }
                    self.policy.norm.apply(raw, &mut final_norm);
                    self.buf.cut_values[i] = Self::value_of(&self.critic, &final_norm, &mut sc);
                }
                if done {
                    let ep = EpisodeEnd {
                        env_index: e,
                        raw_return: self.ep_return[e],
                        length: self.ep_len[e],
                        terminated: tr.terminated,
                        env_steps: self.env_steps,
                    };
                    tally.episodes += 1;
                    tally.return_sum += ep.raw_return;
                    tally.length_sum += ep.length as f64;
                    tally.terminated += tr.terminated as u64;
                    observer.on_episode(&ep);
                    self.ep_return[e] = 0.0;
                    self.ep_len[e] = 0;
                    self.envs[e].reset(raw);
                }
            }
        }
        for e in 0..self.cfg.num_envs {
            let raw = &self.raw_obs[e * o_dim..(e + 1) * o_dim];
            self.policy.norm.apply(raw, &mut final_norm);
            self.buf.last_values[e] = Self::value_of(&self.critic, &final_norm, &mut sc);
        }
        Ok(tally)
    }

    fn gather(&self, idx: &[usize], mb: &mut Minibatch) {
        let (o, a) = (self.obs_dim, self.act_dim);
        let b = &self.buf;
        mb.len = idx.len();
        mb.obs.clear();
        mb.actions.clear();
        mb.old_log_probs.clear();
        mb.advantages.clear();
        mb.targets.clear();
        mb.old_values.clear();
        for &i in idx {
            mb.obs.extend_from_slice(&b.obs[i * o..(i + 1) * o]);
            mb.actions.extend_from_slice(&b.actions[i * a..(i + 1) * a]);
            mb.old_log_probs.push(b.log_probs[i]);
            mb.advantages.push(b.advantages[i]);
            mb.targets.push(b.targets[i]);
            mb.old_values.push(b.values[i]);
        }
        if self.cfg.normalize_advantages && idx.len() > 1 {
            let n = idx.len() as f64;
            let m = mb.advantages.iter().map(|&x| x as f64).sum::<f64>() / n;
            let v = mb
                .advantages
                .iter()
                .map(|&x| (x as f64 - m).powi(2))
                .sum::<f64>()
                / n;
            let inv = 1.0 / (v.sqrt() + 1e-8);
            for x in &mut mb.advantages {
                *x = ((*x as f64 - m) * inv) as f32;
            }
        }
    }

    fn update(&mut self, lr: f64) -> Result<IterationStats, LearnError> {
        let n = self.buf.len();
        let mut perm = std::mem::take(&mut self.perm);
        perm.clear();
        perm.extend(0..n);
        let mut mb = std::mem::take(&mut self.minibatch);
        let mut r = std::mem::replace(&mut self.result, fused::empty_result());
        let mut s = IterationStats::default();
        let eps = self.cfg.clip_epsilon as f32;
        let (mut steps, mut samples) = (0u64, 0u64);
        for _ in 0..self.cfg.epochs {
            perm.shuffle(&mut self.rng);
            for chunk in perm.chunks(self.cfg.minibatch_size) {
                self.gather(chunk, &mut mb);
                if self.cfg.fused_update {
                    fused::loss_and_grads_into(
                        &self.policy,
                        &self.critic,
                        &mb,
                        &self.cfg,
                        &mut self.fused_ws,
                        &mut r,
                    );
                } else {
                    r = loss_and_grads(&self.policy, &self.critic, &mb, &self.cfg)?;
                }
                let diverged = |what: &str| LearnError::Diverged {
                    iteration: self.iteration,
                    reason: format!("non-finite {what}"),
                };
                if !(r.policy_loss.is_finite() && r.value_loss.is_finite() && r.entropy.is_finite())
                {
                    return Err(diverged("loss"));
                }
                let (pn, vn) = self.clip_grads(&mut r.policy_grads, &mut r.value_grads);
                if !(pn.is_finite() && vn.is_finite()) {
                    return Err(diverged("gradient"));
                }
                self.policy_opt.step(
                    lr,
                    &mut policy_tensors_mut(&mut self.policy),
                    &r.policy_grads,
                );
                self.value_opt
                    .step(lr, &mut self.critic.tensors_mut(), &r.value_grads);
                steps += 1;
                s.policy_loss += r.policy_loss as f64;
                s.value_loss += r.value_loss as f64;
                s.entropy += r.entropy as f64;
                s.policy_grad_norm += pn;
                s.value_grad_norm += vn;
                for &ratio in &r.ratios {
                    s.approx_kl += ((ratio - 1.0) - ratio.ln()) as f64;
                    s.clip_fraction += ((ratio - 1.0).abs() > eps) as u64 as f64;
                }
                samples += r.ratios.len() as u64;
            }
        }
        let policy_ok =
            self.policy.actor.all_finite() && self.policy.log_std.iter().all(|x| x.is_finite());
        if !(policy_ok && self.critic.all_finite()) {
            return Err(LearnError::Diverged {
                iteration: self.iteration,
                reason: "non-finite weights after the update".into(),
            });
        }
        let k = steps as f64;
        s.policy_loss /= k;
        s.value_loss /= k;
        s.entropy /= k;
        s.policy_grad_norm /= k;
        s.value_grad_norm /= k;
        s.approx_kl /= samples as f64;
        s.clip_fraction /= samples as f64;
        self.perm = perm;
        self.minibatch = mb;
        self.result = r;
        Ok(s)
    }

    /// Clip the gradients (separately per network, or jointly); returns the raw norms.
    fn clip_grads(&self, pg: &mut [Vec<f32>], vg: &mut [Vec<f32>]) -> (f64, f64) {
        let max = self.cfg.max_grad_norm;
        if self.cfg.separate_grad_clip {
            (clip_global_norm(pg, max), clip_global_norm(vg, max))
        } else {
            let (pn, vn) = (global_norm(pg), global_norm(vg));
            let joint = (pn * pn + vn * vn).sqrt();
            if max > 0.0 && joint > max {
                let s = (max / (joint + 1e-6)) as f32;
                scale_all(pg.iter_mut().chain(vg.iter_mut()), s);
            }
            (pn, vn)
        }
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
