//! Reading a results folder (format: `results`) into memory: study.json plus every planned run folder, with
//! missing runs kept as `Missing` so nothing is silently dropped.

use super::AnalysisError;
use crate::results::{
    self, EvalRow, ProbeRow, RacingRecord, RunRecord, RunStatus, StudyRecord, TermTable,
    TrainingRow, VariantKind, VariantRecord,
};
use std::path::{Path, PathBuf};

/// One planned run and whatever it has written so far.
#[derive(Debug, Clone, PartialEq)]
pub struct RunResults {
    /// Seed of this run.
    pub seed: u64,
    /// How it ended (`Missing` without run.json).
    pub status: RunStatus,
    /// run.json (None when missing).
    pub meta: Option<RunRecord>,
    /// evaluations.csv rows (empty when not written yet).
    pub progress: Vec<EvalRow>,
    /// term_contributions.csv (empty when not written yet).
    pub terms: TermTable,
    /// training.csv rows, one per PPO iteration (empty for the baseline and for older runs).
    pub training: Vec<TrainingRow>,
    /// probes.csv rows, one per probe condition evaluated after training (empty without probes).
    pub probes: Vec<ProbeRow>,
}

/// A variant with its runs, one per planned seed.
#[derive(Debug, Clone, PartialEq)]
pub struct VariantRuns {
    /// As declared in study.json.
    pub info: VariantRecord,
    /// Runs in seed order.
    pub runs: Vec<RunResults>,
}

/// Everything a results folder holds.
#[derive(Debug, Clone, PartialEq)]
pub struct StudyResults {
    /// The results folder.
    pub dir: PathBuf,
    /// study.json.
    pub study: StudyRecord,
    /// Variants in declaration order.
    pub variants: Vec<VariantRuns>,
    /// racing.json of a raced study (None otherwise).
    pub racing: Option<RacingRecord>,
}

/// Read study.json and every planned run folder under `dir`.
///
/// Runs without a folder or run.json are kept with status `Missing`; a run.json whose status text is
/// unknown is an error (the format lists the allowed values).
pub fn load_study(dir: &Path) -> Result<StudyResults, AnalysisError> {
    let study_path = dir.join(results::STUDY_FILE);
    if !study_path.is_file() {
        return Err(AnalysisError::NoStudyFile { path: study_path });
    }
    let study = results::read_study(dir)?;
    if study.variants.is_empty() {
        return Err(AnalysisError::NoVariants { path: study_path });
    }
    let r = &study.reference_variant;
    if !r.is_empty() && !study.variants.iter().any(|v| &v.name == r) {
        return Err(AnalysisError::UnknownReference { name: r.clone() });
    }
    let racing = match study.racing {
        Some(_) => results::read_racing(dir)?,
        None => None,
    };
    let mut variants = Vec::with_capacity(study.variants.len());
    for info in &study.variants {
        let seeds = planned_seeds(&study, racing.as_ref(), info);
        let mut runs = Vec::with_capacity(seeds.len());
        for &seed in &seeds {
            let run_dir = results::run_dir(dir, &info.name, seed);
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
        racing,
    })
}

/// The seeds planned for a variant: study.json's seeds, or for a raced learned variant the seeds racing.json
/// plans for it (before the first decision: the first rung's seeds).
pub fn planned_seeds(
    study: &StudyRecord,
    racing: Option<&RacingRecord>,
    info: &VariantRecord,
) -> Vec<u64> {
    let Some(plan) = &study.racing else {
        return study.seeds.clone();
    };
    if info.kind == VariantKind::Baseline {
        return study.seeds.clone();
    }
    let n = racing
        .and_then(|r| r.variants.iter().find(|v| v.name == info.name))
        .map(|v| v.seeds)
        .or_else(|| plan.rung_seeds.first().copied())
        .unwrap_or(study.seeds.len() as u64);
    (0..n).collect()
}

/// Read one run folder (status, evaluations, reward terms, training, probes); a run without run.json is
/// `Missing`.
pub fn load_run_dir(run_dir: &Path, seed: u64) -> Result<RunResults, AnalysisError> {
    load_run(run_dir, seed)
}

fn load_run(run_dir: &Path, seed: u64) -> Result<RunResults, AnalysisError> {
    let Some(meta) = results::read_run(run_dir)? else {
        return Ok(RunResults {
            seed,
            status: RunStatus::Missing,
            meta: None,
            progress: Vec::new(),
            terms: TermTable::default(),
            training: Vec::new(),
            probes: Vec::new(),
        });
    };
    let progress_path = run_dir.join(results::EVALUATIONS_FILE);
    let progress = if progress_path.is_file() {
        results::read_evaluations(&progress_path)?
    } else {
        Vec::new()
    };
    let terms_path = run_dir.join(results::TERM_CONTRIBUTIONS_FILE);
    let terms = if terms_path.is_file() {
        results::read_terms(&terms_path)?
    } else {
        TermTable::default()
    };
    let training = results::read_training(&run_dir.join(results::TRAINING_FILE))?;
    let probes = results::read_probes(run_dir)?;
    Ok(RunResults {
        seed,
        status: meta.status,
        meta: Some(meta),
        progress,
        terms,
        training,
        probes,
    })
}
