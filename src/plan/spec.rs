//! `PlanSpec`: the planner settings read from a `[plan]` TOML table (embedded in experiment files, or a
//! file of its own for `termwise plan --spec`), with validation that names the offending key.

use super::{planner_by_name, PLANNERS};
use crate::config::{parse_toml, ConfigError};
use serde::{Deserialize, Serialize};

/// Reference-path planner settings. Every field has a default; unknown keys are errors.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields, default)]
pub struct PlanSpec {
    /// Planner name from the registry: "rrt-star" or "bi-rrt-star". Default "bi-rrt-star".
    pub planner: String,
    /// Samples the planner draws (its iteration budget). Default 600.
    pub iterations: usize,
    /// Wall-clock budget for the search, ms. When hit, the search stops early: the result then depends on
    /// machine speed (the only non-deterministic path) and `PlanReport::timed_out` is set. Default 1000: a guard,
    /// not a budget (600 iterations take a few ms); at 50 ms it bound on a busy 2-core machine (16 of 600
    /// iterations seen), which made study results depend on the load.
    pub time_budget_ms: f64,
    /// Waypoints K in the reference path, evenly spaced along its length (first = start, last = goal).
    /// Default 5.
    pub waypoints: usize,
    /// Largest edge added by one extension (RRT* steering distance eta), rad. Default 0.5.
    pub step: f64,
    /// Probability of sampling a goal configuration instead of a uniform one (unidirectional planner
    /// only). Default 0.05.
    pub goal_bias: f64,
    /// Factor on the RRT* connection-radius constant gamma* of Karaman & Frazzoli 2011 (Theorem 38; > 1 keeps
    /// asymptotic optimality). Default 1.1.
    pub rewire_factor: f64,
    /// Random shortcut attempts after the greedy vertex shortcut. Default 40.
    pub shortcut_passes: usize,
    /// Clearance every planned configuration keeps from obstacles, the workspace boundary and (when enabled)
    /// the arm itself, m. It is also the smallest arm motion between two edge checks. Default 0.005.
    pub clearance_margin: f64,
    /// Damped-least-squares seeds for goal configurations of arms with other than two links (the start
    /// configuration, then uniform random ones). Default 8.
    pub ik_seeds: usize,
    /// Largest tip distance from the goal for an inverse-kinematics solution to count, m. Default 1e-4.
    pub ik_tolerance: f64,
}

impl Default for PlanSpec {
    fn default() -> Self {
        PlanSpec {
            planner: "bi-rrt-star".into(),
            iterations: 600,
            time_budget_ms: 1000.0,
            waypoints: 5,
            step: 0.5,
            goal_bias: 0.05,
            rewire_factor: 1.1,
            shortcut_passes: 40,
            clearance_margin: 0.005,
            ik_seeds: 8,
            ik_tolerance: 1e-4,
        }
    }
}

/// A document whose `[plan]` table is a `PlanSpec`; other top-level keys are left to their owners.
#[derive(Deserialize)]
struct PlanDoc {
    #[serde(default)]
    plan: PlanSpec,
}

/// Most iterations accepted (keeps a typo from planning for hours).
pub const MAX_ITERATIONS: usize = 10_000_000;

impl PlanSpec {
    /// Read the `[plan]` table of a TOML document (absent: defaults) and validate it.
    pub fn from_toml_str(src: &str, origin: &str) -> Result<PlanSpec, ConfigError> {
        let doc: PlanDoc = parse_toml(src, origin)?;
        doc.plan.validate(origin, src)?;
        Ok(doc.plan)
    }

