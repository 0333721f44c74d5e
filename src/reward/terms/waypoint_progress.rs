//! `waypoint_progress`: reward for moving the effector's projection along the reference path towards its
//! end (negative when moving back).

use crate::reward::{ParamInfo, ParamKind, ParamValue, Params, Term, TermInfo, Transition};

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "waypoint_progress",
    meaning: "reward for progress of the effector's projection along the reference path (negative when moving back)",
    sign: "+scale * (arc length of projection after - before); both measured on the current path",
    negative_weight: None,
    params: &[ParamInfo {
        name: "scale",
        kind: ParamKind::Magnitude,
        default: ParamValue::Number(1.0),
        unit: "reward per m",
        meaning: "paid per metre the projection advances along the path (charged per metre it recedes)",
    }],
    build,
};

/// Progress along the path.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct WaypointProgress {
    /// Reward per metre of arc-length progress (default 1).
    pub scale: f64,
}

impl Default for WaypointProgress {
    fn default() -> Self {
        WaypointProgress {
            scale: Params::defaults(&INFO).number("scale"),
        }
    }
}

fn build(p: &Params) -> Box<dyn Term> {
    Box::new(WaypointProgress {
        scale: p.number("scale"),
    })
}

impl Term for WaypointProgress {
    #[inline]
    fn value(&self, tr: &Transition) -> f64 {
        match (tr.path_prev, tr.path_now) {
            (Some(a), Some(b)) => self.scale * (b.along - a.along),
            _ => 0.0,
        }
    }
    fn needs_path(&self) -> bool {
        true
    }
}
