//! The `termwise` command: parses the command line and hands it to `termwise::cmd`; nothing else lives here.

use clap::Parser;
use std::process::ExitCode;

fn main() -> ExitCode {
    termwise::cmd::dispatch(termwise::cmd::Cli::parse())
}