    /// Check every setting; errors name the key as `plan.<field>`.
    pub fn validate(&self, origin: &str, src: &str) -> Result<(), ConfigError> {
        let err =
            |key: &str, msg: String| Err(ConfigError::at(origin, src, &format!("plan.{key}"), msg));
        if planner_by_name(&self.planner).is_none() {
            let names: Vec<&str> = PLANNERS.iter().map(|p| p.name()).collect();
            return err(
                "planner",
                format!(
                    "unknown planner {:?}; choose one of: {}",
                    self.planner,
                    names.join(", ")
                ),
            );
        }
        if self.iterations == 0 || self.iterations > MAX_ITERATIONS {
            return err(
                "iterations",
                format!(
                    "must be between 1 and {MAX_ITERATIONS}, got {}",
                    self.iterations
                ),
            );
        }
        if !(self.time_budget_ms.is_finite()
            && self.time_budget_ms > 0.0
            && self.time_budget_ms <= 3.6e6)
        {
            return err(
                "time_budget_ms",
                format!(
                    "must be a number of milliseconds in (0, 3600000], got {}",
                    self.time_budget_ms
                ),
            );
        }
        if self.waypoints < 2 || self.waypoints > 10_000 {
            return err(
                "waypoints",
                format!(
                    "must be between 2 and 10000 (start and goal at least), got {}",
                    self.waypoints
                ),
            );
        }
        if !(self.step.is_finite() && self.step > 0.0) {
            return err(
                "step",
                format!("must be a finite number of radians > 0, got {}", self.step),
            );
        }
        if !(self.goal_bias.is_finite() && (0.0..1.0).contains(&self.goal_bias)) {
            return err(
                "goal_bias",
                format!("must be a probability in [0, 1), got {}", self.goal_bias),
            );
        }
        if !(self.rewire_factor.is_finite() && self.rewire_factor > 0.0) {
            return err(
                "rewire_factor",
                format!(
                    "must be a finite number > 0 (> 1 for asymptotic optimality), got {}",
                    self.rewire_factor
                ),
            );
        }
        if self.shortcut_passes > 1_000_000 {
            return err(
                "shortcut_passes",
                format!("must be at most 1000000, got {}", self.shortcut_passes),
            );
        }
        if !(self.clearance_margin.is_finite() && self.clearance_margin > 0.0) {
            return err(
                "clearance_margin",
                format!(
                    "must be a finite number of metres > 0, got {}",
                    self.clearance_margin
                ),
            );
        }
        if self.ik_seeds == 0 || self.ik_seeds > 10_000 {
            return err(
                "ik_seeds",
                format!("must be between 1 and 10000, got {}", self.ik_seeds),
            );
        }
        if !(self.ik_tolerance.is_finite() && self.ik_tolerance > 0.0) {
            return err(
                "ik_tolerance",
                format!(
                    "must be a finite number of metres > 0, got {}",
                    self.ik_tolerance
                ),
            );
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn fails(body: &str) -> ConfigError {
        let src = format!("[other]\nx = 1\n\n[plan]\n{body}\n");
        PlanSpec::from_toml_str(&src, "exp.toml").unwrap_err()
    }

    #[test]
    fn defaults_are_valid_and_other_tables_ignored() {
        let s = PlanSpec::from_toml_str("[study]\nname = \"x\"\n", "exp.toml").unwrap();
        assert_eq!(s, PlanSpec::default());
        let s = PlanSpec::from_toml_str("[plan]\nplanner = \"rrt-star\"\nwaypoints = 7\n", "e")
            .unwrap();
        assert_eq!((s.planner.as_str(), s.waypoints), ("rrt-star", 7));
    }

    #[test]
    fn bad_values_name_the_key_and_line() {
        let e = fails("waypoints = 1");
        assert_eq!(
            (e.path.as_str(), e.line),
            ("plan.waypoints", Some(5)),
            "{e}"
        );
        assert!(e.to_string().contains("between 2 and"), "{e}");
        let e = fails("iterations = 0");
        assert_eq!(e.path, "plan.iterations", "{e}");
        let e = fails("time_budget_ms = -5.0");
        assert_eq!(e.path, "plan.time_budget_ms", "{e}");
        let e = fails("time_budget_ms = inf");
        assert_eq!(e.path, "plan.time_budget_ms", "{e}");
        let e = fails("step = nan");
        assert_eq!(e.path, "plan.step", "{e}");
        let e = fails("goal_bias = 1.0");
        assert_eq!(e.path, "plan.goal_bias", "{e}");
        let e = fails("rewire_factor = nan");
        assert_eq!(e.path, "plan.rewire_factor", "{e}");
        let e = fails("clearance_margin = 0.0");
        assert_eq!(e.path, "plan.clearance_margin", "{e}");
        let e = fails("ik_tolerance = nan");
        assert_eq!(e.path, "plan.ik_tolerance", "{e}");
        let e = fails("ik_seeds = 0");
        assert_eq!(e.path, "plan.ik_seeds", "{e}");
        let e = fails("planner = \"straight\"");
        assert_eq!(e.path, "plan.planner", "{e}");
        assert!(e.to_string().contains("rrt-star, bi-rrt-star"), "{e}");
        // Unknown keys and wrong types are parse errors with the key path.
        let e = fails("waypionts = 5");
        assert!(e.to_string().contains("unknown field"), "{e}");
        assert_eq!(e.line, Some(5), "{e}");
        let e = fails("iterations = -3");
        assert_eq!(e.path, "plan.iterations", "{e}");
        assert!(!e.to_string().contains('\n'));
    }
}
