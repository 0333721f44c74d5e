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
    /// Run a study: every (variant, seed) of an experiment file, in parallel, resuming finished runs.
    Run {
        /// Experiment TOML file.
        experiment: PathBuf,
        /// Worker threads (each run is single-threaded), at least 1. Default: the number of cores.
        #[arg(long, value_parser = parse_jobs)]
        jobs: Option<usize>,
        /// Results folder. Default: results/<study name>.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Run only the K-th run of the plan (0-based, as `check` lists them), e.g. from a job array.
        #[arg(long)]
        cell: Option<usize>,
        /// Skip drawing the report at the end.
        #[arg(long)]
        no_report: bool,
    },
    /// Validate an experiment file and print its plan with a wall-time estimate, without running it.
    Check {
        /// Experiment TOML file.
        experiment: PathBuf,
        /// Worker threads assumed for the estimate, at least 1. Default: the number of cores.
        #[arg(long, value_parser = parse_jobs)]
        jobs: Option<usize>,
        /// Skip the calibration (no estimate of wall time).
        #[arg(long)]
        no_calibrate: bool,
    },
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
    /// Replay a checkpoint (or the classical tracking controller) on a study's evaluation episodes:
    /// an animated GIF with a caption of time, return and each reward term's running sum, an optional
    /// filmstrip PNG, and per-episode trajectory metrics.
    Replay {
        /// Checkpoint (policy.safetensors with its policy.json sidecar) to replay.
        checkpoint: Option<PathBuf>,
        /// Replay the classical tracking controller instead of a checkpoint.
        #[arg(long)]
        baseline: bool,
        /// Experiment file whose variant settings (reward, planner, observation, baseline) apply.
        #[arg(long)]
        experiment: PathBuf,
        /// Variant of the experiment (default: the first).
        #[arg(long)]
        variant: Option<String>,
        /// Scenario file replacing the variant's scenario.
        #[arg(long)]
        scenario: Option<PathBuf>,
        /// Seed of the evaluation episodes (default: the study's eval_seed, i.e. the episodes evaluated in training).
        #[arg(long)]
        seed: Option<u64>,
        /// Animated GIF of the first episode.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Filmstrip PNG (a grid of 12 frames) of the same episode.
        #[arg(long)]
        filmstrip: Option<PathBuf>,
        /// Roll out this many episodes and write their metrics CSV.
        #[arg(long)]
        episodes: Option<usize>,
        /// Where to write the per-episode metrics CSV (default replay-episodes.csv).
        #[arg(long)]
        metrics_out: Option<PathBuf>,
    },
    /// Write Slurm batch scripts for a study into its results folder: a job array with one task per run
    /// (`run --cell $SLURM_ARRAY_TASK_ID`), a report job that runs after the array, and submit.sh that
    /// queues both (`bash DIR/slurm/submit.sh`). Logs go to DIR/slurm/logs/.
    Slurm {
        /// Experiment TOML file.
        experiment: PathBuf,
        /// Results folder shared by all tasks (must be on a file system every node sees).
        /// Default: results/<study name>.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Partition (queue) for the jobs. Default: the cluster's default.
        #[arg(long)]
        partition: Option<String>,
        /// Time limit of one run, [D-]HH:MM:SS. Default: 04:00:00.
        #[arg(long)]
        time: Option<String>,
        /// Memory of one run (sbatch --mem), e.g. 1500M. Default: 2G.
        #[arg(long)]
        mem: Option<String>,
        /// Most runs at once (the %K of the array). Default: all.
        #[arg(long)]
        max_parallel: Option<usize>,
        /// Account charged for the jobs. Default: your default account.
        #[arg(long)]
        account: Option<String>,
    },
    /// Show how far a study has got: runs done, running, stale (heartbeat stopped), diverged,
    /// interrupted or missing, and which cells to run again.
    Status {
        /// Results folder (the one holding study.json).
        results_dir: PathBuf,
        /// Seconds without a heartbeat after which a running run counts as stale (dead).
        #[arg(long, default_value_t = termwise::study::status::DEFAULT_STALE_AFTER_S)]
        stale_after: u64,
    },
    /// List the reward terms with their parameters, defaults and meaning (from the term registry).
    ///
    /// Each term is switched on by a `[reward.<name>]` table in the experiment file.
    Terms,
    /// Plan a reference path in a scenario and draw it.
    ///
    /// Writes FILE.svg (workspace, obstacles, the arm at the start and at the goal configuration, the
    /// effector path and the waypoints) and FILE.csv beside it (header `k,q1..qN,x,y`, one row per waypoint,
    /// angles in rad, positions in m). Planner settings: the `[plan]` table of --spec (see `PlanSpec`).
    Plan {
        /// Scenario TOML file.
        scenario: PathBuf,
        /// Seed of the planner's random stream.
        #[arg(long, default_value_t = 0)]
        seed: u64,
        /// Output SVG file.
        #[arg(long)]
        out: PathBuf,
        /// TOML file with a `[plan]` table of planner settings (defaults otherwise).
        #[arg(long)]
        spec: Option<PathBuf>,
        /// Goal position `X,Y` in m (default: the scenario's goal).
        #[arg(long, value_parser = parse_point, allow_hyphen_values = true)]
        goal: Option<[f64; 2]>,
        /// Redraw the scenario's random obstacles (from `[random]`) and goal from the seed.
        #[arg(long)]
        randomize: bool,
        /// Also draw the search trees.
        #[arg(long)]
        tree: bool,
        /// Also write FILE.png.
        #[arg(long)]
        png: bool,
    },
}

fn cores() -> usize {
    std::thread::available_parallelism()
        .map(|n| n.get())
        .unwrap_or(1)
}

