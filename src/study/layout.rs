//! The results layout on disk (DESIGN.md): study.json, and per run run.json, evaluations.csv and
//! term_contributions.csv, all written atomically so an interrupted study never leaves a corrupt file.

use super::experiment::{Experiment, VariantKind, VariantSpec};
use super::run::RunSpec;
use super::task::EvalSummary;
use super::StudyError;
use crate::fsio::write_atomic;
use serde::{Deserialize, Serialize};
use std::fmt::Write as _;
use std::path::Path;

/// Where a run stands.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum RunStatus {
    Running,
    Done,
    Diverged,
    Interrupted,
}

/// run.json.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    pub study: String,
    pub variant: String,
    pub seed: u64,
    pub config_hash: String,
    pub status: RunStatus,
    pub env_steps: u64,
    pub wall_seconds: f64,
    /// Unix time of the last update; a `running` run whose heartbeat is old has died.
    pub heartbeat_unix: u64,
    pub version: String,
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
    pub fn new(exp: &Experiment, v: &VariantSpec, spec: &RunSpec) -> RunRecord {
        RunRecord {
            study: exp.study.name.clone(),
            variant: v.name.clone(),
            seed: spec.seed,
            config_hash: spec.config_hash.clone(),
            status: RunStatus::Running,
            env_steps: 0,
            wall_seconds: 0.0,
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

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> StudyError + '_ {
    move |source| StudyError::Io {
        path: path.to_path_buf(),
        source,
    }
}

/// Read a run's run.json, if present and readable.
pub fn read_run_json(dir: &Path) -> Option<RunRecord> {
    read_run_json_checked(dir).ok().flatten()
}

/// Read a run's run.json: `Ok(None)` when there is none, `Err` (saying why) when it cannot be read or parsed.
pub fn read_run_json_checked(dir: &Path) -> Result<Option<RunRecord>, String> {
    let p = dir.join("run.json");
    let text = match std::fs::read_to_string(&p) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(format!("{}: {e}", p.display())),
    };
    serde_json::from_str(&text)
        .map(Some)
        .map_err(|e| format!("{}: {e}", p.display()))
}

pub fn write_run_json(dir: &Path, r: &RunRecord) -> Result<(), StudyError> {
    let p = dir.join("run.json");
    let text = serde_json::to_string_pretty(r).expect("run record serialises");
    write_atomic(&p, text.as_bytes()).map_err(io(&p))
}

/// Remove the files of an unfinished earlier attempt (a run restarts from scratch).
pub fn clear_run(dir: &Path) -> Result<(), StudyError> {
    for f in [
        EVALUATIONS_FILE,
        TERM_CONTRIBUTIONS_FILE,
        "policy.safetensors",
        "policy.json",
        "policy-best.safetensors",
        "policy-best.json",
    ] {
        let p = dir.join(f);
        if p.exists() {
            std::fs::remove_file(&p).map_err(io(&p))?;
        }
    }
    std::fs::create_dir_all(dir).map_err(io(dir))
}

/// Per-run table with one row per evaluation (the reader, `analysis::load`, names it the same way).
pub const EVALUATIONS_FILE: &str = "evaluations.csv";
/// Per-run table with one row per evaluation and one column per reward term.
pub const TERM_CONTRIBUTIONS_FILE: &str = "term_contributions.csv";

/// The header of evaluations.csv. `clean_success_rate` counts episodes that reached the goal with no
/// contact; `reached_rate` counts those that reached it, contact allowed; `collision_rate` those with
/// any contact; `episode_steps` is the mean episode length in control steps.
pub const EVALUATIONS_HEADER: &str = "env_steps,clean_success_rate,reached_rate,collision_rate,mean_return,time_to_goal,episode_steps,rms_joint_acc,peak_joint_acc,rms_jerk,path_length,min_clearance,path_deviation,replans,planner_fallbacks,curriculum_level";

