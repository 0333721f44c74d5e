//! The look shared by every termwise chart: colours that differ in lightness as well as hue (so they
//! survive greyscale printing and common colour-vision deficiencies), a dash pattern and marker
//! shape per variant as a second cue, fonts, number formats and the legend strip drawn outside the
//! plotting area so it never covers data.

use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};

use super::ChartError;

/// Body text colour.
pub const INK: RGBColor = RGBColor(38, 38, 46);
/// Light grid and frame colour.
pub const RULE: RGBColor = RGBColor(222, 222, 228);
/// Muted text colour.
pub const MUTED: RGBColor = RGBColor(110, 110, 122);
/// Warning accent (flags).
pub const ALERT: RGBColor = RGBColor(176, 52, 40);
/// Font family of every label.
pub const FONT: &str = "sans-serif";

/// Variant colours, chosen for termwise. Neighbouring entries alternate dark and light and change hue
/// along the blue-orange axis, which stays distinct for red-green colour-blind readers; the
/// lightness steps keep them apart in greyscale.
const VARIANT_RGB: [(u8, u8, u8); 10] = [
    (24, 60, 120),   // ink blue, dark
    (232, 150, 44),  // amber, light
    (32, 134, 122),  // sea green, mid
    (150, 60, 140),  // plum, mid-dark
    (120, 190, 230), // pale sky, light
    (160, 84, 30),   // rust, mid-dark
    (48, 48, 54),    // graphite, darkest
    (214, 200, 80),  // straw, very light
    (100, 110, 30),  // olive, mid-dark
    (200, 110, 150), // rose, mid-light
];

/// Colour of variant `i` (cycles after ten).
pub fn variant_colour(i: usize) -> RGBColor {
    let (r, g, b) = VARIANT_RGB[i % VARIANT_RGB.len()];
    RGBColor(r, g, b)
}

/// Dash pattern of variant `i`: None = solid, Some((dash, gap)) in pixels. Cycles every four, offset
/// against the colour cycle so colour + dash pairs repeat only after twenty variants.
pub fn variant_dash(i: usize) -> Option<(u32, u32)> {
    match (i / 10 + i) % 4 {
        0 => None,
        1 => Some((10, 5)),
        2 => Some((3, 4)),
        _ => Some((14, 4)),
    }
}

/// Marker shapes, one per variant (cycling).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// Filled circle.
    Circle,
    /// Filled triangle.
    Triangle,
    /// Filled square.
    Square,
    /// Cross.
    Cross,
    /// Hollow circle.
    Ring,
}

/// Marker of variant `i`.
pub fn variant_marker(i: usize) -> Marker {
    [
        Marker::Circle,
        Marker::Triangle,
        Marker::Square,
        Marker::Cross,
        Marker::Ring,
    ][i % 5]
}

/// Term colours for the reward-term chart (their own set, so terms are not confused with
/// variants): a dark-to-light sequence of distinct hues.
pub fn term_colour(i: usize) -> RGBColor {
    const T: [(u8, u8, u8); 8] = [
        (20, 40, 70),
        (210, 120, 30),
        (40, 150, 160),
        (130, 40, 90),
        (150, 200, 120),
        (100, 100, 100),
        (230, 190, 110),
        (90, 120, 200),
    ];
    let (r, g, b) = T[i % T.len()];
    RGBColor(r, g, b)
}

/// Text style helper.
pub fn text(size: u32, colour: RGBColor) -> TextStyle<'static> {
    (FONT, size).into_font().color(&colour)
}

/// Text anchored at a point.
pub fn anchored(size: u32, colour: RGBColor, h: HPos, v: VPos) -> TextStyle<'static> {
    text(size, colour).pos(Pos::new(h, v))
}

/// Map any drawing error into a `ChartError` naming the chart.
pub fn draw_err<E: std::fmt::Display>(chart: &'static str) -> impl Fn(E) -> ChartError {
    move |e| ChartError::Draw {
        chart,
        message: e.to_string(),
    }
}

/// Draw a polyline in the variant's style (solid or dashed) on a 2-D f64 chart.
pub fn styled_line<DB: DrawingBackend>(
    chart: &mut ChartContext<
        '_,
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    points: &[(f64, f64)],
    style: ShapeStyle,
    dash: Option<(u32, u32)>,
    name: &'static str,
) -> Result<(), ChartError> {
    if points.len() < 2 {
        return Ok(());
    }
    match dash {
        None => chart
            .draw_series(LineSeries::new(points.iter().copied(), style))
            .map(|_| ())
            .map_err(draw_err(name)),
        Some((d, g)) => chart
            .draw_series(DashedLineSeries::new(points.iter().copied(), d, g, style))
            .map(|_| ())
            .map_err(draw_err(name)),
    }
}

