//! Small-multiple charts with one panel per learned variant: reward-term attribution (which term
//! drives the return, and when) and the shaping check (shaped return against task success, flagging
//! variants whose return rises while success falls).

use super::curves::segments;
use super::render::Chart;
use super::style::*;
use super::ChartError;
use crate::analysis::metric::{RETURN, SUCCESS};
use crate::analysis::{StudySummary, VariantKind};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

const COLS: usize = 3;
const PANEL_H: u32 = 330;

fn learned(s: &StudySummary) -> Vec<usize> {
    s.variants
        .iter()
        .filter(|v| v.info.kind == VariantKind::Learned)
        .map(|v| v.index)
        .collect()
}

fn grid_rows(n: usize) -> usize {
    n.div_ceil(COLS).max(1)
}

/// Reward-term attribution, one panel per learned variant.
pub struct TermChart<'a> {
    /// The study.
    pub summary: &'a StudySummary,
}

impl TermChart<'_> {
    fn term_names(&self) -> Vec<String> {
        let mut names: Vec<String> = Vec::new();
        for v in &self.summary.variants {
            for t in &v.terms {
                if !names.contains(&t.name) {
                    names.push(t.name.clone());
                }
            }
        }
        names
    }
}

impl Chart for TermChart<'_> {
    fn stem(&self) -> &'static str {
        "reward_terms"
    }
    fn caption(&self) -> &'static str {
        "Mean per-episode contribution of each reward term over training. The term with the largest magnitude drives the return; a term that grows while success stays flat is a candidate for being gamed."
    }
    fn size(&self) -> (u32, u32) {
        (
            1400,
            150 + PANEL_H * grid_rows(learned(self.summary).len()) as u32,
        )
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let name = self.stem();
        let names = self.term_names();
        let head = draw_title(
            root,
            "Which reward term drives the return, and when?",
            "Mean per-episode contribution of each term (mean across seeds) against environment steps; same y scale in every panel.",
            name,
        )?;
        let legend: Vec<LegendEntry> = names
            .iter()
            .enumerate()
            .map(|(k, n)| LegendEntry {
                label: n.clone(),
                colour: term_colour(k),
                dash: [None, Some((10, 4)), Some((3, 3))][k % 3],
                marker: None,
            })
            .collect();
        let (w, _) = root.dim_in_pixel();
        let lh = legend_height(root, &legend, w);
        let (_, rest) = root.split_vertically(head);
        let (legend_area, grid) = rest.split_vertically(lh);
        draw_legend(&legend_area, &legend, name)?;
        let which = learned(s);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for &i in &which {
            for t in &s.variants[i].terms {
                for &y in t.mean.iter().filter(|y| y.is_finite()) {
                    lo = lo.min(y);
                    hi = hi.max(y);
                }
            }
        }
        if !lo.is_finite() {
            (lo, hi) = (-1.0, 1.0);
        }
        let pad = ((hi - lo) * 0.06).max(1e-6);
        let (lo, hi) = (lo.min(0.0) - pad, hi.max(0.0) + pad);
        let x_max = s.study.budget_steps.max(1) as f64;
        let cells = grid.split_evenly((grid_rows(which.len()), COLS));
        for (cell, &i) in cells.iter().zip(&which) {
            let v = &s.variants[i];
            let mut chart = ChartBuilder::on(cell)
                .caption(&v.info.name, text(16, INK))
                .margin(10)
                .x_label_area_size(40)
                .y_label_area_size(62)
                .build_cartesian_2d(0.0..x_max, lo..hi)
                .map_err(draw_err(name))?;
            steps_axes(&mut chart, "contribution per episode", 12, name)?;
            chart
                .draw_series(LineSeries::new(
                    vec![(0.0, 0.0), (x_max, 0.0)],
                    MUTED.stroke_width(1),
                ))
                .map_err(draw_err(name))?;
            for t in &v.terms {
                let k = names.iter().position(|n| *n == t.name).unwrap_or(0);
                let pts = t.steps.iter().zip(&t.mean).map(|(&x, &y)| (x as f64, y));
                for seg in segments(pts) {
                    styled_line(
                        &mut chart,
                        &seg,
                        term_colour(k).stroke_width(2),
                        [None, Some((10, 4)), Some((3, 3))][k % 3],
                        name,
                    )?;
                }
            }
            if v.terms.is_empty() {
                let (cx, cy) = chart.backend_coord(&(x_max / 2.0, (lo + hi) / 2.0));
                root.draw(&Text::new(
                    "no term_contributions.csv yet".to_string(),
                    (cx, cy),
                    anchored(14, MUTED, HPos::Center, VPos::Center),
                ))
                .map_err(draw_err(name))?;
            }
        }
        Ok(())
    }
}

/// Shaped return against task success, one panel per learned variant.
pub struct ShapingChart<'a> {
    /// The study.
    pub summary: &'a StudySummary,
}

