//! Pictures of a planning result, for users debugging their scenarios: the workspace with its obstacles,
//! the arm at the start and at the goal configuration, the effector path through the waypoints and,
//! optionally, the search trees — as SVG (and PNG), plus the waypoints as CSV.

use super::space::lerp;
use super::PlanReport;
use crate::sim::{Arm, JointVec, Scenario, Shape, MAX_JOINTS};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::fmt::Write as _;

/// Canvas size, px.
pub const SIZE: (u32, u32) = (820, 860);

const PAPER: RGBColor = RGBColor(250, 248, 243);
const INK: RGBColor = RGBColor(38, 42, 51);
const GRID: RGBColor = RGBColor(226, 222, 212);
const BLOCK: RGBColor = RGBColor(122, 128, 140);
const START_ARM: RGBColor = RGBColor(46, 110, 142);
const GOAL_ARM: RGBColor = RGBColor(196, 104, 52);
const ROUTE: RGBColor = RGBColor(24, 24, 28);
const MARK: RGBColor = RGBColor(170, 40, 90);
const TREE: RGBColor = RGBColor(150, 170, 120);

/// What to draw besides the report.
pub struct Scene<'a> {
    pub scenario: &'a Scenario,
    /// Obstacles at the moment of planning.
    pub obstacles: &'a [Shape],
    pub goal: [f64; 2],
    pub report: &'a PlanReport,
    /// Title line.
    pub title: String,
    /// Draw the search trees' edges (in effector space).
    pub tree: bool,
}

/// A disc as a polygon in data coordinates.
fn disc(c: [f64; 2], r: f64) -> Vec<(f64, f64)> {
    (0..64)
        .map(|k| {
            let a = k as f64 / 64.0 * std::f64::consts::TAU;
            (c[0] + r * a.cos(), c[1] + r * a.sin())
        })
        .collect()
}

/// A capsule outline (two half discs joined) as a polygon.
fn capsule(a: [f64; 2], b: [f64; 2], r: f64) -> Vec<(f64, f64)> {
    let ang = (b[1] - a[1]).atan2(b[0] - a[0]);
    let mut pts = Vec::with_capacity(66);
    for k in 0..=32 {
        let t = ang + std::f64::consts::FRAC_PI_2 + k as f64 / 32.0 * std::f64::consts::PI;
        pts.push((a[0] + r * t.cos(), a[1] + r * t.sin()));
    }
    for k in 0..=32 {
        let t = ang - std::f64::consts::FRAC_PI_2 + k as f64 / 32.0 * std::f64::consts::PI;
        pts.push((b[0] + r * t.cos(), b[1] + r * t.sin()));
    }
    pts
}

/// Effector positions along joint-space segments, `per` samples per segment.
fn effector_curve(arm: &Arm, route: &[JointVec], n: usize, per: usize) -> Vec<(f64, f64)> {
    let mut out = Vec::new();
    for w in route.windows(2) {
        for s in 0..per {
            let q = lerp(&w[0], &w[1], s as f64 / per as f64, n);
            let p = arm.effector(&q[..n]);
            out.push((p[0], p[1]));
        }
    }
    if let Some(last) = route.last() {
        let p = arm.effector(&last[..n]);
        out.push((p[0], p[1]));
    }
    out
}

fn draw_arm<DB: DrawingBackend>(
    chart: &mut ChartContext<
        '_,
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    arm: &Arm,
    q: &JointVec,
    colour: RGBColor,
    label: &str,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
    let m = arm.joint_points(&q[..arm.n()], &mut pts);
    let fill = colour.mix(0.35).filled();
    for i in 0..m - 1 {
        let r = arm.links[i].radius;
        chart.draw_series(std::iter::once(Polygon::new(
            capsule(pts[i], pts[i + 1], r),
            fill,
        )))?;
        chart.draw_series(std::iter::once(PathElement::new(
            {
                let mut c = capsule(pts[i], pts[i + 1], r);
                c.push(c[0]);
                c
            },
            colour.stroke_width(2),
        )))?;
    }
    let joints: Vec<(f64, f64)> = pts[..m].iter().map(|p| (p[0], p[1])).collect();
    let series = chart.draw_series(
        joints
            .iter()
            .map(|&p| Circle::new(p, 4, ShapeStyle::from(&colour).filled())),
    )?;
    let c = colour;
    series
        .label(label)
        .legend(move |(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], c.mix(0.6).filled()));
    Ok(())
}