/// Parse a worker count: an integer of at least 1.
fn parse_jobs(s: &str) -> Result<usize, String> {
    match s.trim().parse::<usize>() {
        Ok(n) if n >= 1 => Ok(n),
        Ok(_) => Err("must be at least 1 worker".into()),
        Err(e) => Err(format!("{e} in {s:?}")),
    }
}

/// Parse `X,Y` into a point.
fn parse_point(s: &str) -> Result<[f64; 2], String> {
    let parts: Vec<&str> = s.split(',').collect();
    if parts.len() != 2 {
        return Err(format!("expected X,Y, got {s:?}"));
    }
    let x: f64 = parts[0]
        .trim()
        .parse()
        .map_err(|e| format!("{e} in {s:?}"))?;
    let y: f64 = parts[1]
        .trim()
        .parse()
        .map_err(|e| format!("{e} in {s:?}"))?;
    Ok([x, y])
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

/// Exit code of a command stopped by Ctrl-C (128 + SIGINT, as shells report it).
const INTERRUPTED: u8 = 130;

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
        Command::Run {
            experiment,
            jobs,
            out,
            cell,
            no_report,
        } => {
            termwise::learn::pin_kernel_threads();
            let stop = std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false));
            let flag = stop.clone();
            let _ = ctrlc::set_handler(move || {
                if flag.swap(true, std::sync::atomic::Ordering::SeqCst) {
                    // A second Ctrl-C: leave now. Files are written atomically and the run locks of this
                    // dead process are reclaimed at once by the next `run` on this host.
                    eprintln!("termwise: interrupted again; exiting now");
                    std::process::exit(INTERRUPTED.into());
                }
                eprintln!("termwise: stopping after the current iteration (runs are marked interrupted; Ctrl-C again to quit now)...");
            });
            let result = termwise::study::cli_run(
                &experiment,
                jobs.unwrap_or_else(cores),
                out,
                cell,
                !no_report,
                &stop,
            );
            let interrupted = stop.load(std::sync::atomic::Ordering::SeqCst);
            match result {
                Ok(text) => {
                    println!("{text}");
                    if interrupted {
                        ExitCode::from(INTERRUPTED)
                    } else {
                        ExitCode::SUCCESS
                    }
                }
                Err(e) if interrupted => {
                    eprintln!("termwise: error: {e}");
                    ExitCode::from(INTERRUPTED)
                }
                Err(e) => fail(&e, e.is_bad_input()),
            }
        }
        Command::Check {
            experiment,
            jobs,
            no_calibrate,
        } => {
            termwise::learn::pin_kernel_threads();
            match termwise::study::experiment::load(&experiment)
                .map_err(termwise::study::StudyError::from)
                .and_then(|exp| {
                    termwise::study::check_text(&exp, jobs.unwrap_or_else(cores), !no_calibrate)
                }) {
                Ok(text) => {
                    print!("{text}");
                    ExitCode::SUCCESS
                }
                Err(e) => fail(&e, e.is_bad_input()),
            }
        }
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
                Err(e) => fail(&e, e.is_bad_input()),
            }
        }
        Command::Plan {
            scenario,
            seed,
            out,
            spec,
            goal,
            randomize,
            tree,
            png,
        } => {
            let args = termwise::plan::command::PlanArgs {
                scenario,
                seed,
                out,
                spec,
                goal,
                randomize,
                tree,
                png,
            };
            match termwise::plan::command::run_plan(&args) {
                Ok(o) => {
                    eprintln!(
                        "termwise: planned {:.3} rad in joint space ({} iterations{}), wrote {} and {}{}",
                        o.report.cost,
                        o.report.iterations,
                        if o.report.path.fallback { ", FALLBACK" } else { "" },
                        o.svg.display(),
                        o.csv.display(),
                        o.png.map(|p| format!(" and {}", p.display())).unwrap_or_default()
                    );
                    if o.report.path.fallback {
                        // The drawing shows the straight-line fallback; say so in the exit code too.
                        eprintln!("termwise: error: no collision-free path found within the planner's budget; the drawn path is the straight-line fallback (raise plan.iterations or plan.time_budget_ms, or move the goal)");
                        ExitCode::from(1)
                    } else {
                        ExitCode::SUCCESS
                    }
                }
                Err(e) => fail(&e, e.is_bad_input()),
            }
        }
        Command::Replay {
            checkpoint,
            baseline,
            experiment,
            variant,
            scenario,
            seed,
            out,
            filmstrip,
            episodes,
            metrics_out,
        } => {
            let args = termwise::replay::ReplayArgs {
                experiment,
                variant,
                checkpoint,
                baseline,
                scenario,
                seed,
                out,
                filmstrip,
                episodes,
                metrics_out,
            };
            match termwise::replay::run_replay(&args) {
                Ok(text) => {
                    eprintln!("{text}");
                    ExitCode::SUCCESS
                }
                Err(e) => fail(&e, e.is_bad_input()),
            }
        }
        Command::Slurm {
            experiment,
            out,
            partition,
            time,
            mem,
            max_parallel,
            account,
        } => {
            let d = termwise::study::slurm::SlurmSpec::default();
            let spec = termwise::study::slurm::SlurmSpec {
                partition,
                time: time.unwrap_or(d.time),
                mem: mem.unwrap_or(d.mem),
                max_parallel,
                account,
                report_time: d.report_time,
            };
            match termwise::study::slurm::cli_slurm(&experiment, out, &spec) {
                Ok(text) => {
                    println!("{text}");
                    ExitCode::SUCCESS
                }
                Err(e) => fail(&e, e.is_bad_input()),
            }
        }
        Command::Status {
            results_dir,
            stale_after,
        } => match termwise::study::status::cli_status(&results_dir, stale_after) {
            Ok(text) => {
                print!("{text}");
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
