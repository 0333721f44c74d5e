//! How metrics leave the training loop: the trainer calls an [`Observer`] after every finished
//! episode and every iteration; CSV writers, progress bars and tests implement it.

/// Metrics of one iteration (rollout + update). Every field except `rollout_seconds`,
/// `update_seconds` and `steps_per_second` is bit-identical across runs with the same seed on
/// the same machine.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct IterationStats {
    /// Iteration index, from 0.
    pub iteration: u64,
    /// Environment steps taken so far, including this rollout.
    pub env_steps: u64,
    /// Adam step size used in this update.
    pub learning_rate: f64,
    /// Mean clipped-surrogate loss (negated eq. 7 of Schulman et al. 2017) over minibatches.
    pub policy_loss: f64,
    /// Mean value loss (half squared error) over minibatches.
    pub value_loss: f64,
    /// Mean policy entropy over minibatches (nats).
    pub entropy: f64,
    /// Mean approximate KL divergence old -> new, estimated per sample as
    /// `(ratio - 1) - ln ratio` (common practice), over the last epoch.
    pub approx_kl: f64,
    /// Fraction of samples whose ratio left [1 - eps, 1 + eps], over the last epoch.
    pub clip_fraction: f64,
    /// 1 - Var(targets - values) / Var(targets) of the rollout's value predictions.
    pub explained_variance: f64,
    /// Mean policy gradient norm before clipping.
    pub policy_grad_norm: f64,
    /// Mean value gradient norm before clipping.
    pub value_grad_norm: f64,
    /// Mean standard deviation of the policy over action components (action units).
    pub action_std: f64,
    /// Episodes that ended during this rollout.
    pub episodes: u64,
    /// Mean undiscounted raw return of those episodes (NaN when none ended).
    pub mean_episode_return: f64,
    /// Mean length in steps of those episodes (NaN when none ended).
    pub mean_episode_length: f64,
    /// Fraction of those episodes that ended terminated rather than truncated (NaN when none).
    pub terminated_fraction: f64,
    /// Wall-clock seconds of the rollout (not reproducible).
    pub rollout_seconds: f64,
    /// Wall-clock seconds of the update (not reproducible).
    pub update_seconds: f64,
    /// Environment steps per wall-clock second for the whole iteration (not reproducible).
    pub steps_per_second: f64,
}

impl IterationStats {
    /// The reproducible fields only (timings zeroed), for determinism checks.
    pub fn without_timings(&self) -> IterationStats {
        IterationStats {
            rollout_seconds: 0.0,
            update_seconds: 0.0,
            steps_per_second: 0.0,
            ..self.clone()
        }
    }
}

/// One finished episode of a training environment.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct EpisodeEnd {
    /// Index of the environment in the trainer's batch.
    pub env_index: usize,
    /// Undiscounted sum of raw (unscaled) rewards.
    pub raw_return: f64,
    /// Steps in the episode.
    pub length: u64,
    /// Ended in a terminal state (otherwise cut by the time limit).
    pub terminated: bool,
    /// Environment steps of the trainer when it ended.
    pub env_steps: u64,
}

/// Receives metrics from the trainer. Both methods default to doing nothing.
///
/// ```
/// use termwise::learn::{IterationStats, Observer};
/// struct Kl(Vec<f64>);
/// impl Observer for Kl {
///     fn on_iteration(&mut self, s: &IterationStats) { self.0.push(s.approx_kl); }
/// }
/// ```
pub trait Observer {
    /// Called when a training episode ends (inside the rollout).
    fn on_episode(&mut self, _episode: &EpisodeEnd) {}
    /// Called after every iteration's update.
    fn on_iteration(&mut self, _stats: &IterationStats) {}
}

/// An observer that ignores everything.
#[derive(Clone, Copy, Debug, Default)]
pub struct NoObserver;

impl Observer for NoObserver {}

/// Keeps every iteration's stats (tests and small tools).
impl Observer for Vec<IterationStats> {
    fn on_iteration(&mut self, stats: &IterationStats) {
        self.push(stats.clone());
    }
}
