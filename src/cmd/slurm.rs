//! `termwise slurm`: batch scripts for a study (a job array of runs plus a report job).

use super::{Failure, Outcome};
use crate::study::slurm::SlurmSpec;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct SlurmArgs {
    /// Experiment TOML file.
    pub experiment: PathBuf,
    /// Results folder shared by all tasks (must be on a file system every node sees).
    /// Default: results/<study name>.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Partition (queue) for the jobs. Default: the cluster's default.
    #[arg(long)]
    pub partition: Option<String>,
    /// Time limit of one run, [D-]HH:MM:SS. Default: 04:00:00.
    #[arg(long)]
    pub time: Option<String>,
    /// Memory of one run (sbatch --mem), e.g. 1500M. Default: 2G.
    #[arg(long)]
    pub mem: Option<String>,
    /// Most runs at once (the %K of the array). Default: all.
    #[arg(long)]
    pub max_parallel: Option<usize>,
    /// Account charged for the jobs. Default: your default account.
    #[arg(long)]
    pub account: Option<String>,
}

pub fn run(a: SlurmArgs) -> Outcome {
    let d = SlurmSpec::default();
    let spec = SlurmSpec {
        partition: a.partition,
        time: a.time.unwrap_or(d.time),
        mem: a.mem.unwrap_or(d.mem),
        max_parallel: a.max_parallel,
        account: a.account,
        report_time: d.report_time,
    };
    let text =
        crate::study::slurm::cli_slurm(&a.experiment, a.out, &spec).map_err(Failure::classify)?;
    println!("{text}");
    Ok(ExitCode::SUCCESS)
}
