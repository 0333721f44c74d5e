//! `replay`: deterministic rollouts of a trained checkpoint or of the classical tracking controller on a
//! study's evaluation episodes, drawn as an animated GIF (and a filmstrip PNG for print), with per-episode
//! trajectory metrics written as CSV.

use crate::learn::Policy;
use crate::sim::{Shape, StepReport};
use crate::study::experiment::{Experiment, VariantSpec};
use crate::task::{begin_eval, Episode, EpisodeMetrics};
use plotters::prelude::*;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

mod draw;
pub use draw::*;

/// Why a replay failed.
#[derive(Debug, thiserror::Error)]
pub enum ReplayError {
    #[error("{0}")]
    Config(#[from] crate::config::ConfigError),
    #[error("{0}")]
    Bad(String),
    #[error("loading checkpoint: {0}")]
    Checkpoint(#[from] crate::learn::LearnError),
    #[error("{path}: {source}")]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    #[error("drawing the replay: {0}")]
    Draw(String),
}

impl ReplayError {
    pub fn is_bad_input(&self) -> bool {
        use crate::learn::LearnError;
        matches!(
            self,
            ReplayError::Config(_)
                | ReplayError::Bad(_)
                | ReplayError::Checkpoint(LearnError::Checkpoint { .. } | LearnError::Io { .. })
        )
    }
}

/// One recorded frame of an episode.
#[derive(Clone, Debug)]
pub struct Frame {
    pub report: StepReport,
    pub obstacles: Vec<Shape>,
    pub waypoints: Vec<[f64; 2]>,
    pub ret: f64,
    pub terms: Vec<f64>,
}

/// A recorded episode.
#[derive(Clone, Debug)]
pub struct Recording {
    pub frames: Vec<Frame>,
    pub metrics: EpisodeMetrics,
    pub term_names: Vec<String>,
}

/// Who acts in a replay.
pub enum Controller<'a> {
    Policy(&'a Policy),
    Baseline,
}

/// Roll out evaluation episode `j` of seed `eval_seed` and record every step.
pub fn record(v: &VariantSpec, controller: &Controller, eval_seed: u64, j: u64) -> Recording {
    let mut ep = v.episode();
    let mut baseline = crate::task::baseline_actor(&v.baseline, &v.plan, &v.scenario);
    begin_eval(&mut ep, eval_seed, j);
    let names: Vec<String> = v
        .reward
        .term_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    let snap = |ep: &Episode, r: StepReport| Frame {
        report: r,
        obstacles: ep.sim.obstacles().to_vec(),
        waypoints: ep.path.points.clone(),
        ret: ep.composer.episode_total(),
        terms: ep.composer.episode_sums().to_vec(),
    };
    let mut frames = vec![snap(&ep, ep.sim.last_report())];
    let mut obs = vec![0f32; ep.obs_dim()];
    let mut action = vec![0f32; ep.act_dim()];
    loop {
        ep.observe(&mut obs);
        match controller {
            Controller::Policy(p) => p.act_deterministic(&obs, &mut action),
            Controller::Baseline => baseline(&ep, &obs, &mut action),
        }
        let (now, _, terminal) = ep.step(&action);
        frames.push(snap(&ep, now));
        if terminal || now.timed_out {
            break;
        }
    }
    Recording {
        frames,
        metrics: ep.metrics(),
        term_names: names,
    }
}

/// How the episode ended, in the words of the report: clean success means the goal was reached
/// `clean_success` = goal reached with no contact; `reached` = goal reached, contact allowed.
/// Header of the per-episode metrics CSV.
pub const EPISODE_HEADER: &str = "episode,clean_success,time_to_goal,return,collided,rms_joint_acc,peak_joint_acc,rms_jerk,path_length,min_clearance,path_deviation,replans,planner_fallbacks,reached";

/// Options of `termwise replay`.
pub struct ReplayArgs {
    pub experiment: PathBuf,
    pub variant: Option<String>,
    pub checkpoint: Option<PathBuf>,
    pub baseline: bool,
    pub scenario: Option<PathBuf>,
    pub seed: Option<u64>,
    pub out: Option<PathBuf>,
    pub filmstrip: Option<PathBuf>,
    pub episodes: Option<usize>,
    pub metrics_out: Option<PathBuf>,
}

/// Find the variant to replay: named, or the first of the experiment.
fn pick_variant(exp: &Experiment, name: &Option<String>) -> Result<VariantSpec, ReplayError> {
    match name {
        None => Ok(exp.variants[0].clone()),
        Some(n) => exp
            .variants
            .iter()
            .find(|v| &v.name == n)
            .cloned()
            .ok_or_else(|| {
                let names: Vec<_> = exp.variants.iter().map(|v| v.name.as_str()).collect();
                ReplayError::Bad(format!(
                    "no variant `{n}` in {}; variants: {}",
                    exp.path.display(),
                    names.join(", ")
                ))
            }),
    }
}

/// Refuse a checkpoint whose policy does not fit the variant it is to drive (observation layout, action
/// size, arm), and warn when it was trained as another variant or under another configuration.
fn check_fit(
    path: &Path,
    ck: &crate::learn::checkpoint::Loaded,
    exp: &Experiment,
    v: &VariantSpec,
    scenario: Option<&Path>,
) -> Result<(), ReplayError> {
    let (obs_dim, layout) = v.observation_layout();
    let arm = v.arm_description();
    let target = format!(
        "variant `{}` of {}{}",
        v.name,
        exp.path.display(),
        scenario
            .map(|s| format!(" on scenario {}", s.display()))
            .unwrap_or_default()
    );
    let side = &ck.sidecar;
    let (trained_obs, trained_arm) = match &side.trained_for {
        Some(t) => (t.observation.clone(), t.arm.clone()),
        None => (
            format!("{} values", side.obs_dim),
            format!("{} joints", side.act_dim),
        ),
    };
    let refuse = |what: &str, theirs: &str, ours: &str| {
        Err(ReplayError::Bad(format!(
            "checkpoint {} was trained for {what} {theirs}, but {target} gives {ours}; replay it with the experiment, variant and scenario it was trained with",
            path.display()
        )))
    };
    if ck.policy.obs_dim() != obs_dim {
        return refuse("observations of", &trained_obs, &layout);
    }
    if ck.policy.act_dim() != v.scenario.n() {
        return refuse(
            "actions of",
            &format!("{} values ({trained_arm})", ck.policy.act_dim()),
            &format!("{} values ({arm})", v.scenario.n()),
        );
    }
    let Some(t) = &side.trained_for else {
        tracing::warn!(
            "checkpoint {} does not record what it was trained for (written by an older termwise); only its sizes were checked",
            path.display()
        );
        return Ok(());
    };
    if t.arm != arm {
        return refuse("an arm with", &t.arm, &format!("an arm with {arm}"));
    }
    if t.observation != layout {
        return refuse("observations of", &t.observation, &layout);
    }
    if t.variant != v.name || t.study != exp.study.name {
        tracing::warn!(
            "checkpoint {} was trained as variant `{}` of study `{}`; replaying it with the settings of {target}",
            path.display(),
            t.variant,
            t.study
        );
    } else if scenario.is_none() && exp.config_hash(v, t.seed) != t.config_hash {
        tracing::warn!(
            "checkpoint {} was trained under another configuration of variant `{}` (config hash {}, the file now gives {})",
            path.display(),
            t.variant,
            t.config_hash,
            exp.config_hash(v, t.seed)
        );
    }
    Ok(())
}

/// Refuse, before any rollout, an output file whose folder does not exist.
fn check_output_folder(flag: &str, path: Option<&Path>) -> Result<(), ReplayError> {
    let Some(path) = path else { return Ok(()) };
    match path.parent().filter(|d| !d.as_os_str().is_empty()) {
        Some(dir) if !dir.is_dir() => Err(ReplayError::Bad(format!(
            "{flag} {}: folder {} does not exist (create it first, e.g. `mkdir -p {}`)",
            path.display(),
            dir.display(),
            dir.display()
        ))),
        _ => Ok(()),
    }
}

/// The whole `termwise replay` command. Returns a one-line summary.
pub fn run_replay(a: &ReplayArgs) -> Result<String, ReplayError> {
    let exp = crate::study::experiment::load(&a.experiment)?;
    let mut v = pick_variant(&exp, &a.variant)?;
    if let Some(s) = &a.scenario {
        v.scenario = std::sync::Arc::new(crate::sim::Scenario::load(s)?);
    }
    let policy;
    let controller = match (&a.checkpoint, a.baseline) {
        (Some(p), false) => {
            let loaded = crate::learn::checkpoint::load(p)?;
            check_fit(p, &loaded, &exp, &v, a.scenario.as_deref())?;
            policy = loaded.policy;
            Controller::Policy(&policy)
        }
        (None, true) => Controller::Baseline,
        _ => {
            return Err(ReplayError::Bad(
                "give exactly one of a CHECKPOINT or --baseline".into(),
            ))
        }
    };
    for (flag, path) in [
        ("--out", &a.out),
        ("--filmstrip", &a.filmstrip),
        ("--metrics-out", &a.metrics_out),
    ] {
        check_output_folder(flag, path.as_deref())?;
    }
    let seed = a.seed.unwrap_or(exp.study.eval_seed);
    let mut said = Vec::new();
    if let Some(out) = &a.out {
        let rec = record(&v, &controller, seed, 0);
        write_gif(out, &v, &rec)?;
        said.push(format!(
            "{} ({} steps, clean success {}, contact {})",
            out.display(),
            rec.frames.len() - 1,
            rec.metrics.success,
            rec.metrics.collided
        ));
        if let Some(fs) = &a.filmstrip {
            write_filmstrip(fs, &v, &rec)?;
            said.push(fs.display().to_string());
        }
    }
    if let Some(n) = a.episodes {
        let most = crate::study::experiment::MAX_EVAL_EPISODES as usize;
        if n == 0 || n > most {
            return Err(ReplayError::Bad(format!(
                "--episodes must be in 1..={most}, got {n}"
            )));
        }
        let mut csv = String::from(EPISODE_HEADER);
        csv.push('\n');
        let mut eps = Vec::new();
        for j in 0..n as u64 {
            let m = record(&v, &controller, seed, j).metrics;
            let _ = writeln!(
                csv,
                "{j},{},{},{},{},{},{},{},{},{},{},{},{},{}",
                m.success as u8,
                m.time_to_goal.unwrap_or(f64::NAN),
                m.ret,
                m.collided as u8,
                m.rms_acc,
                m.peak_acc,
                m.rms_jerk,
                m.path_length,
                m.min_clearance,
                m.path_deviation,
                m.replans,
                m.fallbacks,
                m.reached as u8
            );
            eps.push(m);
        }
        let path = a
            .metrics_out
            .clone()
            .unwrap_or_else(|| PathBuf::from("replay-episodes.csv"));
        crate::fsio::write_atomic(&path, csv.as_bytes()).map_err(|source| ReplayError::Io {
            path: path.clone(),
            source,
        })?;
        let s = crate::task::EvalSummary::from_episodes(&eps);
        said.push(format!(
            "{} ({n} episodes, clean success rate {:.3}, reached rate {:.3}, collision rate {:.3}, mean return {:.3})",
            path.display(),
            s.success_rate,
            s.reached_rate,
            s.collision_rate,
            s.mean_return
        ));
    }
    if said.is_empty() {
        return Err(ReplayError::Bad(
            "nothing to do: give --out FILE.gif and/or --episodes N".into(),
        ));
    }
    Ok(format!("termwise: wrote {}", said.join(", ")))
}

#[cfg(test)]
mod caption_tests {
    use super::*;

    #[test]
    fn captions_wrap_within_the_frame_and_bars_are_round() {
        crate::fonts::register();
        let width = |t: &str| {
            let (w, _) = plotters::style::FontDesc::from(("sans-serif", CAPTION_PX as f64))
                .box_size(t)
                .expect("layout");
            w
        };
        let parts: Vec<String> = [
            "all-terms-along-path   t 3.98 s   return -12.41",
            "goal 0.00",
            "time -0.40",
            "acceleration -1.83",
            "waypoint_distance -2.20",
            "waypoint_progress 1.92",
            "collision -0.35",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect();
        // The GIF is 560 px wide with 8 px margins each side.
        let lines = wrap_parts(&parts, 544, &width);
        assert!(lines.len() >= 2, "{lines:?}");
        for l in &lines {
            assert!(width(l) <= 544, "{l} is {} px", width(l));
        }
        // Nothing is lost by wrapping.
        assert_eq!(lines.join("  "), parts.join("  "));
        // 1-2-5 scale bars no longer than a fifth of the span.
        assert_eq!(scale_bar_length(2.4), 0.2);
        assert_eq!(scale_bar_length(3.0), 0.5);
        assert_eq!(scale_bar_length(10.0), 2.0);
    }
}
