//! `collision`: a penalty on contact (arm against an obstacle, the workspace boundary or itself), and
//! whether contact ends the episode.

use crate::reward::{ParamInfo, ParamKind, ParamValue, Params, Term, TermInfo, Transition};
use crate::sim::StepReport;

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "collision",
    meaning: "penalty on the step that ends in contact; optionally contact ends the episode",
    sign: "-penalty on a step whose end state is in contact (- remaining_cost x steps left when contact ends the episode)",
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
        ParamInfo {
            name: "remaining_cost",
            kind: ParamKind::Magnitude,
            default: ParamValue::Number(0.0),
            unit: "reward per step",
            meaning: "when contact ends the episode, also subtracted once per step left to the horizon (set it to the time cost so crashing early saves nothing)",
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
    /// Charged once per control step left to the horizon when contact ends the episode (default 0). With a
    /// per-step time cost c and no such charge, an episode that crashes at step k costs k c + penalty while one
    /// that goes on to the horizon H costs up to H c: ending on contact then rewards crashing early. Setting it to
    /// c charges the forgone steps, so a crash costs at least as much as using the whole horizon.
    pub remaining_cost: f64,
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
            remaining_cost: p.number("remaining_cost"),
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
            let forgone = if self.terminate {
                self.remaining_cost * tr.now.steps_left as f64
            } else {
                0.0
            };
            -self.penalty - forgone
        } else {
            0.0
        }
    }
    fn ends_episode(&self, now: &StepReport) -> bool {
        self.terminate && now.collided
    }
}
