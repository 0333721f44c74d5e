//! The `termwise` command: parses the command line and calls the library; nothing else lives here.

use clap::{Parser, Subcommand};
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "termwise",
    version,
    about = "Compare reward terms and reset curricula for RL arm controllers on a CPU"
)]
struct Cli {
    /// More log output (-v info, -vv debug).
    #[arg(short, long, action = clap::ArgAction::Count, global = true)]
    verbose: u8,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let _ = cli.verbose;
    match cli.command {}
}
