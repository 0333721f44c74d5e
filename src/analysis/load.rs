//! Reading a results folder (layout in notes/results-layout.md) into memory: study.json plus every
//! planned run folder, with missing runs kept as `Missing` so nothing is silently dropped.

use super::AnalysisError;
use serde::Deserialize;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Per-run table with one row per evaluation (the writer, `study::layout`, uses the same name).
pub const EVALUATIONS_FILE: &str = "evaluations.csv";
/// Per-run table of each reward term's mean per-episode contribution, one row per evaluation.
pub const TERM_CONTRIBUTIONS_FILE: &str = "term_contributions.csv";

/// The header `evaluations.csv` must carry, in this order (results layout contract).
pub const EVALUATIONS_HEADER: [&str; 16] = [
    "env_steps",
    "clean_success_rate",
    "reached_rate",
    "collision_rate",
    "mean_return",
    "time_to_goal",
    "episode_steps",
    "rms_joint_acc",
    "peak_joint_acc",
    "rms_jerk",
    "path_length",
    "min_clearance",
    "path_deviation",
    "replans",
    "planner_fallbacks",
    "curriculum_level",
];

/// Whether a variant was trained or is the classical controller evaluated once.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum VariantKind {
    /// PPO-trained policy: evaluations.csv has one row per evaluation.
    Learned,
    /// Classical tracking controller: evaluations.csv has one row at env_steps 0.
    Baseline,
}

/// One configuration key a variant changes relative to the base experiment.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct ConfigChange {
    /// Dotted key path, e.g. `reward.time.weight`.
    pub key: String,
    /// Value in the base experiment, as text.
    pub base: String,
    /// Value in this variant, as text.
    pub value: String,
}

/// A variant as declared in study.json.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct VariantInfo {
    /// Variant name; also its folder name.
    pub name: String,
    /// Learned or baseline.
    pub kind: VariantKind,
    /// Keys changed relative to the base experiment.
    #[serde(default)]
    pub changes: Vec<ConfigChange>,
    /// For grid-generated variants: the grid coordinates (key -> value).
    #[serde(default)]
    pub grid: Option<BTreeMap<String, f64>>,
    /// Reset curriculum name, if any.
    #[serde(default)]
    pub curriculum: Option<String>,
}

/// study.json: what was planned.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct StudyInfo {
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
    pub eval_episodes: u32,
    /// Success-rate level that defines steps-to-threshold.
    pub success_threshold: f64,
    /// Variant the comparisons are made against (first variant when absent).
    #[serde(default)]
    pub reference_variant: Option<String>,
    /// Final performance = mean of the last this-many evaluations.
    #[serde(default = "default_final_window")]
    pub final_window: usize,
    /// Declared variants, in order (the order fixes colours).
    pub variants: Vec<VariantInfo>,
    /// The experiment file as given.
    #[serde(default)]
    pub config_toml: String,
}

fn default_final_window() -> usize {
    3
}

/// How a run ended (or did not start).
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum RunStatus {
    /// Budget reached.
    Done,
    /// Non-finite loss or weights stopped the run.
    Diverged,
    /// Stopped before the budget (Ctrl-C, job time limit).
    Interrupted,
    /// run.json says running: the study is still in progress (or the worker died silently).
    Running,
    /// No run folder or no run.json.
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
}

/// run.json, the fields the analysis uses.
#[derive(Debug, Clone, PartialEq, Deserialize)]
pub struct RunMeta {
    /// Status text as written by the runner.
    pub status: String,
    /// Environment steps taken.
    #[serde(default)]
    pub env_steps: u64,
    /// Wall-clock seconds.
    #[serde(default)]
    pub wall_seconds: f64,
    /// Runner message (e.g. why it diverged).
    #[serde(default)]
    pub message: Option<String>,
}

