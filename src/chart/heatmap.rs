//! Sensitivity heatmaps for variants generated from a grid over two reward weights: IQM
//! steps-to-threshold and IQM final success over the two weights, so the sensitive region shows at
//! a glance. One lightness ramp (light = worse, dark = better) keeps it readable in greyscale.

use super::render::Chart;
use super::style::*;
use super::ChartError;
use crate::analysis::metric::SUCCESS;
use crate::analysis::{StudySummary, VariantSummary};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, VPos};

/// The two grid keys and the variants on the grid.
#[derive(Debug, Clone, PartialEq)]
pub struct GridLayout {
    /// Key on the x axis.
    pub x_key: String,
    /// Key on the y axis.
    pub y_key: String,
    /// Distinct x values, ascending.
    pub xs: Vec<f64>,
    /// Distinct y values, ascending.
    pub ys: Vec<f64>,
    /// (variant index, x position, y position).
    pub cells: Vec<(usize, usize, usize)>,
}

/// Find the two-weight grid, if the study has one (at least two grid variants sharing exactly the
/// same two keys).
pub fn grid_layout(s: &StudySummary) -> Option<GridLayout> {
    let on_grid: Vec<&VariantSummary> = s
        .variants
        .iter()
        .filter(|v| v.info.grid.as_ref().is_some_and(|g| g.len() == 2))
        .collect();
    let first = on_grid.first()?.info.grid.as_ref()?;
    let keys: Vec<String> = first.keys().cloned().collect();
    let members: Vec<&VariantSummary> = on_grid
        .into_iter()
        .filter(|v| {
            v.info
                .grid
                .as_ref()
                .is_some_and(|g| g.keys().eq(keys.iter()))
        })
        .collect();
    if members.len() < 2 {
        return None;
    }
    let distinct = |k: &str| {
        let mut v: Vec<f64> = members
            .iter()
            .map(|m| m.info.grid.as_ref().expect("grid")[k])
            .collect();
        v.sort_by(f64::total_cmp);
        v.dedup();
        v
    };
    let (xs, ys) = (distinct(&keys[0]), distinct(&keys[1]));
    let cells = members
        .iter()
        .map(|m| {
            let g = m.info.grid.as_ref().expect("grid");
            let xi = xs.iter().position(|&x| x == g[&keys[0]]).expect("present");
            let yi = ys.iter().position(|&y| y == g[&keys[1]]).expect("present");
            (m.index, xi, yi)
        })
        .collect();
    Some(GridLayout {
        x_key: keys[0].clone(),
        y_key: keys[1].clone(),
        xs,
        ys,
        cells,
    })
}

/// The heatmap pair.
pub struct GridHeatmap<'a> {
    /// The study.
    pub summary: &'a StudySummary,
    /// The grid found by [`grid_layout`].
    pub layout: GridLayout,
}

/// Lightness ramp from pale sand (t = 0, worse) to deep blue (t = 1, better).
pub(super) fn ramp(t: f64) -> RGBColor {
    let stops = [
        (247.0, 241.0, 222.0),
        (122.0, 166.0, 180.0),
        (22.0, 44.0, 92.0),
    ];
    let t = t.clamp(0.0, 1.0) * 2.0;
    let k = (t.floor() as usize).min(1);
    let f = t - k as f64;
    let (a, b) = (stops[k], stops[k + 1]);
    let mix = |p: f64, q: f64| (p + (q - p) * f).round() as u8;
    RGBColor(mix(a.0, b.0), mix(a.1, b.1), mix(a.2, b.2))
}

struct Metric {
    title: &'static str,
    value: fn(&VariantSummary) -> f64,
    label: fn(&VariantSummary) -> String,
    lower_is_better: bool,
}

const METRICS: [Metric; 2] = [
    Metric {
        title: "IQM steps to threshold (fewer = darker = better)",
        value: |v| v.steps_to_threshold.iqm.point,
        label: |v| {
            let lb = if v.steps_to_threshold.lower_bound {
                "≥"
            } else {
                ""
            };
            format!("{lb}{}", fmt_steps(v.steps_to_threshold.iqm.point))
        },
        lower_is_better: true,
    },
    Metric {
        title: "IQM final success (higher = darker = better)",
        value: |v| v.figure(SUCCESS).iqm.point,
        label: |v| fmt_num(v.figure(SUCCESS).iqm.point),
        lower_is_better: false,
    },
];

