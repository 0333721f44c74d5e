//! Probe conditions after training: every finished run's final policy (or the tracking controller) is
//! evaluated on each probe's fixed episodes and the rows go to the run's probes.csv. The same step runs at
//! the end of a run and from `termwise probe`, which adds probes to a finished study without retraining.
//! A row is kept while its probe's definition hash is unchanged, so probing again only evaluates what is new.

use super::experiment::{Experiment, ProbeSpec, VariantKind};
use super::{lock, plan_runs, status, RunSpec, StudyError};
use crate::results::{self, ProbeRow, RunStatus};
use crate::task::{evaluate_probe, Actor, ProbeCondition, ProbeOutcome};
use std::path::Path;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::Mutex;

/// The task's view of a probe.
pub fn condition(p: &ProbeSpec) -> ProbeCondition {
    ProbeCondition {
        name: p.name.clone(),
        episodes: p.episodes,
        noise: p.noise,
        start_region: p.start_region.clone(),
    }
}

fn row(p: &ProbeSpec, definition: &str, o: &ProbeOutcome, env_steps: u64) -> ProbeRow {
    let s = &o.summary;
    ProbeRow {
        probe: p.name.clone(),
        definition: definition.to_string(),
        episodes_digest: o.digest.clone(),
        env_steps,
        episodes: p.episodes,
        success_rate: s.success_rate,
        reached_rate: s.reached_rate,
        collision_rate: s.collision_rate,
        mean_return: s.mean_return,
        time_to_goal: s.time_to_goal,
        episode_steps: s.episode_steps,
        rms_joint_acc: s.rms_joint_acc,
        min_clearance: s.min_clearance,
        replans: s.replans,
        reference_collisions: s.reference_collisions,
    }
}

/// True when the run needs probe rows it does not have: a finished (done) run of a study with probes whose
/// probes.csv lacks a probe or holds another definition of it. Diverged runs are not probed (the report counts
/// them as failures, as it does for their final figures).
pub fn probes_stale(exp: &Experiment, r: &RunSpec) -> Result<bool, StudyError> {
    if exp.probes.is_empty() {
        return Ok(false);
    }
    match results::read_run(&r.dir)? {
        Some(rec) if rec.status == RunStatus::Done => {}
        _ => return Ok(false),
    }
    let rows = results::read_probes(&r.dir)?;
    Ok(!exp.probes.iter().all(|p| {
        let def = &p.per_variant[r.variant].1;
        rows.iter()
            .any(|x| x.probe == p.name && &x.definition == def)
    }))
}

/// Evaluate a finished run on every probe whose row is missing or outdated and rewrite its probes.csv (rows
/// in the experiment's probe order). Returns the number of probes evaluated.
pub fn probe_run(exp: &Experiment, r: &RunSpec) -> Result<usize, StudyError> {
    let v = &exp.variants[r.variant];
    let old = results::read_probes(&r.dir)?;
    let mut rows = Vec::with_capacity(exp.probes.len());
    let mut fresh = 0;
    let mut policy = None;
    for p in &exp.probes {
        let (scenario, def) = &p.per_variant[r.variant];
        if let Some(x) = old
            .iter()
            .find(|x| x.probe == p.name && &x.definition == def)
        {
            rows.push(x.clone());
            continue;
        }
        let mut ep = crate::task::Episode::new(
            scenario.clone(),
            &v.reward,
            &v.plan,
            v.learner.gamma,
            &v.observation,
            &v.waypoints,
        );
        let cond = condition(p);
        let seed = exp.study.eval_seed;
        let (outcome, steps) = if v.kind == VariantKind::Baseline {
            // A fresh controller per episode, as the evaluation builds it.
            let mut make = || -> Box<Actor<'static>> {
                Box::new(crate::task::baseline_actor(&v.baseline, &v.plan, scenario))
            };
            (evaluate_probe(&mut ep, &cond, seed, &mut make), 0)
        } else {
            if policy.is_none() {
                policy = Some(final_policy(r)?);
            }
            let (pol, steps) = policy.as_ref().expect("loaded above");
            let mut make = || -> Box<Actor<'_>> {
                Box::new(|_: &crate::task::Episode, obs: &[f32], a: &mut [f32]| {
                    pol.act_deterministic(obs, a)
                })
            };
            (evaluate_probe(&mut ep, &cond, seed, &mut make), *steps)
        };
        rows.push(row(p, def, &outcome, steps));
        fresh += 1;
    }
    results::write_probes(&r.dir, &rows)?;
    Ok(fresh)
}

/// The final policy of a finished run and its training steps, refusing a checkpoint of another configuration.
fn final_policy(r: &RunSpec) -> Result<(crate::learn::Policy, u64), StudyError> {
    let path = r.dir.join(results::CHECKPOINT_FILE);
    let ck = crate::learn::checkpoint::load(&path)
        .map_err(|e| StudyError::Run(format!("{}: {e}", path.display())))?;
    if let Some(t) = &ck.sidecar.trained_for {
        if t.config_hash != r.config_hash {
            return Err(StudyError::Run(format!(
                "{}: the checkpoint was trained under config hash {}, the run records {}",
                path.display(),
                t.config_hash,
                r.config_hash
            )));
        }
    }
    Ok((ck.policy, ck.sidecar.env_steps))
}

