//! Experiment files: study settings, a base (scenario, planner, reward, curriculum, learner, observation) and
//! variants that deep-merge overrides onto the base, plus generated ablations (leave-one-out, one-term-only,
//! weight grids). Read in two stages: TOML tables are merged per variant, then each merged variant is
//! validated into a `VariantSpec` the runner trusts. Every key is documented in README.md ("Experiment
//! files").

use crate::config::{parse_toml, ConfigError};
use crate::curriculum::CurriculumSpec;
use crate::learn::PpoConfig;
use crate::plan::PlanSpec;
use crate::reward::RewardSpec;
use crate::sim::Scenario;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use toml::{Table, Value};

mod parse;
mod probe;
mod racing;
#[cfg(test)]
mod tests;
mod tree;
mod validate;
pub use parse::*;
pub use probe::{ProbeSpec, MAX_PROBES};
pub use racing::{RaceSpec, RacingSettings, MAX_RUNGS, MIN_RUNG_SEEDS};
pub use tree::*;
use validate::*;

/// Study-wide settings (`[study]`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct StudySettings {
    /// Study name; also the results folder name. Letters, digits, `-`, `_`, `.`.
    pub name: String,
    /// Number of seeds per variant (seeds 0..seeds).
    pub seeds: i64,
    /// Environment steps per run.
    pub budget: i64,
    /// Environment steps between evaluations. Default: budget / 10.
    pub eval_every: Option<i64>,
    /// Evaluation episodes per evaluation. Default 40.
    #[serde(default = "default_eval_episodes")]
    pub eval_episodes: i64,
    /// Seed of the fixed evaluation episodes (shared by every variant and seed). Default 1000.
    #[serde(default = "default_eval_seed")]
    pub eval_seed: u64,
    /// Success rate that counts as "learned" for steps-to-threshold. Default 0.8.
    #[serde(default = "default_threshold")]
    pub success_threshold: f64,
    /// Variant the others are compared with. Default: the first.
    pub reference: Option<String>,
    /// Evaluations averaged for "final" performance. Default 3.
    #[serde(default = "default_final_window")]
    pub final_window: i64,
    /// Racing (`[study.racing]`): stop variants that are clearly behind at rungs. Default: none.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub racing: Option<RacingSettings>,
}
fn default_eval_episodes() -> i64 {
    40
}
fn default_eval_seed() -> u64 {
    1000
}
fn default_threshold() -> f64 {
    0.8
}
fn default_final_window() -> i64 {
    3
}

pub use crate::task::ObservationSpec;

/// Generated variants (`[generate]`).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GenerateSpec {
    /// For each listed reward term, a variant `without-<term>` with that term switched off.
    #[serde(default)]
    pub leave_one_out: Vec<String>,
    /// For each listed reward term, a variant `only-<term>` with every other term switched off.
    #[serde(default)]
    pub one_only: Vec<String>,
    /// Cartesian grid: dotted key (e.g. `reward.time.weight`) -> values; one variant per combination.
    #[serde(default)]
    pub grid: BTreeMap<String, Vec<f64>>,
}

pub use crate::results::{Change, VariantKind};

/// A fully resolved, validated variant.
#[derive(Clone, Debug)]
pub struct VariantSpec {
    pub name: String,
    pub kind: VariantKind,
    pub scenario: Arc<Scenario>,
    pub plan: PlanSpec,
    pub reward: RewardSpec,
    pub curriculum: CurriculumSpec,
    pub learner: PpoConfig,
    pub observation: ObservationSpec,
    /// Where the episode's waypoints come from (`[waypoints]`), with a learned model loaded.
    pub waypoints: crate::task::waypoints::WaypointSource,
    /// Baseline controller settings (used when kind = baseline).
    pub baseline: crate::control::BaselineSpec,
    /// Keys changed relative to the base.
    pub changes: Vec<Change>,
    /// Grid coordinates for grid-generated variants.
    pub grid: Option<BTreeMap<String, f64>>,
    /// The merged configuration (canonical TOML); its hash identifies a run's config.
    pub merged: String,
}

/// A validated experiment.
#[derive(Clone, Debug)]
pub struct Experiment {
    pub study: StudySettings,
    pub variants: Vec<VariantSpec>,
    /// The experiment file as given.
    pub source: String,
    pub path: PathBuf,
    /// Probe conditions evaluated after training (`[[probe]]`).
    pub probes: Vec<ProbeSpec>,
    /// Racing settings (`[study.racing]`), validated.
    pub racing: Option<RaceSpec>,
}

impl Experiment {
    /// Seeds per variant.
    pub fn seeds(&self) -> u64 {
        self.study.seeds as u64
    }
    /// Environment steps between evaluations.
    pub fn eval_every(&self) -> u64 {
        self.study
            .eval_every
            .map(|v| v as u64)
            .unwrap_or((self.study.budget as u64 / 10).max(1))
    }
    /// Index of the reference variant.
    pub fn reference_index(&self) -> usize {
        self.study
            .reference
            .as_ref()
            .and_then(|r| self.variants.iter().position(|v| &v.name == r))
            .unwrap_or(0)
    }
}

/// Most seeds per variant (`study.seeds`).
pub const MAX_SEEDS: i64 = 1_000;
/// Most environment steps per run (`study.budget`): 10^10, days of CPU time per run.
pub const MAX_BUDGET: i64 = 10_000_000_000;
/// Most evaluations per run (budget / eval_every + 1) and largest `study.final_window`.
pub const MAX_EVALUATIONS: i64 = 10_000;
/// Most evaluation episodes per evaluation (`study.eval_episodes`).
pub const MAX_EVAL_EPISODES: i64 = 10_000;
/// Most variants, explicit and generated (a grid's combinations included).
pub const MAX_VARIANTS: usize = 1_000;

/// Most runs in a study (learned variants x seeds, plus one per baseline variant).
pub const MAX_RUNS: i64 = 10_000;

/// Sections of the base a variant may override.
const VARIANT_SECTIONS: &[&str] = &[
    "scenario",
    "plan",
    "reward",
    "curriculum",
    "learner",
    "observation",
    "baseline",
    "waypoints",
];

pub use crate::fsio::fnv1a_hex;
