//! `termwise run`: run a study (or one cell of it), then draw its report; Ctrl-C stops after the current
//! iteration and exits 130.

use super::{cores, parse_jobs, Failure, Outcome, INTERRUPTED};
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;

#[derive(clap::Args)]
pub struct RunArgs {
    /// Experiment TOML file.
    pub experiment: PathBuf,
    /// Worker threads (each run is single-threaded), at least 1. Default: the number of cores.
    #[arg(long, value_parser = parse_jobs)]
    pub jobs: Option<usize>,
    /// Results folder. Default: results/<study name>.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Run only the K-th run of the plan (0-based, as `check` lists them), e.g. from a job array.
    #[arg(long)]
    pub cell: Option<usize>,
    /// Skip drawing the report at the end.
    #[arg(long)]
    pub no_report: bool,
    /// Racing: take the decisions of rungs 1 to K from the finished runs, write racing.json and run nothing
    /// (the step between the stages of a raced study on a cluster; exit 1 while rung K cannot be decided).
    #[arg(long, value_name = "K", conflicts_with = "cell")]
    pub decide: Option<usize>,
}

/// Why the report after a study could not be drawn.
#[derive(Debug, thiserror::Error)]
#[error("run failed: drawing the report")]
struct ReportFailed(#[source] crate::chart::ChartError);

/// A flag set by the first Ctrl-C; a second one exits at once.
pub(crate) fn stop_flag() -> Arc<AtomicBool> {
    let stop = Arc::new(AtomicBool::new(false));
    let flag = stop.clone();
    let _ = ctrlc::set_handler(move || {
        if flag.swap(true, Ordering::SeqCst) {
            // A second Ctrl-C: leave now. Files are written atomically and the run locks of this
            // dead process are reclaimed at once by the next `run` on this host.
            eprintln!("termwise: interrupted again; exiting now");
            std::process::exit(INTERRUPTED.into());
        }
        eprintln!("termwise: stopping after the current iteration (runs are marked interrupted; Ctrl-C again to quit now)...");
    });
    stop
}

/// `--decide K`: the racing decision step alone.
fn decide(a: &RunArgs, k: usize) -> Outcome {
    let exp = crate::study::experiment::load(&a.experiment)
        .map_err(|e| Failure::classify(crate::study::StudyError::from(e)))?;
    let out = a
        .out
        .clone()
        .unwrap_or_else(|| PathBuf::from("results").join(&exp.study.name));
    let text = crate::study::race::cli_decide(&exp, &out, k).map_err(Failure::classify)?;
    println!("{text}");
    Ok(ExitCode::SUCCESS)
}

pub fn run(a: RunArgs) -> Outcome {
    if let Some(k) = a.decide {
        return decide(&a, k);
    }
    crate::learn::pin_kernel_threads();
    let stop = stop_flag();
    let result = crate::study::cli_run(
        &a.experiment,
        a.jobs.unwrap_or_else(cores),
        a.out,
        a.cell,
        &stop,
    );
    let o = result.map_err(|e| {
        if stop.load(Ordering::SeqCst) {
            Failure {
                error: Box::new(e),
                code: INTERRUPTED,
            }
        } else {
            Failure::classify(e)
        }
    })?;
    let mut text = o.text;
    if !o.interrupted && !a.no_report && a.cell.is_none() {
        let files = crate::chart::write_report(&o.out, &crate::chart::ReportOptions::default())
            .map_err(|e| Failure::new(ReportFailed(e), false))?;
        text.push('\n');
        text.push_str(&crate::chart::terminal_summary(&files.summary));
        text.push_str(&format!(
            "\nreport: {}",
            o.out.join("report.html").display()
        ));
    }
    println!("{text}");
    Ok(if o.interrupted || stop.load(Ordering::SeqCst) {
        ExitCode::from(INTERRUPTED)
    } else {
        ExitCode::SUCCESS
    })
}
