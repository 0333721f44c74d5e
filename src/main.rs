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
    /// Redraw summary.csv, the charts and report.html of a results folder from its files alone
    /// (also for a partially finished study).
    Report {
        /// Results folder (the one holding study.json).
        results_dir: PathBuf,
        /// Bootstrap resamples per confidence interval.
        #[arg(long, default_value_t = 2000, value_parser = clap::value_parser!(u64).range(1..))]
        resamples: u64,
        /// Seed of the bootstrap resampling.
        #[arg(long, default_value_t = 0)]
        seed: u64,
    },
}

fn init_tracing(verbose: u8) {
    let level = match verbose {
        0 => tracing::Level::WARN,
        1 => tracing::Level::INFO,
        _ => tracing::Level::DEBUG,
    };
    tracing_subscriber::fmt()
        .with_max_level(level)
        .with_writer(std::io::stderr)
        .init();
}

/// Print an error with its whole chain of causes.
fn report_error(err: &dyn std::error::Error) {
    eprintln!("error: {err}");
    let mut source = err.source();
    while let Some(cause) = source {
        eprintln!("  caused by: {cause}");
        source = cause.source();
    }
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    init_tracing(cli.verbose);
    match cli.command {
        Command::Report {
            results_dir,
            resamples,
            seed,
        } => {
            let mut opts = termwise::chart::ReportOptions::default();
            opts.analysis.resamples = resamples as usize;
            opts.analysis.seed = seed;
            match termwise::chart::write_report(&results_dir, &opts) {
                Ok(files) => {
                    print!("{}", termwise::chart::terminal_summary(&files.summary));
                    println!("report: {}", files.report_html.display());
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    report_error(&e);
                    ExitCode::from(if e.is_bad_input() { 2 } else { 1 })
                }
            }
        }
    }
}
