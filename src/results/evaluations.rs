//! evaluations.csv: one `EvalRow` per evaluation of a run, written and read through serde. The header is the
//! struct's field names (serde renames included), so a new column is one field here plus the line that fills
//! it in `task::metrics`, and its entry in `analysis::metric::METRICS` (what the summary, tables, report and
//! charts make of it; a test there fails until the entry exists).

use super::{csv_buffer, csv_error, display_f64, finish_csv, ResultsError, EVALUATIONS_FILE};
use serde::{Deserialize, Serialize};
use std::path::Path;

/// One row of evaluations.csv: the means over a set of evaluation episodes at `env_steps`.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct EvalRow {
    /// Environment steps at this evaluation.
    pub env_steps: u64,
    /// Clean success: fraction of evaluation episodes that reached the goal with no contact, in [0, 1].
    #[serde(rename = "clean_success_rate", serialize_with = "display_f64")]
    pub success_rate: f64,
    /// Fraction of evaluation episodes that reached the goal, contact allowed, in [0, 1].
    #[serde(serialize_with = "display_f64")]
    pub reached_rate: f64,
    /// Fraction of episodes with any contact (obstacle, boundary or itself), in [0, 1].
    #[serde(serialize_with = "display_f64")]
    pub collision_rate: f64,
    /// Mean shaped return per evaluation episode.
    #[serde(serialize_with = "display_f64")]
    pub mean_return: f64,
    /// Mean time to goal over episodes that reached it, s (NaN when none did).
    #[serde(serialize_with = "display_f64")]
    pub time_to_goal: f64,
    /// Mean episode length, control steps.
    #[serde(serialize_with = "display_f64")]
    pub episode_steps: f64,
    /// RMS joint acceleration, rad/s^2 (`task::metrics::rms_per_joint`).
    #[serde(serialize_with = "display_f64")]
    pub rms_joint_acc: f64,
    /// Peak |joint acceleration|, rad/s^2.
    #[serde(serialize_with = "display_f64")]
    pub peak_joint_acc: f64,
    /// RMS joint jerk, rad/s^3 (`task::metrics::rms_per_joint`).
    #[serde(serialize_with = "display_f64")]
    pub rms_jerk: f64,
    /// Effector path length, m.
    #[serde(serialize_with = "display_f64")]
    pub path_length: f64,
    /// Minimum signed clearance over all episodes, m.
    #[serde(serialize_with = "display_f64")]
    pub min_clearance: f64,
    /// Mean distance to the reference path, m.
    #[serde(serialize_with = "display_f64")]
    pub path_deviation: f64,
    /// Replans per episode.
    #[serde(serialize_with = "display_f64")]
    pub replans: f64,
    /// Planner fallbacks per episode.
    #[serde(serialize_with = "display_f64")]
    pub planner_fallbacks: f64,
    /// Curriculum difficulty in [0, 1].
    #[serde(serialize_with = "display_f64")]
    pub curriculum_level: f64,
}

/// The header of evaluations.csv, from the field names of `EvalRow`.
pub fn evaluation_columns() -> Vec<String> {
    let mut w = csv::WriterBuilder::new()
        .has_headers(true)
        .from_writer(Vec::new());
    // Serialising one row makes the csv crate emit the header from the field names first.
    let header = w
        .serialize(EvalRow::default())
        .ok()
        .and_then(|_| w.into_inner().ok())
        .unwrap_or_default();
    let text = String::from_utf8_lossy(&header);
    text.lines()
        .next()
        .unwrap_or("")
        .split(',')
        .map(str::to_string)
        .collect()
}

/// Write evaluations.csv (header, then one row per evaluation).
pub fn write_evaluations(dir: &Path, rows: &[EvalRow]) -> Result<(), ResultsError> {
    let p = dir.join(EVALUATIONS_FILE);
    let mut w = csv_buffer();
    w.write_record(evaluation_columns())
        .map_err(csv_error(&p))?;
    for r in rows {
        w.serialize(r).map_err(csv_error(&p))?;
    }
    finish_csv(&p, w)
}

/// Read evaluations.csv, checking the header is exactly the format's.
pub fn read_evaluations(path: &Path) -> Result<Vec<EvalRow>, ResultsError> {
    let mut reader = csv::Reader::from_path(path).map_err(csv_error(path))?;
    let header: Vec<String> = reader
        .headers()
        .map_err(csv_error(path))?
        .iter()
        .map(str::to_string)
        .collect();
    let expected = evaluation_columns();
    if header != expected {
        return Err(ResultsError::BadHeader {
            path: path.to_path_buf(),
            expected: expected.join(","),
            found: header.join(","),
        });
    }
    reader
        .deserialize()
        .collect::<Result<Vec<EvalRow>, _>>()
        .map_err(csv_error(path))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The header every published results folder carries (results/quickstart), written out by hand.
    const PUBLISHED: &str = "env_steps,clean_success_rate,reached_rate,collision_rate,mean_return,time_to_goal,episode_steps,rms_joint_acc,peak_joint_acc,rms_jerk,path_length,min_clearance,path_deviation,replans,planner_fallbacks,curriculum_level";

    #[test]
    fn header_is_the_published_one() {
        assert_eq!(evaluation_columns().join(","), PUBLISHED);
    }

    #[test]
    fn rows_round_trip_bit_for_bit_with_display_text() {
        let dir = std::env::temp_dir().join(format!("termwise-evalrow-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let row = EvalRow {
            env_steps: 4096,
            success_rate: 1.0,
            reached_rate: 0.1 + 0.2,
            time_to_goal: f64::NAN,
            min_clearance: -0.0,
            rms_joint_acc: 1e-7,
            curriculum_level: f64::INFINITY,
            ..EvalRow::default()
        };
        write_evaluations(&dir, &[row]).unwrap();
        let text = std::fs::read_to_string(dir.join(EVALUATIONS_FILE)).unwrap();
        // Rust's Display: "1" (not "1.0"), shortest round-trip digits, "NaN", "inf".
        let line = text.lines().nth(1).unwrap();
        assert_eq!(
            line,
            "4096,1,0.30000000000000004,0,0,NaN,0,0.0000001,0,0,0,-0,0,0,0,inf"
        );
        let back = read_evaluations(&dir.join(EVALUATIONS_FILE)).unwrap();
        assert_eq!(back.len(), 1);
        assert!(back[0].time_to_goal.is_nan());
        assert_eq!(back[0].reached_rate.to_bits(), row.reached_rate.to_bits());
        assert_eq!(back[0].min_clearance.to_bits(), (-0.0f64).to_bits());
        let _ = std::fs::remove_dir_all(&dir);
    }
}
