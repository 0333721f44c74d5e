//! `termwise probe`: evaluate the finished policies and the controller of a study on the probe conditions of an
//! experiment file, without retraining, then redraw the report; Ctrl-C stops between runs (exit 130).

use super::{cores, parse_jobs, Failure, Outcome, INTERRUPTED};
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::atomic::Ordering;

#[derive(clap::Args)]
pub struct ProbeArgs {
    /// Results folder of the study (the one holding study.json).
    pub results_dir: PathBuf,
    /// The study's experiment file with `[[probe]]` tables (its other settings must be those the runs were
    /// trained with).
    pub experiment: PathBuf,
    /// Worker threads (each probe evaluation is single-threaded), at least 1. Default: the number of cores.
    #[arg(long, value_parser = parse_jobs)]
    pub jobs: Option<usize>,
    /// Skip redrawing the report.
    #[arg(long)]
    pub no_report: bool,
}

/// Why the report after probing could not be drawn.
#[derive(Debug, thiserror::Error)]
#[error("probe failed: drawing the report")]
struct ReportFailed(#[source] crate::chart::ChartError);

pub fn run(a: ProbeArgs) -> Outcome {
    let stop = super::run::stop_flag();
    let mut text = crate::study::probe::cli_probe(
        &a.experiment,
        &a.results_dir,
        a.jobs.unwrap_or_else(cores),
        &stop,
    )
    .map_err(Failure::classify)?;
    let interrupted = stop.load(Ordering::SeqCst);
    if !interrupted && !a.no_report {
        let files =
            crate::chart::write_report(&a.results_dir, &crate::chart::ReportOptions::default())
                .map_err(|e| Failure::new(ReportFailed(e), false))?;
        text.push_str(&format!("\nreport: {}", files.report_html.display()));
    }
    println!("{text}");
    Ok(if interrupted {
        ExitCode::from(INTERRUPTED)
    } else {
        ExitCode::SUCCESS
    })
}
