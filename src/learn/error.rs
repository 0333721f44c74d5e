//! Errors of the learner: invalid settings, environment shape faults, candle failures, checkpoint
//! I/O, and divergence (non-finite loss or weights), which ends a run with status `diverged`.

use std::path::PathBuf;

/// Everything that can go wrong in `learn`.
#[derive(Debug, thiserror::Error)]
pub enum LearnError {
    /// A `PpoConfig` field is out of range; the message says what to change.
    #[error("invalid learner setting `{field}`: {reason}")]
    InvalidConfig {
        /// The field name as written in the config.
        field: &'static str,
        /// What is wrong and what is allowed.
        reason: String,
    },
    /// The environments disagree with each other or with a policy about their sizes.
    #[error("environment shape mismatch: {0}")]
    EnvShape(String),
    /// Non-finite loss, gradient, weight or observation: the run stops as `diverged`. The
    /// trainer keeps the last good weights (see `Trainer::policy`).
    #[error("training diverged at iteration {iteration}: {reason}")]
    Diverged {
        /// The iteration (0-based) whose update produced the non-finite value.
        iteration: u64,
        /// Which quantity became non-finite.
        reason: String,
    },
    /// A tensor operation failed inside candle.
    #[error("tensor operation failed: {0}")]
    Candle(#[from] candle_core::Error),
    /// Reading or writing a checkpoint failed.
    #[error("checkpoint file {path}: {source}")]
    Io {
        /// The file involved.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// A checkpoint is malformed or does not match its sidecar.
    #[error("checkpoint {path}: {reason}")]
    Checkpoint {
        /// The file involved.
        path: PathBuf,
        /// What is wrong.
        reason: String,
    },
}

impl LearnError {
    /// True when the run should be recorded as `diverged` rather than failed.
    pub fn is_divergence(&self) -> bool {
        matches!(self, LearnError::Diverged { .. })
    }
}
