//! `termwise waypoint-model`: build (or assess) a learned waypoint model for a variant of an experiment.

use super::{Failure, Outcome};
use crate::plan::learned::LearnedError;
use crate::waypoint_model::{build, BuildArgs, DataSpec, TrainSpec};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct WaypointModelArgs {
    /// Experiment file whose variant gives the scenario and the planner settings ([plan]).
    pub experiment: PathBuf,
    /// Variant of the experiment (default: the first).
    #[arg(long)]
    pub variant: Option<String>,
    /// Output folder (created when missing).
    #[arg(long)]
    pub out: PathBuf,
    /// Rows in the data set.
    #[arg(long, default_value_t = 40_000)]
    pub samples: usize,
    /// Mid-path rows per episode: a random configuration on the planned path, with the plan from there.
    #[arg(long, default_value_t = 1)]
    pub mid_path: usize,
    /// Obstacle centres move by a uniform offset in [-M, M]^2 m per drawn layout (0: where the scenario puts them).
    #[arg(long, default_value_t = 0.1)]
    pub obstacle_shift: f64,
    /// Seed of the data set (the held-out rows use a stream derived from it) and of training.
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Held-out rows for the quality report (drawn with their own seed, never trained on).
    #[arg(long, default_value_t = 1000)]
    pub holdout: usize,
    /// Hidden layer widths, comma-separated (tanh units; "" for a linear model).
    #[arg(long, default_value = "64,64", value_parser = parse_widths)]
    pub hidden: Widths,
    /// Most training epochs.
    #[arg(long, default_value_t = 300)]
    pub epochs: usize,
    /// Stop after this many epochs without a better validation error (the best weights are kept).
    #[arg(long, default_value_t = 20)]
    pub patience: usize,
    /// Rows per Adam step.
    #[arg(long, default_value_t = 128)]
    pub batch: usize,
    /// Adam step size.
    #[arg(long, default_value_t = 1e-3)]
    pub learning_rate: f64,
    /// Share of the data set held out for validation (early stopping).
    #[arg(long, default_value_t = 0.1)]
    pub validation: f64,
    /// Assess this existing model folder on the variant instead of building one (writes only quality.json to --out).
    #[arg(long)]
    pub model: Option<PathBuf>,
}

/// Hidden widths as parsed from the command line.
#[derive(Clone, Debug)]
pub struct Widths(pub Vec<usize>);

/// Parse `64,64` (or an empty string) into widths.
pub fn parse_widths(s: &str) -> Result<Widths, String> {
    if s.trim().is_empty() {
        return Ok(Widths(Vec::new()));
    }
    s.split(',')
        .map(|t| {
            t.trim()
                .parse::<usize>()
                .map_err(|e| format!("{e} in {s:?}"))
        })
        .collect::<Result<_, _>>()
        .map(Widths)
}

pub fn run(a: WaypointModelArgs) -> Outcome {
    let exp = crate::study::experiment::load(&a.experiment).map_err(|e| Failure::new(e, true))?;
    let v = match &a.variant {
        None => &exp.variants[0],
        Some(n) => exp.variants.iter().find(|v| &v.name == n).ok_or_else(|| {
            let names: Vec<_> = exp.variants.iter().map(|v| v.name.as_str()).collect();
            Failure::classify(LearnedError::Args(format!(
                "no variant `{n}` in {}; variants: {}",
                a.experiment.display(),
                names.join(", ")
            )))
        })?,
    };
    let args = BuildArgs {
        experiment: a.experiment.clone(),
        experiment_hash: crate::study::experiment::fnv1a_hex(&[exp.source.as_bytes()]),
        variant: v.name.clone(),
        scenario: v.scenario.clone(),
        plan: v.plan.clone(),
        out: a.out.clone(),
        data: DataSpec {
            samples: a.samples,
            mid_path: a.mid_path,
            obstacle_shift: a.obstacle_shift,
            seed: a.seed,
        },
        train: TrainSpec {
            hidden: a.hidden.0,
            max_epochs: a.epochs,
            patience: a.patience,
            batch: a.batch,
            learning_rate: a.learning_rate,
            validation_fraction: a.validation,
            seed: a.seed,
        },
        holdout: a.holdout,
        model: a.model.clone(),
    };
    let o = build(&args).map_err(Failure::classify)?;
    if a.model.is_none() {
        eprintln!(
            "termwise: data set {} rows from {} episodes ({}, {:.1} s); model {} ({} epochs, best validation MSE {:.3e} rad^2)",
            o.rows,
            o.episodes,
            if o.dataset_reused { "reused" } else { "generated" },
            o.dataset_seconds,
            if o.model_reused {
                "reused".to_string()
            } else {
                format!("trained in {:.1} s", o.training_seconds)
            },
            o.epochs,
            o.best_validation_mse
        );
    }
    for q in &o.quality {
        eprintln!(
            "termwise: {}: waypoint error mean {:.4} m, p95 {:.4} m; paths in collision: model {:.3}, planner {:.3}; {:.4} ms per query vs {:.4} ms per plan (median; plan mean {:.3} ms, p95 {:.3} ms; one core)",
            q.set,
            q.waypoint_error_mean_m,
            q.waypoint_error_p95_m,
            q.model_collision_fraction,
            q.planner_collision_fraction,
            q.ms_per_query_median,
            q.ms_per_plan_median,
            q.ms_per_plan_mean,
            q.ms_per_plan_p95
        );
    }
    eprintln!("termwise: wrote {}", a.out.join("quality.json").display());
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::parse_widths;

    #[test]
    fn widths_parse() {
        assert_eq!(parse_widths("64, 32").unwrap().0, vec![64, 32]);
        assert!(parse_widths("").unwrap().0.is_empty());
        assert!(parse_widths("64,x").is_err());
    }
}
