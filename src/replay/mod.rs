//! `replay`: deterministic rollouts of a trained checkpoint or of the classical tracking controller on a study's
//! evaluation episodes, drawn as an animated GIF (and a filmstrip PNG for print), with per-episode trajectory
//! metrics written as CSV.

use crate::learn::Policy;
use crate::sim::{Shape, StepReport};
use crate::study::experiment::{Experiment, VariantSpec};
use crate::study::task::{begin_eval, Episode, EpisodeMetrics};
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
    let mut ep = Episode::new(
        v.scenario.clone(),
        &v.reward,
        &v.plan,
        v.learner.gamma,
        &v.observation,
    );
    let mut baseline = crate::study::run::baseline_actor(v);
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
/// with no contact.
pub fn outcome_label(m: &EpisodeMetrics) -> &'static str {
    match (m.success, m.reached, m.collided) {
        (true, _, _) => "clean success",
        (false, true, _) => "reached the goal, with contact (not a clean success)",
        (false, false, true) => "goal not reached, with contact",
        (false, false, false) => "goal not reached",
    }
}

/// Greedy word wrap of `parts` (joined by two spaces) into lines no wider than `max_px` as
/// measured by `width`; a single part wider than the limit gets a line of its own.
pub fn wrap_parts(parts: &[String], max_px: u32, width: &dyn Fn(&str) -> u32) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    for p in parts {
        match lines.last_mut() {
            Some(l) if width(&format!("{l}  {p}")) <= max_px => {
                l.push_str("  ");
                l.push_str(p);
            }
            _ => lines.push(p.clone()),
        }
    }
    lines
}

/// The caption of frame `k`: variant, time and return, then each reward term's running sum.
pub fn caption_parts(v: &VariantSpec, rec: &Recording, k: usize) -> Vec<String> {
    let f = &rec.frames[k];
    let mut parts = vec![format!(
        "{}   t {:.2} s   return {:.2}",
        v.name, f.report.t, f.ret
    )];
    for (n, s) in rec.term_names.iter().zip(&f.terms) {
        parts.push(format!("{n} {s:.2}"));
    }
    parts
}

/// Caption font size, px.
const CAPTION_PX: u32 = 12;

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
    let (w, _) = area.dim_in_pixel();
    let style = ("sans-serif", CAPTION_PX).into_font();
    let measure = |t: &str| {
        area.estimate_text_size(t, &TextStyle::from(style.clone()))
            .map_or(u32::MAX, |(w, _)| w)
    };
    // The caption is wrapped to the frame's width so it never runs off an edge.
    let lines = if caption {
        wrap_parts(&caption_parts(v, rec, k), w.saturating_sub(16), &measure)
    } else {
        vec![format!("t {:.2} s", f.report.t)]
    };
    let line_h = CAPTION_PX + 4;
    for (i, l) in lines.iter().enumerate() {
        area.draw(&Text::new(
            l.clone(),
            (8, 4 + (i as u32 * line_h) as i32),
            style.color(&RGBColor(40, 44, 52)),
        ))
        .map_err(|e| e.to_string())?;
    }
    let (_, body) = area.split_vertically(8 + lines.len() as u32 * line_h);
    let mut chart = ChartBuilder::on(&body)
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
    // Scale bar in the lower left: a round length near a fifth of the workspace width.
    let bar = scale_bar_length(x1 - x0);
    let (bx, by) = (x0 + 0.04 * (x1 - x0), y0 + 0.05 * (y1 - y0));
    chart
        .draw_series(std::iter::once(PathElement::new(
            vec![(bx, by), (bx + bar, by)],
            ink.stroke_width(2),
        )))
        .map_err(|e| e.to_string())?;
    chart
        .draw_series(std::iter::once(Text::new(
            format!("{bar} m"),
            (bx, by + 0.045 * (y1 - y0)),
            ("sans-serif", 11).into_font().color(&ink),
        )))
        .map_err(|e| e.to_string())?;
    Ok(())
}

