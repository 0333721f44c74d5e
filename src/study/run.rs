//! One run of a study (a variant and a seed): build the task environments, train with PPO, evaluate the
//! deterministic policy on the study's fixed episodes every `eval_every` steps, and keep the run's folder
//! (run.json, evaluations.csv, term_contributions.csv, training.csv, checkpoints) current on disk after every
//! evaluation, in the results format (`results`).

use super::experiment::{fnv1a_hex, Experiment, VariantKind, VariantSpec};
use super::StudyError;
use crate::learn::checkpoint::TrainedFor;
use crate::learn::{Environment, IterationStats, LearnError, Policy, Trainer};
use crate::results::{self, EvalRow, RunRecord, RunStatus, SpeedRow, TermTable, TrainingRow};
use crate::task::{EvalEpisodes, EvalSummary, RunShared, TaskEnv};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::Instant;

/// One planned run.
#[derive(Clone, Debug)]
pub struct RunSpec {
    /// Position in the plan (the `--cell` index).
    pub index: usize,
    pub variant: usize,
    pub seed: u64,
    pub dir: PathBuf,
    pub config_hash: String,
}

/// The plan: every (variant, seed), variant-major; for a raced study every run racing may need, stage-major
/// (`race::plan`).
pub fn plan_runs(exp: &Experiment, out: &Path) -> Vec<RunSpec> {
    if let Some(race) = &exp.racing {
        return super::race::plan(exp, race, out);
    }
    let mut runs = Vec::new();
    for (vi, v) in exp.variants.iter().enumerate() {
        let seeds = if v.kind == VariantKind::Baseline {
            1
        } else {
            exp.seeds()
        };
        for seed in 0..seeds {
            runs.push(RunSpec {
                index: runs.len(),
                variant: vi,
                seed,
                dir: results::run_dir(out, &v.name, seed),
                config_hash: exp.config_hash(v, seed),
            });
        }
    }
    runs
}

/// The run's random seed, derived from (study name, variant name, seed).
pub fn run_seed(exp: &Experiment, v: &VariantSpec, seed: u64) -> u64 {
    let h = fnv1a_hex(&[
        exp.study.name.as_bytes(),
        v.name.as_bytes(),
        &seed.to_le_bytes(),
    ]);
    u64::from_str_radix(&h, 16).expect("16 hex digits")
}

/// What a run's checkpoints are trained for.
pub fn trained_for(exp: &Experiment, v: &VariantSpec, spec: &RunSpec) -> TrainedFor {
    TrainedFor {
        study: exp.study.name.clone(),
        variant: v.name.clone(),
        seed: spec.seed,
        config_hash: spec.config_hash.clone(),
        arm: v.arm_description(),
        observation: v.observation_layout().1,
    }
}

/// Progress of a run, for the display.
#[derive(Clone, Debug)]
pub struct RunProgress {
    pub env_steps: u64,
    pub success_rate: f64,
    pub level: f64,
}

/// Evaluate a deterministic policy on the study's fixed evaluation episodes.
pub fn evaluate_policy(exp: &Experiment, v: &VariantSpec, policy: &Policy) -> EvalSummary {
    evaluate_policy_on(&mut eval_episodes(exp, v), exp, policy)
}

/// The study's evaluation episodes under variant `v`, their starts kept across evaluations.
pub fn eval_episodes(exp: &Experiment, v: &VariantSpec) -> EvalEpisodes {
    let lanes = v.clone();
    EvalEpisodes::new(v.episode(), exp.study.eval_seed).with_lanes(move || lanes.episode())
}

/// `evaluate_policy` on evaluation episodes whose starts earlier evaluations kept.
pub fn evaluate_policy_on(
    evals: &mut EvalEpisodes,
    exp: &Experiment,
    policy: &Policy,
) -> EvalSummary {
    evals.evaluate_policy(exp.study.eval_episodes as u64, policy)
}

/// Redraws the study's evaluation episodes need under variant `v` (rejected draws, episodes left unsolved).
pub fn eval_redraws(exp: &Experiment, v: &VariantSpec) -> (u64, u64) {
    let episodes = exp.study.eval_episodes as u64;
    crate::task::eval_redraws(&mut v.episode(), exp.study.eval_seed, episodes)
}