/// Draw markers of the variant's shape at the given points.
pub fn markers<DB: DrawingBackend>(
    chart: &mut ChartContext<
        '_,
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    points: &[(f64, f64)],
    marker: Marker,
    colour: RGBColor,
    size: i32,
    name: &'static str,
) -> Result<(), ChartError> {
    let filled = colour.filled();
    let stroke = colour.stroke_width(2);
    let result = match marker {
        Marker::Circle => chart
            .draw_series(points.iter().map(|&p| Circle::new(p, size, filled)))
            .map(|_| ()),
        Marker::Ring => chart
            .draw_series(points.iter().map(|&p| Circle::new(p, size, stroke)))
            .map(|_| ()),
        Marker::Triangle => chart
            .draw_series(
                points
                    .iter()
                    .map(|&p| TriangleMarker::new(p, size + 1, filled)),
            )
            .map(|_| ()),
        Marker::Cross => chart
            .draw_series(points.iter().map(|&p| Cross::new(p, size, stroke)))
            .map(|_| ()),
        Marker::Square => chart
            .draw_series(points.iter().map(|&p| {
                EmptyElement::at(p) + Rectangle::new([(-size, -size), (size, size)], filled)
            }))
            .map(|_| ()),
    };
    result.map_err(draw_err(name))
}

/// One legend entry.
pub struct LegendEntry {
    /// Label text.
    pub label: String,
    /// Colour.
    pub colour: RGBColor,
    /// Dash pattern (None = solid).
    pub dash: Option<(u32, u32)>,
    /// Marker shape (None = no marker).
    pub marker: Option<Marker>,
}

/// Height in pixels a legend strip needs for these entries at this width.
pub fn legend_height<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[LegendEntry],
    width: u32,
) -> u32 {
    legend_layout(area, entries, width).1
}

fn legend_layout<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[LegendEntry],
    width: u32,
) -> (Vec<(i32, i32)>, u32) {
    let style = text(15, INK);
    let (mut x, mut y) = (12i32, 6i32);
    let row = 26;
    let mut pos = Vec::with_capacity(entries.len());
    for e in entries {
        let tw = area
            .estimate_text_size(&e.label, &style)
            .map(|(w, _)| w as i32)
            .unwrap_or(8 * e.label.len() as i32);
        let w = 44 + tw + 22;
        if x + w > width as i32 && x > 12 {
            x = 12;
            y += row;
        }
        pos.push((x, y));
        x += w;
    }
    (pos, (y + row + 4) as u32)
}

/// Draw a legend strip filling `area` (drawn above or beside the plots, never over them).
pub fn draw_legend<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[LegendEntry],
    name: &'static str,
) -> Result<(), ChartError> {
    let (w, _) = area.dim_in_pixel();
    let (pos, _) = legend_layout(area, entries, w);
    for (e, &(x, y)) in entries.iter().zip(&pos) {
        let cy = y + 10;
        let style = e.colour.stroke_width(3);
        match e.dash {
            None => area
                .draw(&PathElement::new(vec![(x, cy), (x + 36, cy)], style))
                .map_err(draw_err(name))?,
            Some((d, g)) => {
                let mut sx = x;
                while sx < x + 36 {
                    let ex = (sx + d as i32).min(x + 36);
                    area.draw(&PathElement::new(vec![(sx, cy), (ex, cy)], style))
                        .map_err(draw_err(name))?;
                    sx = ex + g as i32;
                }
            }
        }
        if let Some(m) = e.marker {
            let c = (x + 18, cy);
            let filled = e.colour.filled();
            let stroke = e.colour.stroke_width(2);
            match m {
                Marker::Circle => area.draw(&Circle::new(c, 4, filled)),
                Marker::Ring => area.draw(&Circle::new(c, 4, stroke)),
                Marker::Triangle => area.draw(&TriangleMarker::new(c, 5, filled)),
                Marker::Cross => area.draw(&Cross::new(c, 4, stroke)),
                Marker::Square => area.draw(&Rectangle::new(
                    [(c.0 - 4, c.1 - 4), (c.0 + 4, c.1 + 4)],
                    filled,
                )),
            }
            .map_err(draw_err(name))?;
        }
        area.draw(&Text::new(
            e.label.clone(),
            (x + 44, cy),
            anchored(15, INK, HPos::Left, VPos::Center),
        ))
        .map_err(draw_err(name))?;
    }
    Ok(())
}

