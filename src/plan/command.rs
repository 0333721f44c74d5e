//! `termwise plan`: plan a reference path in a scenario and draw it (SVG, optionally PNG) with the
//! waypoints as CSV beside it, so users can see what the planner does with their scenario.

use super::{draw, plan_detailed, PlanReport, PlanSpec};
use crate::config::ConfigError;
use crate::sim::{ArmEnv, Scenario};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// The command's inputs.
#[derive(Clone, Debug)]
pub struct PlanArgs {
    /// Scenario TOML file.
    pub scenario: PathBuf,
    /// Seed of the planner's random stream (and of `randomize`).
    pub seed: u64,
    /// Output SVG; the CSV goes beside it with extension `.csv`, the PNG (when asked) with `.png`.
    pub out: PathBuf,
    /// TOML file whose `[plan]` table holds the planner settings (defaults when absent).
    pub spec: Option<PathBuf>,
    /// Task-space goal overriding the scenario's, m.
    pub goal: Option<[f64; 2]>,
    /// Redraw the scenario's random parts (obstacles from `[random]`, and the goal) from the seed.
    pub randomize: bool,
    /// Draw the search trees.
    pub tree: bool,
    /// Also write a PNG.
    pub png: bool,
}

/// Why the command failed.
#[derive(Debug, thiserror::Error)]
pub enum PlanCommandError {
    /// The scenario or plan settings are invalid.
    #[error("{0}")]
    Config(#[from] ConfigError),
    /// A command-line value is invalid.
    #[error("{0}")]
    Args(String),
    /// Writing an output failed.
    #[error("{file}: {message}")]
    Output { file: String, message: String },
}

impl PlanCommandError {
    /// True when the user's input is at fault (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        !matches!(self, PlanCommandError::Output { .. })
    }
}

/// What the command wrote.
pub struct PlanOutputs {
    pub report: PlanReport,
    pub svg: PathBuf,
    pub csv: PathBuf,
    pub png: Option<PathBuf>,
}

fn write(path: &Path, bytes: &[u8]) -> Result<(), PlanCommandError> {
    crate::fsio::write_atomic(path, bytes).map_err(|e| PlanCommandError::Output {
        file: path.display().to_string(),
        message: e.to_string(),
    })
}

/// Run `termwise plan`.
pub fn run_plan(args: &PlanArgs) -> Result<PlanOutputs, PlanCommandError> {
    let mut sc = Scenario::load(&args.scenario)?;
    let spec = match &args.spec {
        Some(p) => {
            let src = crate::config::read_file(p)?;
            PlanSpec::from_toml_str(&src, &p.display().to_string())?
        }
        None => PlanSpec::default(),
    };
    if let Some(g) = args.goal {
        if !(g[0].is_finite() && g[1].is_finite()) {
            return Err(PlanCommandError::Args(format!(
                "--goal must be two finite numbers, got {},{}",
                g[0], g[1]
            )));
        }
    }
    let mut rng = ChaCha8Rng::seed_from_u64(args.seed);
    if args.randomize {
        sc = sc.randomized(&mut rng);
    }
    let goal = args.goal.unwrap_or(sc.goal);
    if args.goal.is_some() {
        crate::sim::scenario::check_goal(
            &sc.arm,
            goal,
            sc.goal_tolerance,
            sc.workspace_min,
            sc.workspace_max,
        )
        .map_err(|m| PlanCommandError::Args(format!("--goal {m}")))?;
    }
    let sc = Arc::new(sc);
    let env = ArmEnv::new(sc.clone());
    let n = sc.n();
    let report = plan_detailed(&env, &sc.start_q[..n], goal, &spec, &mut rng, args.tree);
    let title = format!(
        "{} — {}, seed {}, {} rad{}",
        sc.name,
        spec.planner,
        args.seed,
        format_args!("{:.3}", report.cost),
        if report.path.fallback {
            " — FALLBACK"
        } else {
            ""
        }
    );
    let scene = draw::Scene {
        scenario: &sc,
        obstacles: env.obstacles(),
        goal,
        report: &report,
        title,
        tree: args.tree,
    };
    let svg_text = draw::svg(&scene).map_err(|m| PlanCommandError::Output {
        file: args.out.display().to_string(),
        message: m,
    })?;
    write(&args.out, svg_text.as_bytes())?;
    let csv = args.out.with_extension("csv");
    write(&csv, draw::waypoints_csv(&report).as_bytes())?;
    let png = if args.png {
        let p = args.out.with_extension("png");
        draw::png(&scene, &p).map_err(|m| PlanCommandError::Output {
            file: p.display().to_string(),
            message: m,
        })?;
        Some(p)
    } else {
        None
    };
    Ok(PlanOutputs {
        report,
        svg: args.out.clone(),
        csv,
        png,
    })
}
