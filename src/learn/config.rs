//! `PpoConfig`: every setting of the PPO learner with its default and where the default comes
//! from. The study's TOML reader deserialises it; `validate` checks ranges before a run starts.

use serde::{Deserialize, Serialize};

use super::LearnError;

/// Settings of the PPO learner. Defaults: the continuous-control table of Schulman et al. 2017
/// (Table 3) unless a field says otherwise (measured on our tasks, or common practice).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct PpoConfig {
    /// Environments stepped together in one run. Default 16 (project choice). On the four-obstacle task (curriculum
    /// comparison, uniform starts, 5 seeds x 300k steps, 2026-12-03):
    /// 16 x 128 ended at 0.78 [0.53, 0.90] clean success (IQM, 95% CI), 32 x 64 at 0.60 [0.47, 0.81], ranked below.
    pub num_envs: usize,
    /// Steps per environment per rollout; samples per iteration = `num_envs * rollout_steps`.
    /// Default 128 (16 x 128 = 2048, the horizon T of Schulman et al. 2017, Table 3).
    pub rollout_steps: usize,
    /// Passes over the rollout per update. Default 10 (Schulman et al. 2017, Table 3).
    pub epochs: usize,
    /// Samples per minibatch. Default 256 (8 per epoch): Table 3 uses 64. 256 makes the update
    /// about 2.5x faster per iteration than 64 (benches/learn.rs); on the random-goal reach of
    /// `tests/all/learn_reach.rs`, 128 was no faster to learn (first >= 90% success at 139k / 98k /
    /// 129k steps for seeds 1-3, against 111k / 119k / 96k with 256; both with the earlier
    /// `init_log_std` of -0.5 and a step size of 1e-3).
    pub minibatch_size: usize,
    /// Adam step size at the start of training. Default 3e-4 (Schulman et al. 2017, Table 3).
    /// Measured on the random-goal reach of `tests/all/learn_reach.rs` (`init_log_std` 0): first at
    /// 90% success or more after 66k / 76k / 66k / 111k / 80k / 78k / 51k environment steps for seeds
    /// 1-7, against 94k / 98k / 72k / 74k / 72k / 64k / 66k with 1e-3 (a tie); on the quickstart
    /// study (5 seeds per variant) 3e-4 brought every seed of both waypoint variants to 50%
    /// success within 250k steps, 1e-3 only 3 of 5 and 4 of 5.
    pub learning_rate: f64,
    /// Environment steps over which the step size falls linearly to zero; 0 keeps it constant.
    /// Default 0 (Table 3 uses a constant step size; the study runner sets its budget here to
    /// get linear decay). On the four-obstacle task (curriculum comparison, uniform starts, 5 seeds x 300k steps,
    /// 2026-12-03):
    /// decay over the budget 0.78 [0.53, 0.90] clean success, constant 0.66 [0.47, 0.77], ranked below.
    pub lr_decay_steps: u64,
    /// Adam first-moment decay beta1. Default 0.9 (Kingma & Ba 2015, Algorithm 1).
    pub adam_beta1: f64,
    /// Adam second-moment decay beta2. Default 0.999 (Kingma & Ba 2015, Algorithm 1).
    pub adam_beta2: f64,
    /// Adam epsilon. Default 1e-5 (common practice for PPO; Kingma & Ba use 1e-8).
    pub adam_epsilon: f64,
    /// Discount gamma per step. Default 0.99 (Schulman et al. 2017, Table 3). Measured on the
    /// random-goal reach of `tests/all/learn_reach.rs` with the other defaults: first >= 90% success
    /// at 121k / 86k / 68k / 98k / 78k / 76k / 49k environment steps for seeds 1-7, against 66k /
    /// 76k / 66k / 111k / 80k / 78k / 51k with 0.98 (a tie). With the earlier step size 1e-3
    /// and `init_log_std` -0.5, 0.98 had been the more reliable (7 of 7 seeds against 6 of 7).
    pub gamma: f64,
    /// GAE lambda. Default 0.95 (Schulman et al. 2017, Table 3).
    pub gae_lambda: f64,
    /// Clipping range epsilon of the surrogate (eq. 7). Default 0.2 (Schulman et al. 2017,
    /// Table 3 and section 6.1).
    pub clip_epsilon: f64,
    /// Weight c1 of the value loss in the combined loss (eq. 9). Default 0.5 (common practice;
    /// with separate networks and separate gradient clipping it only rescales the value
    /// gradient before Adam).
    pub value_coef: f64,
    /// Weight c2 of the entropy bonus (eq. 9). Default 0.0 (the continuous-control runs of
    /// Schulman et al. 2017 use no entropy bonus; Andrychowicz et al. 2021 found it unhelpful in continuous
    /// control). On the four-obstacle task (curriculum comparison, uniform starts, 5 seeds x 300k steps,
    /// 2026-12-03):
    /// 0 ended at 0.78 [0.53, 0.90] clean success, 0.01 at 0.65 [0.50, 0.77], ranked below.
    pub entropy_coef: f64,
    /// Clip the value prediction to within `clip_epsilon` of its old value before the squared
    /// error (pessimistic max of clipped and unclipped). Default false (plain squared error, as in
    /// eq. 9 of Schulman et al. 2017; Andrychowicz et al. 2021 and Engstrom et al. 2020 found clipping no help or
    /// harmful). On the four-obstacle task (curriculum comparison, uniform starts, 5 seeds x 300k steps,
    /// 2026-12-03):
    /// without clipping 0.78 [0.53, 0.90] clean success, with it 0.53 [0.38, 0.74], ranked below.
    pub clip_value_loss: bool,
    /// Global L2 norm limit on the gradient; 0 disables. Default 0.5 (common practice).
    pub max_grad_norm: f64,
    /// Clip the policy and value gradients separately (each to `max_grad_norm`) instead of one
    /// joint norm. Default true (a reference PPO on a similar arm task was more stable so).
    pub separate_grad_clip: bool,
    /// Hidden layer widths of both the policy-mean and the value network (tanh activations).
    /// Default [64, 64] (Schulman et al. 2017, section 6.1). On the four-obstacle task (curriculum comparison,
    /// uniform starts, 5 seeds x 300k steps, 2026-12-03):
    /// [64, 64] 0.78 [0.53, 0.90] clean success, [128, 128] 0.64 [0.47, 0.81], ranked below.
    pub hidden: Vec<usize>,
    /// Let the policy network output the log standard deviation too (state-dependent std).
    /// Default false: a state-independent learned log std (Schulman et al. 2017, section 6.1).
    pub state_dependent_std: bool,
    /// Initial log standard deviation of the Gaussian policy. Default 0.0 (std 1 in action units
    /// [-1, 1]; common practice). Measured on the random-goal reach of `tests/all/learn_reach.rs`
    /// (step size 1e-3): first >= 90% success at 94k / 98k / 72k / 74k / 72k / 64k / 66k steps
    /// for seeds 1-7 with 0.0, against 111k / 119k / 96k / 123k / 186k / 80k / 86k with -0.5.
    pub init_log_std: f64,
    /// Normalise observations by a running mean and standard deviation (frozen during an
    /// iteration). Default true (common practice for continuous control).
    pub normalize_obs: bool,
    /// Clip normalised observations to [-obs_clip, obs_clip]. Default 10.0 (common practice).
    pub obs_clip: f64,
    /// Divide rewards by a running standard deviation of the discounted return. Default true
    /// (common practice; the dense distance term makes raw returns of order -50 to -150). On the four-obstacle task
    /// (curriculum comparison, uniform starts, 5 seeds x 300k steps, 2026-12-03):
    /// with scaling 0.78 [0.53, 0.90] clean success and 3 of 5 seeds at 70% by 300k, without it 0.89 [0.84, 0.90]
    /// and 5 of 5 (119k [102k, 154k]): one group under the report's rule (P(without beats with) 0.68 [0.28, 1.00]),
    /// so the default stays until more seeds decide it.
    pub scale_rewards: bool,
    /// Clip scaled rewards to [-reward_clip, reward_clip]. Default 10.0 (common practice).
    pub reward_clip: f64,
    /// Normalise advantages to zero mean and unit std within each minibatch. Default true
    /// (common practice).
    pub normalize_advantages: bool,
    /// Compute the update's loss and gradients by the fused path (`learn::fused`: hand-written
    /// backpropagation over contiguous f32 buffers, matrix products by `learn::kernels`) rather
    /// than by candle's autograd. Both compute the same loss (a test holds them within 1e-5);
    /// the fused path is several times faster (benches/learn.rs). Default true.
    pub fused_update: bool,
}

