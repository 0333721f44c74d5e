//! `sim`: the planar N-link arm simulator — kinematics, rigid-body dynamics, integrators, limits, capsule
//! geometry, scenarios with moving obstacles and goal jumps, and the per-step environment. Knows nothing
//! about rewards or learning.

pub mod arm;
pub mod contact;
pub mod env;
pub mod geometry;
pub mod random_scene;
pub mod scenario;
pub mod simulate;

pub use arm::{Arm, JointVec, Link, MAX_JOINTS};
pub use contact::ContactMode;
pub use env::{ArmEnv, ArmState, StepReport};
pub use geometry::{Capsule, Shape};
pub use scenario::{ControlMode, Integrator, Motion, Obstacle, Scenario};
