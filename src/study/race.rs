//! Racing a study (successive halving over seeds: Jamieson & Talwalkar, "Non-stochastic best arm
//! identification and hyperparameter optimization", AISTATS 2016; Li, Jamieson, DeSalvo, Rostamizadeh,
//! Talwalkar, "Hyperband: A novel bandit-based approach to hyperparameter optimization", JMLR 18, 2017).
//!
//! A variant's budget is its seeds x steps, and it is spent seed by seed: rung k decides once every racing
//! variant has finished its first `rung_seeds[k]` seeds. Variants the report's rank-group intervals put behind
//! the leader stop there (`analysis::race`); the seeds they no longer run go to the variants still racing as further
//! seeds (split evenly, up to `max_seeds` each; the rest is saved). Every run is a whole run, bit-identical
//! to the same seed of the un-raced study, so a decision depends only on finished runs: it is a pure
//! function of the results folder, taken by whichever process needs it (this one between stages, or a
//! `--cell` of a later stage) and recorded in racing.json.
//!
//! Cells are numbered stage-major: stage 0 holds the controller and the first rung's seeds of every learned
//! variant, stage k the seeds between rung k and rung k + 1, the last stage every further seed up to
//! `max_seeds`; a cell whose seed racing does not need does nothing.

use super::experiment::{Experiment, RaceSpec, VariantKind};
use super::{run::RunSpec, StudyError, StudyOutcome};
use crate::analysis::bootstrap::stream_seed;
use crate::analysis::race::{decide_rung, Entrant};
use crate::analysis::run_metrics::RunContext;
use crate::results::{
    self, Interval, RaceVariant, RacingRecord, RungEntry, RungRecord, VariantKind as Kind,
};
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};

/// Resamples of each racing interval (the report's default).
pub const RESAMPLES: usize = 2000;

/// The stage a seed belongs to: the number of rungs at or below it.
pub fn stage_of(rung_seeds: &[u64], seed: u64) -> usize {
    rung_seeds.iter().filter(|&&n| seed >= n).count()
}

/// The cells of a raced study, stage-major, then variant, then seed: (variant index, seed).
pub fn cell_order(kinds: &[Kind], rung_seeds: &[u64], max_seeds: u64) -> Vec<(usize, u64)> {
    let mut cells = Vec::new();
    let stages = rung_seeds.len() + 1;
    for stage in 0..stages {
        let from = if stage == 0 { 0 } else { rung_seeds[stage - 1] };
        let to = rung_seeds.get(stage).copied().unwrap_or(max_seeds);
        for (v, k) in kinds.iter().enumerate() {
            match k {
                Kind::Baseline if stage == 0 => cells.push((v, 0)),
                Kind::Baseline => {}
                Kind::Learned => cells.extend((from..to).map(|s| (v, s))),
            }
        }
    }
    cells
}

/// The plan of a raced study: every run racing may need, in cell order.
pub fn plan(exp: &Experiment, race: &RaceSpec, out: &Path) -> Vec<RunSpec> {
    let kinds: Vec<Kind> = exp.variants.iter().map(|v| v.kind).collect();
    cell_order(&kinds, &race.rung_seeds, race.max_seeds)
        .into_iter()
        .enumerate()
        .map(|(index, (vi, seed))| {
            let v = &exp.variants[vi];
            RunSpec {
                index,
                variant: vi,
                seed,
                dir: results::run_dir(out, &v.name, seed),
                config_hash: exp.config_hash(v, seed),
            }
        })
        .collect()
}

/// Where the race stands after the rungs that could be decided.
#[derive(Clone, Debug, PartialEq)]
pub struct RaceState {
    /// The record written to racing.json.
    pub record: RacingRecord,
    /// Rungs decided.
    pub decided: usize,
    /// The first undecided rung that was asked for and the runs it waits for (variant, seed).
    pub waiting: Option<(usize, Vec<(String, u64)>)>,
}

impl RaceState {
    /// Seeds planned for variant `v` (learned) so far.
    pub fn seeds(&self, exp: &Experiment, v: usize) -> u64 {
        let name = &exp.variants[v].name;
        self.record
            .variants
            .iter()
            .find(|x| &x.name == name)
            .map_or(0, |x| x.seeds)
    }