impl Default for PpoConfig {
    fn default() -> Self {
        PpoConfig {
            num_envs: 16,
            rollout_steps: 128,
            epochs: 10,
            minibatch_size: 256,
            learning_rate: 3e-4,
            lr_decay_steps: 0,
            adam_beta1: 0.9,
            adam_beta2: 0.999,
            adam_epsilon: 1e-5,
            gamma: 0.99,
            gae_lambda: 0.95,
            clip_epsilon: 0.2,
            value_coef: 0.5,
            entropy_coef: 0.0,
            clip_value_loss: false,
            max_grad_norm: 0.5,
            separate_grad_clip: true,
            hidden: vec![64, 64],
            state_dependent_std: false,
            init_log_std: 0.0,
            normalize_obs: true,
            obs_clip: 10.0,
            scale_rewards: true,
            reward_clip: 10.0,
            normalize_advantages: true,
            fused_update: true,
        }
    }
}

/// Most environments per run (`num_envs`).
pub const MAX_NUM_ENVS: usize = 1_024;
/// Most steps per environment per rollout (`rollout_steps`).
pub const MAX_ROLLOUT_STEPS: usize = 100_000;
/// Most samples per iteration (`num_envs * rollout_steps`); bounds the rollout buffer's memory.
pub const MAX_BATCH: usize = 1_000_000;
/// Most passes over a rollout per update (`epochs`).
pub const MAX_EPOCHS: usize = 1_000;
/// Most hidden layers (`hidden`).
pub const MAX_LAYERS: usize = 16;
/// Widest hidden layer (`hidden`).
pub const MAX_WIDTH: usize = 4_096;

