//! `analysis`: statistics over runs and seeds — reads a results folder (through `results`, never `study`),
//! computes per-run figures, across-seed IQM and mean with stratified bootstrap confidence intervals, and
//! comparisons against the reference variant (Agarwal et al., "Deep RL at the Edge of the Statistical
//! Precipice", NeurIPS 2021). Knows nothing about plotting.

pub mod bootstrap;
pub mod compare;
pub mod groups;
pub mod load;
pub mod metric;
pub mod probes;
pub mod race;
pub mod run_metrics;
pub mod stats;
pub mod summary;
pub mod training;

pub use crate::results::{EvalRow, RunStatus, StudyRecord, VariantKind, VariantRecord};
pub use bootstrap::{BootstrapSpec, Estimate};
pub use compare::{MannWhitney, PValueMethod};
pub use load::{load_study, RunResults, StudyResults, VariantRuns};
pub use metric::{Metric, MetricId, METRICS};
pub use run_metrics::{RunMetrics, Threshold};
pub use summary::{
    summarize, verdict, Aggregate, AnalysisOptions, Comparison, CrashFlag, Curve, Effects,
    EpisodeLevel, GamingFlag, PointStat, SeedsNeeded, StatusCounts, StudySummary,
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
    /// A results file could not be read or is malformed.
    #[error(transparent)]
    Results(#[from] crate::results::ResultsError),
}