impl Chart for GridHeatmap<'_> {
    fn stem(&self) -> &'static str {
        "grid_sensitivity"
    }
    fn caption(&self) -> &'static str {
        "Variants generated from a grid over two reward weights: IQM steps to threshold (left) and IQM final success (right). Dark cells are good; a sharp light/dark edge marks the sensitive region."
    }
    fn size(&self) -> (u32, u32) {
        let h = 260 + 90 * self.layout.ys.len().max(2) as u32;
        (1400, h.min(1400))
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let l = &self.layout;
        let name = self.stem();
        let head = draw_title(
            root,
            "Where in the weight grid does learning break down?",
            &format!(
                "Each cell is one variant: x = {}, y = {}. Cell text: value, variant name.",
                l.x_key, l.y_key
            ),
            name,
        )?;
        let (_, rest) = root.split_vertically(head);
        let halves = rest.split_evenly((1, 2));
        for (area, metric) in halves.iter().zip(&METRICS) {
            let values: Vec<f64> = l
                .cells
                .iter()
                .map(|&(i, _, _)| (metric.value)(&s.variants[i]))
                .filter(|v| v.is_finite())
                .collect();
            let (lo, hi) = values
                .iter()
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &v| {
                    (a.min(v), b.max(v))
                });
            let (nx, ny) = (l.xs.len() as f64, l.ys.len() as f64);
            let mut chart = ChartBuilder::on(area)
                .caption(metric.title, text(16, INK))
                .margin(16)
                .margin_bottom(56)
                .x_label_area_size(58)
                .y_label_area_size(92)
                .build_cartesian_2d(0.0..nx, 0.0..ny)
                .map_err(draw_err(name))?;
            chart
                .configure_mesh()
                .disable_mesh()
                .disable_x_axis()
                .disable_y_axis()
                .draw()
                .map_err(draw_err(name))?;
            for &(i, xi, yi) in &l.cells {
                let v = &s.variants[i];
                let val = (metric.value)(v);
                let t = if !val.is_finite() {
                    None
                } else if hi > lo {
                    let u = (val - lo) / (hi - lo);
                    Some(if metric.lower_is_better { 1.0 - u } else { u })
                } else {
                    Some(0.5)
                };
                let fill = t.map_or(RULE, ramp);
                let (x, y) = (xi as f64, yi as f64);
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(x + 0.02, y + 0.02), (x + 0.98, y + 0.98)],
                        fill.filled(),
                    )))
                    .map_err(draw_err(name))?;
                let ink = if t.is_some_and(|t| t > 0.55) {
                    WHITE
                } else {
                    INK
                };
                let (cx, cy) = chart.backend_coord(&(x + 0.5, y + 0.5));
                let label = if val.is_finite() {
                    (metric.label)(v)
                } else {
                    "no data".into()
                };
                root.draw(&Text::new(
                    label,
                    (cx, cy - 9),
                    anchored(18, ink, HPos::Center, VPos::Center),
                ))
                .map_err(draw_err(name))?;
                root.draw(&Text::new(
                    v.info.name.clone(),
                    (cx, cy + 13),
                    anchored(11, ink, HPos::Center, VPos::Center),
                ))
                .map_err(draw_err(name))?;
            }
            for (k, xv) in l.xs.iter().enumerate() {
                let (px, py) = chart.backend_coord(&(k as f64 + 0.5, 0.0));
                root.draw(&Text::new(
                    fmt_num(*xv),
                    (px, py + 8),
                    anchored(14, INK, HPos::Center, VPos::Top),
                ))
                .map_err(draw_err(name))?;
            }
            for (k, yv) in l.ys.iter().enumerate() {
                let (px, py) = chart.backend_coord(&(0.0, k as f64 + 0.5));
                root.draw(&Text::new(
                    fmt_num(*yv),
                    (px - 8, py),
                    anchored(14, INK, HPos::Right, VPos::Center),
                ))
                .map_err(draw_err(name))?;
            }
            let (bx, by) = chart.backend_coord(&(nx / 2.0, 0.0));
            root.draw(&Text::new(
                l.x_key.clone(),
                (bx, by + 32),
                anchored(14, INK, HPos::Center, VPos::Top),
            ))
            .map_err(draw_err(name))?;
            let (lx, ly) = chart.backend_coord(&(0.0, ny));
            root.draw(&Text::new(
                format!("↑ {}", l.y_key),
                (lx - 88, ly - 14),
                anchored(14, INK, HPos::Left, VPos::Bottom),
            ))
            .map_err(draw_err(name))?;
            // Colour key under the grid.
            let (kx0, ky) = chart.backend_coord(&(0.0, 0.0));
            let ky = ky + 58;
            let kw = 220;
            for p in 0..kw {
                let t = p as f64 / (kw - 1) as f64;
                root.draw(&Rectangle::new(
                    [(kx0 + p, ky), (kx0 + p + 1, ky + 12)],
                    ramp(t).filled(),
                ))
                .map_err(draw_err(name))?;
            }
            let (worse, better) = if metric.lower_is_better {
                (hi, lo)
            } else {
                (lo, hi)
            };
            let fmt = |v: f64| {
                if metric.lower_is_better {
                    fmt_steps(v)
                } else {
                    fmt_num(v)
                }
            };
            root.draw(&Text::new(
                format!("worse {}", fmt(worse)),
                (kx0, ky + 16),
                anchored(12, MUTED, HPos::Left, VPos::Top),
            ))
            .map_err(draw_err(name))?;
            root.draw(&Text::new(
                format!("better {}", fmt(better)),
                (kx0 + kw, ky + 16),
                anchored(12, MUTED, HPos::Right, VPos::Top),
            ))
            .map_err(draw_err(name))?;
        }
        Ok(())
    }
}
