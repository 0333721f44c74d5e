//! Scenario files: the arm, physics settings, workspace, obstacles (still or moving), the goal, the start
//! state and seeded in-episode events, read from TOML in two stages (raw serde structs, then a validated
//! `Scenario` the rest of the code trusts). Every key is documented here and in README.md.

use super::arm::{Arm, JointVec, Link, MAX_JOINTS};
pub use super::contact::ContactMode;
use super::geometry::{capsule_shape_distance, Capsule, Shape};
use crate::config::{finite, positive, ConfigError};
use serde::{Deserialize, Serialize};
use std::path::Path;

mod raw;
#[cfg(test)]
mod tests;
mod validate;

use raw::*;

/// How actions drive the arm.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ControlMode {
    /// Actions are joint torques, N m (clipped to `tau_max`).
    Torque,
    /// Actions are desired joint accelerations, rad/s^2 (clipped to `acc_max`); the torque that produces them
    /// is computed by inverse dynamics and clipped to `tau_max`, so torque limits still bite.
    Acceleration,
}

/// Time integration scheme for one physics step.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Integrator {
    /// Semi-implicit (symplectic) Euler: dq += dt ddq, then q += dt dq.
    SemiImplicitEuler,
    /// Classical fourth-order Runge-Kutta.
    Rk4,
}

/// Largest physics step `physics.dt`, s.
pub const MAX_DT: f64 = 0.1;
/// Longest link (`arm.link[i].length`), m.
pub const MAX_LINK_LENGTH: f64 = 100.0;
/// Most physics steps per control step (`physics.substeps`).
pub const MAX_SUBSTEPS: i64 = 1_000;
/// Most control steps per episode (`physics.horizon`).
pub const MAX_HORIZON: i64 = 1_000_000;
/// Most physics steps per episode (`physics.horizon * physics.substeps`).
pub const MAX_EPISODE_PHYSICS_STEPS: i64 = 10_000_000;
/// Most obstacles (`[[obstacle]]` tables, and `random.obstacle_count` max).
pub const MAX_OBSTACLES: usize = 100;
/// Most entries of `events.goal_jump_times`.
pub const MAX_GOAL_JUMP_TIMES: usize = 1_000;
/// Largest `events.goal_jump_rate`, jumps per second (every jump replans the reference path).
pub const MAX_GOAL_JUMP_RATE: f64 = 10.0;

/// Why `goal` (with a goal region of radius `tolerance`) cannot be a goal of `arm` in the workspace
/// [wmin, wmax], if it cannot: outside the workspace, or a goal region that misses the annulus the effector
/// reaches (outer radius the sum of the link lengths, inner radius the longest link minus the others; joint
/// limits and obstacles are the planner's business).
pub fn check_goal(
    arm: &Arm,
    goal: [f64; 2],
    tolerance: f64,
    wmin: [f64; 2],
    wmax: [f64; 2],
) -> Result<(), String> {
    if (0..2).any(|k| goal[k] < wmin[k] || goal[k] > wmax[k]) {
        return Err(format!(
            "{goal:?} lies outside the workspace {wmin:?}..{wmax:?}"
        ));
    }
    let r = super::geometry::dist(goal, [0.0, 0.0]);
    let reach = arm.reach();
    let longest = arm.links.iter().map(|l| l.length).fold(0.0, f64::max);
    let inner = (2.0 * longest - reach).max(0.0);
    if r > reach + tolerance {
        return Err(format!(
            "{goal:?} is out of reach: {r:.4} m from the base, the arm reaches {reach:.4} m (goal tolerance {tolerance} m)"
        ));
    }
    if r < inner - tolerance {
        return Err(format!(
            "{goal:?} is out of reach: {r:.4} m from the base, the arm cannot fold closer than {inner:.4} m (goal tolerance {tolerance} m)"
        ));
    }
    Ok(())
}

// ---------- validated types ----------

/// Obstacle motion during an episode.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Motion {
    Still,
    /// Constant velocity (m/s), bouncing off the workspace boundary.
    Linear {
        velocity: [f64; 2],
    },
    /// centre(t) = centre0 + amplitude * sin(2 pi t / period + phase).
    Sine {
        amplitude: [f64; 2],
        period: f64,
        phase: f64,
    },
}

/// One obstacle: its shape at t = 0 and its motion.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Obstacle {
    pub shape: Shape,
    pub motion: Motion,
}

/// Seeded in-episode events.
#[derive(Clone, Debug, PartialEq)]
pub struct Events {
    /// Times (s) at which the goal jumps to a new random reachable point.
    pub goal_jump_times: Vec<f64>,
    /// Additional random goal jumps, per second (Poisson process; 0 = none).
    pub goal_jump_rate: f64,
    /// An obstacle that moved more than this (m) since the last plan counts as "moved" (replanning cue).
    pub replan_margin: f64,
}