impl Chart for ShapingChart<'_> {
    fn stem(&self) -> &'static str {
        "shaping_check"
    }
    fn caption(&self) -> &'static str {
        "Shaped return (solid) against task success (dotted, right axis) per variant. Return and success should rise together; a red frame marks a variant whose return kept rising after its success peaked and fell."
    }
    fn size(&self) -> (u32, u32) {
        (
            1400,
            150 + PANEL_H * grid_rows(learned(self.summary).len()) as u32,
        )
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let name = self.stem();
        let head = draw_title(
            root,
            "Does a higher return mean more successes? (reward-gaming check)",
            "Solid: mean return (left axis); dotted grey: success rate (right axis); means across seeds. Red frame: return rose while success fell.",
            name,
        )?;
        let legend = vec![
            LegendEntry {
                label: "mean return (left axis, variant colour)".into(),
                colour: INK,
                dash: None,
                marker: None,
            },
            LegendEntry {
                label: "success rate (right axis)".into(),
                colour: MUTED,
                dash: Some((3, 3)),
                marker: None,
            },
            LegendEntry {
                label: "flagged: return up while success down".into(),
                colour: ALERT,
                dash: None,
                marker: None,
            },
        ];
        let (w, _) = root.dim_in_pixel();
        let lh = legend_height(root, &legend, w);
        let (_, rest) = root.split_vertically(head);
        let (legend_area, grid) = rest.split_vertically(lh);
        draw_legend(&legend_area, &legend, name)?;
        let which = learned(s);
        let x_max = s.study.budget_steps.max(1) as f64;
        let cells = grid.split_evenly((grid_rows(which.len()), COLS));
        for (cell, &i) in cells.iter().zip(&which) {
            let v = &s.variants[i];
            let ret = &v.curves[&RETURN];
            let suc = &v.curves[&SUCCESS];
            let ys: Vec<f64> = ret
                .points
                .iter()
                .map(|p| p.mean.point)
                .filter(|y| y.is_finite())
                .collect();
            let (lo, hi) = ys
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &y| {
                    (a.min(y), b.max(y))
                });
            let (lo, hi) = if lo.is_finite() && hi > lo {
                let p = (hi - lo) * 0.08;
                (lo - p, hi + p)
            } else if lo.is_finite() {
                (lo - 1.0, lo + 1.0)
            } else {
                (0.0, 1.0)
            };
            let title = match &v.gaming {
                Some(_) => format!("{}  — FLAGGED", v.info.name),
                None => v.info.name.clone(),
            };
            let mut chart = ChartBuilder::on(cell)
                .caption(
                    title,
                    text(16, if v.gaming.is_some() { ALERT } else { INK }),
                )
                .margin(10)
                .x_label_area_size(40)
                .y_label_area_size(62)
                .right_y_label_area_size(50)
                .build_cartesian_2d(0.0..x_max, lo..hi)
                .map_err(draw_err(name))?
                .set_secondary_coord(0.0..x_max, 0.0..1.0);
            steps_axes(&mut chart, "mean return", 12, name)?;
            chart
                .configure_secondary_axes()
                .y_desc("success rate")
                .label_style(text(12, MUTED))
                .axis_desc_style(text(13, MUTED))
                .draw()
                .map_err(draw_err(name))?;
            let rpts = ret
                .steps
                .iter()
                .zip(&ret.points)
                .map(|(&x, p)| (x as f64, p.mean.point));
            for seg in segments(rpts) {
                chart
                    .draw_series(LineSeries::new(seg, variant_colour(i).stroke_width(3)))
                    .map_err(draw_err(name))?;
            }
            let spts = suc
                .steps
                .iter()
                .zip(&suc.points)
                .map(|(&x, p)| (x as f64, p.mean.point));
            for seg in segments(spts) {
                chart
                    .draw_secondary_series(DashedLineSeries::new(seg, 3, 3, MUTED.stroke_width(2)))
                    .map_err(draw_err(name))?;
            }
            if let Some(g) = &v.gaming {
                let (x0, y0) = cell.get_base_pixel();
                let (w, h) = cell.dim_in_pixel();
                root.draw(&Rectangle::new(
                    [(x0 + 3, y0 + 3), (x0 + w as i32 - 3, y0 + h as i32 - 3)],
                    ALERT.stroke_width(3),
                ))
                .map_err(draw_err(name))?;
                let px = chart.backend_coord(&(g.peak_step as f64, hi)).0;
                root.draw(&Text::new(
                    format!(
                        "success peaked at {}, then fell {:.2}",
                        fmt_steps(g.peak_step as f64),
                        g.success_drop
                    ),
                    (px, chart.backend_coord(&(0.0, hi)).1 + 6),
                    anchored(13, ALERT, HPos::Center, VPos::Top),
                ))
                .map_err(draw_err(name))?;
            }
        }
        Ok(())
    }
}
