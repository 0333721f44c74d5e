//! `plan`: collision-free reference paths for episodes — RRT* and bidirectional RRT* in joint space,
//! shortcutting, resampling to K waypoints, replanning after scenario events.

pub mod path;

pub use path::{Polyline, Projection, ReferencePath};
