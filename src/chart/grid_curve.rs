//! The curve of a one-key grid (`generate.grid` with a single key, e.g. the waypoint noise level): final clean
//! success and collision rate of each grid variant against the key's value, IQM across seeds with its bootstrap
//! interval, so a study can read how performance degrades as the setting grows.

use super::render::Chart;
use super::style::*;
use super::ChartError;
use crate::analysis::metric::{MetricId, COLLISION, SUCCESS};
use crate::analysis::StudySummary;
use plotters::coord::Shift;
use plotters::prelude::*;

/// The grid key and its variants, ordered by value.
#[derive(Debug, Clone, PartialEq)]
pub struct GridLine {
    pub key: String,
    /// (value, variant index), ascending by value.
    pub points: Vec<(f64, usize)>,
}

/// The one-key grid of a study: at least two variants generated from the same single grid key.
pub fn grid_line(s: &StudySummary) -> Option<GridLine> {
    let one_key = |i: usize| {
        s.variants[i]
            .info
            .grid
            .as_ref()
            .filter(|g| g.len() == 1)
            .and_then(|g| g.iter().next().map(|(k, v)| (k.clone(), *v)))
    };
    let key = (0..s.variants.len()).find_map(one_key)?.0;
    let mut points: Vec<(f64, usize)> = (0..s.variants.len())
        .filter_map(|i| one_key(i).filter(|(k, _)| *k == key).map(|(_, v)| (v, i)))
        .collect();
    points.sort_by(|a, b| a.0.total_cmp(&b.0));
    (points.len() >= 2).then_some(GridLine { key, points })
}

/// The two panels of the curve.
pub struct GridCurve<'a> {
    pub summary: &'a StudySummary,
    pub line: GridLine,
}

const PANELS: [(MetricId, &str); 2] = [
    (SUCCESS, "final clean success (higher is better)"),
    (COLLISION, "final collision rate (lower is better)"),
];

impl Chart for GridCurve<'_> {
    fn stem(&self) -> &'static str {
        "grid_curve"
    }
    fn caption(&self) -> &'static str {
        "Variants generated from a grid over one setting: final clean success (left) and collision rate (right) against the setting's value; dot = IQM across seeds, bar = bootstrap confidence interval. Overlapping bars mean the data do not separate the levels."
    }
    fn size(&self) -> (u32, u32) {
        (1300, 560)
    }
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError> {
        let s = self.summary;
        let l = &self.line;
        let name = self.stem();
        // The variants, in the order of their values (a long list names its ends, to fit the line).
        let names: Vec<&str> = l
            .points
            .iter()
            .map(|&(_, i)| s.variants[i].info.name.as_str())
            .collect();
        let listed = if names.join(", ").len() <= 100 {
            names.join(", ")
        } else {
            format!("{} ... {}", names[0], names[names.len() - 1])
        };
        let head = draw_title(
            root,
            &format!("How do the results change with {}?", l.key),
            &format!(
                "Dot: IQM across seeds; bar: {:.0}% bootstrap CI. Variants, left to right: {listed}.",
                s.options.confidence * 100.0
            ),
            name,
        )?;
        let (_, rest) = root.split_vertically(head);
        let halves = rest.split_evenly((1, 2));
        let (x0, x1) = (l.points[0].0, l.points[l.points.len() - 1].0);
        let pad = ((x1 - x0) * 0.06).max(1e-9);
        for (area, (metric, title)) in halves.iter().zip(PANELS) {
            let mut chart = ChartBuilder::on(area)
                .caption(title, text(16, INK))
                .margin(16)
                .x_label_area_size(48)
                .y_label_area_size(64)
                .build_cartesian_2d((x0 - pad)..(x1 + pad), 0.0..1.0)
                .map_err(draw_err(name))?;
            chart
                .configure_mesh()
                .light_line_style(RULE.mix(0.5))
                .bold_line_style(RULE)
                .x_desc(l.key.as_str())
                .y_desc("IQM across seeds")
                .label_style(text(13, MUTED))
                .axis_desc_style(text(14, INK))
                .draw()
                .map_err(draw_err(name))?;
            let est: Vec<(f64, f64, f64, f64)> = l
                .points
                .iter()
                .map(|&(x, i)| {
                    let e = s.variants[i].figure(metric).iqm;
                    (x, e.point, e.lo, e.hi)
                })
                .filter(|p| p.1.is_finite())
                .collect();
            chart
                .draw_series(LineSeries::new(
                    est.iter().map(|p| (p.0, p.1)),
                    variant_colour(0).stroke_width(2),
                ))
                .map_err(draw_err(name))?;
            chart
                .draw_series(
                    est.iter()
                        .filter(|p| p.2.is_finite() && p.3.is_finite())
                        .map(|p| {
                            ErrorBar::new_vertical(
                                p.0,
                                p.2,
                                p.1,
                                p.3,
                                variant_colour(0).stroke_width(2),
                                10,
                            )
                        }),
                )
                .map_err(draw_err(name))?;
            chart
                .draw_series(
                    est.iter()
                        .map(|p| Circle::new((p.0, p.1), 5, variant_colour(0).filled())),
                )
                .map_err(draw_err(name))?;
        }
        Ok(())
    }
}
