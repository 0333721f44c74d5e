//! `potential`: potential-based shaping F = gamma * Phi(s') - Phi(s) (Ng, Harada & Russell, "Policy
//! invariance under reward transformations", ICML 1999, Theorem 1), which leaves the optimal policy
//! unchanged while giving a dense signal. Phi is one of a small set of progress measures.

use crate::reward::{
    ParamInfo, ParamKind, ParamValue, Params, PathPoint, Term, TermInfo, Transition,
};
use crate::sim::StepReport;

/// The choices of Phi.
pub const PHI_CHOICES: &[&str] = &["remaining-path", "goal-distance"];

/// Registry entry.
pub const INFO: TermInfo = TermInfo {
    name: "potential",
    meaning: "potential-based shaping gamma*Phi(s') - Phi(s) (Ng, Harada & Russell 1999); keeps the optimal policy",
    sign: "+ when Phi rises (getting closer); Phi(s') = 0 when s' ends the episode",
    negative_weight: Some("a scaled potential is again a potential, so any finite weight keeps the optimal policy"),
    params: &[ParamInfo {
        name: "phi",
        kind: ParamKind::Choice(PHI_CHOICES),
        default: ParamValue::Choice("remaining-path"),
        unit: "",
        meaning: "remaining-path: Phi = -(path length left + path end to goal), goal distance if no path; goal-distance: Phi = -distance to goal (m)",
    }],
    build,
};

/// The potential function.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Phi {
    /// Phi = -(remaining path length), m; without a path, -(distance to the goal).
    RemainingPath,
    /// Phi = -(effector distance to the goal), m.
    GoalDistance,
}

impl Phi {
    /// The potential of a state given its report and (if any) its place on the path.
    #[inline]
    pub fn of(self, r: &StepReport, p: Option<PathPoint>) -> f64 {
        match (self, p) {
            (Phi::RemainingPath, Some(p)) => -p.remaining,
            _ => -r.goal_dist,
        }
    }
}

/// The shaping reward F(s, s') = gamma * Phi(s') - Phi(s) (Ng et al. 1999, eq. for F in Theorem 1).
///
/// At a terminal transition Phi(s') is taken as 0. Ng et al. assume absorbing terminal states; setting the
/// potential of the absorbing state to 0 is the common practice for episodic tasks and still a potential
/// function, so the policy-invariance guarantee carries over (checked in tests/all/reward_shaping.rs).
#[inline]
pub fn shaping(gamma: f64, phi_prev: f64, phi_next: f64, terminal: bool) -> f64 {
    let next = if terminal { 0.0 } else { phi_next };
    gamma * next - phi_prev
}

/// Potential-based shaping term.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Potential {
    /// The potential (default remaining-path).
    pub phi: Phi,
}

impl Default for Potential {
    fn default() -> Self {
        Potential::from_params(&Params::defaults(&INFO))
    }
}

impl Potential {
    fn from_params(p: &Params) -> Potential {
        let phi = match p.choice("phi") {
            "goal-distance" => Phi::GoalDistance,
            _ => Phi::RemainingPath,
        };
        Potential { phi }
    }
}

fn build(p: &Params) -> Box<dyn Term> {
    Box::new(Potential::from_params(p))
}

impl Term for Potential {
    #[inline]
    fn value(&self, tr: &Transition) -> f64 {
        // Both potentials use the path as it is after any replan (the composer projects both ends of a
        // transition on the same path) and each state's own goal.
        let before = self.phi.of(tr.prev, tr.path_prev);
        let after = self.phi.of(tr.now, tr.path_now);
        shaping(tr.gamma, before, after, tr.terminal)
    }
    fn needs_path(&self) -> bool {
        self.phi == Phi::RemainingPath
    }
}
