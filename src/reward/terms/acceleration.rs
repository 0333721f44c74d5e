//! `acceleration`: a smoothness penalty on squared joint accelerations and on the change of the action
//! between consecutive steps.

use crate::reward::{ParamInfo, ParamKind, ParamValue, Params, Term, TermInfo, Transition};
use crate::sim::MAX_JOINTS;

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "acceleration",
    meaning: "smooth-motion penalty: squared joint accelerations and squared change of action between steps",
    sign: "-(joint * sum ddq_i^2 + action_change * sum (a_i - a_prev_i)^2) every step",
    negative_weight: None,
    params: &[
        ParamInfo {
            name: "joint",
            kind: ParamKind::Magnitude,
            default: ParamValue::Number(1e-4),
            unit: "reward per (rad/s^2)^2",
            meaning: "coefficient of the sum of squared mean joint accelerations over the step",
        },
        ParamInfo {
            name: "action_change",
            kind: ParamKind::Magnitude,
            default: ParamValue::Number(1e-4),
            unit: "reward per (action unit)^2",
            meaning: "coefficient of the sum of squared changes of the applied action (rad/s^2 or N m)",
        },
    ],
    build,
};

/// Quadratic smoothness penalty.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Acceleration {
    /// Coefficient of sum ddq_i^2, reward per (rad/s^2)^2 (default 1e-4).
    pub joint: f64,
    /// Coefficient of sum (a_i - a_prev_i)^2, reward per (action unit)^2 (default 1e-4).
    pub action_change: f64,
}

impl Default for Acceleration {
    fn default() -> Self {
        Acceleration::from_params(&Params::defaults(&INFO))
    }
}

impl Acceleration {
    fn from_params(p: &Params) -> Acceleration {
        Acceleration {
            joint: p.number("joint"),
            action_change: p.number("action_change"),
        }
    }
}

fn build(p: &Params) -> Box<dyn Term> {
    Box::new(Acceleration::from_params(p))
}

impl Term for Acceleration {
    #[inline]
    fn value(&self, tr: &Transition) -> f64 {
        // Entries beyond the arm's joint count are zero in every StepReport, so summing all is exact.
        let now = tr.now;
        let mut acc2 = 0.0;
        let mut da2 = 0.0;
        for i in 0..MAX_JOINTS {
            acc2 += now.ddq[i] * now.ddq[i];
            let d = now.action[i] - now.prev_action[i];
            da2 += d * d;
        }
        -(self.joint * acc2 + self.action_change * da2)
    }
}
