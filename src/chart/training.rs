//! The training-health chart: what PPO did in each iteration, one line per learned variant (mean across
//! seeds) in four panels — approximate KL, clip fraction, entropy and explained variance. A user debugging a
//! reward looks here first: a collapsing entropy, a KL far above the rest or a negative explained variance
//! explain a flat learning curve before any reward term does.

use super::curves::segments;
use super::render::Chart;
use super::style::*;
use super::ChartError;
use crate::analysis::training::{TrainingHealth, CLIP_HIGH, KL_HIGH};
use crate::analysis::{StudySummary, VariantSummary};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::fmt::Write as _;

/// The training-health chart of a study (drawn when some variant has training.csv).
pub struct TrainingHealthChart<'a> {
    /// The study.
    pub summary: &'a StudySummary,
}

/// The variants with training tables: (variant index, its health).
pub fn with_training(s: &StudySummary) -> Vec<(usize, &TrainingHealth)> {
    s.variants
        .iter()
        .filter_map(|v| v.training.as_ref().map(|t| (v.index, t)))
        .collect()
}

/// One panel: title, y label, the series of a variant, and a dotted guide line (a warning level).
struct Panel {
    title: &'static str,
    y_desc: &'static str,
    series: fn(&TrainingHealth) -> &[f64],
    guide: Option<f64>,
}

const PANELS: [Panel; 4] = [
    Panel {
        title: "approximate KL per update (dotted: 0.05)",
        y_desc: "approx KL",
        series: |t| &t.approx_kl,
        guide: Some(KL_HIGH),
    },
    Panel {
        title: "clip fraction (dotted: 0.3)",
        y_desc: "fraction clipped",
        series: |t| &t.clip_fraction,
        guide: Some(CLIP_HIGH),
    },
    Panel {
        title: "policy entropy",
        y_desc: "entropy, nats",
        series: |t| &t.entropy,
        guide: None,
    },
    Panel {
        title: "explained variance of the value function (dotted: 0)",
        y_desc: "explained variance",
        series: |t| &t.explained_variance,
        guide: Some(0.0),
    },
];

impl Chart for TrainingHealthChart<'_> {
    fn stem(&self) -> &'static str {
        "training_health"
    }
    fn caption(&self) -> &'static str {
        "What PPO did in each iteration, mean across seeds per variant (from each run's training.csv). Approximate KL and clip fraction say how far each update moved the policy (well above the dotted levels, updates are larger than the clipped objective is meant to allow); entropy is the exploration left; explained variance below 0 means the value function predicts the return worse than a constant, so the advantages are mostly noise."
    }
    fn size(&self) -> (u32, u32) {
        (1400, 900)
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let name = self.stem();
        let which = with_training(s);
        let head = draw_title(
            root,
            "Is PPO healthy?",
            "Per-iteration training figures against environment steps, mean across seeds.",
            name,
        )?;
        let legend: Vec<LegendEntry> = which
            .iter()
            .map(|&(i, _)| LegendEntry {
                label: s.variants[i].info.name.clone(),
                colour: variant_colour(i),
                dash: variant_dash(i),
                marker: None,
            })
            .collect();
        let (w, _) = root.dim_in_pixel();
        let lh = legend_height(root, &legend, w);
        let (_, rest) = root.split_vertically(head);
        let (legend_area, grid) = rest.split_vertically(lh);
        draw_legend(&legend_area, &legend, name)?;
        let x_max = s.study.budget_steps.max(1) as f64;
        for (cell, panel) in grid.split_evenly((2, 2)).iter().zip(&PANELS) {
            let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
            for &(_, t) in &which {
                for &y in (panel.series)(t).iter().filter(|y| y.is_finite()) {
                    lo = lo.min(y);
                    hi = hi.max(y);
                }
            }
            if let Some(g) = panel.guide {
                (lo, hi) = (lo.min(g), hi.max(g));
            }
            if !lo.is_finite() {
                (lo, hi) = (0.0, 1.0);
            }
            let pad = ((hi - lo) * 0.06).max(1e-6);
            let mut chart = ChartBuilder::on(cell)
                .caption(panel.title, text(16, INK))
                .margin(10)
                .x_label_area_size(40)
                .y_label_area_size(62)
                .build_cartesian_2d(0.0..x_max, (lo - pad)..(hi + pad))
                .map_err(draw_err(name))?;
            steps_axes(&mut chart, panel.y_desc, 12, name)?;
            if let Some(g) = panel.guide {
                styled_line(
                    &mut chart,
                    &[(0.0, g), (x_max, g)],
                    MUTED.stroke_width(1),
                    Some((3, 3)),
                    name,
                )?;
            }
            for &(i, t) in &which {
                let pts = t
                    .steps
                    .iter()
                    .zip((panel.series)(t))
                    .map(|(&x, &y)| (x as f64, y));
                for seg in segments(pts) {
                    styled_line(
                        &mut chart,
                        &seg,
                        variant_colour(i).stroke_width(2),
                        variant_dash(i),
                        name,
                    )?;
                }
            }
        }
        Ok(())
    }
}

/// One row per learned variant with a training.csv: the late-training PPO figures and their warnings.
pub fn html_panel(h: &mut String, s: &StudySummary, swatch: fn(&VariantSummary) -> String) {
    let rows: Vec<_> = s
        .variants
        .iter()
        .filter_map(|v| v.training.as_ref().map(|t| (v, t)))
        .collect();
    if rows.is_empty() {
        return;
    }
    h.push_str("<h2>Training health</h2><p>PPO's own figures over the last quarter of the iterations, mean across seeds (each run's training.csv; the chart <i>training_health</i> shows them over training). Look here first when a variant does not learn.</p><table><tr><th>variant</th><th>seeds</th><th>approx KL</th><th>clip fraction</th><th>entropy (nats)</th><th>explained variance</th><th>warnings</th></tr>");
    for (v, t) in rows {
        let [kl, clip, ent, ev] = t.late;
        let warn = if t.warnings.is_empty() {
            "—".to_string()
        } else {
            t.warnings
                .iter()
                .map(|w| super::html::esc(w))
                .collect::<Vec<_>>()
                .join("<br>")
        };
        let _ = write!(
            h,
            "<tr><td>{}</td><td class=num>{}</td><td class=num>{kl:.4}</td><td class=num>{clip:.3}</td><td class=num>{ent:.3}</td><td class=num>{ev:.3}</td><td>{warn}</td></tr>",
            swatch(v),
            t.seeds
        );
    }
    h.push_str("</table>");
}
