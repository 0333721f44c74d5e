//! `waypoint_distance`: a penalty on the effector's distance to the reference path (the polyline through
//! the waypoints), which keeps the motion near the planned collision-free route.

use crate::reward::{ParamInfo, ParamKind, ParamValue, Params, Term, TermInfo, Transition};

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "waypoint_distance",
    meaning:
        "penalty on the effector's distance to the reference path polyline (0 when no path is set)",
    sign: "-scale * distance to the path after every step",
    negative_weight: None,
    params: &[ParamInfo {
        name: "scale",
        kind: ParamKind::Magnitude,
        default: ParamValue::Number(1.0),
        unit: "reward per m per step",
        meaning: "charged every step times the distance from the effector to the path",
    }],
    build,
};

/// Distance-to-path penalty.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WaypointDistance {
    /// Reward per metre of distance per step, subtracted (default 1).
    pub scale: f64,
}

impl Default for WaypointDistance {
    fn default() -> Self {
        WaypointDistance {
            scale: Params::defaults(&INFO).number("scale"),
        }
    }
}

fn build(p: &Params) -> Box<dyn Term> {
    Box::new(WaypointDistance {
        scale: p.number("scale"),
    })
}

impl Term for WaypointDistance {
    #[inline]
    fn value(&self, tr: &Transition) -> f64 {
        match tr.path_now {
            Some(p) => -self.scale * p.distance,
            None => 0.0,
        }
    }
    fn needs_path(&self) -> bool {
        true
    }
}
