//! `termwise planners`: the reference-path planners of the registry.

use super::Outcome;
use std::process::ExitCode;

pub fn run() -> Outcome {
    print!("{}", crate::plan::describe_planners());
    Ok(ExitCode::SUCCESS)
}
