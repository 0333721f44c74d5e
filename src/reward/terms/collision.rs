//! `collision`: a penalty on contact (arm against an obstacle, the workspace boundary or itself), and
//! whether contact ends the episode.

use crate::reward::{ParamInfo, ParamKind, ParamValue, Params, Term, TermInfo, Transition};
use crate::sim::StepReport;

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "collision",
    meaning: "penalty on the step that ends in contact; optionally contact ends the episode",
    sign: "-penalty on a step whose end state is in contact",
    negative_weight: None,
    params: &[
        ParamInfo {
            name: "penalty",
            kind: ParamKind::Magnitude,
            default: ParamValue::Number(1.0),
            unit: "reward",
            meaning: "subtracted on every step that ends in contact",
        },
        ParamInfo {
            name: "terminate",
            kind: ParamKind::Flag,
            default: ParamValue::Flag(true),
            unit: "",
            meaning: "contact ends the episode (honoured even with weight = 0 while the table is present)",
        },
    ],
    build,
};

/// Contact penalty and termination rule.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Collision {
    /// Reward subtracted on contact (default 1).
    pub penalty: f64,
    /// Whether contact ends the episode (default true).
    pub terminate: bool,
}

impl Default for Collision {
    fn default() -> Self {
        Collision::from_params(&Params::defaults(&INFO))
    }
}

impl Collision {
    fn from_params(p: &Params) -> Collision {
        Collision {
            penalty: p.number("penalty"),
            terminate: p.flag("terminate"),
        }
    }
}

fn build(p: &Params) -> Box<dyn Term> {
    Box::new(Collision::from_params(p))
}

impl Term for Collision {
    #[inline]
    fn value(&self, tr: &Transition) -> f64 {
        if tr.now.collided {
            -self.penalty
        } else {
            0.0
        }
    }
    fn ends_episode(&self, now: &StepReport) -> bool {
        self.terminate && now.collided
    }
}