/// Write evaluations.csv (one row per evaluation).
pub fn write_evaluations(dir: &Path, rows: &[(u64, EvalSummary, f64)]) -> Result<(), StudyError> {
    let mut s = String::from(EVALUATIONS_HEADER);
    s.push('\n');
    for (steps, e, level) in rows {
        let _ = writeln!(
            s,
            "{steps},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            e.success_rate,
            e.reached_rate,
            e.collision_rate,
            e.mean_return,
            e.time_to_goal,
            e.episode_steps,
            e.rms_joint_acc,
            e.peak_joint_acc,
            e.rms_jerk,
            e.path_length,
            e.min_clearance,
            e.path_deviation,
            e.replans,
            e.planner_fallbacks,
            level
        );
    }
    let p = dir.join(EVALUATIONS_FILE);
    write_atomic(&p, s.as_bytes()).map_err(io(&p))
}

/// Write term_contributions.csv (mean per-episode contribution of each reward term, one row per evaluation).
pub fn write_terms(
    dir: &Path,
    names: &[String],
    rows: &[(u64, EvalSummary, f64)],
) -> Result<(), StudyError> {
    let mut s = String::from("env_steps");
    for n in names {
        s.push(',');
        s.push_str(n);
    }
    s.push('\n');
    for (steps, e, _) in rows {
        let _ = write!(s, "{steps}");
        for t in &e.terms {
            let _ = write!(s, ",{t}");
        }
        s.push('\n');
    }
    let p = dir.join(TERM_CONTRIBUTIONS_FILE);
    write_atomic(&p, s.as_bytes()).map_err(io(&p))
}

/// study.json: what the analysis needs to read the folder without the experiment file.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct StudyRecord {
    pub name: String,
    pub seeds: Vec<u64>,
    pub budget_steps: u64,
    pub eval_every: u64,
    pub eval_episodes: u64,
    pub success_threshold: f64,
    pub reference_variant: String,
    pub final_window: u64,
    pub variants: Vec<VariantRecord>,
    pub config_toml: String,
}

/// One variant in study.json.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct VariantRecord {
    pub name: String,
    pub kind: String,
    pub changes: Vec<super::experiment::Change>,
    pub grid: Option<std::collections::BTreeMap<String, f64>>,
    pub curriculum: String,
    /// Evaluation draws rejected because no collision-free path joined start and goal (the evaluation
    /// episodes are drawn again until one does; see `task::begin_eval`).
    #[serde(default)]
    pub eval_redraws: u64,
    /// Evaluation episodes still without such a path after `task::MAX_REDRAWS` draws.
    #[serde(default)]
    pub eval_unsolved: u64,
}

pub fn write_study_json(dir: &Path, exp: &Experiment) -> Result<(), StudyError> {
    let rec = StudyRecord {
        name: exp.study.name.clone(),
        seeds: (0..exp.seeds()).collect(),
        budget_steps: exp.study.budget as u64,
        eval_every: exp.eval_every(),
        eval_episodes: exp.study.eval_episodes as u64,
        success_threshold: exp.study.success_threshold,
        reference_variant: exp.variants[exp.reference_index()].name.clone(),
        final_window: exp.study.final_window as u64,
        variants: exp
            .variants
            .iter()
            .map(|v| {
                let (eval_redraws, eval_unsolved) = super::run::eval_redraws(exp, v);
                VariantRecord {
                    name: v.name.clone(),
                    kind: match v.kind {
                        VariantKind::Learned => "learned".into(),
                        VariantKind::Baseline => "baseline".into(),
                    },
                    changes: v.changes.clone(),
                    grid: v.grid.clone(),
                    curriculum: v.curriculum.kind.clone(),
                    eval_redraws,
                    eval_unsolved,
                }
            })
            .collect(),
        config_toml: exp.source.clone(),
    };
    let p = dir.join("study.json");
    write_atomic(
        &p,
        serde_json::to_string_pretty(&rec)
            .expect("serialises")
            .as_bytes(),
    )
    .map_err(io(&p))
}
