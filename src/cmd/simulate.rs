//! `termwise simulate`: an open-loop input sequence through a scenario, written as a state trace.

use super::{Failure, Outcome};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct SimulateArgs {
    /// Scenario TOML file.
    pub scenario: PathBuf,
    /// Input sequence CSV.
    #[arg(long)]
    pub inputs: PathBuf,
    /// Where to write the state trace CSV.
    #[arg(long)]
    pub out: PathBuf,
}

pub fn run(a: SimulateArgs) -> Outcome {
    let steps = crate::sim::simulate::run_simulate(&a.scenario, &a.inputs, &a.out)
        .map_err(Failure::classify)?;
    eprintln!(
        "termwise: simulated {steps} control steps, wrote {}",
        a.out.display()
    );
    Ok(ExitCode::SUCCESS)
}
