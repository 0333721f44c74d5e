//! Learning curves (success, return, time to goal, RMS joint acceleration side by side) and the
//! curriculum difficulty chart: IQM across seeds per variant with a shaded bootstrap band, optional
//! faint per-seed lines, baselines as flat reference lines.

use super::render::Chart;
use super::style::*;
use super::ChartError;
use crate::analysis::metric::{with_curve, CurveChart, MetricId, OwnChart, Panel, Shown, SUCCESS};
use crate::analysis::{Estimate, StudySummary, VariantKind, VariantSummary};
use plotters::coord::Shift;
use plotters::prelude::*;

/// Panels per row of the learning-curves figure.
const COLS: usize = 3;

/// The panels of the learning-curves figure: the metrics drawn as `CurveChart::Panel`, in list order.
fn learning_panels() -> Vec<(MetricId, &'static Panel)> {
    with_curve()
        .filter_map(|(id, _, c)| match &c.chart {
            CurveChart::Panel(p) => Some((id, p)),
            _ => None,
        })
        .collect()
}

/// Side-by-side learning curves for every variant.
pub struct LearningCurves<'a> {
    /// The study.
    pub summary: &'a StudySummary,
    /// Draw faint per-seed lines.
    pub per_seed: bool,
}

/// One metric's learning curve in a chart of its own (`CurveChart::Own`).
pub struct MetricChart<'a> {
    /// The study.
    pub summary: &'a StudySummary,
    /// The metric.
    pub metric: MetricId,
    /// Its chart.
    pub spec: &'static OwnChart,
    /// Indices of the variants to draw.
    pub variants: Vec<usize>,
    /// Draw faint per-seed lines.
    pub per_seed: bool,
}

/// The charts of the metrics drawn on their own, in list order (a chart no variant qualifies for is left out).
pub fn metric_charts(s: &StudySummary, per_seed: bool) -> Vec<MetricChart<'_>> {
    with_curve()
        .filter_map(|(id, _, c)| match &c.chart {
            CurveChart::Own(spec) => Some((id, spec)),
            _ => None,
        })
        .map(|(metric, spec)| MetricChart {
            summary: s,
            metric,
            spec,
            variants: shown(s, metric, spec.variants),
            per_seed,
        })
        .filter(|c| !c.variants.is_empty())
        .collect()
}

/// The variants a metric's own chart draws.
fn shown(s: &StudySummary, metric: MetricId, which: Shown) -> Vec<usize> {
    match which {
        Shown::All => (0..s.variants.len()).collect(),
        Shown::Curriculum => curriculum_variants(s, metric),
    }
}

/// Learned variants whose curriculum is named (not none/uniform) or whose curve of `metric` (the curriculum
/// level) changes over training.
fn curriculum_variants(s: &StudySummary, metric: MetricId) -> Vec<usize> {
    s.variants
        .iter()
        .filter(|v| v.info.kind == VariantKind::Learned)
        .filter(|v| {
            let named = !matches!(
                v.info.curriculum.as_str(),
                "" | "none" | "uniform" | "fixed"
            );
            let varies = v.curves.get(&metric).is_some_and(|c| {
                c.points
                    .iter()
                    .any(|p| (p.iqm.point - c.points[0].iqm.point).abs() > 1e-9)
            });
            named || varies
        })
        .map(|v| v.index)
        .collect()
}

pub(super) fn variant_legend(s: &StudySummary, which: &[usize]) -> Vec<LegendEntry> {
    which
        .iter()
        .map(|&i| {
            let v = &s.variants[i];
            let base = v.info.kind == VariantKind::Baseline;
            LegendEntry {
                label: if base {
                    format!("{} (baseline, flat)", v.info.name)
                } else {
                    v.info.name.clone()
                },
                colour: variant_colour(i),
                dash: if base { Some((6, 6)) } else { variant_dash(i) },
                marker: (!base).then(|| variant_marker(i)),
            }
        })
        .collect()
}

