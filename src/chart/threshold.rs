//! Steps-to-threshold interval plot: per learned variant the IQM with its bootstrap CI, every run as
//! a dot, and runs that never reached the threshold marked as censored at the budget.

use super::render::Chart;
use super::style::*;
use super::ChartError;
use crate::analysis::{StudySummary, Threshold, VariantKind};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

/// The interval plot.
pub struct ThresholdChart<'a> {
    /// The study.
    pub summary: &'a StudySummary,
}

impl ThresholdChart<'_> {
    fn rows(&self) -> Vec<usize> {
        self.summary
            .ranking()
            .into_iter()
            .filter(|&i| self.summary.variants[i].info.kind == VariantKind::Learned)
            .collect()
    }
}

impl Chart for ThresholdChart<'_> {
    fn stem(&self) -> &'static str {
        "steps_to_threshold"
    }
    fn caption(&self) -> &'static str {
        "Steps to reach the success threshold per variant, fastest first: diamond = IQM, bar = confidence interval, dots = single runs, open triangles at the budget = runs that never reached it (censored; their true value is larger than the budget). Overlapping bars mean the data do not separate the variants."
    }
    fn size(&self) -> (u32, u32) {
        (1300, 160 + 52 * self.rows().len().max(1) as u32)
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let name = self.stem();
        let rows = self.rows();
        let head = draw_title(
            root,
            &format!(
                "How many environment steps until {:.0}% clean success (goal reached, no contact)?",
                s.study.success_threshold * 100.0
            ),
            &format!(
                "Diamond: IQM across seeds; bar: {:.0}% bootstrap CI; dots: single runs; open triangles at the budget: censored (never reached). Fastest first.",
                s.options.confidence * 100.0
            ),
            name,
        )?;
        let (_, plot) = root.split_vertically(head);
        let budget = s.study.budget_steps.max(1) as f64;
        let n = rows.len().max(1) as f64;
        let label_w = rows
            .iter()
            .map(|&i| {
                plot.estimate_text_size(&s.variants[i].info.name, &text(15, INK))
                    .map(|(w, _)| w)
                    .unwrap_or(100)
            })
            .max()
            .unwrap_or(100)
            + 24;
        let mut chart = ChartBuilder::on(&plot)
            .margin(14)
            .margin_right(260)
            .x_label_area_size(46)
            .y_label_area_size(label_w)
            .build_cartesian_2d(0.0..budget * 1.04, -0.5..n - 0.5)
            .map_err(draw_err(name))?;
        chart
            .configure_mesh()
            .disable_y_mesh()
            .disable_y_axis()
            .light_line_style(TRANSPARENT)
            .bold_line_style(RULE)
            .axis_style(MUTED)
            .x_desc("environment steps to reach the success threshold")
            .x_label_formatter(&|x| fmt_steps(*x))
            .label_style(text(13, INK))
            .axis_desc_style(text(14, INK))
            .draw()
            .map_err(draw_err(name))?;
        chart
            .draw_series(DashedLineSeries::new(
                vec![(budget, -0.5), (budget, n - 0.5)],
                5,
                5,
                MUTED.stroke_width(1),
            ))
            .map_err(draw_err(name))?;
        for (row, &i) in rows.iter().enumerate() {
            let v = &s.variants[i];
            let y = (rows.len() - 1 - row) as f64;
            let colour = variant_colour(i);
            // Row label in the left margin.
            let (px, py) = chart.backend_coord(&(0.0, y));
            root.draw(&Text::new(
                v.info.name.clone(),
                (px - 12, py),
                anchored(15, INK, HPos::Right, VPos::Center),
            ))
            .map_err(draw_err(name))?;
            // Runs: reached as small filled dots, censored as open triangles at the budget,
            // spread vertically so equal values stay visible.
            let runs: Vec<&Threshold> = v.runs.iter().map(|m| &m.steps_to_threshold).collect();
            let k = runs.len().max(1) as f64;
            for (j, t) in runs.iter().enumerate() {
                let dy = -0.28 + 0.56 * (j as f64 + 0.5) / k;
                match t {
                    Threshold::Reached(x) => {
                        chart
                            .draw_series(std::iter::once(Circle::new(
                                (*x as f64, y + dy),
                                3,
                                lighten(colour, 0.25).filled(),
                            )))
                            .map_err(draw_err(name))?;
                    }
                    Threshold::Censored(x) => {
                        chart
                            .draw_series(std::iter::once(TriangleMarker::new(
                                (*x as f64, y + dy),
                                5,
                                colour.stroke_width(1),
                            )))
                            .map_err(draw_err(name))?;
                    }
                    _ => {}
                }
            }
            let agg = &v.steps_to_threshold;
            if agg.iqm.lo.is_finite() {
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        vec![(agg.iqm.lo, y), (agg.iqm.hi, y)],
                        colour.stroke_width(4),
                    )))
                    .map_err(draw_err(name))?;
            }
            if agg.iqm.point.is_finite() {
                let (cx, cy) = chart.backend_coord(&(agg.iqm.point, y));
                root.draw(&Polygon::new(
                    vec![(cx, cy - 9), (cx + 9, cy), (cx, cy + 9), (cx - 9, cy)],
                    colour.filled(),
                ))
                .map_err(draw_err(name))?;
                root.draw(&PathElement::new(
                    vec![
                        (cx, cy - 9),
                        (cx + 9, cy),
                        (cx, cy + 9),
                        (cx - 9, cy),
                        (cx, cy - 9),
                    ],
                    INK.stroke_width(1),
                ))
                .map_err(draw_err(name))?;
            }
            // Right margin: IQM text and censoring count.
            let (rx, ry) = chart.backend_coord(&(budget * 1.04, y));
            let lb = if agg.lower_bound { "≥" } else { "" };
            let note = format!(
                "{lb}{}  ({} of {} censored{})",
                fmt_steps(agg.iqm.point),
                agg.censored,
                agg.reached + agg.censored,
                if agg.pending > 0 {
                    format!(", {} unfinished", agg.pending)
                } else {
                    String::new()
                }
            );
            root.draw(&Text::new(
                note,
                (rx + 10, ry),
                anchored(13, INK, HPos::Left, VPos::Center),
            ))
            .map_err(draw_err(name))?;
        }
        let (bx, by) = chart.backend_coord(&(budget, n - 0.5));
        root.draw(&Text::new(
            "budget".to_string(),
            (bx, by - 4),
            anchored(12, MUTED, HPos::Center, VPos::Bottom),
        ))
        .map_err(draw_err(name))?;
        Ok(())
    }
}
