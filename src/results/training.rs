//! training.csv and training-speed.csv: what PPO did in each iteration of a run. training.csv holds the
//! reproducible figures (same seed, same bytes); the wall-clock speed lives in training-speed.csv, the one
//! run file that differs between repeats of a run, so byte-for-byte checks skip it by name.

use super::{csv_error, display_f64, finish_csv, ResultsError, TRAINING_FILE, TRAINING_SPEED_FILE};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// One PPO iteration (rollout + update). Loss and KL figures follow Schulman et al. 2017 (see
/// `learn::IterationStats` for each definition).
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct TrainingRow {
    /// Iteration index, from 0.
    pub iteration: u64,
    /// Environment steps after this iteration's rollout.
    pub env_steps: u64,
    /// Adam step size of the update.
    #[serde(serialize_with = "display_f64")]
    pub learning_rate: f64,
    /// Mean clipped-surrogate loss over minibatches.
    #[serde(serialize_with = "display_f64")]
    pub policy_loss: f64,
    /// Mean value loss over minibatches.
    #[serde(serialize_with = "display_f64")]
    pub value_loss: f64,
    /// Mean policy entropy, nats.
    #[serde(serialize_with = "display_f64")]
    pub entropy: f64,
    /// Mean approximate KL divergence old -> new over the last epoch.
    #[serde(serialize_with = "display_f64")]
    pub approx_kl: f64,
    /// Fraction of samples whose probability ratio was clipped, last epoch.
    #[serde(serialize_with = "display_f64")]
    pub clip_fraction: f64,
    /// 1 - Var(targets - values) / Var(targets) of the rollout.
    #[serde(serialize_with = "display_f64")]
    pub explained_variance: f64,
    /// Mean policy-gradient norm before clipping.
    #[serde(serialize_with = "display_f64")]
    pub policy_grad_norm: f64,
    /// Mean value-gradient norm before clipping.
    #[serde(serialize_with = "display_f64")]
    pub value_grad_norm: f64,
    /// Mean policy standard deviation (action units).
    #[serde(serialize_with = "display_f64")]
    pub action_std: f64,
    /// Training episodes that ended in this rollout.
    pub episodes: u64,
    /// Their mean undiscounted return (NaN when none ended).
    #[serde(serialize_with = "display_f64")]
    pub mean_episode_return: f64,
}

/// Wall-clock speed of one iteration (not reproducible).
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct SpeedRow {
    pub iteration: u64,
    pub env_steps: u64,
    /// Environment steps per wall-clock second over the iteration.
    #[serde(serialize_with = "display_f64")]
    pub steps_per_s: f64,
    /// Wall-clock seconds of the iteration's rollout (policy passes, environment steps, resets and their
    /// planning) and of its update (GAE excluded, both epochs' passes and Adam steps).
    #[serde(serialize_with = "display_f64")]
    pub rollout_s: f64,
    #[serde(serialize_with = "display_f64")]
    pub update_s: f64,
}

fn write_rows<T: Serialize>(path: &Path, rows: &[T]) -> Result<(), ResultsError> {
    // The header comes from the field names (the first `serialize` writes it).
    let mut w = csv::WriterBuilder::new()
        .has_headers(true)
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new());
    for r in rows {
        w.serialize(r).map_err(csv_error(path))?;
    }
    finish_csv(path, w)
}

/// Write training.csv.
pub fn write_training(dir: &Path, rows: &[TrainingRow]) -> Result<(), ResultsError> {
    write_rows(&dir.join(TRAINING_FILE), rows)
}

/// Write training-speed.csv.
pub fn write_training_speed(dir: &Path, rows: &[SpeedRow]) -> Result<(), ResultsError> {
    write_rows(&dir.join(TRAINING_SPEED_FILE), rows)
}

/// Read training.csv (an absent file, e.g. from an older run, reads as no rows).
pub fn read_training(path: &Path) -> Result<Vec<TrainingRow>, ResultsError> {
    if !path.is_file() {
        return Ok(Vec::new());
    }
    let mut reader = csv::Reader::from_path(path).map_err(csv_error(path))?;
    reader
        .deserialize()
        .collect::<Result<Vec<TrainingRow>, _>>()
        .map_err(csv_error(path))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn training_rows_round_trip() {
        let dir = std::env::temp_dir().join(format!("termwise-train-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let rows = [
            TrainingRow {
                iteration: 0,
                env_steps: 512,
                approx_kl: 0.012,
                mean_episode_return: f64::NAN,
                ..TrainingRow::default()
            },
            TrainingRow {
                iteration: 1,
                env_steps: 1024,
                clip_fraction: 0.25,
                ..TrainingRow::default()
            },
        ];
        write_training(&dir, &rows).unwrap();
        let text = std::fs::read_to_string(dir.join(TRAINING_FILE)).unwrap();
        assert!(text.starts_with("iteration,env_steps,learning_rate,policy_loss,"));
        assert_eq!(text.lines().count(), 3);
        let back = read_training(&dir.join(TRAINING_FILE)).unwrap();
        assert_eq!(back[1], rows[1]);
        assert!(back[0].mean_episode_return.is_nan() && back[0].approx_kl == 0.012);
        let _ = std::fs::remove_dir_all(&dir);
    }
}
