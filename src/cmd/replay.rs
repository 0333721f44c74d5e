//! `termwise replay`: a checkpoint (or the classical controller) on a study's evaluation episodes, drawn as
//! a GIF and filmstrip, with per-episode metrics.

use super::{Failure, Outcome};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct ReplayCmdArgs {
    /// Checkpoint (policy.safetensors with its policy.json sidecar) to replay.
    pub checkpoint: Option<PathBuf>,
    /// Replay the classical tracking controller instead of a checkpoint.
    #[arg(long)]
    pub baseline: bool,
    /// Experiment file whose variant settings (reward, planner, observation, baseline) apply.
    #[arg(long)]
    pub experiment: PathBuf,
    /// Variant of the experiment (default: the first).
    #[arg(long)]
    pub variant: Option<String>,
    /// Scenario file replacing the variant's scenario.
    #[arg(long)]
    pub scenario: Option<PathBuf>,
    /// Seed of the evaluation episodes (default: the study's eval_seed, i.e. the episodes evaluated in training).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Animated GIF of the first episode.
    #[arg(long)]
    pub out: Option<PathBuf>,
    /// Filmstrip PNG (a grid of 12 frames) of the same episode.
    #[arg(long)]
    pub filmstrip: Option<PathBuf>,
    /// Roll out this many episodes and write their metrics CSV.
    #[arg(long)]
    pub episodes: Option<usize>,
    /// Where to write the per-episode metrics CSV (default replay-episodes.csv).
    #[arg(long)]
    pub metrics_out: Option<PathBuf>,
}

pub fn run(a: ReplayCmdArgs) -> Outcome {
    let args = crate::replay::ReplayArgs {
        experiment: a.experiment,
        variant: a.variant,
        checkpoint: a.checkpoint,
        baseline: a.baseline,
        scenario: a.scenario,
        seed: a.seed,
        out: a.out,
        filmstrip: a.filmstrip,
        episodes: a.episodes,
        metrics_out: a.metrics_out,
    };
    let text = crate::replay::run_replay(&args).map_err(Failure::classify)?;
    eprintln!("{text}");
    Ok(ExitCode::SUCCESS)
}