/// A round scale-bar length (1, 2 or 5 times a power of ten) no longer than a fifth of `span`, m.
pub fn scale_bar_length(span: f64) -> f64 {
    let target = (span / 5.0).max(1e-9);
    let p = 10f64.powf(target.log10().floor());
    [5.0, 2.0, 1.0]
        .iter()
        .map(|m| m * p)
        .find(|&l| l <= target)
        .unwrap_or(p)
}

/// The filmstrip's header: variant, outcome, and a legend of what the frames show.
fn draw_filmstrip_header<DB: DrawingBackend>(
    area: &DrawingArea<DB, plotters::coord::Shift>,
    v: &VariantSpec,
    rec: &Recording,
) -> Result<(), String>
where
    DB::ErrorType: 'static,
{
    area.fill(&WHITE).map_err(|e| e.to_string())?;
    let ink = RGBColor(40, 44, 52);
    let title = format!(
        "{}: {} ({} steps, {:.2} s), 12 frames evenly spread over the episode",
        v.name,
        outcome_label(&rec.metrics),
        rec.frames.len() - 1,
        rec.frames.last().map_or(0.0, |f| f.report.t)
    );
    area.draw(&Text::new(
        title,
        (10, 8),
        ("sans-serif", 16).into_font().color(&ink),
    ))
    .map_err(|e| e.to_string())?;
    let items: [(&str, RGBColor, bool); 5] = [
        ("arm", ink, false),
        ("obstacles", RGBColor(150, 150, 160), true),
        ("reference path and waypoints", RGBColor(0, 114, 178), false),
        ("goal region", RGBColor(213, 94, 0), false),
        ("effector trail", RGBColor(0, 158, 115), false),
    ];
    let mut x = 10i32;
    let y = 36i32;
    let style = ("sans-serif", 13).into_font();
    for (label, colour, filled) in items {
        if filled {
            area.draw(&Rectangle::new([(x, y), (x + 18, y + 12)], colour.filled()))
                .map_err(|e| e.to_string())?;
        } else {
            area.draw(&PathElement::new(
                vec![(x, y + 6), (x + 18, y + 6)],
                colour.stroke_width(3),
            ))
            .map_err(|e| e.to_string())?;
        }
        area.draw(&Text::new(label, (x + 24, y - 1), style.color(&ink)))
            .map_err(|e| e.to_string())?;
        let w = area
            .estimate_text_size(label, &TextStyle::from(style.clone()))
            .map_or(120, |(w, _)| w) as i32;
        x += 24 + w + 22;
    }
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
        let header = 60u32;
        let root = BitMapBackend::new(&tmp, (cols as u32 * 300, rows as u32 * 320 + header))
            .into_drawing_area();
        let (top, grid) = root.split_vertically(header);
        draw_filmstrip_header(&top, v, rec).map_err(ReplayError::Draw)?;
        let cells = grid.split_evenly((rows, cols));
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

/// Refuse a checkpoint whose policy does not fit the variant it is to drive (observation layout, action
/// size, arm), and warn when it was trained as another variant or under another configuration.
fn check_fit(
    path: &Path,
    ck: &crate::learn::checkpoint::Loaded,
    exp: &Experiment,
    v: &VariantSpec,
    scenario: Option<&Path>,
) -> Result<(), ReplayError> {
    use crate::study::run::{arm_description, config_hash, observation_layout};
    let (obs_dim, layout) = observation_layout(v);
    let arm = arm_description(v);
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
    } else if scenario.is_none() && config_hash(exp, v, t.seed) != t.config_hash {
        tracing::warn!(
            "checkpoint {} was trained under another configuration of variant `{}` (config hash {}, the file now gives {})",
            path.display(),
            t.variant,
            t.config_hash,
            config_hash(exp, v, t.seed)
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
