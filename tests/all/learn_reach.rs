//! Learning quality on the default 2-link reaching scenario (no obstacles, acceleration control,
//! 5 cm tolerance, 200-step episodes; reward = goal bonus + time cost + dense distance): the
//! deterministic policy's success on 100 held-out episodes (their own seed), evaluated after every
//! iteration, with a fixed training seed, the learner's default settings and a 300k
//! environment-step budget. Run with `cargo test --release --test all learn_reach:: -- --nocapture` to
//! see the learning curve and the step count at which success first reaches 90%.

use crate::common::reach_env::{reach_envs, success_rate, Goals};
use termwise::learn::{NoObserver, PpoConfig, Trainer};

const BUDGET: u64 = 300_000;
const TARGET: f64 = 0.9;

/// Train with the default settings; the step count at which success first reaches `TARGET`.
fn steps_to_target(goals: Goals) -> (Option<u64>, f64) {
    let mut tr = Trainer::new(PpoConfig::default(), reach_envs(16, goals, 1), 1).unwrap();
    let mut last = 0.0;
    while tr.env_steps() < BUDGET {
        let s = tr.iterate(&mut NoObserver).unwrap();
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
    (None, last)
}

/// Random starts and random reachable goals: the held-out episodes differ from the training ones
/// in both. Measured with the default settings: first >= 90% at 120,832 steps (seed 1); seeds
/// 2-7 of the same setup at 86,016 / 67,584 / 98,304 / 77,824 / 75,776 / 49,152 (see the
/// measurements beside `PpoConfig::gamma`).
#[test]
fn reaches_90_percent_on_random_goals_within_300k_steps() {
    let (hit, last) = steps_to_target(Goals::Random);
    println!("random starts and goals: first >= 90% success at {hit:?} steps");
    assert!(hit.is_some(), "success only {last} after {BUDGET} steps");
}

/// Random starts, the scenario's fixed goal (an easier check of the same loop).
#[test]
fn reaches_90_percent_from_random_starts_within_300k_steps() {
    let (hit, last) = steps_to_target(Goals::Scenario);
    println!("random starts, scenario goal: first >= 90% success at {hit:?} steps");
    assert!(hit.is_some(), "success only {last} after {BUDGET} steps");
}

/// Train a shipped study's variant by the study's own code path with a fixed seed, evaluating on the study's
/// fixed evaluation episodes at its evaluation interval; the steps at which clean success (goal reached, no
/// contact) first reached `target`, or a panic naming the best level seen within `budget`.
fn study_variant_reaches(file: &str, variant: &str, seed: u64, budget: u64, target: f64) -> u64 {
    use std::sync::{Arc, Mutex};
    use termwise::study::experiment;
    use termwise::study::run::{build_envs, evaluate_policy};
    use termwise::task::RunShared;

    let exp = experiment::load(std::path::Path::new(file)).unwrap();
    let v = exp
        .variants
        .iter()
        .find(|v| v.name == variant)
        .unwrap_or_else(|| panic!("{file} has no variant {variant}"))
        .clone();
    let mut cfg = v.learner.clone();
    cfg.lr_decay_steps = exp.study.budget as u64;
    let shared = Arc::new(Mutex::new(RunShared::new(v.curriculum.build())));
    let mut tr = Trainer::new(cfg, build_envs(&v, seed, &shared), seed).unwrap();
    let every = exp.eval_every();
    let mut next = every;
    let mut best = 0.0f64;
    while tr.env_steps() < budget {
        tr.iterate(&mut NoObserver).unwrap();
        if tr.env_steps() >= next {
            next += every;
            let s = evaluate_policy(&exp, &v, tr.policy());
            println!(
                "steps {:>7} clean success {:.2} reached {:.2} collision rate {:.2}",
                tr.env_steps(),
                s.success_rate,
                s.reached_rate,
                s.collision_rate
            );
            best = best.max(s.success_rate);
            if s.success_rate >= target {
                println!(
                    "first >= {target} clean success at {} steps",
                    tr.env_steps()
                );
                return tr.env_steps();
            }
        }
    }
    panic!("clean success at most {best} within {budget} steps");
}

/// A harder task: the quickstart study's `all-terms` variant (two-link arm among two solid discs, random
/// collision-free starts and reachable goals, waypoint reward terms, the study's learner settings). Measured with
/// the committed settings: seed 7 first at >= 0.9 after 129,024 steps (0.30 / 0.67 / 0.60 / 0.77 / 0.90 at the
/// evaluations every 25,600 steps).
#[test]
fn quickstart_task_reaches_90_percent_clean_success_within_300k_steps() {
    study_variant_reaches("experiments/quickstart.toml", "all-terms", 7, 300_000, 0.9);
}

/// A harder task still: the curriculum comparison's `uniform` variant (two-link arm among four solid obstacles,
/// uniform starts). Measured with the committed settings: seed 7 first at >= 0.8 after 204,800 steps (0.27 /
/// 0.40 / 0.67 / 0.80 at the evaluations every 51,200 steps; collision rate 0.40 falling to 0.13).
#[test]
fn four_obstacle_task_reaches_80_percent_clean_success_within_400k_steps() {
    study_variant_reaches(
        "experiments/curriculum-comparison.toml",
        "uniform",
        7,
        400_000,
        0.8,
    );
}
