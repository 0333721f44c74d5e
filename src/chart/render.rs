//! Drawing one chart twice, as SVG (kept as text for the self-contained report) and PNG, and
//! writing both atomically.

use super::ChartError;
use crate::fsio;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::{Path, PathBuf};

/// A chart that can draw itself on any plotters backend.
pub trait Chart {
    /// File stem, e.g. `learning_curves`.
    fn stem(&self) -> &'static str;
    /// What the chart answers, printed under it in the report (plain text).
    fn caption(&self) -> &'static str;
    /// Pixel size (width, height).
    fn size(&self) -> (u32, u32);
    /// Draw on a white root area of `size()`.
    fn draw<DB: DrawingBackend>(&self, root: &DrawingArea<DB, Shift>) -> Result<(), ChartError>;
}

/// Files written for one chart.
#[derive(Debug, Clone, PartialEq)]
pub struct ChartFiles {
    /// File stem.
    pub stem: String,
    /// The SVG file.
    pub svg: PathBuf,
    /// The PNG file.
    pub png: PathBuf,
    /// The SVG text (inlined in report.html).
    pub svg_text: String,
    /// The chart's caption (`Chart::caption`).
    pub caption: String,
}

/// Render `chart` into `charts_dir/<stem>.svg` and `.png`.
pub fn render<C: Chart>(chart: &C, charts_dir: &Path) -> Result<ChartFiles, ChartError> {
    crate::fonts::register();
    let stem = chart.stem();
    let size = chart.size();
    let mut svg_text = String::new();
    {
        let root = SVGBackend::with_string(&mut svg_text, size).into_drawing_area();
        root.fill(&WHITE).map_err(super::style::draw_err(stem))?;
        chart.draw(&root)?;
        root.present().map_err(super::style::draw_err(stem))?;
    }
    let svg = charts_dir.join(format!("{stem}.svg"));
    fsio::write_atomic(&svg, svg_text.as_bytes()).map_err(|source| ChartError::Io {
        path: svg.clone(),
        source,
    })?;

    // The bitmap backend encodes by file extension, so the temporary sibling keeps ".png" at the end;
    // rename makes the final file appear atomically, as fsio::write_atomic does.
    let png = charts_dir.join(format!("{stem}.png"));
    let tmp = charts_dir.join(format!(".{stem}.tmp-{}.png", std::process::id()));
    {
        let root = BitMapBackend::new(&tmp, size).into_drawing_area();
        root.fill(&WHITE).map_err(super::style::draw_err(stem))?;
        chart.draw(&root)?;
        root.present().map_err(super::style::draw_err(stem))?;
    }
    std::fs::rename(&tmp, &png).map_err(|source| {
        let _ = std::fs::remove_file(&tmp);
        ChartError::Io {
            path: png.clone(),
            source,
        }
    })?;
    Ok(ChartFiles {
        stem: stem.to_string(),
        svg,
        png,
        svg_text,
        caption: chart.caption().to_string(),
    })
}