/// One row of evaluations.csv.
#[derive(Debug, Clone, Copy, PartialEq, Deserialize)]
pub struct EvalRow {
    /// Environment steps at this evaluation.
    pub env_steps: u64,
    /// Clean success: fraction of evaluation episodes that reached the goal with no contact, in [0, 1].
    #[serde(rename = "clean_success_rate")]
    pub success_rate: f64,
    /// Fraction of evaluation episodes that reached the goal, contact allowed, in [0, 1].
    pub reached_rate: f64,
    /// Fraction of episodes with any contact (obstacle, boundary or itself), in [0, 1].
    pub collision_rate: f64,
    /// Mean shaped return per evaluation episode.
    pub mean_return: f64,
    /// Mean time to goal over clean successes, s (NaN when none succeeded).
    pub time_to_goal: f64,
    /// Mean episode length, control steps.
    pub episode_steps: f64,
    /// RMS joint acceleration, rad/s^2.
    pub rms_joint_acc: f64,
    /// Peak joint acceleration, rad/s^2.
    pub peak_joint_acc: f64,
    /// RMS joint jerk, rad/s^3.
    pub rms_jerk: f64,
    /// Effector path length, m.
    pub path_length: f64,
    /// Minimum obstacle clearance, m.
    pub min_clearance: f64,
    /// Mean distance to the reference path, m.
    pub path_deviation: f64,
    /// Replans per episode.
    pub replans: f64,
    /// Planner fallbacks per episode.
    pub planner_fallbacks: f64,
    /// Curriculum difficulty in [0, 1].
    pub curriculum_level: f64,
}

/// term_contributions.csv: per-evaluation mean per-episode contribution of each reward term.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct TermTable {
    /// Term names in column order.
    pub names: Vec<String>,
    /// Environment steps of each row.
    pub steps: Vec<u64>,
    /// `values[row][term]`.
    pub values: Vec<Vec<f64>>,
}

/// One planned run and whatever it has written so far.
#[derive(Debug, Clone, PartialEq)]
pub struct RunRecord {
    /// Seed of this run.
    pub seed: u64,
    /// How it ended.
    pub status: RunStatus,
    /// run.json (None when missing).
    pub meta: Option<RunMeta>,
    /// evaluations.csv rows (empty when not written yet).
    pub progress: Vec<EvalRow>,
    /// term_contributions.csv (empty when not written yet).
    pub terms: TermTable,
}

/// A variant with its runs, one per planned seed.
#[derive(Debug, Clone, PartialEq)]
pub struct VariantRuns {
    /// As declared in study.json.
    pub info: VariantInfo,
    /// Runs in seed order.
    pub runs: Vec<RunRecord>,
}

/// Everything a results folder holds.
#[derive(Debug, Clone, PartialEq)]
pub struct StudyResults {
    /// The results folder.
    pub dir: PathBuf,
    /// study.json.
    pub study: StudyInfo,
    /// Variants in declaration order.
    pub variants: Vec<VariantRuns>,
}

/// Read study.json and every planned run folder under `dir`.
///
/// Runs without a folder or run.json are kept with status `Missing`; a run.json whose status
/// text is unknown is an error (the contract lists the allowed values).
pub fn load_study(dir: &Path) -> Result<StudyResults, AnalysisError> {
    let study_path = dir.join("study.json");
    if !study_path.is_file() {
        return Err(AnalysisError::NoStudyFile { path: study_path });
    }
    let study: StudyInfo = read_json(&study_path)?;
    if study.variants.is_empty() {
        return Err(AnalysisError::NoVariants { path: study_path });
    }
    if let Some(r) = &study.reference_variant {
        if !study.variants.iter().any(|v| &v.name == r) {
            return Err(AnalysisError::UnknownReference { name: r.clone() });
        }
    }
    let mut variants = Vec::with_capacity(study.variants.len());
    for info in &study.variants {
        let mut runs = Vec::with_capacity(study.seeds.len());
        for &seed in &study.seeds {
            let run_dir = dir.join(&info.name).join(format!("seed-{seed}"));
            // The classical controller is deterministic: the runner plans only seed 0 for it, so further
            // seeds of a baseline are read when present and never reported as missing.
            if info.kind == VariantKind::Baseline && seed != study.seeds[0] && !run_dir.exists() {
                continue;
            }
            runs.push(load_run(&run_dir, seed)?);
        }
        variants.push(VariantRuns {
            info: info.clone(),
            runs,
        });
    }
    Ok(StudyResults {
        dir: dir.to_path_buf(),
        study,
        variants,
    })
}

