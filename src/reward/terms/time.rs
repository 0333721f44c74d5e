//! `time`: a constant cost per step, which makes faster arrival worth more.

use crate::reward::{ParamInfo, ParamKind, ParamValue, Params, Term, TermInfo, Transition};

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "time",
    meaning: "constant cost per step (rewards reaching the goal sooner)",
    sign: "-cost every step",
    negative_weight: None,
    params: &[ParamInfo {
        name: "cost",
        kind: ParamKind::Magnitude,
        default: ParamValue::Number(0.01),
        unit: "reward per step",
        meaning: "subtracted after every step",
    }],
    build,
};

/// Constant per-step cost.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Time {
    /// Reward subtracted per step (default 0.01).
    pub cost: f64,
}

impl Default for Time {
    fn default() -> Self {
        Time {
            cost: Params::defaults(&INFO).number("cost"),
        }
    }
}

fn build(p: &Params) -> Box<dyn Term> {
    Box::new(Time {
        cost: p.number("cost"),
    })
}

impl Term for Time {
    #[inline]
    fn value(&self, _tr: &Transition) -> f64 {
        -self.cost
    }
}
