//! `cmd`: one file per subcommand of the `termwise` binary. Each parses nothing itself (clap does that from
//! the `Args` structs here), calls the library, prints what the user reads and maps failures to exit codes
//! (2 bad input, 1 failure, 130 interrupted) through the one error path below, which prints the whole cause
//! chain so the operating system's reason behind an I/O error reaches the user.

pub mod check;
pub mod curricula;
pub mod plan;
pub mod planners;
pub mod probe;
pub mod replay;
pub mod report;
pub mod run;
pub mod simulate;
pub mod slurm;
pub mod status;
pub mod terms;
pub mod waypoint_model;

use crate::error_chain::error_chain_text;
use clap::{Parser, Subcommand};
use std::error::Error;
use std::process::ExitCode;

/// The command line.
#[derive(Parser)]
#[command(
    name = "termwise",
    version,
    about = "Compare reward terms and reset curricula for RL arm controllers on a CPU"
)]
pub struct Cli {
    /// More log output (-v info, -vv debug).
    #[arg(short, long, action = clap::ArgAction::Count, global = true)]
    pub verbose: u8,
    #[command(subcommand)]
    pub command: Command,
}

/// The subcommands; each variant's arguments and behaviour live in the file of the same name.
#[derive(Subcommand)]
pub enum Command {
    /// Run an open-loop input sequence through a scenario and write the state trace.
    ///
    /// INPUTS.csv: header `u1,...,uN`, one row per control step (torques in N m for `control = "torque"`,
    /// accelerations in rad/s^2 for `control = "acceleration"`), each held for one control step
    /// (physics.dt * physics.substeps). STATES.csv: header `t,q1..qN,dq1..dqN,ee_x,ee_y,energy,min_clearance`,
    /// a row at t = 0 and one after every control step. Scenario keys: see README.md ("Scenario files").
    Simulate(simulate::SimulateArgs),
    /// Run a study: every (variant, seed) of an experiment file, in parallel, resuming finished runs.
    Run(run::RunArgs),
    /// Validate an experiment file and print its plan with a wall-time estimate, without running it.
    Check(check::CheckArgs),
    /// Evaluate a finished study's policies and controller on the probe conditions (`[[probe]]`) of an
    /// experiment file, without retraining: rows go to each run's probes.csv, then the report is redrawn.
    Probe(probe::ProbeArgs),
    /// Redraw summary.csv, the charts and report.html of a results folder from its files alone
    /// (also for a partially finished study).
    Report(report::ReportArgs),
    /// Replay a checkpoint (or the classical tracking controller) on a study's evaluation episodes:
    /// an animated GIF with a caption of time, return and each reward term's running sum, an optional
    /// filmstrip PNG, and per-episode trajectory metrics.
    Replay(replay::ReplayCmdArgs),
    /// Write Slurm batch scripts for a study into its results folder: a job array with one task per run
    /// (`run --cell $SLURM_ARRAY_TASK_ID`), a report job that runs after the array, and submit.sh that
    /// queues both (`bash DIR/slurm/submit.sh`). Logs go to DIR/slurm/logs/.
    Slurm(slurm::SlurmArgs),
    /// Show how far a study has got: runs done, running, stale (heartbeat stopped), diverged,
    /// interrupted or missing, and which cells to run again.
    Status(status::StatusArgs),
    /// List the reward terms with their parameters, defaults and meaning (from the term registry).
    ///
    /// Each term is switched on by a `[reward.<name>]` table in the experiment file.
    Terms,
    /// List the reset curricula with their parameters, defaults and meaning (from the curriculum registry).
    ///
    /// A variant picks one with `[curriculum] kind = "<name>"` and sets its parameters in the same table.
    Curricula,
    /// List the reference-path planners (from the planner registry).
    ///
    /// A variant picks one with `[plan] planner = "<name>"`.
    Planners,
    /// Plan a reference path in a scenario and draw it.
    ///
    /// Writes FILE.svg (workspace, obstacles, the arm at the start and at the goal configuration, the
    /// effector path and the waypoints) and FILE.csv beside it (header `k,q1..qN,x,y`, one row per waypoint,
    /// angles in rad, positions in m). Planner settings: the `[plan]` table of --spec (see `PlanSpec`).
    Plan(plan::PlanCmdArgs),
    /// Build a learned waypoint model for a variant of an experiment: a data set of planner solutions over
    /// random episodes of its scenario, a small network trained to imitate them, and its quality on held-out
    /// episodes (waypoint error, collisions, time per query vs per plan).
    ///
    /// DIR (--out) receives dataset.csv, dataset.json (provenance), model.safetensors, model.json and
    /// quality.json. A rerun reuses the data set and the model when their inputs are unchanged; the quality
    /// report is always redone. With --model, an existing model is assessed on the variant instead.
    WaypointModel(waypoint_model::WaypointModelArgs),
}

