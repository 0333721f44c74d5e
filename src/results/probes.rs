//! probes.csv: one `ProbeRow` per probe condition a run's final policy (or the controller) was evaluated on
//! after training, written and read through serde like evaluations.csv. The header is the struct's field
//! names. study.json lists the probes (`ProbeRecord`) so the report can be drawn from the folder alone.

use super::{display_f64, header_of, not_recorded, read_rows, write_rows, ResultsError};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Per-run table of the probe conditions.
pub const PROBES_FILE: &str = "probes.csv";

/// One probe condition of a study, as study.json records it.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ProbeRecord {
    /// The probe's name (unique in the study).
    pub name: String,
    /// What it changes, in words (one entry per setting).
    pub changes: Vec<String>,
    /// Evaluation episodes of the probe.
    pub episodes: u64,
}

/// One row of probes.csv: the final policy's means over a probe's fixed evaluation episodes.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct ProbeRow {
    /// The probe's name.
    pub probe: String,
    /// Hash of the probe as applied to this run's variant (scenario, noise, start region, episodes): a row
    /// whose hash differs from the experiment's is evaluated again.
    pub definition: String,
    /// Hash of the evaluation episodes drawn (start states, goals, obstacles, event streams, noise stream):
    /// the same for every variant and seed evaluated under the same scenario and planner.
    pub episodes_digest: String,
    /// Environment steps of training behind the policy evaluated (0 for the controller).
    pub env_steps: u64,
    /// Evaluation episodes.
    pub episodes: u64,
    /// Fraction of episodes that reached the goal with no contact, in [0, 1].
    #[serde(rename = "clean_success_rate", serialize_with = "display_f64")]
    pub success_rate: f64,
    /// Fraction of episodes that reached the goal, contact allowed.
    #[serde(serialize_with = "display_f64")]
    pub reached_rate: f64,
    /// Fraction of episodes with any contact.
    #[serde(serialize_with = "display_f64")]
    pub collision_rate: f64,
    /// Mean return per episode.
    #[serde(serialize_with = "display_f64")]
    pub mean_return: f64,
    /// Mean time to goal over episodes that reached it, s (NaN when none did).
    #[serde(serialize_with = "display_f64")]
    pub time_to_goal: f64,
    /// Mean episode length, control steps.
    #[serde(serialize_with = "display_f64")]
    pub episode_steps: f64,
    /// RMS joint acceleration, rad/s^2.
    #[serde(serialize_with = "display_f64")]
    pub rms_joint_acc: f64,
    /// Minimum signed clearance over all episodes, m.
    #[serde(serialize_with = "display_f64")]
    pub min_clearance: f64,
    /// Replans per episode.
    #[serde(serialize_with = "display_f64")]
    pub replans: f64,
    /// Fraction of an episode's reference paths that touch an obstacle, mean over episodes (NaN in files
    /// written before the column existed).
    #[serde(serialize_with = "display_f64", default = "not_recorded")]
    pub reference_collisions: f64,
}

/// Columns added after the first format of probes.csv, newest last (a file may lack a suffix of them).
const ADDED_COLUMNS: &[&str] = &["reference_collisions"];

/// The header of probes.csv, from the field names of `ProbeRow`.
pub fn probe_columns() -> Vec<String> {
    header_of::<ProbeRow>()
}

/// Write probes.csv into the run folder `dir`.
pub fn write_probes(dir: &Path, rows: &[ProbeRow]) -> Result<(), ResultsError> {
    write_rows(&dir.join(PROBES_FILE), rows)
}

/// Read a run folder's probes.csv; no file gives no rows. A file from before `reference_collisions` reads it
/// as NaN.
pub fn read_probes(dir: &Path) -> Result<Vec<ProbeRow>, ResultsError> {
    let path = dir.join(PROBES_FILE);
    if !path.is_file() {
        return Ok(Vec::new());
    }
    read_rows(&path, ADDED_COLUMNS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_round_trip_and_the_header_is_fixed() {
        assert_eq!(
            probe_columns().join(","),
            "probe,definition,episodes_digest,env_steps,episodes,clean_success_rate,reached_rate,\
             collision_rate,mean_return,time_to_goal,episode_steps,rms_joint_acc,min_clearance,replans,\
             reference_collisions"
        );
        let dir = std::env::temp_dir().join(format!("termwise-probes-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        assert!(read_probes(&dir).unwrap().is_empty());
        let row = ProbeRow {
            probe: "goal-jumps".into(),
            definition: "0123456789abcdef".into(),
            episodes_digest: "fedcba9876543210".into(),
            env_steps: 4096,
            episodes: 30,
            success_rate: 0.1 + 0.2,
            time_to_goal: f64::NAN,
            ..ProbeRow::default()
        };
        write_probes(&dir, std::slice::from_ref(&row)).unwrap();
        let back = read_probes(&dir).unwrap();
        assert_eq!(back.len(), 1);
        assert_eq!(back[0].probe, row.probe);
        assert_eq!(back[0].success_rate.to_bits(), row.success_rate.to_bits());
        assert!(back[0].time_to_goal.is_nan());
        let _ = std::fs::remove_dir_all(&dir);
    }
}
