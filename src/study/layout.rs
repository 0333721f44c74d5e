//! The study's records in the results format (`results`): study.json built from an experiment, written
//! atomically before any run starts.

use super::experiment::Experiment;
use super::StudyError;
use crate::results::{StudyRecord, VariantRecord};
use std::path::Path;

/// study.json of an experiment.
pub fn study_record(exp: &Experiment) -> StudyRecord {
    StudyRecord {
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
                    kind: v.kind,
                    changes: v.changes.clone(),
                    grid: v.grid.clone(),
                    curriculum: v.curriculum.kind.clone(),
                    eval_redraws,
                    eval_unsolved,
                }
            })
            .collect(),
        config_toml: exp.source.clone(),
        probes: exp.probes.iter().map(|p| p.record()).collect(),
        racing: exp.racing.as_ref().map(|r| crate::results::RacingPlan {
            rungs: r.fractions.clone(),
            rung_seeds: r.rung_seeds.clone(),
            max_seeds: r.max_seeds,
            confidence: r.confidence,
        }),
    }
}

/// Write study.json into the results folder `dir`.
pub fn write_study_json(dir: &Path, exp: &Experiment) -> Result<(), StudyError> {
    Ok(crate::results::write_study(dir, &study_record(exp))?)
}
