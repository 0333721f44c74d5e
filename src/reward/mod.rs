//! `reward`: the `Term` trait, the built-in reward terms, their registry (keyed by the TOML name), the
//! `[reward]` table reader and the composer that sums weighted terms every step and per episode.
//!
//! # Sign convention
//! Every weight is a non-negative multiplier (weight 0 or an absent table turns a term off); each term
//! states its own sign: costs are returned as negative numbers, bonuses and progress as positive ones.
//! Only a term whose convention allows it accepts a negative weight (today: `potential`, because any
//! scaled potential is again a potential, Ng, Harada & Russell, ICML 1999). Every cost-like parameter
//! (`cost`, `penalty`, `bonus`, `joint`, ...) must be >= 0; the term supplies the minus sign.
//!
//! # Adding a term
//! Write one file in `terms/` defining a `Term` type and a `pub const INFO: TermInfo`, then add its `mod`
//! line and one line to `REGISTRY` in `terms/mod.rs`. Parsing, validation, defaults, the `termwise terms` listing and the
//! composer all read the registry.

mod composer;
mod registry;
mod spec;
pub mod terms;
mod track;

pub use composer::Composer;
pub use registry::{describe_terms, registry, ParamInfo, ParamKind, ParamValue, Params, TermInfo};
pub(crate) use spec::nearest;
pub use spec::{RewardSpec, TermSetting, MAX_MAGNITUDE};
pub use track::{PathPoint, PathTrack};

use crate::sim::StepReport;

/// What a term sees for one transition s -> s'.
#[derive(Clone, Copy, Debug)]
pub struct Transition<'a> {
    /// The report of the state before the step (s).
    pub prev: &'a StepReport,
    /// The report of the state after the step (s').
    pub now: &'a StepReport,
    /// The effector's relation to the reference path before the step (None without a path, or when no
    /// enabled term asks for the path).
    pub path_prev: Option<PathPoint>,
    /// The same after the step.
    pub path_now: Option<PathPoint>,
    /// The learner's discount factor.
    pub gamma: f64,
    /// True when s' ends the episode (goal reached, or a contact that a term declares terminal). Horizon
    /// time-outs are truncations, not terminal.
    pub terminal: bool,
}

/// One reward term. `value` returns the term's contribution for one transition *before* its weight; the
/// composer multiplies by the weight from the `[reward.<name>]` table.
///
/// ```
/// use termwise::reward::{Term, Transition};
/// /// A bonus for keeping the effector slow: -|v| per step.
/// #[derive(Debug)]
/// struct Calm;
/// impl Term for Calm {
///     fn value(&self, tr: &Transition) -> f64 {
///         -tr.now.ee_vel[0].hypot(tr.now.ee_vel[1])
///     }
/// }
/// ```
pub trait Term: Send + Sync + std::fmt::Debug {
    /// The unweighted contribution of the transition (the term documents its sign). Must not allocate.
    fn value(&self, tr: &Transition) -> f64;
    /// Whether `value` reads `path_prev` / `path_now` (the composer then projects the effector).
    fn needs_path(&self) -> bool {
        false
    }
    /// Whether this term declares the state `now` terminal (e.g. a contact). Asked even when the term's
    /// weight is 0, so that ablating a penalty does not silently change when episodes end.
    fn ends_episode(&self, _now: &StepReport) -> bool {
        false
    }
}
