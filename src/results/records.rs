//! The records of study.json and run.json, and the status and kind enums both the runner and the analysis use.
//! Field order is the order in the files.

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Where a run stands. `run.json` holds one of the first four; `Missing` is what the reader reports for a
/// planned run with no run.json (it is never written).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum RunStatus {
    /// Budget reached.
    Done,
    /// Non-finite loss or weights stopped the run.
    Diverged,
    /// Stopped before the budget (Ctrl-C, job time limit).
    Interrupted,
    /// The run is in progress (or its worker died silently; see `termwise status`).
    Running,
    /// No run folder or no run.json (reader only).
    #[serde(skip)]
    Missing,
}

impl RunStatus {
    /// All statuses, in report order.
    pub const ALL: [RunStatus; 5] = [
        RunStatus::Done,
        RunStatus::Diverged,
        RunStatus::Interrupted,
        RunStatus::Running,
        RunStatus::Missing,
    ];

    /// Lower-case name as used in files and the report.
    pub fn as_str(self) -> &'static str {
        match self {
            RunStatus::Done => "done",
            RunStatus::Diverged => "diverged",
            RunStatus::Interrupted => "interrupted",
            RunStatus::Running => "running",
            RunStatus::Missing => "missing",
        }
    }

    /// Done or diverged: the run will not be run again.
    pub fn is_final(self) -> bool {
        matches!(self, RunStatus::Done | RunStatus::Diverged)
    }
}

/// Whether a variant trains a policy or runs the classical baseline controller.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum VariantKind {
    /// PPO learns a policy: evaluations.csv has one row per evaluation.
    Learned,
    /// The classical tracking controller, evaluated once (one row at env_steps 0), seed 0 only.
    Baseline,
}

impl VariantKind {
    /// The name in files and tables.
    pub fn as_str(self) -> &'static str {
        match self {
            VariantKind::Learned => "learned",
            VariantKind::Baseline => "baseline",
        }
    }
}

/// One key a variant changes relative to the base experiment.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Change {
    /// Dotted key path, e.g. `reward.time.weight`.
    pub key: String,
    /// Value in the base ("(unset)" when absent).
    pub base: String,
    /// Value in the variant ("(unset)" when removed).
    pub value: String,
}

/// study.json: what was planned, so a results folder can be read without the experiment file.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct StudyRecord {
    /// Experiment name.
    pub name: String,
    /// Seeds every learned variant runs with.
    pub seeds: Vec<u64>,
    /// Environment steps per run.
    pub budget_steps: u64,
    /// Environment steps between evaluations.
    pub eval_every: u64,
    /// Episodes per evaluation.
    #[serde(default)]
    pub eval_episodes: u64,
    /// Success-rate level that defines steps-to-threshold.
    pub success_threshold: f64,
    /// Variant the comparisons are made against (empty: the first variant).
    #[serde(default)]
    pub reference_variant: String,
    /// Final performance = mean of the last this-many evaluations.
    #[serde(default = "default_final_window")]
    pub final_window: u64,
    /// Declared variants, in order (the order fixes colours).
    pub variants: Vec<VariantRecord>,
    /// The experiment file as given.
    #[serde(default)]
    pub config_toml: String,
    /// Probe conditions every finished policy is evaluated on after training (absent: none).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub probes: Vec<super::ProbeRecord>,
    /// Racing settings (absent: every variant runs every seed).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub racing: Option<super::RacingPlan>,
}

fn default_final_window() -> u64 {
    3
}

impl StudyRecord {
    /// The seeds planned for a variant: all of them for a learned one, the first only for the baseline.
    pub fn planned_seeds(&self, v: &VariantRecord) -> Vec<u64> {
        match v.kind {
            VariantKind::Learned => self.seeds.clone(),
            VariantKind::Baseline => self.seeds.first().map(|&s| vec![s]).unwrap_or_default(),
        }
    }
}

