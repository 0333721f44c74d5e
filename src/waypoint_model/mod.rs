//! Building a learned waypoint model (`termwise waypoint-model`): a seeded data set of planner solutions over
//! random episodes of a variant's scenario (`dataset`), supervised regression of a small network on it with
//! early stopping (`train`), and its quality on held-out episodes against the planner (`quality`); `build` runs
//! the stages and writes the model folder. The model at query time is `plan::learned::WaypointModel`.

pub mod build;
pub mod dataset;
pub mod quality;
pub mod train;

pub use crate::plan::learned::{TrainSpec, TrainSummary};
pub use build::{build, BuildArgs, BuildOutcome};
pub use dataset::{DataSet, DataSpec};
pub use quality::Quality;
