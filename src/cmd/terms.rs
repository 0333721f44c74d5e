//! `termwise terms`: the reward terms of the registry, with parameters, defaults and meaning.

use super::Outcome;
use std::process::ExitCode;

pub fn run() -> Outcome {
    print!("{}", crate::reward::describe_terms());
    Ok(ExitCode::SUCCESS)
}
