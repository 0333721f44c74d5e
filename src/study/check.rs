//! `termwise check`: the plan in words, the evaluation count, the redraw note and the wall-time estimate from
//! a short calibration on this machine.

use super::*;

/// `termwise check`: the plan as text — each variant and what it changes, runs, steps, and a wall-time estimate
/// from a short calibration on this machine (one PPO iteration and a few evaluation episodes of the first variant).
pub fn check_text(exp: &Experiment, jobs: usize, calibrate: bool) -> Result<String, StudyError> {
    use std::fmt::Write as _;
    let runs = plan_runs(exp, Path::new("results").join(&exp.study.name).as_path());
    let mut s = String::new();
    let _ = writeln!(
        s,
        "study `{}`: {}",
        exp.study.name,
        plan_line(exp, runs.len())
    );
    for (i, v) in exp.variants.iter().enumerate() {
        let tag = if i == exp.reference_index() {
            " (reference)"
        } else {
            ""
        };
        let kind = if v.kind == VariantKind::Baseline {
            " [baseline controller]"
        } else {
            ""
        };
        let _ = writeln!(s, "  {}{}{}", v.name, kind, tag);
        if v.changes.is_empty() {
            let _ = writeln!(s, "      (the base configuration)");
        }
        for c in &v.changes {
            // "(unset)" means the base leaves the key at its default: say so in words.
            let base = if c.base == "(unset)" {
                "not set, so its default".to_string()
            } else {
                c.base.clone()
            };
            let _ = writeln!(s, "      {} = {}   (base: {base})", c.key, c.value);
        }
    }
    if let Some(race) = &exp.racing {
        let rungs: Vec<String> = race
            .fractions
            .iter()
            .zip(&race.rung_seeds)
            .map(|(f, n)| format!("{f} ({n} seeds)"))
            .collect();
        let _ = writeln!(
            s,
            "racing: rungs at {} of each variant's {} seeds; at each rung the variants the report's rank-group intervals \
             against the leader (confidence {}, Bonferroni-adjusted) put behind stop, and their seeds go to the rest \
             as further seeds, up to {} per variant",
            rungs.join(", "),
            exp.seeds(),
            race.confidence,
            race.max_seeds
        );
    }
    for p in &exp.probes {
        let _ = writeln!(s, "probe `{}`: {}", p.name, p.changes.join("; "));
    }
    let _ = writeln!(s, "plan ({} runs, `--cell K` runs one):", runs.len());
    for r in &runs {
        let stage = match &exp.racing {
            Some(race) if exp.variants[r.variant].kind == VariantKind::Learned => {
                match race::stage_of(&race.rung_seeds, r.seed) {
                    0 => String::new(),
                    k => format!("   (racing stage {k}: run if rung {k} keeps the variant)"),
                }
            }
            _ => String::new(),
        };
        let _ = writeln!(
            s,
            "  cell {:>3}: {} seed {}{stage}",
            r.index, exp.variants[r.variant].name, r.seed
        );
    }
    let learned = runs
        .iter()
        .filter(|r| exp.variants[r.variant].kind == VariantKind::Learned)
        .count() as u64;
    let total = learned.saturating_mul(exp.study.budget as u64);
    let evals = evaluations_per_run(exp.study.budget as u64, exp.eval_every());
    let _ = writeln!(
        s,
        "environment steps: {} per run, {} in total; {} evaluations of {} episodes per run",
        exp.study.budget, total, evals, exp.study.eval_episodes
    );
    if exp.racing.is_some() {
        let learned_variants = exp
            .variants
            .iter()
            .filter(|v| v.kind == VariantKind::Learned)
            .count() as u64;
        let _ = writeln!(
            s,
            "racing: the total counts every seed racing could give; without racing the study trains {} steps, \
             and racing never plans more than that",
            learned_variants * exp.seeds() * exp.study.budget as u64
        );
    }
    let _ = writeln!(
        s,
        "note: studies draw a random collision-free start and a reachable goal for every episode; the scenario's \
         start.q and goal.position are used by `plan`, `simulate` and as the fallback of a failed draw"
    );
    if calibrate {
        let _ = writeln!(s, "{}", redraws_text(exp));
        let workers = jobs.max(1).min(runs.len().max(1));
        let _ = writeln!(s, "{}", estimate_line(exp, evals, runs.len(), workers));
    }
    Ok(s)
}

/// Longest time `check` spends calibrating, s: the estimate is bounded in time whatever the input.
pub const CALIBRATION_LIMIT_S: u64 = 20;

