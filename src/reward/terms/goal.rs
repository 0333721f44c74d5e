//! `goal`: the bonus for reaching the goal region (the step that reaches it ends the episode), plus an
//! optional dense penalty proportional to the effector's distance to the goal.

use crate::reward::{ParamInfo, ParamKind, ParamValue, Params, Term, TermInfo, Transition};

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "goal",
    meaning: "bonus on the step the effector reaches the goal region (terminal), optional dense -distance to the goal",
    sign: "+bonus on arrival; -dense * goal distance after every step",
    negative_weight: None,
    params: &[
        ParamInfo {
            name: "bonus",
            kind: ParamKind::Magnitude,
            default: ParamValue::Number(10.0),
            unit: "reward",
            meaning: "paid once, on the step whose end state is inside the goal tolerance",
        },
        ParamInfo {
            name: "dense",
            kind: ParamKind::Magnitude,
            default: ParamValue::Number(0.0),
            unit: "reward per m per step",
            meaning: "charged every step times the effector's distance to the goal after the step",
        },
    ],
    build,
};

/// Goal bonus and optional dense distance penalty.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Goal {
    /// Reward on arrival (default 10).
    pub bonus: f64,
    /// Reward per metre of goal distance per step, subtracted (default 0).
    pub dense: f64,
}

impl Default for Goal {
    fn default() -> Self {
        Goal::from_params(&Params::defaults(&INFO))
    }
}

impl Goal {
    fn from_params(p: &Params) -> Goal {
        Goal {
            bonus: p.number("bonus"),
            dense: p.number("dense"),
        }
    }
}

fn build(p: &Params) -> Box<dyn Term> {
    Box::new(Goal::from_params(p))
}

impl Term for Goal {
    #[inline]
    fn value(&self, tr: &Transition) -> f64 {
        let arrive = if tr.now.reached_goal { self.bonus } else { 0.0 };
        arrive - self.dense * tr.now.goal_dist
    }
}
