//! `study`: experiment files, variant and ablation expansion, run planning, parallel execution with resume,
//! and writing study.json and each run's files in the results format (`results`). The library side of
//! `termwise run`, `check`, `slurm` and `status`.

pub mod experiment;
pub mod layout;
pub mod lock;
pub mod probe;
pub mod race;
pub mod run;
pub mod slurm;
mod slurm_race;
pub mod status;
pub mod variant;

pub use crate::results::{RunRecord, RunStatus};
pub use experiment::{Experiment, VariantKind, VariantSpec};
pub use run::{plan_runs, RunSpec};

use crate::config::ConfigError;
use indicatif::{MultiProgress, ProgressBar, ProgressDrawTarget, ProgressStyle};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Mutex;
use std::time::Instant;

mod check;
pub use check::*;

/// Why a study could not run.
#[derive(Debug, thiserror::Error)]
pub enum StudyError {
    #[error("{0}")]
    Config(#[from] ConfigError),
    #[error("{path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error(transparent)]
    Results(#[from] crate::results::ResultsError),
    #[error("{dir}: results there come from a different configuration (run {variant}/seed-{seed} has config hash {found}, this file gives {expected}); refusing to mix them — choose a new --out folder or remove the old results")]
    ChangedConfig {
        dir: PathBuf,
        variant: String,
        seed: u64,
        found: String,
        expected: String,
    },
    #[error("racing rung {rung} cannot be decided yet{}: these runs of the stage before it are not finished: {runs} (run their cells first; `termwise status` lists them)", if *cell == usize::MAX { String::new() } else { format!(" (--cell {cell} comes after it)") })]
    RungWaiting {
        cell: usize,
        rung: usize,
        runs: String,
    },
    #[error("--cell {cell} is outside the plan (0..{runs}); `termwise check` prints the plan")]
    NoSuchCell { cell: usize, runs: usize },
    #[error("run failed: {0}")]
    Run(String),
    /// A results folder that does not belong to the experiment given.
    #[error("{0}")]
    Mismatch(String),
    #[error("{0}")]
    Slurm(#[from] slurm::SlurmError),
}

impl StudyError {
    /// True when the user's input is at fault (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        matches!(
            self,
            StudyError::Config(_)
                | StudyError::ChangedConfig { .. }
                | StudyError::NoSuchCell { .. }
                | StudyError::Mismatch(_)
                | StudyError::Slurm(_)
        )
    }
}

/// How a study run ended.
#[derive(Clone, Debug, Default)]
pub struct StudyOutcome {
    pub out: PathBuf,
    pub ran: usize,
    pub skipped: usize,
    pub done: usize,
    pub diverged: usize,
    pub interrupted: usize,
    /// Runs left to another live process holding their lock: (variant, seed, owner).
    pub busy: Vec<(String, u64, lock::LockOwner)>,
    /// Runs another process finished after this one planned its work (counted in `skipped` too).
    pub finished_elsewhere: usize,
    /// Finished runs evaluated on probes they lacked (nothing retrained).
    pub probed: usize,
    /// Racing: cells whose run racing does not need, with why.
    pub not_needed: Vec<String>,
    /// Racing: variants stopped, with the rung.
    pub stopped: Vec<(String, u64)>,
    /// Racing: the rung that could not be decided because runs of the stage before it are unfinished.
    pub waiting: Option<(usize, String)>,
}

/// Whether a run's folder already holds a finished run of this config; a different config hash is an error.
fn finished(r: &RunSpec, exp: &Experiment) -> Result<bool, StudyError> {
    let rec = match crate::results::read_run(&r.dir) {
        Ok(rec) => rec,
        Err(why) => {
            // An unreadable run.json (e.g. a disk filled up) is restarted like an interrupted run.
            tracing::warn!(
                "restarting {}: unreadable run record: {why}",
                r.dir.display()
            );
            None
        }
    };
    match rec {
        Some(rec) if rec.config_hash != r.config_hash => Err(StudyError::ChangedConfig {
            dir: r
                .dir
                .parent()
                .and_then(|p| p.parent())
                .unwrap_or(&r.dir)
                .to_path_buf(),
            variant: exp.variants[r.variant].name.clone(),
            seed: r.seed,
            found: rec.config_hash,
            expected: r.config_hash.clone(),
        }),
        Some(rec) => Ok(matches!(rec.status, RunStatus::Done | RunStatus::Diverged)),
        None => Ok(false),
    }
}

/// Decide which runs need running: finished runs with the same config hash are skipped; a different hash is an error.
fn pending(runs: &[RunSpec], exp: &Experiment) -> Result<(Vec<RunSpec>, usize), StudyError> {
    let mut todo = Vec::new();
    let mut skipped = 0;
    for r in runs {
        if finished(r, exp)? && !probe::probes_stale(exp, r)? {
            skipped += 1
        } else {
            todo.push(r.clone())
        }
    }
    Ok((todo, skipped))
}

/// What a worker did with one planned run.
enum Claim {
    Ran(RunStatus),
    /// A finished run evaluated on the probes it lacked.
    Probed,
    Busy(lock::LockOwner),
    FinishedElsewhere,
}

/// Run `r` under its lock: left alone when another live process holds it or finished it meanwhile; otherwise
/// the leftovers of a killed attempt (temporary files) are removed and the run executes.
fn claim_and_execute(
    exp: &Experiment,
    r: &RunSpec,
    stop: &AtomicBool,
    on_progress: &mut dyn FnMut(&run::RunProgress),
) -> Result<Claim, StudyError> {
    let io = |source| StudyError::Io {
        path: r.dir.clone(),
        source,
    };
    let _lock = match lock::try_lock(&r.dir, status::DEFAULT_STALE_AFTER_S).map_err(io)? {
        lock::Acquire::Acquired(l) => l,
        lock::Acquire::Busy(owner) => return Ok(Claim::Busy(owner)),
    };
    if finished(r, exp)? {
        if probe::probes_stale(exp, r)? {
            probe::probe_run(exp, r)?;
            return Ok(Claim::Probed);
        }
        return Ok(Claim::FinishedElsewhere);
    }
    crate::fsio::remove_stale_temps(&r.dir, true).map_err(io)?;
    let st = run::execute(exp, r, stop, on_progress)?;
    if st == RunStatus::Done && !exp.probes.is_empty() && !stop.load(Ordering::SeqCst) {
        // The probe conditions, on the final policy (an interrupted probe step is redone by the next run).
        probe::probe_run(exp, r)?;
    }
    Ok(Claim::Ran(st))
}

/// Run a study (or one cell of it) with `jobs` workers; `stop` is raised by Ctrl-C. A raced study runs stage
/// by stage, deciding each rung from the finished runs before the next stage (`race`).
pub fn run_study(
    exp: &Experiment,
    out: &Path,
    jobs: usize,
    cell: Option<usize>,
    stop: &AtomicBool,
) -> Result<StudyOutcome, StudyError> {
    let all = plan_runs(exp, out);
    let selected: Vec<RunSpec> = match cell {
        Some(k) => vec![all.get(k).cloned().ok_or(StudyError::NoSuchCell {
            cell: k,
            runs: all.len(),
        })?],
        None => all.clone(),
    };
    // A changed configuration is refused before anything is written.
    let (todo, skipped) = pending(&selected, exp)?;
    std::fs::create_dir_all(out).map_err(|source| StudyError::Io {
        path: out.to_path_buf(),
        source,
    })?;
    if let Err(e) = crate::fsio::remove_stale_temps(out, false) {
        tracing::warn!(
            "{}: cannot remove leftover temporary files: {e}",
            out.display()
        );
    }
    layout::write_study_json(out, exp)?;
    let mut outcome = StudyOutcome {
        out: out.to_path_buf(),
        ..Default::default()
    };
    let Some(race) = &exp.racing else {
        outcome.skipped = skipped;
        run_batch(exp, todo, jobs, stop, &mut outcome)?;
        return Ok(outcome);
    };
    race::run_raced(
        exp,
        race,
        out,
        &all,
        cell.and(selected.first()),
        jobs,
        stop,
        &mut outcome,
    )?;
    Ok(outcome)
}

/// Run `todo` with `jobs` workers, adding what happened to `outcome`.
fn run_batch(
    exp: &Experiment,
    todo: Vec<RunSpec>,
    jobs: usize,
    stop: &AtomicBool,
    outcome: &mut StudyOutcome,
) -> Result<(), StudyError> {
    if todo.is_empty() {
        tracing::info!("all selected runs are already finished");
        return Ok(());
    }
    let tty = std::io::stderr().is_terminal();
    let multi = MultiProgress::with_draw_target(if tty {
        ProgressDrawTarget::stderr()
    } else {
        ProgressDrawTarget::hidden()
    });
    let total_steps: u64 = todo
        .iter()
        .map(|r| {
            if exp.variants[r.variant].kind == VariantKind::Baseline {
                1
            } else {
                exp.study.budget as u64
            }
        })
        .sum();
    let overall = multi.add(ProgressBar::new(total_steps));
    overall.set_style(
        ProgressStyle::with_template(
            "{prefix:>10} [{bar:30}] {percent:>3}%  {pos}/{len} steps  eta {eta}",
        )
        .expect("valid template")
        .progress_chars("=> "),
    );
    overall.set_prefix("study");
    let next = AtomicUsize::new(0);
    let results = Mutex::new(Vec::new());
    let error = Mutex::new(None);
    let started = Instant::now();
    let workers = jobs.max(1).min(todo.len());
    std::thread::scope(|s| {
        for _ in 0..workers {
            s.spawn(|| loop {
                let i = next.fetch_add(1, Ordering::SeqCst);
                if i >= todo.len()
                    || stop.load(Ordering::SeqCst)
                    || error.lock().expect("lock").is_some()
                {
                    break;
                }
                let r = &todo[i];
                let v = &exp.variants[r.variant];
                let line = multi.add(ProgressBar::new(exp.study.budget as u64));
                line.set_style(
                    ProgressStyle::with_template("  {prefix:<40} {pos:>8} steps  {msg}")
                        .expect("valid template"),
                );
                line.set_prefix(format!("{} seed {}", v.name, r.seed));
                let mut last = 0u64;
                let mut on_progress = |p: &run::RunProgress| {
                    overall.inc(p.env_steps.saturating_sub(last));
                    last = p.env_steps;
                    line.set_position(p.env_steps);
                    line.set_message(format!(
                        "success {:.2}  level {:.2}",
                        p.success_rate, p.level
                    ));
                    if !tty {
                        eprintln!(
                            "termwise: [{}/{}] {} seed {}: {} steps, success {:.2}, level {:.2}",
                            r.index + 1,
                            outcome_total(exp),
                            v.name,
                            r.seed,
                            p.env_steps,
                            p.success_rate,
                            p.level
                        );
                    }
                };
                match claim_and_execute(exp, r, stop, &mut on_progress) {
                    Ok(c) => results.lock().expect("lock").push((r.clone(), c)),
                    Err(e) => {
                        *error.lock().expect("lock") = Some(e);
                    }
                }
                line.finish_and_clear();
            });
        }
    });
    overall.finish_and_clear();
    if let Some(e) = error.into_inner().expect("lock") {
        return Err(e);
    }
    for (r, c) in results.into_inner().expect("lock") {
        let st = match c {
            Claim::Ran(st) => st,
            Claim::Busy(owner) => {
                let name = exp.variants[r.variant].name.clone();
                outcome.busy.push((name, r.seed, owner));
                continue;
            }
            Claim::FinishedElsewhere => {
                outcome.skipped += 1;
                outcome.finished_elsewhere += 1;
                continue;
            }
            Claim::Probed => {
                outcome.probed += 1;
                continue;
            }
        };
        outcome.ran += 1;
        match st {
            RunStatus::Done => outcome.done += 1,
            RunStatus::Diverged => outcome.diverged += 1,
            RunStatus::Interrupted | RunStatus::Running | RunStatus::Missing => {
                outcome.interrupted += 1
            }
        }
    }
    tracing::info!("runs finished in {:.1} s", started.elapsed().as_secs_f64());
    Ok(())
}

fn outcome_total(exp: &Experiment) -> usize {
    exp.variants
        .iter()
        .map(|v| {
            if v.kind == VariantKind::Baseline {
                1
            } else {
                exp.seeds() as usize
            }
        })
        .sum()
}

/// What `termwise run` did, for the command to print (and to draw the report from `out`).
#[derive(Clone, Debug)]
pub struct RunCommandOutcome {
    /// The lines to print.
    pub text: String,
    /// The results folder.
    pub out: PathBuf,
    /// Ctrl-C stopped the study before it finished.
    pub interrupted: bool,
}

/// The study part of `termwise run`: load, run (or one cell), and say what happened. Drawing the report is
/// the command's business (`cmd::run`), so `study` does not depend on `chart`.
pub fn cli_run(
    path: &Path,
    jobs: usize,
    out: Option<PathBuf>,
    cell: Option<usize>,
    stop: &AtomicBool,
) -> Result<RunCommandOutcome, StudyError> {
    let exp = experiment::load(path)?;
    let out = out.unwrap_or_else(|| Path::new("results").join(&exp.study.name));
    let o = run_study(&exp, &out, jobs, cell, stop)?;
    let mut text = format!(
        "termwise: {} runs ran ({} done, {} diverged, {} interrupted), {} already finished; results in {}",
        o.ran,
        o.done,
        o.diverged,
        o.interrupted,
        o.skipped,
        out.display()
    );
    for note in &o.not_needed {
        text.push_str(&format!("\ntermwise: {note}"));
    }
    if !o.stopped.is_empty() {
        let list: Vec<String> = o
            .stopped
            .iter()
            .map(|(v, k)| format!("{v} (rung {k})"))
            .collect();
        text.push_str(&format!(
            "\ntermwise: racing stopped {} variant{}: {}; racing.json and the report say why",
            list.len(),
            if list.len() == 1 { "" } else { "s" },
            list.join(", ")
        ));
    }
    if let Some((rung, runs)) = &o.waiting {
        text.push_str(&format!(
            "\ntermwise: racing rung {rung} waits for unfinished runs: {runs}; run the same command again"
        ));
    }
    if o.probed > 0 {
        text.push_str(&format!(
            "\ntermwise: {} finished runs evaluated on the probe conditions they lacked",
            o.probed
        ));
    }
    if !o.busy.is_empty() {
        let list: Vec<String> = o
            .busy
            .iter()
            .map(|(v, s, owner)| format!("{v} seed {s} ({owner})"))
            .collect();
        text.push_str(&format!(
            "\ntermwise: {} runs left to the process holding their lock: {}",
            o.busy.len(),
            list.join(", ")
        ));
    }
    let interrupted = stop.load(std::sync::atomic::Ordering::SeqCst);
    if interrupted {
        text.push_str("\ntermwise: interrupted; run the same command again to finish the study");
    }
    Ok(RunCommandOutcome {
        text,
        out,
        interrupted,
    })
}
