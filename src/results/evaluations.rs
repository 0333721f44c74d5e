//! evaluations.csv: one `EvalRow` per evaluation of a run, written and read through serde. The header is the
//! struct's field names (serde renames included), so a new column is one field here plus the line that fills
//! it in `task::metrics`, and its entry in `analysis::metric::METRICS` (what the summary, tables, report and
//! charts make of it; a test there fails until the entry exists).

use super::{
    display_f64, header_of, not_recorded, read_rows, write_rows, ResultsError, EVALUATIONS_FILE,
};
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
    /// Fraction of an episode's reference paths that touch an obstacle, mean over episodes, in [0, 1]. Absent
    /// from files written before the column existed (read as NaN: not recorded).
    #[serde(serialize_with = "display_f64", default = "not_recorded")]
    pub reference_collisions: f64,
}

/// Columns added after the first published format, newest last: a file may lack a suffix of them.
const ADDED_COLUMNS: &[&str] = &["reference_collisions"];

/// The header of evaluations.csv, from the field names of `EvalRow`.
pub fn evaluation_columns() -> Vec<String> {
    header_of::<EvalRow>()
}

/// Write evaluations.csv (header, then one row per evaluation).
pub fn write_evaluations(dir: &Path, rows: &[EvalRow]) -> Result<(), ResultsError> {
    write_rows(&dir.join(EVALUATIONS_FILE), rows)
}

/// Read evaluations.csv, checking the header is exactly the format's, or an earlier one lacking some of the
/// newest columns (`ADDED_COLUMNS`; those read as NaN).
pub fn read_evaluations(path: &Path) -> Result<Vec<EvalRow>, ResultsError> {
    read_rows(path, ADDED_COLUMNS)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The header of evaluations.csv written out by hand (the published folders before `reference_collisions`
    /// lack its last column).
    const PUBLISHED: &str = "env_steps,clean_success_rate,reached_rate,collision_rate,mean_return,time_to_goal,episode_steps,rms_joint_acc,peak_joint_acc,rms_jerk,path_length,min_clearance,path_deviation,replans,planner_fallbacks,curriculum_level,reference_collisions";

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
            "4096,1,0.30000000000000004,0,0,NaN,0,0.0000001,0,0,0,-0,0,0,0,inf,0"
        );
        let back = read_evaluations(&dir.join(EVALUATIONS_FILE)).unwrap();
        assert_eq!(back.len(), 1);
        assert!(back[0].time_to_goal.is_nan());
        assert_eq!(back[0].reached_rate.to_bits(), row.reached_rate.to_bits());
        assert_eq!(back[0].min_clearance.to_bits(), (-0.0f64).to_bits());
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn a_file_without_the_newest_column_reads_it_as_not_recorded() {
        let dir = std::env::temp_dir().join(format!("termwise-evalold-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join(EVALUATIONS_FILE);
        let old = PUBLISHED.trim_end_matches(",reference_collisions");
        std::fs::write(
            &p,
            format!("{old}\n4096,0.5,1,0,2,1.5,100,3,4,5,0.6,0.01,0.02,1,0,1\n"),
        )
        .unwrap();
        let rows = read_evaluations(&p).unwrap();
        assert_eq!(rows[0].success_rate, 0.5);
        assert_eq!(rows[0].curriculum_level, 1.0);
        assert!(rows[0].reference_collisions.is_nan());
        // Any other header is refused.
        std::fs::write(&p, "env_steps,clean_success_rate\n1,0\n").unwrap();
        assert!(read_evaluations(&p).is_err());
        let _ = std::fs::remove_dir_all(&dir);
    }
}