impl Chart for LearningCurves<'_> {
    fn stem(&self) -> &'static str {
        "learning_curves"
    }
    fn caption(&self) -> &'static str {
        "IQM across seeds per variant with a shaded bootstrap confidence band; faint lines are single seeds; the classical controller is a flat dashed line with a band over its evaluation episodes. Top row, side by side: clean success (goal reached with no contact — read this first: the earlier a curve crosses the dotted threshold, the faster the variant learns), reached rate (contact allowed) and collision rate. A gap between reached and clean success is the share of episodes that got there by touching something. Bottom row: return, time to goal and joint acceleration."
    }
    fn size(&self) -> (u32, u32) {
        // Two rows of three panels; a further row adds its height.
        let rows = learning_panels().len().div_ceil(COLS).max(2) as u32;
        (1800, 1040 + 470 * (rows - 2))
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let name = self.stem();
        let head = draw_title(
            root,
            "How fast does each variant learn, and how well does it move?",
            &format!(
                "Lines: IQM across seeds; bands: {:.0}% stratified bootstrap CI; {}dashed flat lines: baselines. X: environment steps.",
                s.options.confidence * 100.0,
                if self.per_seed { "faint lines: single seeds; " } else { "" }
            ),
            name,
        )?;
        let all: Vec<usize> = (0..s.variants.len()).collect();
        let legend = variant_legend(s, &all);
        let (w, _) = root.dim_in_pixel();
        let lh = legend_height(root, &legend, w);
        let (top, rest) = root.split_vertically(head);
        let _ = top;
        let (legend_area, plots) = rest.split_vertically(lh);
        draw_legend(&legend_area, &legend, name)?;
        let panels = learning_panels();
        let cells = plots.split_evenly((panels.len().div_ceil(COLS).max(2), COLS));
        for (cell, (id, panel)) in cells.iter().zip(&panels) {
            draw_panel(cell, s, *id, panel, &all, self.per_seed, name)?;
        }
        Ok(())
    }
}

impl Chart for MetricChart<'_> {
    fn stem(&self) -> &'static str {
        self.spec.stem
    }
    fn caption(&self) -> &'static str {
        self.spec.caption
    }
    fn size(&self) -> (u32, u32) {
        self.spec.size
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let name = self.stem();
        let head = draw_title(root, self.spec.title, self.spec.subtitle, name)?;
        let legend = variant_legend(s, &self.variants);
        let (w, _) = root.dim_in_pixel();
        let lh = legend_height(root, &legend, w);
        let (_, rest) = root.split_vertically(head);
        let (legend_area, plot) = rest.split_vertically(lh);
        draw_legend(&legend_area, &legend, name)?;
        draw_panel(
            &plot,
            s,
            self.metric,
            &self.spec.panel,
            &self.variants,
            self.per_seed,
            name,
        )
    }
}

/// Split a curve into finite runs of points (gaps where the value is undefined).
pub(super) fn segments(points: impl Iterator<Item = (f64, f64)>) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
    for (x, y) in points {
        if y.is_finite() {
            out.last_mut().expect("non-empty").push((x, y));
        } else if !out.last().expect("non-empty").is_empty() {
            out.push(Vec::new());
        }
    }
    out.retain(|s| !s.is_empty());
    out
}

fn y_range(
    s: &StudySummary,
    metric: MetricId,
    panel: &Panel,
    which: &[usize],
    per_seed: bool,
) -> (f64, f64) {
    if let Some(r) = panel.range {
        return r;
    }
    let value = metric.metric().value;
    let mut lo = f64::INFINITY;
    let mut hi = f64::NEG_INFINITY;
    for &i in which {
        let v = &s.variants[i];
        for p in v.curves.get(&metric).map_or(&[][..], |c| &c.points) {
            for y in [p.iqm.lo, p.iqm.hi, p.iqm.point] {
                if y.is_finite() {
                    lo = lo.min(y);
                    hi = hi.max(y);
                }
            }
        }
        if per_seed {
            for c in &v.seed_curves {
                for r in &c.rows {
                    let y = value(r);
                    if y.is_finite() {
                        lo = lo.min(y);
                        hi = hi.max(y);
                    }
                }
            }
        }
    }
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    let pad = ((hi - lo) * 0.06).max(1e-6 * hi.abs().max(1.0));
    (lo - pad, hi + pad)
}

fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    s: &StudySummary,
    metric: MetricId,
    panel: &Panel,
    which: &[usize],
    per_seed: bool,
    name: &'static str,
) -> Result<(), ChartError> {
    let x_max = s.study.budget_steps.max(1) as f64;
    let (y0, y1) = y_range(s, metric, panel, which, per_seed);
    let value = metric.metric().value;
    let mut chart = ChartBuilder::on(area)
        .caption(panel.title, text(17, INK))
        .margin(14)
        .x_label_area_size(46)
        .y_label_area_size(74)
        .build_cartesian_2d(0.0..x_max, y0..y1)
        .map_err(draw_err(name))?;
    steps_axes(&mut chart, panel.y_label, 13, name)?;
    if metric == SUCCESS {
        let t = s.study.success_threshold;
        chart
            .draw_series(DashedLineSeries::new(
                vec![(0.0, t), (x_max, t)],
                4,
                6,
                MUTED.stroke_width(1),
            ))
            .map_err(draw_err(name))?;
        chart
            .draw_series(std::iter::once(Text::new(
                format!("threshold {t}"),
                (x_max * 0.01, t),
                anchored(
                    12,
                    MUTED,
                    plotters::style::text_anchor::HPos::Left,
                    plotters::style::text_anchor::VPos::Bottom,
                ),
            )))
            .map_err(draw_err(name))?;
    }
    // Faint per-seed lines first, then bands, then the IQM lines on top.
    if per_seed {
        for &i in which {
            let v = &s.variants[i];
            if v.info.kind == VariantKind::Baseline {
                continue;
            }
            let faint = lighten(variant_colour(i), 0.6).stroke_width(1);
            for c in &v.seed_curves {
                let pts = c.rows.iter().map(|r| (r.env_steps as f64, value(r)));
                for seg in segments(pts) {
                    chart
                        .draw_series(LineSeries::new(seg, faint))
                        .map_err(draw_err(name))?;
                }
            }
        }
    }
    for &i in which {
        draw_band(&mut chart, &s.variants[i], metric, x_max, name)?;
    }
    for &i in which {
        draw_centre(&mut chart, &s.variants[i], metric, x_max, name)?;
    }
    Ok(())
}

/// The flat level of a baseline on `metric`: for the rates, the value with its interval over the
/// evaluation episodes (Wilson); otherwise its single evaluation (no interval).
fn baseline_level(v: &VariantSummary, metric: MetricId) -> Option<Estimate> {
    if let Some(e) = v.episode_level.as_ref().and_then(|e| e.rate(metric)) {
        return Some(e);
    }
    v.curves.get(&metric)?.points.first().map(|p| p.iqm)
}

type F64Chart<'a, DB> = ChartContext<
    'a,
    DB,
    Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
>;

fn draw_band<DB: DrawingBackend>(
    chart: &mut F64Chart<'_, DB>,
    v: &VariantSummary,
    metric: MetricId,
    x_max: f64,
    name: &'static str,
) -> Result<(), ChartError> {
    let Some(c) = v.curves.get(&metric) else {
        return Ok(());
    };
    let fill = variant_colour(v.index).mix(0.16).filled();
    if v.info.kind == VariantKind::Baseline {
        if let Some(p) = baseline_level(v, metric).filter(|p| p.lo.is_finite()) {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(0.0, p.lo), (x_max, p.hi)],
                    variant_colour(v.index).mix(0.08).filled(),
                )))
                .map_err(draw_err(name))?;
        }
        return Ok(());
    }
    let pts = c
        .steps
        .iter()
        .zip(&c.points)
        .map(|(&x, p)| (x as f64, p.iqm.lo, p.iqm.hi));
    let mut run: Vec<(f64, f64, f64)> = Vec::new();
    let mut flush = |run: &mut Vec<(f64, f64, f64)>| -> Result<(), ChartError> {
        if run.len() >= 2 {
            let mut poly: Vec<(f64, f64)> = run.iter().map(|&(x, lo, _)| (x, lo)).collect();
            poly.extend(run.iter().rev().map(|&(x, _, hi)| (x, hi)));
            chart
                .draw_series(std::iter::once(Polygon::new(poly, fill)))
                .map_err(draw_err(name))?;
        }
        run.clear();
        Ok(())
    };
    for (x, lo, hi) in pts {
        if lo.is_finite() && hi.is_finite() {
            run.push((x, lo, hi));
        } else {
            flush(&mut run)?;
        }
    }
    flush(&mut run)
}

fn draw_centre<DB: DrawingBackend>(
    chart: &mut F64Chart<'_, DB>,
    v: &VariantSummary,
    metric: MetricId,
    x_max: f64,
    name: &'static str,
) -> Result<(), ChartError> {
    let Some(c) = v.curves.get(&metric) else {
        return Ok(());
    };
    let colour = variant_colour(v.index);
    if v.info.kind == VariantKind::Baseline {
        if let Some(p) = baseline_level(v, metric).filter(|p| p.point.is_finite()) {
            let y = p.point;
            styled_line(
                chart,
                &[(0.0, y), (x_max, y)],
                colour.stroke_width(2),
                Some((6, 6)),
                name,
            )?;
        }
        return Ok(());
    }
    let pts = c
        .steps
        .iter()
        .zip(&c.points)
        .map(|(&x, p)| (x as f64, p.iqm.point));
    for seg in segments(pts) {
        styled_line(
            chart,
            &seg,
            colour.stroke_width(3),
            variant_dash(v.index),
            name,
        )?;
        let every = seg.len().div_ceil(12).max(1);
        let marks: Vec<(f64, f64)> = seg.iter().copied().step_by(every).collect();
        markers(chart, &marks, variant_marker(v.index), colour, 4, name)?;
    }
    Ok(())
}