/// One variant in study.json.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct VariantRecord {
    /// Variant name; also its folder name.
    pub name: String,
    /// Learned or baseline.
    pub kind: VariantKind,
    /// Keys changed relative to the base experiment.
    #[serde(default)]
    pub changes: Vec<Change>,
    /// For grid-generated variants: the grid coordinates (key -> value).
    #[serde(default)]
    pub grid: Option<BTreeMap<String, f64>>,
    /// Reset curriculum name (empty when not recorded).
    #[serde(default)]
    pub curriculum: String,
    /// Evaluation draws rejected because no collision-free path joined start and goal (the evaluation
    /// episodes are drawn again until one does; see `task::begin_eval`).
    #[serde(default)]
    pub eval_redraws: u64,
    /// Evaluation episodes still without such a path after `task::MAX_REDRAWS` draws.
    #[serde(default)]
    pub eval_unsolved: u64,
}

/// run.json: a run's status, heartbeat and counters, rewritten while the run goes on (after every evaluation
/// and at least every `study::run::RECORD_EVERY_S` seconds) and when it ends.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    pub study: String,
    pub variant: String,
    pub seed: u64,
    /// Identifies everything that determines the run's results.
    pub config_hash: String,
    pub status: RunStatus,
    #[serde(default)]
    pub env_steps: u64,
    #[serde(default)]
    pub wall_seconds: f64,
    /// Environment steps per second of wall time so far, training and evaluation together (wall clock: differs
    /// between repeats, like `wall_seconds`).
    #[serde(default)]
    pub steps_per_second: f64,
    /// Unix time of the last update; a `running` run whose heartbeat is old has died.
    #[serde(default)]
    pub heartbeat_unix: u64,
    #[serde(default)]
    pub version: String,
    /// Why the run stopped (e.g. why it diverged).
    #[serde(default)]
    pub message: Option<String>,
    /// Training draws rejected because no collision-free path joined their start and goal.
    #[serde(default)]
    pub redraws: u64,
    /// Training episodes used without such a path (after `task::MAX_REDRAWS` draws).
    #[serde(default)]
    pub unsolved: u64,
    /// Training episodes so far.
    #[serde(default)]
    pub episodes: u64,
}

fn now_unix() -> u64 {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map(|d| d.as_secs())
        .unwrap_or(0)
}

impl RunRecord {
    /// A run that starts now.
    pub fn new(study: &str, variant: &str, seed: u64, config_hash: &str) -> RunRecord {
        RunRecord {
            study: study.into(),
            variant: variant.into(),
            seed,
            config_hash: config_hash.into(),
            status: RunStatus::Running,
            env_steps: 0,
            wall_seconds: 0.0,
            steps_per_second: 0.0,
            heartbeat_unix: now_unix(),
            version: env!("CARGO_PKG_VERSION").into(),
            message: None,
            redraws: 0,
            unsolved: 0,
            episodes: 0,
        }
    }
    pub fn heartbeat(&mut self, env_steps: u64, wall: f64) {
        self.env_steps = env_steps;
        self.wall_seconds = wall;
        self.steps_per_second = if wall > 0.0 {
            env_steps as f64 / wall
        } else {
            0.0
        };
        self.heartbeat_unix = now_unix();
    }
    pub fn finish(
        &mut self,
        status: RunStatus,
        env_steps: u64,
        wall: f64,
        message: Option<String>,
    ) {
        self.heartbeat(env_steps, wall);
        self.status = status;
        self.message = message;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn heartbeat_records_the_measured_speed() {
        let mut r = RunRecord::new("s", "v", 0, "h");
        assert_eq!(r.steps_per_second, 0.0);
        r.heartbeat(0, 0.0);
        assert_eq!(r.steps_per_second, 0.0, "no division by a zero wall time");
        r.heartbeat(51_200, 2.0);
        assert_eq!(r.steps_per_second, 25_600.0);
    }

    #[test]
    fn missing_is_never_read_from_a_file() {
        // The four written statuses round-trip; "missing" is not a value run.json may hold.
        for s in [
            RunStatus::Done,
            RunStatus::Diverged,
            RunStatus::Interrupted,
            RunStatus::Running,
        ] {
            let text = serde_json::to_string(&s).unwrap();
            assert_eq!(text, format!("\"{}\"", s.as_str()));
            assert_eq!(serde_json::from_str::<RunStatus>(&text).unwrap(), s);
        }
        assert!(serde_json::from_str::<RunStatus>("\"missing\"").is_err());
        assert!(serde_json::from_str::<RunStatus>("\"finished\"").is_err());
    }
}
