//! The scenario file as written: serde structs with `deny_unknown_fields` and documented defaults, before
//! validation turns them into a `Scenario`.

use super::*;

// ---------- raw file structs ----------

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawScenario {
    #[serde(default)]
    pub(super) name: Option<String>,
    pub(super) arm: RawArm,
    #[serde(default)]
    pub(super) physics: RawPhysics,
    #[serde(default)]
    pub(super) workspace: RawWorkspace,
    pub(super) start: RawStart,
    pub(super) goal: RawGoal,
    #[serde(default)]
    pub(super) obstacle: Vec<RawObstacle>,
    #[serde(default)]
    pub(super) events: RawEvents,
    #[serde(default)]
    pub(super) random: Option<RawRandom>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawArm {
    pub(super) control: ControlMode,
    #[serde(default)]
    pub(super) gravity: f64,
    pub(super) link: Vec<RawLink>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawLink {
    pub(super) length: f64,
    pub(super) mass: f64,
    pub(super) com: Option<f64>,
    pub(super) inertia: Option<f64>,
    #[serde(default)]
    pub(super) damping: f64,
    #[serde(default = "default_radius")]
    pub(super) radius: f64,
    pub(super) q_min: Option<f64>,
    pub(super) q_max: Option<f64>,
    pub(super) v_max: Option<f64>,
    pub(super) tau_max: Option<f64>,
    pub(super) acc_max: Option<f64>,
}

pub(super) fn default_radius() -> f64 {
    0.03
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawPhysics {
    #[serde(default = "default_integrator")]
    pub(super) integrator: Integrator,
    #[serde(default = "default_dt")]
    pub(super) dt: f64,
    #[serde(default = "default_substeps")]
    pub(super) substeps: i64,
    #[serde(default = "default_horizon")]
    pub(super) horizon: i64,
    #[serde(default)]
    pub(super) self_collision: bool,
    #[serde(default)]
    pub(super) contact: ContactMode,
}
pub(super) fn default_integrator() -> Integrator {
    Integrator::Rk4
}
pub(super) fn default_dt() -> f64 {
    0.001
}
pub(super) fn default_substeps() -> i64 {
    10
}
pub(super) fn default_horizon() -> i64 {
    200
}
impl Default for RawPhysics {
    fn default() -> Self {
        RawPhysics {
            integrator: default_integrator(),
            dt: default_dt(),
            substeps: default_substeps(),
            horizon: default_horizon(),
            self_collision: false,
            contact: ContactMode::default(),
        }
    }
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields)]
pub(super) struct RawWorkspace {
    pub(super) min: Option<[f64; 2]>,
    pub(super) max: Option<[f64; 2]>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawStart {
    pub(super) q: Vec<f64>,
    pub(super) dq: Option<Vec<f64>>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawGoal {
    pub(super) position: [f64; 2],
    #[serde(default = "default_tolerance")]
    pub(super) tolerance: f64,
}
pub(super) fn default_tolerance() -> f64 {
    0.05
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawObstacle {
    pub(super) shape: String,
    pub(super) center: [f64; 2],
    pub(super) radius: Option<f64>,
    pub(super) half: Option<[f64; 2]>,
    #[serde(default = "default_motion")]
    pub(super) motion: String,
    pub(super) velocity: Option<[f64; 2]>,
    pub(super) amplitude: Option<[f64; 2]>,
    pub(super) period: Option<f64>,
    #[serde(default)]
    pub(super) phase: f64,
}
pub(super) fn default_motion() -> String {
    "still".into()
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawEvents {
    #[serde(default)]
    pub(super) goal_jump_times: Vec<f64>,
    #[serde(default)]
    pub(super) goal_jump_rate: f64,
    #[serde(default = "default_replan_margin")]
    pub(super) replan_margin: f64,
}
pub(super) fn default_replan_margin() -> f64 {
    0.05
}
impl Default for RawEvents {
    fn default() -> Self {
        RawEvents {
            goal_jump_times: Vec::new(),
            goal_jump_rate: 0.0,
            replan_margin: default_replan_margin(),
        }
    }
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawRandom {
    pub(super) obstacle_count: [i64; 2],
    pub(super) obstacle_radius: [f64; 2],
    pub(super) region_min: Option<[f64; 2]>,
    pub(super) region_max: Option<[f64; 2]>,
}

// ---------- bounds ----------
