//! `termwise report`: redraw summary.csv, the charts and report.html of a results folder from its files.

use super::{Failure, Outcome};
use crate::results::RunStatus;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct ReportArgs {
    /// Results folder (the one holding study.json).
    pub results_dir: PathBuf,
    /// Bootstrap resamples per confidence interval.
    #[arg(long, default_value_t = 2000, value_parser = clap::value_parser!(u64).range(1..))]
    pub resamples: u64,
    /// Seed of the bootstrap resampling.
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Redraw even a folder that holds a published summary and report but no run folders (the result would
    /// be an empty report).
    #[arg(long)]
    pub overwrite_published: bool,
}

pub fn run(a: ReportArgs) -> Outcome {
    let mut opts = crate::chart::ReportOptions::default();
    opts.analysis.resamples = a.resamples as usize;
    opts.analysis.seed = a.seed;
    let results = crate::analysis::load_study(&a.results_dir)
        .map_err(|e| Failure::classify(crate::chart::ChartError::from(e)))?;
    let no_runs = results
        .variants
        .iter()
        .all(|v| v.runs.iter().all(|r| r.status == RunStatus::Missing));
    let published =
        a.results_dir.join("summary.csv").is_file() || a.results_dir.join("report.html").is_file();
    if no_runs && published && !a.overwrite_published {
        let msg = format!(
            "{} holds a summary and report but no run folders (a published result: per-run folders are not \
             shipped); redrawing would replace them with an empty report. Run the experiment again first \
             (`termwise run FILE --out {}`; the file is recorded in study.json), or pass --overwrite-published",
            a.results_dir.display(),
            a.results_dir.display()
        );
        return Err(Failure::new(std::io::Error::other(msg), true));
    }
    let summary = crate::analysis::summarize(&results, &opts.analysis);
    let files = crate::chart::write_report_from(&a.results_dir, &summary, &opts)
        .map_err(Failure::classify)?;
    print!("{}", crate::chart::terminal_summary(&files.summary));
    println!("report: {}", files.report_html.display());
    Ok(ExitCode::SUCCESS)
}