    /// Whether racing needs the run of variant `v`, seed `seed`.
    pub fn needs(&self, exp: &Experiment, v: usize, seed: u64) -> bool {
        match exp.variants[v].kind {
            VariantKind::Baseline => seed == 0,
            VariantKind::Learned => seed < self.seeds(exp, v),
        }
    }
}

fn interval(e: &crate::analysis::Estimate) -> Option<Interval> {
    Interval::of(e.point, e.lo, e.hi)
}

fn finite(x: f64) -> Option<f64> {
    x.is_finite().then_some(x)
}

/// Decide rungs 1..=`upto` from the finished runs in `out` (stopping at the first rung whose runs are not all
/// finished) and write racing.json. The decisions depend only on the runs' files.
pub fn decide(
    exp: &Experiment,
    race: &RaceSpec,
    out: &Path,
    upto: usize,
) -> Result<RaceState, StudyError> {
    let s = exp.seeds();
    let budget = exp.study.budget as u64;
    let learned: Vec<usize> = (0..exp.variants.len())
        .filter(|&v| exp.variants[v].kind == VariantKind::Learned)
        .collect();
    let first = race.rung_seeds[0];
    let mut seeds: Vec<u64> = vec![first; exp.variants.len()];
    let mut stopped: Vec<Option<u64>> = vec![None; exp.variants.len()];
    let mut alive: Vec<usize> = learned.clone();
    let mut rungs = Vec::new();
    let mut freed_runs = 0u64;
    let mut waiting = None;
    let ctx = RunContext {
        budget_steps: budget,
        success_threshold: exp.study.success_threshold,
        final_window: exp.study.final_window as usize,
        kind: Kind::Learned,
    };
    for k in 0..upto.min(race.rung_seeds.len()) {
        let n = race.rung_seeds[k];
        let mut runs = Vec::with_capacity(alive.len());
        let mut unfinished = Vec::new();
        for &v in &alive {
            let name = &exp.variants[v].name;
            let mut vr = Vec::with_capacity(n as usize);
            for seed in 0..n {
                let dir = results::run_dir(out, name, seed);
                let rec = results::read_run(&dir)?;
                let hash = exp.config_hash(&exp.variants[v], seed);
                match rec {
                    Some(r) if r.config_hash == hash && r.status.is_final() => vr.push(
                        crate::analysis::load::load_run_dir(&dir, seed).map_err(|e| {
                            StudyError::Run(format!("racing: reading {}: {e}", dir.display()))
                        })?,
                    ),
                    _ => unfinished.push((name.clone(), seed)),
                }
            }
            runs.push(vr);
        }
        if !unfinished.is_empty() {
            waiting = Some((k + 1, unfinished));
            break;
        }
        let entrants: Vec<Entrant> = alive
            .iter()
            .zip(&runs)
            .map(|(&index, r)| Entrant { index, runs: r })
            .collect();
        let seed = stream_seed(0, &[0x7261_6365, k as u64 + 1]);
        let rung = decide_rung(&entrants, &ctx, race.confidence, RESAMPLES, seed);
        let name = |i: usize| exp.variants[i].name.clone();
        rungs.push(RungRecord {
            rung: k as u64 + 1,
            fraction: race.fractions[k],
            seeds: n,
            level: rung.level,
            entries: rung
                .verdicts
                .iter()
                .map(|v| RungEntry {
                    variant: name(v.index),
                    kept: v.kept,
                    group: v.group as u64,
                    leader: name(v.leader),
                    steps_iqm: finite(v.steps_iqm),
                    success_iqm: finite(v.success_iqm),
                    steps_ratio: interval(&v.steps_ratio),
                    success_diff: interval(&v.success_diff),
                })
                .collect(),
        });
        for v in rung.verdicts.iter().filter(|v| !v.kept) {
            stopped[v.index] = Some(k as u64 + 1);
            seeds[v.index] = n;
            freed_runs += s - n;
        }
        alive.retain(|&v| stopped[v].is_none());
        // Survivors: the next rung's seeds, and at the end their share of the freed seeds.
        let share = freed_runs / alive.len().max(1) as u64;
        let target = (s + share).min(race.max_seeds);
        for &v in &alive {
            seeds[v] = race.rung_seeds.get(k + 1).copied().unwrap_or(target).max(n);
        }
        if k + 1 == race.rung_seeds.len() {
            for &v in &alive {
                seeds[v] = target;
            }
        }
    }
    let decided = rungs.len();
    if decided < race.rung_seeds.len() {
        // Until the last rung is decided, the final seed counts are not known: plan what is known.
        for &v in &alive {
            seeds[v] = race.rung_seeds[decided];
        }
    }
    let reinvested_runs: u64 = if decided == race.rung_seeds.len() {
        alive.iter().map(|&v| seeds[v].saturating_sub(s)).sum()
    } else {
        0
    };
    let final_seeds = |v: usize| {
        if stopped[v].is_some() || decided == race.rung_seeds.len() {
            seeds[v]
        } else {
            s
        }
    };
    let record = RacingRecord {
        rungs,
        variants: learned
            .iter()
            .map(|&v| RaceVariant {
                name: exp.variants[v].name.clone(),
                seeds: seeds[v],
                stopped_at: stopped[v],
            })
            .collect(),
        unraced_steps: learned.len() as u64 * s * budget,
        planned_steps: learned.iter().map(|&v| final_seeds(v)).sum::<u64>() * budget,
        freed_steps: freed_runs * budget,
        reinvested_steps: reinvested_runs * budget,
    };
    // Decisions are a function of the finished runs, so a record with more rungs decided is the more informed
    // one: a process that saw fewer finished runs does not overwrite it.
    let known = results::read_racing(out).ok().flatten();
    if known.is_none_or(|k| k.rungs.len() <= record.rungs.len()) {
        results::write_racing(out, &record)?;
    }
    Ok(RaceState {
        record,
        decided,
        waiting,
    })
}

