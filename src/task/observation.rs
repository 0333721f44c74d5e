//! What the policy observes beyond the simulator's physical observation (`[observation]`): the settings
//! (`Episode::observe` writes the values, `Episode::obs_dim` counts them).

use serde::{Deserialize, Serialize};

/// What the policy observes beyond the simulator's physical observation (`[observation]`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ObservationSpec {
    /// Append the next K reference-path waypoints relative to the effector (a path-conditioned policy). Default true.
    #[serde(default = "yes")]
    pub waypoints: bool,
    /// Append the joint-space offsets of the same K waypoints (waypoint joints minus the arm's joints, over pi):
    /// the effector waypoints alone do not say which way the elbow must pass an obstacle. Default true.
    /// Measured on the quickstart task (all-terms, 1M steps, 5 seeds each, final clean success as the mean of
    /// the last 3 evaluations): 0.89 (0.87-0.91 over seeds, reached 0.99) with it, against 0.67 (0.63-0.78,
    /// reached 0.72) without; with it every seed reached 50% clean success by 307k steps (median 154k), without
    /// by 410k (median 256k).
    #[serde(default = "yes")]
    pub joint_waypoints: bool,
    /// Append each link's clearance to the nearest obstacle and the joint-space direction away from it
    /// (`ArmEnv::observe_clearance`). Default false: measured on the same task and budget (5 seeds each), 0.72
    /// alone against 0.67 without, and 0.86 with joint waypoints against 0.89 for joint waypoints alone (fewer
    /// collisions, fewer goals reached); with `collision.penalty` 0.5, 0.90 against 0.90.
    #[serde(default)]
    pub clearance: bool,
}
fn yes() -> bool {
    true
}
impl Default for ObservationSpec {
    fn default() -> Self {
        ObservationSpec {
            waypoints: true,
            joint_waypoints: true,
            clearance: false,
        }
    }
}
