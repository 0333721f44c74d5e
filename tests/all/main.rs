//! The integration tests, one crate (the library and the binary link once): each module is one area, run
//! alone with `cargo test --release --test all <module>::`, e.g. `--test all learn_reach:: -- --nocapture`.

mod common;
mod support {
    pub mod fixture;
}

mod config_fuzz;
mod control_baseline;
mod control_route;
mod learn_reach;
mod learn_toy;
mod messages;
mod plan_arm;
mod plan_cli;
mod plan_index;
mod plan_planners;
mod report;
mod reward_alloc;
mod reward_shaping;
mod reward_terms;
mod robustness_cli;
mod sim_contact;
mod sim_physics;
mod study_cli;
mod study_probes;
mod study_racing;
mod study_slurm;
mod task_feasible;
mod waypoint_model;
mod waypoint_sources;
