//! The probe conditions heat map: one row per variant (the controller last), one column for the training
//! condition and one per probe; a cell's shade is its IQM clean success on the absolute 0-1 scale (light =
//! low, dark = high) and its text the value with the drop from the training condition.

use super::heatmap::ramp;
use super::render::Chart;
use super::style::*;
use super::ChartError;
use crate::analysis::probes::{ProbeCell, ProbeSummary};
use crate::analysis::{StudySummary, VariantKind};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

/// The heat map of a study with probes.
pub struct ProbeHeatmap<'a> {
    pub summary: &'a StudySummary,
    pub probes: &'a ProbeSummary,
}

const LABEL_W: u32 = 230;
const COL_W: u32 = 128;
const ROW_H: u32 = 46;

impl ProbeHeatmap<'_> {
    /// Rows: learned variants in declaration order, then the controllers.
    fn rows(&self) -> Vec<usize> {
        let v = &self.summary.variants;
        let mut rows: Vec<usize> = (0..v.len())
            .filter(|&i| v[i].info.kind == VariantKind::Learned)
            .collect();
        rows.extend((0..v.len()).filter(|&i| v[i].info.kind == VariantKind::Baseline));
        rows
    }
}

fn short(name: &str, most: usize) -> String {
    if name.chars().count() <= most {
        name.to_string()
    } else {
        let s: String = name.chars().take(most - 1).collect();
        format!("{s}…")
    }
}

impl Chart for ProbeHeatmap<'_> {
    fn stem(&self) -> &'static str {
        "probes"
    }
    fn caption(&self) -> &'static str {
        "Clean success of the final policies on the training condition and on each probe condition (IQM across seeds; the controller: its rate over the probe's episodes). Darker is higher on an absolute 0-1 scale; the second line is the change from the training condition of the same policies (IQM across seeds). Light columns are the conditions that break the variants."
    }
    fn size(&self) -> (u32, u32) {
        let cols = self.probes.probes.len() as u32 + 1;
        let rows = self.rows().len() as u32;
        (
            (LABEL_W + 40 + COL_W * cols).clamp(700, 4000),
            (190 + ROW_H * rows).clamp(320, 4000),
        )
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let name = self.stem();
        let head = draw_title(
            root,
            "Which conditions break which variant?",
            "Clean success of the final policies: training condition, then each probe (IQM; change from training below)",
            name,
        )?;
        let top = head as i32 + 44;
        let x0 = LABEL_W as i32;
        let mut cols: Vec<String> = vec!["training".into()];
        cols.extend(self.probes.probes.iter().map(|p| p.name.clone()));
        for (c, label) in cols.iter().enumerate() {
            let cx = x0 + (c as i32) * COL_W as i32 + COL_W as i32 / 2;
            root.draw(&Text::new(
                short(label, 17),
                (cx, top - 10),
                anchored(13, INK, HPos::Center, VPos::Bottom),
            ))
            .map_err(draw_err(name))?;
        }
        for (r, &vi) in self.rows().iter().enumerate() {
            let v = &self.summary.variants[vi];
            let y = top + r as i32 * ROW_H as i32;
            let label = if v.info.kind == VariantKind::Baseline {
                format!("{} (controller)", short(&v.info.name, 20))
            } else {
                short(&v.info.name, 30)
            };
            root.draw(&Text::new(
                label,
                (x0 - 10, y + ROW_H as i32 / 2),
                anchored(13, INK, HPos::Right, VPos::Center),
            ))
            .map_err(draw_err(name))?;
            let mut row: Vec<Option<ProbeCell>> = vec![self.probes.training[vi]];
            row.extend(self.probes.cells[vi].iter().copied());
            for (c, cell) in row.iter().enumerate() {
                let x = x0 + c as i32 * COL_W as i32;
                let value = cell.map(|c| c.success.point).filter(|p| p.is_finite());
                let fill = value.map_or(RULE, ramp);
                root.draw(&Rectangle::new(
                    [(x + 2, y + 2), (x + COL_W as i32 - 2, y + ROW_H as i32 - 2)],
                    fill.filled(),
                ))
                .map_err(draw_err(name))?;
                let ink = if value.is_some_and(|t| t > 0.55) {
                    WHITE
                } else {
                    INK
                };
                let cx = x + COL_W as i32 / 2;
                let (first, second) = match (cell, value) {
                    (Some(cell), Some(p)) => (
                        fmt_num(p),
                        if c == 0 {
                            if cell.runs == 1 {
                                "1 run".to_string()
                            } else {
                                format!("{} runs", cell.runs)
                            }
                        } else if cell.drop.point.is_finite() {
                            format!("{:+.2}", cell.drop.point)
                        } else {
                            String::new()
                        },
                    ),
                    _ => ("no data".to_string(), String::new()),
                };
                root.draw(&Text::new(
                    first,
                    (cx, y + 15),
                    anchored(15, ink, HPos::Center, VPos::Center),
                ))
                .map_err(draw_err(name))?;
                root.draw(&Text::new(
                    second,
                    (cx, y + 32),
                    anchored(11, ink, HPos::Center, VPos::Center),
                ))
                .map_err(draw_err(name))?;
            }
        }
        // Colour key.
        let ky = top + (self.rows().len() as i32) * ROW_H as i32 + 22;
        let kw = 220;
        for p in 0..kw {
            let t = p as f64 / (kw - 1) as f64;
            root.draw(&Rectangle::new(
                [(x0 + p, ky), (x0 + p + 1, ky + 12)],
                ramp(t).filled(),
            ))
            .map_err(draw_err(name))?;
        }
        for (t, h) in [(0.0, HPos::Left), (1.0, HPos::Right)] {
            root.draw(&Text::new(
                format!("clean success {}", fmt_num(t)),
                (x0 + (t * kw as f64) as i32, ky + 16),
                anchored(12, MUTED, h, VPos::Top),
            ))
            .map_err(draw_err(name))?;
        }
        Ok(())
    }
}
