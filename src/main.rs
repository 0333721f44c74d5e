//! The `termwise` command: parses the command line and calls the library; nothing else lives here.

use clap::{Parser, Subcommand};
use std::path::PathBuf;
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
enum Command {
    /// Run an open-loop input sequence through a scenario and write the state trace.
    ///
    /// INPUTS.csv: header `u1,...,uN`, one row per control step (torques in N m for `control = "torque"`,
    /// accelerations in rad/s^2 for `control = "acceleration"`), each held for one control step
    /// (physics.dt * physics.substeps). STATES.csv: header `t,q1..qN,dq1..dqN,ee_x,ee_y,energy,min_clearance`,
    /// a row at t = 0 and one after every control step. Scenario keys: see README.md ("Scenario files").
    Simulate {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Input sequence CSV.
        #[arg(long)]
        inputs: PathBuf,
        /// Where to write the state trace CSV.
        #[arg(long)]
        out: PathBuf,
    },
    /// List the reward terms with their parameters, defaults and meaning (from the term registry).
    ///
    /// Each term is switched on by a `[reward.<name>]` table in the experiment file.
    Terms,
}

fn init_logging(verbose: u8) {
    let level = match verbose {
        0 => tracing::Level::WARN,
        1 => tracing::Level::INFO,
        _ => tracing::Level::DEBUG,
    };
    let _ = tracing_subscriber::fmt()
        .with_max_level(level)
        .with_writer(std::io::stderr)
        .try_init();
}

/// Print an error on one line and map it to an exit code: 2 for bad input, 1 otherwise.
fn fail(e: &dyn std::fmt::Display, bad_input: bool) -> ExitCode {
    eprintln!("termwise: error: {e}");
    ExitCode::from(if bad_input { 2 } else { 1 })
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    init_logging(cli.verbose);
    match cli.command {
        Command::Simulate {
            scenario,
            inputs,
            out,
        } => match termwise::sim::simulate::run_simulate(&scenario, &inputs, &out) {
            Ok(steps) => {
                eprintln!(
                    "termwise: simulated {steps} control steps, wrote {}",
                    out.display()
                );
                ExitCode::SUCCESS
            }
            Err(e) => fail(&e, e.is_bad_input()),
        },
        Command::Terms => {
            print!("{}", termwise::reward::describe_terms());
            ExitCode::SUCCESS
        }
    }
}