/// Evaluate the classical tracking controller on the study's fixed evaluation episodes. The tracker follows
/// each episode's reference path and is re-targeted whenever the episode replans after a scenario event.
pub fn evaluate_baseline(exp: &Experiment, v: &VariantSpec) -> EvalSummary {
    let mut ep = v.episode();
    let eps: Vec<_> = (0..exp.study.eval_episodes as u64)
        .map(|j| {
            // A fresh controller per episode, as replay builds it.
            let mut act = crate::task::baseline_actor(&v.baseline, &v.plan, &v.scenario);
            crate::task::run_episode(&mut ep, exp.study.eval_seed, j, &mut act)
        })
        .collect();
    EvalSummary::from_episodes(&eps)
}

/// Build the training environments of a run.
pub fn build_envs(
    v: &VariantSpec,
    rseed: u64,
    shared: &Arc<Mutex<RunShared>>,
) -> Vec<Box<dyn Environment>> {
    (0..v.learner.num_envs)
        .map(|i| {
            Box::new(TaskEnv::new(
                v.episode(),
                rseed ^ (i as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15),
                shared.clone(),
            )) as Box<dyn Environment>
        })
        .collect()
}

/// What a run has written so far, kept in memory and rewritten whole (atomically) at every evaluation.
struct RunTables {
    evaluations: Vec<EvalRow>,
    terms: TermTable,
    training: Vec<TrainingRow>,
    speed: Vec<SpeedRow>,
}

impl RunTables {
    fn new(term_names: Vec<String>) -> RunTables {
        RunTables {
            evaluations: Vec::new(),
            terms: TermTable {
                names: term_names,
                ..TermTable::default()
            },
            training: Vec::new(),
            speed: Vec::new(),
        }
    }

    fn push_evaluation(&mut self, env_steps: u64, s: &EvalSummary, level: f64) {
        self.evaluations.push(s.row(env_steps, level));
        self.terms.steps.push(env_steps);
        self.terms.values.push(s.terms.clone());
    }

    fn push_iteration(&mut self, st: &IterationStats) {
        self.training.push(training_row(st));
        self.speed.push(SpeedRow {
            iteration: st.iteration,
            env_steps: st.env_steps,
            steps_per_s: st.steps_per_second,
            rollout_s: st.rollout_seconds,
            update_s: st.update_seconds,
        });
    }

    fn save(&self, dir: &Path) -> Result<(), StudyError> {
        results::write_evaluations(dir, &self.evaluations)?;
        results::write_terms(dir, &self.terms)?;
        if !self.training.is_empty() {
            results::write_training(dir, &self.training)?;
            results::write_training_speed(dir, &self.speed)?;
        }
        Ok(())
    }
}

/// The reproducible figures of one PPO iteration, as training.csv holds them.
pub fn training_row(st: &IterationStats) -> TrainingRow {
    TrainingRow {
        iteration: st.iteration,
        env_steps: st.env_steps,
        learning_rate: st.learning_rate,
        policy_loss: st.policy_loss,
        value_loss: st.value_loss,
        entropy: st.entropy,
        approx_kl: st.approx_kl,
        clip_fraction: st.clip_fraction,
        explained_variance: st.explained_variance,
        policy_grad_norm: st.policy_grad_norm,
        value_grad_norm: st.value_grad_norm,
        action_std: st.action_std,
        episodes: st.episodes,
        mean_episode_return: st.mean_episode_return,
    }
}

/// Longest time between two writes of a running run's record (run.json), seconds of wall time.
pub const RECORD_EVERY_S: f64 = 1.0;