/// What `termwise probe` did.
#[derive(Clone, Debug, Default)]
pub struct ProbeCommandOutcome {
    /// Runs whose probes.csv was (re)written.
    pub probed: usize,
    /// Probe evaluations made.
    pub evaluations: usize,
    /// Runs already holding every probe row.
    pub current: usize,
    /// Planned runs not finished (not probed; `termwise run` probes them when it finishes them).
    pub unfinished: usize,
    /// Runs another live process holds (left alone).
    pub busy: usize,
}

/// `termwise probe`: evaluate the probes of `experiment` on every finished run in `out` (trained by the same
/// experiment: a run of another configuration is an error), with `jobs` workers, and record the probes in
/// study.json. Nothing is retrained.
pub fn probe_study(
    exp: &Experiment,
    out: &Path,
    jobs: usize,
    stop: &AtomicBool,
) -> Result<ProbeCommandOutcome, StudyError> {
    let rec = results::read_study(out)?;
    if rec.name != exp.study.name {
        return Err(StudyError::Mismatch(format!(
            "{}: the results there are of study `{}`, the experiment file is `{}`",
            out.display(),
            rec.name,
            exp.study.name
        )));
    }
    let mut outcome = ProbeCommandOutcome::default();
    let mut todo = Vec::new();
    for r in plan_runs(exp, out) {
        if !super::finished(&r, exp)? {
            if r.dir.join(results::RUN_FILE).is_file() || exp.racing.is_none() {
                outcome.unfinished += 1;
            }
            continue;
        }
        if probes_stale(exp, &r)? {
            todo.push(r);
        } else {
            outcome.current += 1;
        }
    }
    if todo.is_empty() && outcome.current == 0 {
        return Err(StudyError::Mismatch(format!(
            "{}: no finished run here to probe (a published study holds only its summary and report; give the \
             folder the study ran in)",
            out.display()
        )));
    }
    super::layout::write_study_json(out, exp)?;
    let next = AtomicUsize::new(0);
    let done = Mutex::new((0usize, 0usize, 0usize));
    let error = Mutex::new(None);
    std::thread::scope(|s| {
        for _ in 0..jobs.max(1).min(todo.len().max(1)) {
            s.spawn(|| loop {
                let i = next.fetch_add(1, Ordering::SeqCst);
                if i >= todo.len() || stop.load(Ordering::SeqCst) {
                    break;
                }
                let r = &todo[i];
                let res = lock::try_lock(&r.dir, status::DEFAULT_STALE_AFTER_S)
                    .map_err(|source| StudyError::Io {
                        path: r.dir.clone(),
                        source,
                    })
                    .and_then(|l| match l {
                        lock::Acquire::Acquired(_held) => probe_run(exp, r).map(Some),
                        lock::Acquire::Busy(_) => Ok(None),
                    });
                let mut d = done.lock().expect("lock");
                match res {
                    Ok(Some(n)) => {
                        d.0 += 1;
                        d.1 += n;
                    }
                    Ok(None) => d.2 += 1,
                    Err(e) => {
                        *error.lock().expect("lock") = Some(e);
                        break;
                    }
                }
            });
        }
    });
    if let Some(e) = error.into_inner().expect("lock") {
        return Err(e);
    }
    let (probed, evaluations, busy) = done.into_inner().expect("lock");
    outcome.probed = probed;
    outcome.evaluations = evaluations;
    outcome.busy = busy;
    Ok(outcome)
}

/// The whole `termwise probe` command on the library side: load the experiment, probe the finished runs in
/// `out`, and say what happened (drawing the report is the command's business).
pub fn cli_probe(
    experiment: &Path,
    out: &Path,
    jobs: usize,
    stop: &AtomicBool,
) -> Result<String, StudyError> {
    let exp = super::experiment::load(experiment)?;
    if exp.probes.is_empty() {
        return Err(StudyError::Config(crate::config::ConfigError {
            origin: experiment.display().to_string(),
            line: None,
            path: "probe".into(),
            message: "the experiment file has no [[probe]] table: add probe conditions to evaluate"
                .into(),
        }));
    }
    if !out.join(results::STUDY_FILE).is_file() {
        return Err(StudyError::Run(format!(
            "{}: no study.json here; give the results folder of a study run with `termwise run`",
            out.display()
        )));
    }
    let o = probe_study(&exp, out, jobs, stop)?;
    let mut text = format!(
        "termwise: {} probe conditions; {} runs probed ({} evaluations), {} already had every probe",
        exp.probes.len(),
        o.probed,
        o.evaluations,
        o.current
    );
    if o.unfinished > 0 {
        text.push_str(&format!(
            "; {} runs are not finished (`termwise run` probes them when it finishes them)",
            o.unfinished
        ));
    }
    if o.busy > 0 {
        text.push_str(&format!("; {} runs are held by another process", o.busy));
    }
    Ok(text)
}
