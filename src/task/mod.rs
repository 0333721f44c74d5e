//! `task`: the reaching task a run trains and is evaluated on — one episode (a feasible start/goal draw, a
//! reference path, the reward composer, the observation), the learner's environment adapter around it, the
//! fixed evaluation episodes, and the metrics of episodes and trajectories (one definition, used by runs,
//! replay and the controller checks). Knows nothing about files or experiment files.

pub mod env;
pub mod episode;
pub mod eval;
pub mod metrics;
pub mod observation;
pub mod probe;
pub mod trajectory;
pub mod waypoints;

pub use env::{RunShared, TaskEnv};
pub use episode::{
    feasibility_spec, ChosenStart, Episode, Redraws, MAX_REDRAWS, START_CLEARANCE_FACTOR,
};
pub use eval::{baseline_actor, begin_eval, eval_redraws, run_episode, Actor, EvalEpisodes};
pub use metrics::{rms_per_joint, EpisodeMetrics, EvalSummary};
pub use observation::ObservationSpec;
pub use probe::{evaluate_probe, ProbeCondition, ProbeOutcome};
pub use trajectory::{trajectory_metrics, TrajectoryMetrics};
