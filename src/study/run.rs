//! One run of a study (a variant and a seed): build the task environments, train with PPO, evaluate the
//! deterministic policy on the study's fixed episodes every `eval_every` steps, and keep the run's folder
//! (run.json, evaluations.csv, term_contributions.csv, checkpoints) current on disk after every evaluation.

use super::experiment::{fnv1a_hex, Experiment, VariantKind, VariantSpec};
use super::layout::{self, RunRecord, RunStatus};
use super::task::{begin_eval, run_episode, Episode, EvalSummary, RunShared, TaskEnv};
use super::StudyError;
use crate::learn::checkpoint::TrainedFor;
use crate::learn::{Environment, LearnError, NoObserver, Policy, Trainer};
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

/// The plan: every (variant, seed), variant-major.
pub fn plan_runs(exp: &Experiment, out: &Path) -> Vec<RunSpec> {
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
                dir: out.join(&v.name).join(format!("seed-{seed}")),
                config_hash: config_hash(exp, v, seed),
            });
        }
    }
    runs
}

/// Identifies everything that determines a run's results.
pub fn config_hash(exp: &Experiment, v: &VariantSpec, seed: u64) -> String {
    let st = &exp.study;
    let settings = format!(
        "{}|{}|{}|{}|{}|{}",
        st.budget,
        exp.eval_every(),
        st.eval_episodes,
        st.eval_seed,
        seed,
        env!("CARGO_PKG_VERSION")
    );
    fnv1a_hex(&[
        st.name.as_bytes(),
        v.name.as_bytes(),
        v.merged.as_bytes(),
        settings.as_bytes(),
    ])
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

/// The observation a variant's policy sees: its length and a description of its layout.
pub fn observation_layout(v: &VariantSpec) -> (usize, String) {
    let ep = Episode::new(
        v.scenario.clone(),
        &v.reward,
        &v.plan,
        v.learner.gamma,
        &v.observation,
    );
    let (sim, all) = (ep.sim.obs_dim(), ep.obs_dim());
    let n = v.scenario.n();
    let mut path = if v.observation.waypoints {
        format!(" + {} waypoints x 2", v.plan.waypoints)
    } else {
        " (observation.waypoints = false)".into()
    };
    if v.observation.joint_waypoints {
        path += &format!(" + {} joint waypoints x {n}", v.plan.waypoints);
    }
    if v.observation.clearance {
        path += &format!(" + link clearances and their gradient ({})", 2 * n);
    }
    (
        all,
        format!("{all} values: {n}-joint arm, goal and obstacles ({sim}){path}"),
    )
}

/// The arm a variant's policy drives, as recorded in checkpoints.
pub fn arm_description(v: &VariantSpec) -> String {
    let sc = &v.scenario;
    let lengths: Vec<String> = sc
        .arm
        .links
        .iter()
        .map(|l| format!("{}", l.length))
        .collect();
    let control = match sc.control {
        crate::sim::ControlMode::Torque => "torque",
        crate::sim::ControlMode::Acceleration => "acceleration",
    };
    format!(
        "{} joints, link lengths [{}] m, {control} control",
        sc.n(),
        lengths.join(", ")
    )
}

/// What a run's checkpoints are trained for.
pub fn trained_for(exp: &Experiment, v: &VariantSpec, spec: &RunSpec) -> TrainedFor {
    TrainedFor {
        study: exp.study.name.clone(),
        variant: v.name.clone(),
        seed: spec.seed,
        config_hash: spec.config_hash.clone(),
        arm: arm_description(v),
        observation: observation_layout(v).1,
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
    let mut ep = Episode::new(
        v.scenario.clone(),
        &v.reward,
        &v.plan,
        v.learner.gamma,
        &v.observation,
    );
    let mut eps = Vec::with_capacity(exp.study.eval_episodes as usize);
    let mut act = |_: &Episode, obs: &[f32], a: &mut [f32]| policy.act_deterministic(obs, a);
    for j in 0..exp.study.eval_episodes as u64 {
        eps.push(run_episode(&mut ep, exp.study.eval_seed, j, &mut act));
    }
    EvalSummary::from_episodes(&eps)
}

/// Redraws the study's evaluation episodes need under variant `v` (rejected draws, episodes left unsolved).
pub fn eval_redraws(exp: &Experiment, v: &VariantSpec) -> (u64, u64) {
    let mut ep = Episode::new(
        v.scenario.clone(),
        &v.reward,
        &v.plan,
        v.learner.gamma,
        &v.observation,
    );
    let (mut redraws, mut unsolved) = (0, 0);
    for j in 0..exp.study.eval_episodes as u64 {
        let r = begin_eval(&mut ep, exp.study.eval_seed, j);
        redraws += r.redraws as u64;
        unsolved += r.unsolved as u64;
    }
    (redraws, unsolved)
}

/// Evaluate the classical tracking controller on the study's fixed evaluation episodes. The tracker follows
/// each episode's reference path and is re-targeted whenever the episode replans after a scenario event.
pub fn evaluate_baseline(exp: &Experiment, v: &VariantSpec) -> EvalSummary {
    let mut ep = Episode::new(
        v.scenario.clone(),
        &v.reward,
        &v.plan,
        v.learner.gamma,
        &v.observation,
    );
    let mut eps = Vec::with_capacity(exp.study.eval_episodes as usize);
    for j in 0..exp.study.eval_episodes as u64 {
        eps.push(run_episode(
            &mut ep,
            exp.study.eval_seed,
            j,
            &mut baseline_actor(v),
        ));
    }
    EvalSummary::from_episodes(&eps)
}

/// A controller closure driving an `Episode` with the baseline (normalised actions): it plans and follows its
/// own route with its clearance (`control::RouteFollower`), and replans after the episode's scenario events.
pub fn baseline_actor(v: &VariantSpec) -> impl FnMut(&Episode, &[f32], &mut [f32]) {
    let mut follower = crate::control::RouteFollower::new(&v.baseline, &v.plan, &v.scenario);
    let mut seen: Option<(usize, f64)> = None;
    let mut out = vec![0.0; v.scenario.n()];
    move |ep: &Episode, _obs: &[f32], action: &mut [f32]| {
        let n = ep.sim.n();
        let t = ep.sim.time();
        // A new episode (time went back) or a scenario event: plan from here.
        let key = (ep.replans(), t);
        if seen.is_none_or(|(r, t0)| r != key.0 || t < t0) {
            follower.reset();
        }
        seen = Some(key);
        follower.action(&ep.sim, &mut out);
        for i in 0..n {
            action[i] = (out[i] / ep.sim.action_limits()[i]) as f32;
        }
    }
}

/// Build the training environments of a run.
pub fn build_envs(
    v: &VariantSpec,
    rseed: u64,
    shared: &Arc<Mutex<RunShared>>,
) -> Vec<Box<dyn Environment>> {
    (0..v.learner.num_envs)
        .map(|i| {
            let ep = Episode::new(
                v.scenario.clone(),
                &v.reward,
                &v.plan,
                v.learner.gamma,
                &v.observation,
            );
            Box::new(TaskEnv::new(
                ep,
                rseed ^ (i as u64 + 1).wrapping_mul(0x9E37_79B9_7F4A_7C15),
                shared.clone(),
            )) as Box<dyn Environment>
        })
        .collect()
}

/// Execute one run to completion (or interruption / divergence), writing its folder as it goes.
pub fn execute(
    exp: &Experiment,
    spec: &RunSpec,
    stop: &AtomicBool,
    on_progress: &mut dyn FnMut(&RunProgress),
) -> Result<RunStatus, StudyError> {
    let v = &exp.variants[spec.variant];
    let t0 = Instant::now();
    let mut record = RunRecord::new(exp, v, spec);
    layout::clear_run(&spec.dir)?;
    layout::write_run_json(&spec.dir, &record)?;
    let term_names: Vec<String> = v
        .reward
        .term_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let mut rows: Vec<(u64, EvalSummary, f64)> = Vec::new();
    let save_rows = |rows: &[(u64, EvalSummary, f64)]| -> Result<(), StudyError> {
        layout::write_evaluations(&spec.dir, rows)?;
        layout::write_terms(&spec.dir, &term_names, rows)
    };
    if v.kind == VariantKind::Baseline {
        let summary = evaluate_baseline(exp, v);
        rows.push((0, summary, 1.0));
        save_rows(&rows)?;
        record.finish(RunStatus::Done, 0, t0.elapsed().as_secs_f64(), None);
        layout::write_run_json(&spec.dir, &record)?;
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
    let ckpt = spec.dir.join("policy.safetensors");
    let best = spec.dir.join("policy-best.safetensors");
    let budget = exp.study.budget as u64;
    let every = exp.eval_every();
    let meta = trained_for(exp, v, spec);
    let mut best_success = -1.0;
    let level = |sh: &Arc<Mutex<RunShared>>| sh.lock().expect("run state").curriculum.level();
    let mut evaluate = |trainer: &Trainer,
                        rows: &mut Vec<(u64, EvalSummary, f64)>,
                        best_success: &mut f64|
     -> Result<(), StudyError> {
        let s = evaluate_policy(exp, v, trainer.policy());
        let lv = level(&shared);
        on_progress(&RunProgress {
            env_steps: trainer.env_steps(),
            success_rate: s.success_rate,
            level: lv,
        });
        let improved = s.success_rate > *best_success;
        rows.push((trainer.env_steps(), s, lv));
        save_rows(rows)?;
        trainer
            .save_checkpoint_for(&ckpt, Some(&meta))
            .map_err(|e| StudyError::Run(e.to_string()))?;
        if improved {
            *best_success = rows.last().expect("just pushed").1.success_rate;
            trainer
                .save_checkpoint_for(&best, Some(&meta))
                .map_err(|e| StudyError::Run(e.to_string()))?;
        }
        Ok(())
    };
    evaluate(&trainer, &mut rows, &mut best_success)?;
    let mut next_eval = every;
    let mut status = RunStatus::Done;
    let mut message = None;
    while trainer.env_steps() < budget {
        if stop.load(Ordering::SeqCst) {
            status = RunStatus::Interrupted;
            break;
        }
        match trainer.iterate(&mut NoObserver) {
            Ok(_) => {}
            Err(e @ LearnError::Diverged { .. }) => {
                status = RunStatus::Diverged;
                message = Some(e.to_string());
                break;
            }
            Err(e) => return Err(StudyError::Run(format!("{}: {e}", spec.dir.display()))),
        }
        if trainer.env_steps() >= next_eval || trainer.env_steps() >= budget {
            evaluate(&trainer, &mut rows, &mut best_success)?;
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
        layout::write_run_json(&spec.dir, &record)?;
    }
    if status == RunStatus::Interrupted && rows.last().map(|r| r.0) != Some(trainer.env_steps()) {
        // Record where the run stopped (the trainer's weights are the last good ones).
        evaluate(&trainer, &mut rows, &mut best_success)?;
    }
    record.finish(
        status,
        trainer.env_steps(),
        t0.elapsed().as_secs_f64(),
        message,
    );
    layout::write_run_json(&spec.dir, &record)?;
    Ok(status)
}
