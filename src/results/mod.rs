//! `results`: the on-disk format of a study, one module for the writer (`study`) and the reader (`analysis`).
//! File and folder names, the record types of study.json and run.json, the evaluation row (written and read
//! through serde with the `csv` crate), the reward-term table and the training-diagnostics table. Every file
//! is written atomically (temp file + rename). Nothing here computes statistics or draws.
//!
//! ```text
//! <out>/study.json                      StudyRecord
//! <out>/<variant>/seed-<k>/run.json     RunRecord
//!                          evaluations.csv         EvalRow per evaluation
//!                          term_contributions.csv  TermTable (env_steps, one column per reward term)
//!                          training.csv            TrainingRow per PPO iteration (reproducible)
//!                          training-speed.csv      env_steps, steps_per_s, rollout_s, update_s (wall clock: differs run to run)
//!                          policy.safetensors/.json, policy-best.safetensors/.json   checkpoints
//!                          probes.csv              ProbeRow per probe condition (studies with probes)
//! <out>/racing.json                     RacingRecord (studies with racing)
//! ```

pub mod evaluations;
pub mod probes;
pub mod racing;
pub mod records;
pub mod terms;
pub mod training;

pub use evaluations::{evaluation_columns, read_evaluations, write_evaluations, EvalRow};
pub use probes::{read_probes, write_probes, ProbeRecord, ProbeRow, PROBES_FILE};
pub use racing::{
    read_racing, write_racing, Interval, RaceVariant, RacingPlan, RacingRecord, RungEntry,
    RungRecord, RACING_FILE,
};
pub use records::{Change, RunRecord, RunStatus, StudyRecord, VariantKind, VariantRecord};
pub use terms::{read_terms, write_terms, TermTable};
pub use training::{read_training, write_training, write_training_speed, SpeedRow, TrainingRow};

use crate::fsio::write_atomic;
use std::path::{Path, PathBuf};

/// What the analysis needs to read a results folder without the experiment file.
pub const STUDY_FILE: &str = "study.json";
/// A run's record: status, heartbeat, counters.
pub const RUN_FILE: &str = "run.json";
/// Per-run table with one row per evaluation.
pub const EVALUATIONS_FILE: &str = "evaluations.csv";
/// Per-run table with one row per evaluation and one column per reward term.
pub const TERM_CONTRIBUTIONS_FILE: &str = "term_contributions.csv";
/// Per-run table with one row per PPO iteration (losses, KL, clip fraction, entropy, ...): same bytes for
/// the same seed.
pub const TRAINING_FILE: &str = "training.csv";
/// Per-run wall-clock speed of each PPO iteration; the one per-run table that differs between repeats,
/// kept apart so every other file can be compared byte for byte.
pub const TRAINING_SPEED_FILE: &str = "training-speed.csv";
/// The latest checkpoint (with its `.json` sidecar).
pub const CHECKPOINT_FILE: &str = "policy.safetensors";
/// The checkpoint with the best clean success so far (with its `.json` sidecar).
pub const BEST_CHECKPOINT_FILE: &str = "policy-best.safetensors";

/// Every file a run writes (cleared before a run restarts).
pub const RUN_OUTPUTS: [&str; 9] = [
    EVALUATIONS_FILE,
    TERM_CONTRIBUTIONS_FILE,
    TRAINING_FILE,
    TRAINING_SPEED_FILE,
    CHECKPOINT_FILE,
    "policy.json",
    BEST_CHECKPOINT_FILE,
    "policy-best.json",
    PROBES_FILE,
];

/// The folder of one run.
pub fn run_dir(out: &Path, variant: &str, seed: u64) -> PathBuf {
    out.join(variant).join(format!("seed-{seed}"))
}

/// Why a results file could not be read or written.
#[derive(Debug, thiserror::Error)]
pub enum ResultsError {
    /// A file could not be read.
    #[error("cannot read {path}")]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// A file could not be written.
    #[error("cannot write {path}")]
    Write {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// A JSON file is malformed.
    #[error("malformed JSON in {path}")]
    Json {
        path: PathBuf,
        #[source]
        source: serde_json::Error,
    },
    /// A CSV file is malformed.
    #[error("malformed CSV in {path}")]
    Csv {
        path: PathBuf,
        #[source]
        source: csv::Error,
    },
    /// A CSV header differs from the format.
    #[error("{path}: header must be '{expected}', found '{found}'")]
    BadHeader {
        path: PathBuf,
        expected: String,
        found: String,
    },
    /// A CSV cell is not a number.
    #[error("{path}: '{text}' is not a number")]
    BadNumber { path: PathBuf, text: String },
}

pub(crate) fn read_error(path: &Path) -> impl FnOnce(std::io::Error) -> ResultsError + '_ {
    move |source| ResultsError::Read {
        path: path.to_path_buf(),
        source,
    }
}

pub(crate) fn csv_error(path: &Path) -> impl Fn(csv::Error) -> ResultsError + '_ {
    move |source| ResultsError::Csv {
        path: path.to_path_buf(),
        source,
    }
}

/// Write `bytes` to `path` atomically.
pub fn write_file(path: &Path, bytes: &[u8]) -> Result<(), ResultsError> {
    write_atomic(path, bytes).map_err(|source| ResultsError::Write {
        path: path.to_path_buf(),
        source,
    })
}

