//! `termwise curricula`: the reset curricula of the registry, with parameters, defaults and meaning.

use super::Outcome;
use std::process::ExitCode;

pub fn run() -> Outcome {
    print!("{}", crate::curriculum::describe_curricula());
    Ok(ExitCode::SUCCESS)
}