/// The racing part of `run_study`: one cell (after deciding the rungs before its stage), or every stage in
/// turn, deciding each rung before the next stage, until the study is done or stops (Ctrl-C, a busy run).
#[allow(clippy::too_many_arguments)]
pub(super) fn run_raced(
    exp: &Experiment,
    race: &RaceSpec,
    out: &Path,
    all: &[RunSpec],
    cell: Option<&RunSpec>,
    jobs: usize,
    stop: &AtomicBool,
    outcome: &mut StudyOutcome,
) -> Result<(), StudyError> {
    let last = race.rung_seeds.len();
    if let Some(r) = cell {
        // One cell: the rungs before its stage must be decided (from the runs of the earlier stages).
        let stage = match exp.variants[r.variant].kind {
            VariantKind::Baseline => 0,
            VariantKind::Learned => stage_of(&race.rung_seeds, r.seed),
        };
        let st = decide(exp, race, out, stage)?;
        if let Some((rung, runs)) = st.waiting {
            return Err(StudyError::RungWaiting {
                cell: r.index,
                rung,
                runs: waiting_list(&runs),
            });
        }
        if st.needs(exp, r.variant, r.seed) {
            let (todo, skipped) = super::pending(std::slice::from_ref(r), exp)?;
            outcome.skipped = skipped;
            super::run_batch(exp, todo, jobs, stop, outcome)?;
        } else {
            outcome.not_needed.push(not_needed_note(exp, &st, r));
        }
        decide(exp, race, out, last)?;
        return Ok(());
    }
    for stage in 0..=last {
        let st = decide(exp, race, out, stage)?;
        if let Some((rung, runs)) = st.waiting {
            outcome.waiting = Some((rung, waiting_list(&runs)));
            break;
        }
        let batch: Vec<RunSpec> = all
            .iter()
            .filter(|r| {
                let s = match exp.variants[r.variant].kind {
                    VariantKind::Baseline => 0,
                    VariantKind::Learned => stage_of(&race.rung_seeds, r.seed),
                };
                s == stage && st.needs(exp, r.variant, r.seed)
            })
            .cloned()
            .collect();
        let (todo, skipped) = super::pending(&batch, exp)?;
        outcome.skipped += skipped;
        super::run_batch(exp, todo, jobs, stop, outcome)?;
        if stop.load(Ordering::SeqCst) || outcome.interrupted > 0 || !outcome.busy.is_empty() {
            break;
        }
    }
    let st = decide(exp, race, out, last)?;
    outcome.stopped = st
        .record
        .variants
        .iter()
        .filter_map(|v| v.stopped_at.map(|k| (v.name.clone(), k)))
        .collect();
    Ok(())
}

