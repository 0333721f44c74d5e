//! `termwise plan`: plan a reference path in a scenario and draw it (SVG, CSV, optional PNG).

use super::{Failure, Outcome, FAILED};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(clap::Args)]
pub struct PlanCmdArgs {
    /// Scenario TOML file.
    pub scenario: PathBuf,
    /// Seed of the planner's random stream.
    #[arg(long, default_value_t = 0)]
    pub seed: u64,
    /// Output SVG file.
    #[arg(long)]
    pub out: PathBuf,
    /// TOML file with a `[plan]` table of planner settings (defaults otherwise).
    #[arg(long)]
    pub spec: Option<PathBuf>,
    /// Goal position `X,Y` in m (default: the scenario's goal).
    #[arg(long, value_parser = parse_point, allow_hyphen_values = true)]
    pub goal: Option<[f64; 2]>,
    /// Redraw the scenario's random obstacles (from `[random]`) and goal from the seed.
    #[arg(long)]
    pub randomize: bool,
    /// Also draw the search trees.
    #[arg(long)]
    pub tree: bool,
    /// Also write FILE.png.
    #[arg(long)]
    pub png: bool,
}

/// Parse `X,Y` into a point.
pub fn parse_point(s: &str) -> Result<[f64; 2], String> {
    let parts: Vec<&str> = s.split(',').collect();
    if parts.len() != 2 {
        return Err(format!("expected X,Y, got {s:?}"));
    }
    let coord = |t: &str| t.trim().parse::<f64>().map_err(|e| format!("{e} in {s:?}"));
    Ok([coord(parts[0])?, coord(parts[1])?])
}

/// The drawing shows the straight-line fallback; the exit code says so too.
#[derive(Debug, thiserror::Error)]
#[error("no collision-free path found within the planner's budget; the drawn path is the straight-line fallback (raise plan.iterations or plan.time_budget_ms, or move the goal)")]
struct Fallback;

pub fn run(a: PlanCmdArgs) -> Outcome {
    let args = crate::plan::command::PlanArgs {
        scenario: a.scenario,
        seed: a.seed,
        out: a.out,
        spec: a.spec,
        goal: a.goal,
        randomize: a.randomize,
        tree: a.tree,
        png: a.png,
    };
    let o = crate::plan::command::run_plan(&args).map_err(Failure::classify)?;
    eprintln!(
        "termwise: planned {:.3} rad in joint space ({} iterations{}), wrote {} and {}{}",
        o.report.cost,
        o.report.iterations,
        if o.report.path.fallback {
            ", FALLBACK"
        } else {
            ""
        },
        o.svg.display(),
        o.csv.display(),
        o.png
            .map(|p| format!(" and {}", p.display()))
            .unwrap_or_default()
    );
    if o.report.path.fallback {
        return Err(Failure {
            error: Box::new(Fallback),
            code: FAILED,
        });
    }
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::parse_point;

    #[test]
    fn points_parse_with_signs_and_spaces() {
        assert_eq!(parse_point("-0.5, 1.25"), Ok([-0.5, 1.25]));
        assert!(parse_point("1").is_err());
        assert!(parse_point("1,x").is_err());
    }
}
