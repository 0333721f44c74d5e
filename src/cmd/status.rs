//! `termwise status`: how far a study has got, and which cells to run again.

use super::{Failure, Outcome};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct StatusArgs {
    /// Results folder (the one holding study.json).
    pub results_dir: PathBuf,
    /// Seconds without a heartbeat after which a running run counts as stale (dead).
    #[arg(long, default_value_t = crate::study::status::DEFAULT_STALE_AFTER_S)]
    pub stale_after: u64,
}

pub fn run(a: StatusArgs) -> Outcome {
    let text = crate::study::status::cli_status(&a.results_dir, a.stale_after)
        .map_err(Failure::classify)?;
    print!("{text}");
    Ok(ExitCode::SUCCESS)
}