/// The wall-time estimate line of `check`. Calibration runs on its own thread and is abandoned after
/// [`CALIBRATION_LIMIT_S`]; a calibration that fails or takes too long gives a line saying so, never an error.
pub(super) fn estimate_line(exp: &Experiment, evals: u64, runs: usize, workers: usize) -> String {
    let (tx, rx) = std::sync::mpsc::channel();
    let copy = exp.clone();
    let spawned = std::thread::Builder::new()
        .name("calibration".into())
        .spawn(move || {
            let _ = tx.send(calibration(&copy));
        });
    if let Err(e) = spawned {
        return format!("estimate unavailable: cannot start the calibration thread: {e}");
    }
    match rx.recv_timeout(std::time::Duration::from_secs(CALIBRATION_LIMIT_S)) {
        Ok(Ok((train_sps, eval_s))) => {
            let per_run = exp.study.budget as f64 / train_sps + evals as f64 * eval_s;
            let wall = per_run * runs as f64 / workers as f64;
            format!(
                "estimate on this machine: {:.0} training steps/s, {:.2} s per evaluation -> about {} with {} worker(s)",
                train_sps,
                eval_s,
                human_duration(wall),
                workers
            )
        }
        Ok(Err(e)) => format!("estimate unavailable: the calibration run failed: {e}"),
        Err(std::sync::mpsc::RecvTimeoutError::Timeout) => format!(
            "estimate unavailable: one PPO iteration and 4 evaluation episodes of the first learned variant took \
             more than {CALIBRATION_LIMIT_S} s, so each run takes far longer (budget {} steps, {evals} evaluations)",
            exp.study.budget
        ),
        Err(std::sync::mpsc::RecvTimeoutError::Disconnected) => {
            "estimate unavailable: the calibration run stopped unexpectedly".into()
        }
    }
}

/// Per variant, how many evaluation draws were rejected (start too close to contact, or no collision-free path) (bounded in time like
/// the calibration: after [`CALIBRATION_LIMIT_S`] it says so instead).
pub(super) fn redraws_text(exp: &Experiment) -> String {
    let (tx, rx) = std::sync::mpsc::channel();
    let copy = exp.clone();
    let spawned = std::thread::Builder::new()
        .name("redraws".into())
        .spawn(move || {
            let mut lines = Vec::new();
            for v in &copy.variants {
                let (redraws, unsolved) = run::eval_redraws(&copy, v);
                lines.push(format!(
                    "evaluation episodes of `{}`: {} draws rejected (start within twice the planning margin of contact, or no collision-free path){}",
                    v.name,
                    redraws,
                    if unsolved > 0 {
                        format!(", {unsolved} still unsolved after {} draws", crate::task::MAX_REDRAWS)
                    } else {
                        String::new()
                    }
                ));
            }
            let _ = tx.send(lines.join("\n"));
        });
    if let Err(e) = spawned {
        return format!("evaluation redraws unknown: cannot start a thread: {e}");
    }
    rx.recv_timeout(std::time::Duration::from_secs(CALIBRATION_LIMIT_S))
        .unwrap_or_else(|_| {
            format!("evaluation redraws unknown: drawing the evaluation episodes took more than {CALIBRATION_LIMIT_S} s")
        })
}

pub(super) fn count(n: usize, one: &str, many: &str) -> String {
    format!("{n} {}", if n == 1 { one } else { many })
}

/// "3 learned variants x 5 seeds + 1 baseline controller (1 run) = 16 runs".
pub fn plan_line(exp: &Experiment, runs: usize) -> String {
    let learned = exp
        .variants
        .iter()
        .filter(|v| v.kind == VariantKind::Learned)
        .count();
    let baselines = exp.variants.len() - learned;
    let seeds = exp.seeds() as usize;
    let mut line = format!(
        "{} x {}",
        count(learned, "learned variant", "learned variants"),
        count(seeds, "seed", "seeds")
    );
    if baselines > 0 {
        line.push_str(&format!(
            " + {} (deterministic, 1 run each)",
            count(baselines, "baseline controller", "baseline controllers")
        ));
    }
    line.push_str(&format!(" = {}", count(runs, "run", "runs")));
    line
}

/// Evaluations a learned run writes: one before training, one at every multiple of `every`
/// below the budget, and one when the budget is reached (the runner's loop in `run.rs`).
pub fn evaluations_per_run(budget: u64, every: u64) -> u64 {
    1 + budget.div_ceil(every.max(1))
}

pub(super) fn human_duration(s: f64) -> String {
    if s < 90.0 {
        format!("{s:.0} s")
    } else if s < 5400.0 {
        format!("{:.1} min", s / 60.0)
    } else {
        format!("{:.1} h", s / 3600.0)
    }
}

/// Time one PPO iteration and a few evaluation episodes of the first learned variant.
pub(super) fn calibration(exp: &Experiment) -> Result<(f64, f64), StudyError> {
    let Some(v) = exp.variants.iter().find(|v| v.kind == VariantKind::Learned) else {
        return Ok((f64::INFINITY, 0.0));
    };
    let shared = std::sync::Arc::new(Mutex::new(crate::task::RunShared::new(
        v.curriculum.build(),
    )));
    let envs = run::build_envs(v, 1, &shared);
    let mut trainer = crate::learn::Trainer::new(v.learner.clone(), envs, 1)
        .map_err(|e| StudyError::Run(e.to_string()))?;
    let t = Instant::now();
    trainer
        .iterate(&mut crate::learn::NoObserver)
        .map_err(|e| StudyError::Run(e.to_string()))?;
    let sps = trainer.env_steps() as f64 / t.elapsed().as_secs_f64();
    let mut small = exp.clone();
    small.study.eval_episodes = 4;
    let t = Instant::now();
    run::evaluate_policy(&small, v, trainer.policy());
    let eval_s = t.elapsed().as_secs_f64() / 4.0 * exp.study.eval_episodes as f64;
    Ok((sps, eval_s))
}