/// A title line and an optional subtitle at the top of `area`; returns the height used.
pub fn draw_title<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    title: &str,
    subtitle: &str,
    name: &'static str,
) -> Result<u32, ChartError> {
    area.draw(&Text::new(title.to_string(), (14, 10), text(22, INK)))
        .map_err(draw_err(name))?;
    if subtitle.is_empty() {
        return Ok(42);
    }
    area.draw(&Text::new(subtitle.to_string(), (14, 40), text(15, MUTED)))
        .map_err(draw_err(name))?;
    Ok(66)
}

/// Env steps as a short label: 950, 12.3k, 1.25M.
pub fn fmt_steps(x: f64) -> String {
    let a = x.abs();
    if !x.is_finite() {
        "n/a".into()
    } else if a >= 1e6 {
        format!("{}M", trim(x / 1e6, 2))
    } else if a >= 1e3 {
        format!("{}k", trim(x / 1e3, 1))
    } else {
        format!("{}", x.round())
    }
}

fn trim(x: f64, digits: usize) -> String {
    let s = format!("{x:.digits$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

/// A number with at most three significant decimals and no trailing zeros, for labels and ticks:
/// 14, 0.9, 0.875, 0.001, 2.5e-5.
pub fn fmt_num(x: f64) -> String {
    if !x.is_finite() {
        return "n/a".into();
    }
    let a = x.abs();
    if a < 5e-13 {
        "0".into()
    } else if a >= 1000.0 {
        format!("{x:.0}")
    } else if a >= 10.0 {
        trim(x, 1)
    } else if a >= 0.001 {
        trim(x, 3)
    } else {
        format!("{x:.1e}")
    }
}

/// Blend a colour toward white by `t` in [0, 1] (for bands and faint lines without alpha).
pub fn lighten(c: RGBColor, t: f64) -> RGBColor {
    let f = |v: u8| (v as f64 + (255.0 - v as f64) * t).round() as u8;
    RGBColor(f(c.0), f(c.1), f(c.2))
}

/// The house axes of a chart against environment steps: no light grid, a ruled bold grid, muted axes,
/// step labels on x (12.3k), numbers on y; tick labels `label_px` high, the axis titles one pixel larger.
pub fn steps_axes<DB: DrawingBackend>(
    chart: &mut ChartContext<
        '_,
        DB,
        Cartesian2d<plotters::coord::types::RangedCoordf64, plotters::coord::types::RangedCoordf64>,
    >,
    y_desc: &str,
    label_px: u32,
    name: &'static str,
) -> Result<(), ChartError> {
    chart
        .configure_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(RULE)
        .axis_style(MUTED)
        .x_desc("environment steps")
        .y_desc(y_desc)
        .x_label_formatter(&|x| fmt_steps(*x))
        .y_label_formatter(&|y| fmt_num(*y))
        .label_style(text(label_px, INK))
        .axis_desc_style(text(label_px + 1, INK))
        .draw()
        .map_err(draw_err(name))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn luminance(c: RGBColor) -> f64 {
        // Rec. 709 luma weights (ITU-R BT.709), the usual greyscale conversion.
        0.2126 * c.0 as f64 + 0.7152 * c.1 as f64 + 0.0722 * c.2 as f64
    }

    #[test]
    fn neighbouring_variant_colours_differ_in_greyscale() {
        // Common practice for greyscale-safe palettes: adjacent series differ in luma by a clear
        // margin (here at least 25 of 255).
        for i in 0..9 {
            let (a, b) = (variant_colour(i), variant_colour(i + 1));
            assert!(
                (luminance(a) - luminance(b)).abs() >= 25.0,
                "{i}: {} vs {}",
                luminance(a),
                luminance(b)
            );
        }
    }

    #[test]
    fn step_labels_are_short() {
        assert_eq!(fmt_steps(950.0), "950");
        assert_eq!(fmt_steps(12_288.0), "12.3k");
        assert_eq!(fmt_steps(40_960.0), "41k");
        assert_eq!(fmt_steps(1_250_000.0), "1.25M");
        assert_eq!(fmt_num(0.9000000001), "0.9");
        assert_eq!(fmt_num(14.0), "14");
        assert_eq!(fmt_num(0.001), "0.001");
        assert_eq!(fmt_num(-2.5e-5), "-2.5e-5");
    }
}
