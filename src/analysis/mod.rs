//! `analysis`: statistics over runs and seeds — reads a results folder, computes per-run figures,
//! across-seed IQM and mean with stratified bootstrap confidence intervals, and comparisons against
//! the reference variant (Agarwal et al., "Deep RL at the Edge of the Statistical Precipice",
//! NeurIPS 2021). Knows nothing about plotting.

pub mod bootstrap;
pub mod compare;
pub mod load;
pub mod run_metrics;
pub mod stats;
pub mod summary;

pub use bootstrap::{BootstrapSpec, Estimate};
pub use compare::{MannWhitney, PValueMethod};
pub use load::{
    load_study, ConfigChange, EvalRow, RunRecord, RunStatus, StudyInfo, StudyResults, VariantInfo,
    VariantKind, VariantRuns,
};
pub use run_metrics::{RunMetrics, Threshold};
pub use summary::{
    summarize, verdict, Aggregate, AnalysisOptions, Comparison, CrashFlag, Curve, CurveMetric,
    Effects, EpisodeLevel, GamingFlag, PointStat, SeedsNeeded, StatusCounts, StudySummary,
    ThresholdAggregate, VariantSummary, Verdict,
};

use std::path::PathBuf;

/// Why a results folder could not be read.
#[derive(Debug, thiserror::Error)]
pub enum AnalysisError {
    /// The folder has no study.json.
    #[error("{path} not found: is this a results folder written by `termwise run`?")]
    NoStudyFile {
        /// Expected path.
        path: PathBuf,
    },
    /// study.json lists no variants.
    #[error("{path} lists no variants")]
    NoVariants {
        /// study.json path.
        path: PathBuf,
    },
    /// reference_variant names no declared variant.
    #[error("reference_variant '{name}' is not one of the study's variants")]
    UnknownReference {
        /// The name given.
        name: String,
    },
    /// A file could not be read.
    #[error("cannot read {path}")]
    Io {
        /// File.
        path: PathBuf,
        /// Cause.
        #[source]
        source: std::io::Error,
    },
    /// A JSON file is malformed.
    #[error("malformed JSON in {path}")]
    Json {
        /// File.
        path: PathBuf,
        /// Cause.
        #[source]
        source: serde_json::Error,
    },
    /// A CSV file is malformed.
    #[error("malformed CSV in {path}")]
    Csv {
        /// File.
        path: PathBuf,
        /// Cause.
        #[source]
        source: csv::Error,
    },
    /// A CSV header differs from the results layout.
    #[error("{path}: header must be '{expected}', found '{found}'")]
    BadHeader {
        /// File.
        path: PathBuf,
        /// Header the contract requires.
        expected: String,
        /// Header found.
        found: String,
    },
    /// A CSV cell is not a number.
    #[error("{path}: '{text}' is not a number")]
    BadNumber {
        /// File.
        path: PathBuf,
        /// Offending text.
        text: String,
    },
    /// run.json has a status outside done | diverged | interrupted | running.
    #[error(
        "{path}: unknown run status '{status}' (expected done, diverged, interrupted or running)"
    )]
    BadStatus {
        /// File.
        path: PathBuf,
        /// Status found.
        status: String,
    },
}