fn waiting_list(runs: &[(String, u64)]) -> String {
    let list: Vec<String> = runs.iter().map(|(v, s)| format!("{v} seed {s}")).collect();
    list.join(", ")
}

fn not_needed_note(exp: &Experiment, st: &RaceState, r: &RunSpec) -> String {
    let name = &exp.variants[r.variant].name;
    match st
        .record
        .variants
        .iter()
        .find(|v| &v.name == name)
        .and_then(|v| v.stopped_at)
    {
        Some(k) => format!(
            "cell {}: {name} seed {} is not run: racing stopped `{name}` at rung {k}",
            r.index, r.seed
        ),
        None => format!(
            "cell {}: {name} seed {} is not run: racing plans {} seeds for `{name}`",
            r.index,
            r.seed,
            st.seeds(exp, r.variant)
        ),
    }
}

/// `termwise run --decide K`: decide racing rungs 1..=K from the finished runs in `out`, write racing.json
/// and run nothing (the decision step between the stages of a raced study on a cluster). An error when rung
/// K cannot be decided yet, so a job that depends on this step does not start.
pub fn cli_decide(exp: &Experiment, out: &Path, upto: usize) -> Result<String, StudyError> {
    let Some(race) = &exp.racing else {
        return Err(StudyError::Mismatch(format!(
            "--decide: study `{}` has no [study.racing] settings",
            exp.study.name
        )));
    };
    if upto == 0 || upto > race.rung_seeds.len() {
        return Err(StudyError::Mismatch(format!(
            "--decide {upto}: the study has rungs 1 to {}",
            race.rung_seeds.len()
        )));
    }
    if !out.join(results::STUDY_FILE).is_file() {
        super::layout::write_study_json(out, exp)?;
    }
    let st = decide(exp, race, out, upto)?;
    if let Some((rung, runs)) = &st.waiting {
        return Err(StudyError::RungWaiting {
            cell: usize::MAX,
            rung: *rung,
            runs: waiting_list(runs),
        });
    }
    let mut text = format!("termwise: racing rungs 1 to {upto} decided");
    for r in &st.record.rungs {
        let stopped: Vec<&str> = r
            .entries
            .iter()
            .filter(|e| !e.kept)
            .map(|e| e.variant.as_str())
            .collect();
        text.push_str(&format!(
            "\n  rung {} ({} seeds per variant): {}",
            r.rung,
            r.seeds,
            if stopped.is_empty() {
                "every variant goes on".to_string()
            } else {
                format!("stopped {}", stopped.join(", "))
            }
        ));
    }
    Ok(text)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cells_are_stage_major_and_stages_follow_the_rungs() {
        // The plan's own definition (no outside source): stage 0 holds the controller and the first rung's
        // seeds, each later stage the seeds up to the next rung, the last every seed up to max_seeds.
        let kinds = [Kind::Learned, Kind::Baseline, Kind::Learned];
        let cells = cell_order(&kinds, &[2, 3], 5);
        assert_eq!(
            cells,
            vec![
                (0, 0),
                (0, 1),
                (1, 0),
                (2, 0),
                (2, 1),
                (0, 2),
                (2, 2),
                (0, 3),
                (0, 4),
                (2, 3),
                (2, 4)
            ]
        );
        let stages: Vec<usize> = (0..6).map(|s| stage_of(&[2, 3], s)).collect();
        assert_eq!(stages, vec![0, 0, 1, 2, 2, 2]);
    }
}