fn bad(field: &'static str, reason: impl Into<String>) -> LearnError {
    LearnError::InvalidConfig {
        field,
        reason: reason.into(),
    }
}

impl PpoConfig {
    /// Samples collected per iteration.
    pub fn batch_size(&self) -> usize {
        self.num_envs * self.rollout_steps
    }

    /// Check every range; the error names the field and what is allowed.
    pub fn validate(&self) -> Result<(), LearnError> {
        let unit = |x: f64| (0.0..=1.0).contains(&x);
        let pos = |x: f64| x.is_finite() && x > 0.0;
        let nonneg = |x: f64| x.is_finite() && x >= 0.0;
        if self.num_envs == 0 || self.num_envs > MAX_NUM_ENVS {
            return Err(bad(
                "num_envs",
                format!("must be in 1..={MAX_NUM_ENVS}, got {}", self.num_envs),
            ));
        }
        if self.rollout_steps == 0 || self.rollout_steps > MAX_ROLLOUT_STEPS {
            return Err(bad(
                "rollout_steps",
                format!(
                    "must be in 1..={MAX_ROLLOUT_STEPS}, got {}",
                    self.rollout_steps
                ),
            ));
        }
        if self.batch_size() > MAX_BATCH {
            return Err(bad(
                "rollout_steps",
                format!(
                    "num_envs * rollout_steps = {} samples per iteration; at most {MAX_BATCH} are allowed",
                    self.batch_size()
                ),
            ));
        }
        if self.epochs == 0 || self.epochs > MAX_EPOCHS {
            return Err(bad(
                "epochs",
                format!("must be in 1..={MAX_EPOCHS}, got {}", self.epochs),
            ));
        }
        if self.minibatch_size == 0 || self.minibatch_size > self.batch_size() {
            return Err(bad(
                "minibatch_size",
                format!(
                    "must be in 1..={} (num_envs * rollout_steps), got {}",
                    self.batch_size(),
                    self.minibatch_size
                ),
            ));
        }
        if !pos(self.learning_rate) {
            return Err(bad("learning_rate", "must be a positive number"));
        }
        if !(unit(self.adam_beta1) && self.adam_beta1 < 1.0) {
            return Err(bad("adam_beta1", "must be in [0, 1)"));
        }
        if !(unit(self.adam_beta2) && self.adam_beta2 < 1.0) {
            return Err(bad("adam_beta2", "must be in [0, 1)"));
        }
        if !pos(self.adam_epsilon) {
            return Err(bad("adam_epsilon", "must be a positive number"));
        }
        if !(unit(self.gamma) && self.gamma > 0.0) {
            return Err(bad("gamma", "must be in (0, 1]"));
        }
        if !unit(self.gae_lambda) {
            return Err(bad("gae_lambda", "must be in [0, 1]"));
        }
        if !(pos(self.clip_epsilon) && self.clip_epsilon < 1.0) {
            return Err(bad("clip_epsilon", "must be in (0, 1)"));
        }
        if !nonneg(self.value_coef) {
            return Err(bad("value_coef", "must be >= 0"));
        }
        if !nonneg(self.entropy_coef) {
            return Err(bad("entropy_coef", "must be >= 0"));
        }
        if !nonneg(self.max_grad_norm) {
            return Err(bad("max_grad_norm", "must be >= 0 (0 disables clipping)"));
        }
        if self.hidden.is_empty()
            || self.hidden.len() > MAX_LAYERS
            || self.hidden.iter().any(|&w| w == 0 || w > MAX_WIDTH)
        {
            return Err(bad(
                "hidden",
                format!("needs 1 to {MAX_LAYERS} layers, each 1 to {MAX_WIDTH} wide"),
            ));
        }
        if !self.init_log_std.is_finite() || self.init_log_std.abs() > 5.0 {
            return Err(bad("init_log_std", "must be in [-5, 5]"));
        }
        if !pos(self.obs_clip) {
            return Err(bad("obs_clip", "must be a positive number"));
        }
        if !pos(self.reward_clip) {
            return Err(bad("reward_clip", "must be a positive number"));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_valid_and_parse_from_partial_toml() {
        PpoConfig::default().validate().unwrap();
        let c: PpoConfig = toml::from_str("epochs = 4\nhidden = [32, 32]").unwrap();
        assert_eq!(c.epochs, 4);
        assert_eq!(c.hidden, vec![32, 32]);
        assert_eq!(c.num_envs, 16);
        assert!(toml::from_str::<PpoConfig>("epoch = 4").is_err());
    }

    #[test]
    fn validation_names_the_field() {
        let c = PpoConfig {
            minibatch_size: 5000,
            ..PpoConfig::default()
        };
        let e = c.validate().unwrap_err().to_string();
        assert!(e.contains("minibatch_size"), "{e}");
    }
}
