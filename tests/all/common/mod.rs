//! Shared helpers for the integration tests and benches.
pub mod reach_env;

use std::path::{Path, PathBuf};

/// A tiny study: 2 variants x 2 seeds of 1024 steps (two rollouts of 8 x 64), plus `extra` at the end.
pub fn tiny_study(dir: &Path, file: &str, extra: &str) -> PathBuf {
    let text = format!(
        r#"
[study]
name = "tiny"
seeds = 2
budget = 1024
eval_every = 512
eval_episodes = 4
[scenario]
file = "{}"
[reward.goal]
bonus = 5.0
[reward.time]
[reward.waypoint_progress]
[learner]
num_envs = 8
rollout_steps = 64
minibatch_size = 128
epochs = 2
[[variant]]
name = "with-path"
[[variant]]
name = "without-path"
[variant.reward.waypoint_progress]
weight = 0.0
{extra}
"#,
        concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/experiments/scenarios/table-2link-2obs.toml"
        )
    );
    let p = dir.join(file);
    std::fs::write(&p, text).unwrap();
    p
}
