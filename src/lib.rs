//! termwise: a CPU lab that measures which reward terms and reset curricula make PPO learn a
//! planar-arm reaching task fastest and move best. The binary in `main.rs` only parses the command
//! line; every capability lives in these modules (see DEVELOPERS.md for the code map).

// Numeric kernels index several arrays by joint in lockstep, mirroring the equations they implement.
#![allow(clippy::needless_range_loop)]

pub mod analysis;
pub mod chart;
pub mod cmd;
pub mod config;
pub mod control;
pub mod curriculum;
pub mod error_chain;
pub mod fonts;
pub mod fsio;
pub mod learn;
pub mod plan;
pub mod replay;
pub mod results;
pub mod reward;
pub mod sim;
pub mod study;
pub mod task;
pub mod waypoint_model;
