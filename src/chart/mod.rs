//! `chart`: turns a results folder into what a user decides from — summary.csv, SVG + PNG charts
//! and a self-contained report.html — plus the short ranking printed on the terminal.
//! One type per chart kind, each implementing [`render::Chart`].

pub mod curves;
pub mod grid_curve;
pub mod heatmap;
pub mod html;
pub mod panels;
pub mod probes;
pub mod render;
pub mod style;
pub mod table;
pub mod terminal;
pub mod threshold;
pub mod training;

pub use render::ChartFiles;
pub use terminal::terminal_summary;

use crate::analysis::{load_study, summarize, AnalysisError, AnalysisOptions, StudySummary};
use crate::fsio;
use std::path::{Path, PathBuf};

/// Report settings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ReportOptions {
    /// Statistics settings (bootstrap resamples, seed, confidence; defaults 2000, 0, 0.95).
    pub analysis: AnalysisOptions,
    /// Draw faint per-seed lines in the learning curves (default true).
    pub per_seed_lines: bool,
}

impl Default for ReportOptions {
    fn default() -> Self {
        Self {
            analysis: AnalysisOptions::default(),
            per_seed_lines: true,
        }
    }
}

/// Why the report could not be written.
#[derive(Debug, thiserror::Error)]
pub enum ChartError {
    /// The results folder could not be read.
    #[error(transparent)]
    Analysis(#[from] AnalysisError),
    /// A file could not be written.
    #[error("cannot write {path}")]
    Io {
        /// File.
        path: PathBuf,
        /// Cause.
        #[source]
        source: std::io::Error,
    },
    /// plotters failed while drawing.
    #[error("drawing chart '{chart}' failed: {message}")]
    Draw {
        /// Chart stem.
        chart: &'static str,
        /// plotters' message.
        message: String,
    },
    /// summary.csv could not be encoded.
    #[error("cannot encode summary.csv")]
    Csv(#[from] csv::Error),
}

/// Files written by [`write_report`].
#[derive(Debug, Clone)]
pub struct ReportFiles {
    /// summary.csv.
    pub summary_csv: PathBuf,
    /// report.html.
    pub report_html: PathBuf,
    /// Charts, in report order.
    pub charts: Vec<ChartFiles>,
    /// The summary everything was drawn from (for the terminal ranking).
    pub summary: StudySummary,
}

/// Read the results folder `dir` and write summary.csv, charts/*.svg + *.png and report.html into it.
/// Works on partially finished studies (missing and unfinished runs are counted and shown).
pub fn write_report(dir: &Path, opts: &ReportOptions) -> Result<ReportFiles, ChartError> {
    let results = load_study(dir)?;
    let summary = summarize(&results, &opts.analysis);
    write_report_from(dir, &summary, opts)
}

/// Write every output for an already computed summary.
pub fn write_report_from(
    dir: &Path,
    summary: &StudySummary,
    opts: &ReportOptions,
) -> Result<ReportFiles, ChartError> {
    let charts_dir = dir.join("charts");
    let mut charts = vec![
        render::render(
            &curves::LearningCurves {
                summary,
                per_seed: opts.per_seed_lines,
            },
            &charts_dir,
        )?,
        render::render(&threshold::ThresholdChart { summary }, &charts_dir)?,
        render::render(&panels::TermChart { summary }, &charts_dir)?,
        render::render(&panels::ShapingChart { summary }, &charts_dir)?,
    ];
    for chart in curves::metric_charts(summary, opts.per_seed_lines) {
        charts.push(render::render(&chart, &charts_dir)?);
    }
    if !training::with_training(summary).is_empty() {
        charts.push(render::render(
            &training::TrainingHealthChart { summary },
            &charts_dir,
        )?);
    }
    if let Some(layout) = heatmap::grid_layout(summary) {
        charts.push(render::render(
            &heatmap::GridHeatmap { summary, layout },
            &charts_dir,
        )?);
    }
    if let Some(line) = grid_curve::grid_line(summary) {
        charts.push(render::render(
            &grid_curve::GridCurve { summary, line },
            &charts_dir,
        )?);
    }
    if let Some(probes) = &summary.probes {
        charts.push(render::render(
            &probes::ProbeHeatmap { summary, probes },
            &charts_dir,
        )?);
    }
    let summary_csv = dir.join("summary.csv");
    let bytes = table::summary_csv(summary)?;
    fsio::write_atomic(&summary_csv, &bytes).map_err(|source| ChartError::Io {
        path: summary_csv.clone(),
        source,
    })?;
    let report_html = dir.join("report.html");
    let page = html::report_html(summary, &charts);
    fsio::write_atomic(&report_html, page.as_bytes()).map_err(|source| ChartError::Io {
        path: report_html.clone(),
        source,
    })?;
    tracing::info!(
        dir = %dir.display(),
        charts = charts.len(),
        "report written"
    );
    Ok(ReportFiles {
        summary_csv,
        report_html,
        charts,
        summary: summary.clone(),
    })
}

impl ChartError {
    /// True when the error comes from the results folder's content (missing or malformed files),
    /// i.e. the user gave bad input, rather than from writing the outputs.
    pub fn is_bad_input(&self) -> bool {
        matches!(self, ChartError::Analysis(_))
    }
}
