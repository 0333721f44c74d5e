//! The rollout buffer: one iteration's samples for all environments, stored environment-major
//! (sample index = env * steps + t) so each environment's segment is contiguous for GAE.

use super::gae::{advantages, Segment};

/// Samples of one rollout of `num_envs` environments for `steps` steps.
#[derive(Clone, Debug)]
pub struct RolloutBuffer {
    /// Environments.
    pub num_envs: usize,
    /// Steps per environment.
    pub steps: usize,
    /// Observation length.
    pub obs_dim: usize,
    /// Action length.
    pub act_dim: usize,
    /// Normalised observations (frozen statistics), `len * obs_dim`.
    pub obs: Vec<f32>,
    /// Unclipped Gaussian action samples, `len * act_dim`.
    pub actions: Vec<f32>,
    /// Log-probability of each unclipped sample under the acting policy.
    pub log_probs: Vec<f32>,
    /// Value predictions V(s_t).
    pub values: Vec<f32>,
    /// Rewards (scaled when reward scaling is on).
    pub rewards: Vec<f32>,
    /// Terminal flags.
    pub terminated: Vec<bool>,
    /// Time-limit flags.
    pub truncated: Vec<bool>,
    /// V(final observation) at time-limit cuts.
    pub cut_values: Vec<f32>,
    /// V of each environment's observation after the last step.
    pub last_values: Vec<f32>,
    /// GAE advantages (after [`RolloutBuffer::compute_advantages`]).
    pub advantages: Vec<f32>,
    /// Value targets: advantage + value.
    pub targets: Vec<f32>,
}

impl RolloutBuffer {
    /// An empty buffer of the right sizes.
    pub fn new(num_envs: usize, steps: usize, obs_dim: usize, act_dim: usize) -> Self {
        let n = num_envs * steps;
        RolloutBuffer {
            num_envs,
            steps,
            obs_dim,
            act_dim,
            obs: vec![0.0; n * obs_dim],
            actions: vec![0.0; n * act_dim],
            log_probs: vec![0.0; n],
            values: vec![0.0; n],
            rewards: vec![0.0; n],
            terminated: vec![false; n],
            truncated: vec![false; n],
            cut_values: vec![0.0; n],
            last_values: vec![0.0; num_envs],
            advantages: vec![0.0; n],
            targets: vec![0.0; n],
        }
    }

    /// Number of samples.
    pub fn len(&self) -> usize {
        self.num_envs * self.steps
    }

    /// True when the buffer holds no samples.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Sample index of environment `env` at step `t`.
    #[inline]
    pub fn index(&self, env: usize, t: usize) -> usize {
        env * self.steps + t
    }

    /// Run GAE over every environment's segment.
    pub fn compute_advantages(&mut self, gamma: f32, lambda: f32) {
        let t = self.steps;
        for e in 0..self.num_envs {
            let r = e * t..(e + 1) * t;
            let seg = Segment {
                rewards: &self.rewards[r.clone()],
                values: &self.values[r.clone()],
                terminated: &self.terminated[r.clone()],
                truncated: &self.truncated[r.clone()],
                cut_values: &self.cut_values[r.clone()],
                last_value: self.last_values[e],
            };
            let (adv, tgt) = (&mut self.advantages[r.clone()], &mut self.targets[r]);
            advantages(&seg, gamma, lambda, adv, tgt);
        }
    }

    /// 1 - Var(targets - values) / Var(targets) (NaN when the targets are constant).
    pub fn explained_variance(&self) -> f64 {
        let var = |it: &mut dyn Iterator<Item = f64>| {
            let v: Vec<f64> = it.collect();
            let n = v.len() as f64;
            let m = v.iter().sum::<f64>() / n;
            v.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / n
        };
        let vt = var(&mut self.targets.iter().map(|&x| x as f64));
        let vr = var(&mut self
            .targets
            .iter()
            .zip(&self.values)
            .map(|(&g, &v)| (g - v) as f64));
        if vt == 0.0 {
            f64::NAN
        } else {
            1.0 - vr / vt
        }
    }
}