/// Execute one run to completion (or interruption / divergence), writing its folder as it goes.
pub fn execute(
    exp: &Experiment,
    spec: &RunSpec,
    stop: &AtomicBool,
    on_progress: &mut dyn FnMut(&RunProgress),
) -> Result<RunStatus, StudyError> {
    let v = &exp.variants[spec.variant];
    let t0 = Instant::now();
    let mut record = RunRecord::new(&exp.study.name, &v.name, spec.seed, &spec.config_hash);
    results::clear_run(&spec.dir)?;
    results::write_run(&spec.dir, &record)?;
    let term_names: Vec<String> = v
        .reward
        .term_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut tables = RunTables::new(term_names);
    if v.kind == VariantKind::Baseline {
        let summary = evaluate_baseline(exp, v);
        tables.push_evaluation(0, &summary, 1.0);
        tables.save(&spec.dir)?;
        record.finish(RunStatus::Done, 0, t0.elapsed().as_secs_f64(), None);
        results::write_run(&spec.dir, &record)?;
        return Ok(RunStatus::Done);
    }
    let mut cfg = v.learner.clone();
    if cfg.lr_decay_steps == 0 {
        cfg.lr_decay_steps = exp.study.budget as u64;
    }
    let rseed = run_seed(exp, v, spec.seed);
    let shared = Arc::new(Mutex::new(RunShared::new(v.curriculum.build())));
    let envs = build_envs(v, rseed, &shared);
    let mut trainer = Trainer::new(cfg, envs, rseed)
        .map_err(|e| StudyError::Run(format!("{}: {e}", spec.dir.display())))?;
    let ckpt = spec.dir.join(results::CHECKPOINT_FILE);
    let best = spec.dir.join(results::BEST_CHECKPOINT_FILE);
    let budget = exp.study.budget as u64;
    let every = exp.eval_every();
    let meta = trained_for(exp, v, spec);
    let mut best_success = -1.0;
    let level = |sh: &Arc<Mutex<RunShared>>| sh.lock().expect("run state").curriculum.level();
    let mut evals = eval_episodes(exp, v);
    let mut evaluate = |trainer: &Trainer,
                        tables: &mut RunTables,
                        best_success: &mut f64|
     -> Result<(), StudyError> {
        let s = evaluate_policy_on(&mut evals, exp, trainer.policy());
        let lv = level(&shared);
        on_progress(&RunProgress {
            env_steps: trainer.env_steps(),
            success_rate: s.success_rate,
            level: lv,
        });
        let improved = s.success_rate > *best_success;
        tables.push_evaluation(trainer.env_steps(), &s, lv);
        tables.save(&spec.dir)?;
        trainer
            .save_checkpoint_for(&ckpt, Some(&meta))
            .map_err(|e| StudyError::Run(e.to_string()))?;
        if improved {
            *best_success = s.success_rate;
            trainer
                .save_checkpoint_for(&best, Some(&meta))
                .map_err(|e| StudyError::Run(e.to_string()))?;
        }
        Ok(())
    };
    evaluate(&trainer, &mut tables, &mut best_success)?;
    let mut next_eval = every;
    let mut status = RunStatus::Done;
    let mut message = None;
    let mut last_record = Instant::now();
    while trainer.env_steps() < budget {
        if stop.load(Ordering::SeqCst) {
            status = RunStatus::Interrupted;
            break;
        }
        // The iteration's figures reach training.csv through the trainer's observer interface.
        let mut seen: Vec<IterationStats> = Vec::with_capacity(1);
        match trainer.iterate(&mut seen) {
            Ok(_) => seen.iter().for_each(|st| tables.push_iteration(st)),
            Err(e @ LearnError::Diverged { .. }) => {
                status = RunStatus::Diverged;
                message = Some(e.to_string());
                break;
            }
            Err(e) => return Err(StudyError::Run(format!("{}: {e}", spec.dir.display()))),
        }
        let evaluated = trainer.env_steps() >= next_eval || trainer.env_steps() >= budget;
        if evaluated {
            evaluate(&trainer, &mut tables, &mut best_success)?;
            while next_eval <= trainer.env_steps() {
                next_eval += every;
            }
        }
        record.heartbeat(trainer.env_steps(), t0.elapsed().as_secs_f64());
        {
            let sh = shared.lock().expect("run state");
            (record.redraws, record.unsolved, record.episodes) =
                (sh.redraws, sh.unsolved, sh.episodes);
        }
        // run.json is synced to disk on every write; once a second is enough for `status` and the locks
        // (their stale limits are minutes), and the last write below always happens.
        if evaluated || last_record.elapsed().as_secs_f64() >= RECORD_EVERY_S {
            results::write_run(&spec.dir, &record)?;
            last_record = Instant::now();
        }
    }
    let last = tables.evaluations.last().map(|r| r.env_steps);
    if status == RunStatus::Interrupted && last != Some(trainer.env_steps()) {
        // Record where the run stopped (the trainer's weights are the last good ones).
        evaluate(&trainer, &mut tables, &mut best_success)?;
    }
    // Iterations after the last evaluation (a diverged run) still reach training.csv.
    tables.save(&spec.dir)?;
    record.finish(
        status,
        trainer.env_steps(),
        t0.elapsed().as_secs_f64(),
        message,
    );
    results::write_run(&spec.dir, &record)?;
    Ok(status)
}