/// Read a JSON record.
pub fn read_json<T: serde::de::DeserializeOwned>(path: &Path) -> Result<T, ResultsError> {
    let text = std::fs::read_to_string(path).map_err(read_error(path))?;
    serde_json::from_str(&text).map_err(|source| ResultsError::Json {
        path: path.to_path_buf(),
        source,
    })
}

/// Write a JSON record (pretty, as every results file is meant to be read by people too).
pub fn write_json<T: serde::Serialize>(path: &Path, value: &T) -> Result<(), ResultsError> {
    let text = serde_json::to_string_pretty(value).map_err(|source| ResultsError::Json {
        path: path.to_path_buf(),
        source,
    })?;
    write_file(path, text.as_bytes())
}

/// A CSV writer into memory with the format's conventions: `\n` line ends, quotes only where needed.
pub(crate) fn csv_buffer() -> csv::Writer<Vec<u8>> {
    csv::WriterBuilder::new()
        .has_headers(false)
        .terminator(csv::Terminator::Any(b'\n'))
        .from_writer(Vec::new())
}

/// Finish a CSV buffer and write it atomically.
pub(crate) fn finish_csv(path: &Path, w: csv::Writer<Vec<u8>>) -> Result<(), ResultsError> {
    let bytes = w.into_inner().map_err(|e| ResultsError::Write {
        path: path.to_path_buf(),
        source: std::io::Error::other(e.to_string()),
    })?;
    write_file(path, &bytes)
}

/// The header of a table of `T` rows: the field names (serde renames included), as the csv crate writes them
/// before the first serialised row.
pub(crate) fn header_of<T: serde::Serialize + Default>() -> Vec<String> {
    let mut w = csv::WriterBuilder::new()
        .has_headers(true)
        .from_writer(Vec::new());
    let header = w
        .serialize(T::default())
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

/// Write a table of `T` rows (header from `header_of`) to `path` atomically.
pub(crate) fn write_rows<T: serde::Serialize + Default>(
    path: &Path,
    rows: &[T],
) -> Result<(), ResultsError> {
    let mut w = csv_buffer();
    w.write_record(header_of::<T>()).map_err(csv_error(path))?;
    for r in rows {
        w.serialize(r).map_err(csv_error(path))?;
    }
    finish_csv(path, w)
}

/// Read a table of `T` rows, checking its header is exactly `header_of::<T>()`, or an earlier format's that
/// lacks the newest columns `added` (a suffix of the header, oldest first; their fields must have serde
/// defaults).
pub(crate) fn read_rows<T: serde::de::DeserializeOwned + serde::Serialize + Default>(
    path: &Path,
    added: &[&str],
) -> Result<Vec<T>, ResultsError> {
    let mut reader = csv::Reader::from_path(path).map_err(csv_error(path))?;
    let header: Vec<String> = reader
        .headers()
        .map_err(csv_error(path))?
        .iter()
        .map(str::to_string)
        .collect();
    let expected = header_of::<T>();
    let earlier = (1..=added.len()).any(|k| {
        expected.len() >= k
            && header.as_slice() == &expected[..expected.len() - k]
            && expected[expected.len() - k..] == added[added.len() - k..]
    });
    if header != expected && !earlier {
        return Err(ResultsError::BadHeader {
            path: path.to_path_buf(),
            expected: expected.join(","),
            found: header.join(","),
        });
    }
    reader
        .deserialize()
        .collect::<Result<Vec<T>, _>>()
        .map_err(csv_error(path))
}

/// The value of a column a file written before the column existed does not have: NaN, not recorded.
pub(crate) fn not_recorded() -> f64 {
    f64::NAN
}

/// Serialise an `f64` with Rust's `Display` (shortest text that reads back to the same bits, `NaN`, `inf`),
/// the format every results table has used; the `csv` crate's own float format differs (`1.0` for `1`).
pub(crate) fn display_f64<S: serde::Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
    s.collect_str(x)
}

/// Read a study's study.json.
pub fn read_study(dir: &Path) -> Result<StudyRecord, ResultsError> {
    read_json(&dir.join(STUDY_FILE))
}

/// Write a study's study.json.
pub fn write_study(dir: &Path, rec: &StudyRecord) -> Result<(), ResultsError> {
    write_json(&dir.join(STUDY_FILE), rec)
}

/// Read a run's run.json: `Ok(None)` when there is none, `Err` (saying why) when it cannot be read or parsed.
pub fn read_run(dir: &Path) -> Result<Option<RunRecord>, ResultsError> {
    let p = dir.join(RUN_FILE);
    match std::fs::metadata(&p) {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(None),
        _ => read_json(&p).map(Some),
    }
}

/// Write a run's run.json.
pub fn write_run(dir: &Path, rec: &RunRecord) -> Result<(), ResultsError> {
    write_json(&dir.join(RUN_FILE), rec)
}

/// Remove the files of an unfinished earlier attempt (a run restarts from scratch) and make the folder.
pub fn clear_run(dir: &Path) -> Result<(), ResultsError> {
    for f in RUN_OUTPUTS {
        let p = dir.join(f);
        if p.exists() {
            std::fs::remove_file(&p).map_err(|source| ResultsError::Write {
                path: p.clone(),
                source,
            })?;
        }
    }
    std::fs::create_dir_all(dir).map_err(|source| ResultsError::Write {
        path: dir.to_path_buf(),
        source,
    })
}