/// Draw the scene on any plotters backend.
pub fn draw<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    scene: &Scene,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>> {
    crate::fonts::register();
    let sc = scene.scenario;
    let arm = &sc.arm;
    let rep = scene.report;
    let n = rep.n;
    root.fill(&PAPER)?;
    let (lo, hi) = (sc.workspace_min, sc.workspace_max);
    let mut chart = ChartBuilder::on(root)
        .caption(&scene.title, ("sans-serif", 20).into_font().color(&INK))
        .margin(18)
        .x_label_area_size(42)
        .y_label_area_size(52)
        .build_cartesian_2d(lo[0]..hi[0], lo[1]..hi[1])?;
    chart
        .configure_mesh()
        .light_line_style(TRANSPARENT)
        .x_labels(10)
        .y_labels(10)
        .bold_line_style(GRID)
        .axis_style(INK.mix(0.6))
        .label_style(("sans-serif", 13).into_font().color(&INK))
        .x_desc("x (m)")
        .y_desc("y (m)")
        .draw()?;
    // Reach circle (dotted by short dashes).
    let reach = arm.reach();
    let ring = disc([0.0, 0.0], reach);
    for k in (0..ring.len()).step_by(2) {
        let a = ring[k];
        let b = ring[(k + 1) % ring.len()];
        chart.draw_series(std::iter::once(PathElement::new(vec![a, b], INK.mix(0.35))))?;
    }
    // Obstacles.
    let obstacle_series = chart.draw_series(scene.obstacles.iter().map(|s| {
        let outline = match *s {
            Shape::Disc { center, radius } => disc(center, radius),
            Shape::Box { center, half } => vec![
                (center[0] - half[0], center[1] - half[1]),
                (center[0] + half[0], center[1] - half[1]),
                (center[0] + half[0], center[1] + half[1]),
                (center[0] - half[0], center[1] + half[1]),
            ],
        };
        Polygon::new(outline, BLOCK.mix(0.8).filled())
    }))?;
    obstacle_series
        .label("obstacle")
        .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 18, y + 5)], BLOCK.mix(0.8).filled()));
    // Search trees.
    if scene.tree && !rep.tree.is_empty() {
        let s = chart.draw_series(rep.tree.iter().map(|(a, b)| {
            PathElement::new(effector_curve(arm, &[*a, *b], n, 4), TREE.mix(0.55))
        }))?;
        s.label("search tree (effector)")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], TREE));
    }
    // Arms.
    let start = rep.route.first().copied().unwrap_or([0.0; MAX_JOINTS]);
    let end = rep.route.last().copied().unwrap_or(start);
    draw_arm(&mut chart, arm, &start, START_ARM, "arm at start")?;
    draw_arm(&mut chart, arm, &end, GOAL_ARM, "arm at goal configuration")?;
    // Effector path and waypoints.
    let style = if rep.path.fallback {
        MARK.stroke_width(2)
    } else {
        ROUTE.stroke_width(2)
    };
    chart
        .draw_series(std::iter::once(PathElement::new(
            effector_curve(arm, &rep.route, n, 40),
            style,
        )))?
        .label(if rep.path.fallback {
            "fallback path (straight joint line)"
        } else {
            "effector path"
        })
        .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 18, y)], style));
    chart
        .draw_series(rep.path.points.iter().enumerate().map(|(k, p)| {
            EmptyElement::at((p[0], p[1]))
                + Circle::new((0, 0), 6, ShapeStyle::from(&PAPER).filled())
                + Circle::new((0, 0), 6, INK.stroke_width(2))
                + Text::new(
                    format!("{k}"),
                    (8, -16),
                    ("sans-serif", 13).into_font().color(&INK),
                )
        }))?
        .label("waypoints")
        .legend(|(x, y)| Circle::new((x + 9, y), 5, INK.stroke_width(2)));
    // Goal marker: a ring with a cross.
    let g = scene.goal;
    let tol = sc.goal_tolerance;
    chart.draw_series(std::iter::once(PathElement::new(
        {
            let mut r = disc(g, tol);
            r.push(r[0]);
            r
        },
        MARK.stroke_width(2),
    )))?;
    chart
        .draw_series(std::iter::once(
            EmptyElement::at((g[0], g[1]))
                + PathElement::new(vec![(-7, -7), (7, 7)], MARK.stroke_width(2))
                + PathElement::new(vec![(-7, 7), (7, -7)], MARK.stroke_width(2)),
        ))?
        .label("goal (tolerance ring)")
        .legend(|(x, y)| {
            EmptyElement::at((x + 9, y))
                + PathElement::new(vec![(-5, -5), (5, 5)], MARK.stroke_width(2))
                + PathElement::new(vec![(-5, 5), (5, -5)], MARK.stroke_width(2))
        });
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::LowerRight)
        .background_style(PAPER.mix(0.9))
        .border_style(GRID)
        .label_font(("sans-serif", 13).into_font().color(&INK))
        .draw()?;
    root.present()?;
    Ok(())
}

/// The scene as SVG text.
pub fn svg(scene: &Scene) -> Result<String, String> {
    crate::fonts::register();
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, SIZE).into_drawing_area();
        draw(&root, scene).map_err(|e| e.to_string())?;
    }
    Ok(out)
}

/// Render the scene as a PNG file at `path` (written to a temporary sibling, then renamed).
pub fn png(scene: &Scene, path: &std::path::Path) -> Result<(), String> {
    crate::fonts::register();
    let tmp = crate::fsio::temp_sibling(path).with_extension("png");
    {
        let root = BitMapBackend::new(&tmp, SIZE).into_drawing_area();
        draw(&root, scene).map_err(|e| e.to_string())?;
    }
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        e.to_string()
    })
}

/// The waypoints as CSV: header `k,q1..qN,x,y`, one row per waypoint.
pub fn waypoints_csv(report: &PlanReport) -> String {
    let n = report.n;
    let mut s = String::from("k");
    for i in 1..=n {
        let _ = write!(s, ",q{i}");
    }
    s.push_str(",x,y\n");
    for (k, (q, p)) in report
        .path
        .joints
        .iter()
        .zip(&report.path.points)
        .enumerate()
    {
        let _ = write!(s, "{k}");
        for v in &q[..n] {
            let _ = write!(s, ",{v}");
        }
        let _ = writeln!(s, ",{},{}", p[0], p[1]);
    }
    s
}
