//! `termwise report`: redraw summary.csv, the charts and report.html of a results folder from its files.

use super::{Failure, Outcome};
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
}

pub fn run(a: ReportArgs) -> Outcome {
    let mut opts = crate::chart::ReportOptions::default();
    opts.analysis.resamples = a.resamples as usize;
    opts.analysis.seed = a.seed;
    let files = crate::chart::write_report(&a.results_dir, &opts).map_err(Failure::classify)?;
    print!("{}", crate::chart::terminal_summary(&files.summary));
    println!("report: {}", files.report_html.display());
    Ok(ExitCode::SUCCESS)
}
