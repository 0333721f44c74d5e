//! Drawing a recorded episode: the frame (arm, obstacles, waypoints, goal, caption with each reward term's
//! running sum), the animated GIF and the filmstrip PNG.

use super::*;

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
pub(super) const CAPTION_PX: u32 = 12;

pub(super) fn draw_frame<DB: DrawingBackend>(
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
pub(super) fn draw_filmstrip_header<DB: DrawingBackend>(
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