/// Exit code of a command stopped by Ctrl-C (128 + SIGINT, as shells report it).
pub const INTERRUPTED: u8 = 130;
/// Exit code when the user's input is at fault.
pub const BAD_INPUT: u8 = 2;
/// Exit code of any other failure.
pub const FAILED: u8 = 1;

/// A failed command: the error (with its causes) and the exit code it maps to.
#[derive(Debug)]
pub struct Failure {
    pub error: Box<dyn Error + Send + Sync + 'static>,
    pub code: u8,
}

impl Failure {
    /// Exit code 2 when `bad_input`, else 1.
    pub fn new(error: impl Error + Send + Sync + 'static, bad_input: bool) -> Failure {
        Failure {
            error: Box::new(error),
            code: if bad_input { BAD_INPUT } else { FAILED },
        }
    }
}

/// An error that knows whether the user's input is at fault (exit code 2) or not (1).
pub trait Classified: Error + Send + Sync + Sized + 'static {
    fn is_bad_input(&self) -> bool;
}

macro_rules! classified {
    ($($t:ty),*) => {$(
        impl Classified for $t {
            fn is_bad_input(&self) -> bool {
                <$t>::is_bad_input(self)
            }
        }
    )*};
}
classified!(
    crate::study::StudyError,
    crate::chart::ChartError,
    crate::replay::ReplayError,
    crate::sim::simulate::SimulateError,
    crate::plan::command::PlanCommandError,
    crate::plan::learned::LearnedError
);

impl Failure {
    /// A library error with the exit code its kind asks for.
    pub fn classify<E: Classified>(e: E) -> Failure {
        let bad = e.is_bad_input();
        Failure::new(e, bad)
    }
}

/// What a subcommand returns: the exit code of a finished command, or a failure to print.
pub type Outcome = Result<ExitCode, Failure>;

/// The one place errors reach the terminal.
fn print_failure(f: &Failure) -> ExitCode {
    eprintln!("termwise: error: {}", error_chain_text(f.error.as_ref()));
    ExitCode::from(f.code)
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

/// Run a parsed command line: set up logging, call the subcommand, print a failure with its causes.
pub fn dispatch(cli: Cli) -> ExitCode {
    init_logging(cli.verbose);
    let outcome = match cli.command {
        Command::Simulate(a) => simulate::run(a),
        Command::Run(a) => run::run(a),
        Command::Check(a) => check::run(a),
        Command::Report(a) => report::run(a),
        Command::Probe(a) => probe::run(a),
        Command::Replay(a) => replay::run(a),
        Command::Slurm(a) => slurm::run(a),
        Command::Status(a) => status::run(a),
        Command::Terms => terms::run(),
        Command::Curricula => curricula::run(),
        Command::Planners => planners::run(),
        Command::Plan(a) => plan::run(a),
        Command::WaypointModel(a) => waypoint_model::run(a),
    };
    outcome.unwrap_or_else(|f| print_failure(&f))
}

/// Number of cores (the default worker count).
pub fn cores() -> usize {
    std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(1)
}

/// Parse a worker count: an integer of at least 1.
pub fn parse_jobs(s: &str) -> Result<usize, String> {
    match s.trim().parse::<usize>() {
        Ok(n) if n >= 1 => Ok(n),
        Ok(_) => Err("must be at least 1 worker".into()),
        Err(e) => Err(format!("{e} in {s:?}")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn jobs_must_be_positive() {
        assert_eq!(parse_jobs(" 3 "), Ok(3));
        assert!(parse_jobs("0").is_err());
        assert!(parse_jobs("x").is_err());
    }
}
