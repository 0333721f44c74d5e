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
    /// the effector waypoints alone do not say which way the elbow must pass an obstacle. Default false.
    #[serde(default)]
    pub joint_waypoints: bool,
    /// Append each link's clearance to the nearest obstacle and the joint-space direction away from it
    /// (`ArmEnv::observe_clearance`). Default false.
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
            joint_waypoints: false,
            clearance: false,
        }
    }
}
