//! `control`: the classical baseline that learned policies are compared with — joint-space tracking of the
//! reference path (PD on acceleration, or computed torque), with trapezoidal or quintic time-scaling under the
//! joint limits, replanning from a moving state (its trajectory-quality metrics are `task::trajectory`). Knows nothing about
//! learning.
//!
//! ```no_run
//! # use termwise::control::{BaselineSpec, Tracker};
//! # fn demo(env: &mut termwise::sim::ArmEnv, path: &termwise::plan::ReferencePath) {
//! let sc = env.scenario().clone();
//! let mut tracker = Tracker::new(&BaselineSpec::default(), &sc);
//! let s = *env.state();
//! tracker.follow(path, &s.q, &s.dq, env.time());
//! let mut u = [0.0; termwise::sim::MAX_JOINTS];
//! loop {
//!     let s = *env.state();
//!     tracker.action(&sc.arm, &s.q, &s.dq, env.time(), &mut u);
//!     let r = env.step(&u[..sc.n()]);
//!     if r.reached_goal || r.timed_out { break; }
//! }
//! # }
//! ```

pub mod follower;
pub mod profile;
pub mod spec;
pub mod tracker;
pub mod trajectory;

pub use follower::RouteFollower;
pub use profile::{Profile, TimeScaling};
pub use spec::{BaselineSpec, Gains};
pub use tracker::{computed_torque, feedback_acceleration, Tracker};
pub use trajectory::{Budget, RefSample, Trajectory};