/// Ranges for random scenario generation (`Scenario::randomized`).
#[derive(Clone, Debug, PartialEq)]
pub struct RandomSpec {
    pub obstacle_count: [usize; 2],
    pub obstacle_radius: [f64; 2],
    pub region_min: [f64; 2],
    pub region_max: [f64; 2],
}

/// A validated scenario.
#[derive(Clone, Debug, PartialEq)]
pub struct Scenario {
    pub name: String,
    pub arm: Arm,
    pub control: ControlMode,
    pub integrator: Integrator,
    /// Physics step, s.
    pub dt: f64,
    /// Physics steps per control step.
    pub substeps: usize,
    /// Control steps per episode.
    pub horizon: usize,
    pub self_collision: bool,
    /// Whether obstacles, the boundary and (with `self_collision`) the arm itself are solid (`physics.contact`,
    /// "solid" by default) or only detected ("pass-through").
    pub contact: ContactMode,
    pub workspace_min: [f64; 2],
    pub workspace_max: [f64; 2],
    pub start_q: Vec<f64>,
    pub start_dq: Vec<f64>,
    pub goal: [f64; 2],
    pub goal_tolerance: f64,
    pub obstacles: Vec<Obstacle>,
    pub events: Events,
    pub random: Option<RandomSpec>,
    /// The arm the acceleration-mode controller's inverse dynamics assumes, when it differs from the simulated
    /// `arm` (model error: a probe condition's heavier or more damped links). None (every scenario file): the
    /// simulated arm itself. Not a file key.
    pub control_model: Option<Arm>,
}

impl Scenario {
    /// Read and validate a scenario file.
    pub fn load(path: &Path) -> Result<Scenario, ConfigError> {
        let src = crate::config::read_file(path)?;
        Scenario::from_toml_str(&src, &path.display().to_string())
    }

    /// Parse and validate scenario TOML text; `origin` names it in errors.
    pub fn from_toml_str(src: &str, origin: &str) -> Result<Scenario, ConfigError> {
        let raw: RawScenario = crate::config::parse_toml(src, origin)?;
        Scenario::from_raw(raw, src, origin)
    }

    /// Parse from an already-parsed TOML value (used when a scenario is embedded in an experiment file).
    pub fn from_toml_value(
        v: toml::Value,
        src: &str,
        origin: &str,
    ) -> Result<Scenario, ConfigError> {
        let text = toml::to_string(&v).map_err(|e| ConfigError {
            origin: origin.into(),
            line: None,
            path: "scenario".into(),
            message: e.to_string(),
        })?;
        let raw: RawScenario = crate::config::parse_toml(&text, origin).map_err(|mut e| {
            e.path = format!("scenario.{}", e.path);
            e.line = crate::config::locate_line(src, &e.path);
            e
        })?;
        Scenario::from_raw(raw, src, origin).map_err(|mut e| {
            e.path = format!("scenario.{}", e.path);
            e.line = crate::config::locate_line(src, &e.path);
            e
        })
    }

    /// Number of joints.
    pub fn n(&self) -> usize {
        self.arm.n()
    }

    /// Lever arm of each joint, m/rad: the summed length of the links beyond it, twice that with self-collision
    /// (where two links move relative to each other). Moving joint i by d moves no point of any link axis by more
    /// than |d| times this, so every clearance changes by at most `sum_i |dq_i| R_i` between two configurations
    /// (the bound `plan::ArmSpace` walks edges by and `ArmEnv::step` certifies contact-free substeps with).
    pub fn lever_arms(&self) -> JointVec {
        let factor = if self.self_collision { 2.0 } else { 1.0 };
        let mut lever = [0.0; MAX_JOINTS];
        for (i, l) in lever.iter_mut().enumerate().take(self.n()) {
            *l = factor * self.arm.links[i..].iter().map(|k| k.length).sum::<f64>();
        }
        lever
    }

    /// Control step, s.
    pub fn control_dt(&self) -> f64 {
        self.dt * self.substeps as f64
    }

    /// Link capsules for configuration q; returns how many were written.
    pub fn capsules(&self, q: &[f64], out: &mut [Capsule; MAX_JOINTS]) -> usize {
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        let n = self.arm.joint_points(q, &mut pts) - 1;
        for i in 0..n {
            out[i] = Capsule {
                a: pts[i],
                b: pts[i + 1],
                radius: self.arm.links[i].radius,
            };
        }
        n
    }

    /// The first obstacle (index, clearance) that touches the start pose, if any.
    fn start_overlap(&self) -> Option<(usize, f64)> {
        let mut caps = [Capsule {
            a: [0.0; 2],
            b: [0.0; 2],
            radius: 0.0,
        }; MAX_JOINTS];
        let n = self.capsules(&self.start_q, &mut caps);
        for (i, o) in self.obstacles.iter().enumerate() {
            let d = caps[..n]
                .iter()
                .map(|c| capsule_shape_distance(c, &o.shape))
                .fold(f64::INFINITY, f64::min);
            if d < 0.0 {
                return Some((i, d));
            }
        }
        None
    }
}
