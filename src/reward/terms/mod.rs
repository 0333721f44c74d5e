//! The built-in reward terms, one file each; each file defines the term and its registry entry `INFO`.

pub mod acceleration;
pub mod collision;
pub mod goal;
pub mod potential;
pub mod time;
pub mod waypoint_distance;
pub mod waypoint_progress;
