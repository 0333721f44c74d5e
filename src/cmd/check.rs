//! `termwise check`: validate an experiment file and print its plan with a wall-time estimate.

use super::{cores, parse_jobs, Failure, Outcome};
use crate::study::StudyError;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct CheckArgs {
    /// Experiment TOML file.
    pub experiment: PathBuf,
    /// Worker threads assumed for the estimate, at least 1. Default: the number of cores.
    #[arg(long, value_parser = parse_jobs)]
    pub jobs: Option<usize>,
    /// Skip the calibration (no estimate of wall time).
    #[arg(long)]
    pub no_calibrate: bool,
}

pub fn run(a: CheckArgs) -> Outcome {
    crate::learn::pin_kernel_threads();
    let text = crate::study::experiment::load(&a.experiment)
        .map_err(StudyError::from)
        .and_then(|exp| {
            crate::study::check_text(&exp, a.jobs.unwrap_or_else(cores), !a.no_calibrate)
        })
        .map_err(Failure::classify)?;
    print!("{text}");
    Ok(ExitCode::SUCCESS)
}