fn load_run(run_dir: &Path, seed: u64) -> Result<RunRecord, AnalysisError> {
    let meta_path = run_dir.join("run.json");
    if !meta_path.is_file() {
        return Ok(RunRecord {
            seed,
            status: RunStatus::Missing,
            meta: None,
            progress: Vec::new(),
            terms: TermTable::default(),
        });
    }
    let meta: RunMeta = read_json(&meta_path)?;
    let status = match meta.status.as_str() {
        "done" => RunStatus::Done,
        "diverged" => RunStatus::Diverged,
        "interrupted" => RunStatus::Interrupted,
        "running" => RunStatus::Running,
        other => {
            return Err(AnalysisError::BadStatus {
                path: meta_path,
                status: other.to_string(),
            })
        }
    };
    let progress_path = run_dir.join(EVALUATIONS_FILE);
    let progress = if progress_path.is_file() {
        read_evaluations(&progress_path)?
    } else {
        Vec::new()
    };
    let terms_path = run_dir.join(TERM_CONTRIBUTIONS_FILE);
    let terms = if terms_path.is_file() {
        read_terms(&terms_path)?
    } else {
        TermTable::default()
    };
    Ok(RunRecord {
        seed,
        status,
        meta: Some(meta),
        progress,
        terms,
    })
}

fn read_json<T: serde::de::DeserializeOwned>(path: &Path) -> Result<T, AnalysisError> {
    let text = std::fs::read_to_string(path).map_err(|source| AnalysisError::Io {
        path: path.to_path_buf(),
        source,
    })?;
    serde_json::from_str(&text).map_err(|source| AnalysisError::Json {
        path: path.to_path_buf(),
        source,
    })
}

fn csv_error(path: &Path, source: csv::Error) -> AnalysisError {
    AnalysisError::Csv {
        path: path.to_path_buf(),
        source,
    }
}

/// Read evaluations.csv, checking the header is exactly the contract's.
pub fn read_evaluations(path: &Path) -> Result<Vec<EvalRow>, AnalysisError> {
    let mut reader = csv::Reader::from_path(path).map_err(|e| csv_error(path, e))?;
    let header: Vec<String> = reader
        .headers()
        .map_err(|e| csv_error(path, e))?
        .iter()
        .map(str::to_string)
        .collect();
    if header
        .iter()
        .map(String::as_str)
        .ne(EVALUATIONS_HEADER.iter().copied())
    {
        return Err(AnalysisError::BadHeader {
            path: path.to_path_buf(),
            expected: EVALUATIONS_HEADER.join(","),
            found: header.join(","),
        });
    }
    reader
        .deserialize()
        .collect::<Result<Vec<EvalRow>, _>>()
        .map_err(|e| csv_error(path, e))
}

/// Read term_contributions.csv: `env_steps` then one column per reward term.
pub fn read_terms(path: &Path) -> Result<TermTable, AnalysisError> {
    let mut reader = csv::Reader::from_path(path).map_err(|e| csv_error(path, e))?;
    let header = reader.headers().map_err(|e| csv_error(path, e))?.clone();
    if header.get(0) != Some("env_steps") {
        return Err(AnalysisError::BadHeader {
            path: path.to_path_buf(),
            expected: "env_steps,<term>...".into(),
            found: header.iter().collect::<Vec<_>>().join(","),
        });
    }
    let names: Vec<String> = header.iter().skip(1).map(str::to_string).collect();
    let mut table = TermTable {
        names,
        ..TermTable::default()
    };
    for record in reader.records() {
        let record = record.map_err(|e| csv_error(path, e))?;
        let parse = |s: &str| -> Result<f64, AnalysisError> {
            s.trim()
                .parse::<f64>()
                .map_err(|_| AnalysisError::BadNumber {
                    path: path.to_path_buf(),
                    text: s.to_string(),
                })
        };
        let steps = parse(record.get(0).unwrap_or(""))?;
        let values = record
            .iter()
            .skip(1)
            .map(parse)
            .collect::<Result<Vec<_>, _>>()?;
        table.steps.push(steps as u64);
        table.values.push(values);
    }
    Ok(table)
}
