//! The built-in reward terms, one file each; each file defines the term and its registry entry `INFO`. A new
//! term is one file plus two lines here (its `mod` line and its entry in `REGISTRY`).

pub mod acceleration;
pub mod collision;
pub mod goal;
pub mod potential;
pub mod time;
pub mod waypoint_distance;
pub mod waypoint_progress;

use super::TermInfo;

/// All built-in terms, in the order the composer evaluates and reports them. One line per term.
pub static REGISTRY: &[TermInfo] = &[
    goal::INFO,
    time::INFO,
    acceleration::INFO,
    waypoint_distance::INFO,
    waypoint_progress::INFO,
    collision::INFO,
    potential::INFO,
];
