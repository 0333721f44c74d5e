//! `replay`: deterministic rollouts of a trained checkpoint or of the classical tracking controller on a study's
//! evaluation episodes, drawn as an animated GIF (and a filmstrip PNG for print), with per-episode trajectory
//! metrics written as CSV.

use crate::learn::Policy;
use crate::sim::{Shape, StepReport};
use crate::study::experiment::{Experiment, VariantSpec};
use crate::study::task::{eval_draw, Episode, EpisodeMetrics};
use plotters::prelude::*;
use std::fmt::Write as _;
use std::path::{Path, PathBuf};

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
    #[error("drawing: {0}")]
    Draw(String),
}

impl ReplayError {
    pub fn is_bad_input(&self) -> bool {
        matches!(self, ReplayError::Config(_) | ReplayError::Bad(_))
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
    let mut ep = Episode::new(
        v.scenario.clone(),
        &v.reward,
        &v.plan,
        v.learner.gamma,
        v.observation.waypoints,
    );
    let (d, mut rng) = eval_draw(&mut ep, eval_seed, j);
    let mut baseline = crate::study::run::baseline_actor(v);
    ep.begin(&d, &mut rng);
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

fn draw_frame<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    v: &VariantSpec,
    rec: &Recording,
    k: usize,
    caption: bool,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    let sc = &v.scenario;
    let f = &rec.frames[k];
    let (x0, x1) = (sc.workspace_min[0], sc.workspace_max[0]);
    let (y0, y1) = (sc.workspace_min[1], sc.workspace_max[1]);
    area.fill(&WHITE).map_err(|e| e.to_string())?;
    let cap = if caption {
        let mut c = format!("t {:.2} s  return {:.2}", f.report.t, f.ret);
        for (n, s) in rec.term_names.iter().zip(&f.terms) {
            let _ = write!(c, "  {n} {s:.2}");
        }
        c
    } else {
        format!("t {:.2} s", f.report.t)
    };
    let mut chart = ChartBuilder::on(area)
        .caption(cap, ("sans-serif", 11))
        .margin(6)
        .build_cartesian_2d(x0..x1, y0..y1)
        .map_err(|e| e.to_string())?;
    let ink = RGBColor(40, 44, 52);
    let obstacle_fill = RGBColor(150, 150, 160);
    let path_col = RGBColor(0, 114, 178);
    let goal_col = RGBColor(213, 94, 0);
    let trail_col = RGBColor(0, 158, 115);
    // Workspace boundary.
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(x0, y0), (x1, y1)],
            ink.stroke_width(1),
        )))
        .map_err(|e| e.to_string())?;
    let circle = |c: [f64; 2], r: f64| -> Vec<(f64, f64)> {
        (0..=40)
            .map(|i| {
                let a = i as f64 / 40.0 * std::f64::consts::TAU;
                (c[0] + r * a.cos(), c[1] + r * a.sin())
            })
            .collect()
    };
    for s in &f.obstacles {
        let pts = match *s {
            Shape::Disc { center, radius } => circle(center, radius),
            Shape::Box { center, half } => vec![
                (center[0] - half[0], center[1] - half[1]),
                (center[0] + half[0], center[1] - half[1]),
                (center[0] + half[0], center[1] + half[1]),
                (center[0] - half[0], center[1] + half[1]),
            ],
        };
        chart
            .draw_series(std::iter::once(Polygon::new(pts, obstacle_fill.filled())))
            .map_err(|e| e.to_string())?;
    }
    // Goal region and reference path with waypoints.
    chart
        .draw_series(std::iter::once(PathElement::new(
            circle(f.report.goal, sc.goal_tolerance),
            goal_col.stroke_width(2),
        )))
        .map_err(|e| e.to_string())?;
    let wp: Vec<(f64, f64)> = f.waypoints.iter().map(|p| (p[0], p[1])).collect();
    chart
        .draw_series(std::iter::once(PathElement::new(
            wp.clone(),
            path_col.stroke_width(1),
        )))
        .map_err(|e| e.to_string())?;
    chart
        .draw_series(wp.iter().map(|p| Circle::new(*p, 3, path_col.filled())))
        .map_err(|e| e.to_string())?;
    // Effector trail.
    let trail: Vec<(f64, f64)> = rec.frames[..=k]
        .iter()
        .map(|fr| (fr.report.ee[0], fr.report.ee[1]))
        .collect();
    chart
        .draw_series(std::iter::once(PathElement::new(
            trail,
            trail_col.stroke_width(2),
        )))
        .map_err(|e| e.to_string())?;
    // The arm.
    let mut pts = [[0.0; 2]; crate::sim::MAX_JOINTS + 1];
    let n = sc.arm.joint_points(&f.report.q, &mut pts);
    let arm: Vec<(f64, f64)> = pts[..n].iter().map(|p| (p[0], p[1])).collect();
    chart
        .draw_series(std::iter::once(PathElement::new(
            arm.clone(),
            ink.stroke_width(6),
        )))
        .map_err(|e| e.to_string())?;
    chart
        .draw_series(arm.iter().map(|p| Circle::new(*p, 4, WHITE.filled())))
        .map_err(|e| e.to_string())?;
    Ok(())
}

/// Write the recording as an animated GIF (every `stride`-th step, real-time frame delay).
pub fn write_gif(path: &Path, v: &VariantSpec, rec: &Recording) -> Result<(), ReplayError> {
    let stride = 2usize;
    let delay = ((v.scenario.control_dt() * stride as f64) * 1000.0)
        .round()
        .max(10.0) as u32;
    crate::fonts::register();
    let tmp = crate::fsio::temp_sibling(path);
    {
        let root = BitMapBackend::gif(&tmp, (560, 600), delay)
            .map_err(|e| ReplayError::Draw(e.to_string()))?
            .into_drawing_area();
        let mut k = 0;
        loop {
            draw_frame(&root, v, rec, k.min(rec.frames.len() - 1), true)
                .map_err(ReplayError::Draw)?;
            root.present()
                .map_err(|e| ReplayError::Draw(e.to_string()))?;
            if k >= rec.frames.len() - 1 {
                break;
            }
            k += stride;
        }
    }
    std::fs::rename(&tmp, path).map_err(|source| ReplayError::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// Write a grid of 12 frames evenly spread over the episode as one PNG.
pub fn write_filmstrip(path: &Path, v: &VariantSpec, rec: &Recording) -> Result<(), ReplayError> {
    let (cols, rows) = (4usize, 3usize);
    crate::fonts::register();
    let tmp = crate::fsio::temp_sibling(path).with_extension("png");
    {
        let root =
            BitMapBackend::new(&tmp, (cols as u32 * 300, rows as u32 * 320)).into_drawing_area();
        let cells = root.split_evenly((rows, cols));
        let last = rec.frames.len() - 1;
        for (i, cell) in cells.iter().enumerate() {
            let k = (i * last) / (cols * rows - 1);
            draw_frame(cell, v, rec, k, false).map_err(ReplayError::Draw)?;
        }
        root.present()
            .map_err(|e| ReplayError::Draw(e.to_string()))?;
    }
    std::fs::rename(&tmp, path).map_err(|source| ReplayError::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// Header of the per-episode metrics CSV.
/// `clean_success` = goal reached with no contact; `reached` = goal reached, contact allowed.
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
            policy = crate::learn::checkpoint::load_policy(p)?;
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
        let s = crate::study::task::EvalSummary::from_episodes(&eps);
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
