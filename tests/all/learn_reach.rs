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

/// A harder task: the quickstart study's `all-terms` variant (two-link arm among two solid discs, random
/// collision-free starts and reachable goals, waypoint reward terms, the study's learner settings), trained by
/// the study's own code path with a fixed seed and evaluated on the study's 30 fixed evaluation episodes every
/// 51,200 steps. Success here is clean success (goal reached, no contact). Measured with the committed settings:
/// seed 7 first at >= 0.8 after 153,600 steps (0.50 / 0.73 / 0.80 at the first three evaluations); the five study
/// seeds of the quickstart reached 0.8 within 154k-205k steps with the planner's default 5 mm margin; with that
/// margin this seed stayed at 0.70 from 153,600 to 300k steps (collision rate 0.23).
#[test]
fn quickstart_task_reaches_80_percent_clean_success_within_300k_steps() {
    use std::sync::{Arc, Mutex};
    use termwise::study::experiment;
    use termwise::study::run::{build_envs, evaluate_policy};
    use termwise::task::RunShared;

    const HARD_BUDGET: u64 = 300_000;
    const HARD_TARGET: f64 = 0.8;
    let exp = experiment::load(std::path::Path::new("experiments/quickstart.toml")).unwrap();
    let v = exp
        .variants
        .iter()
        .find(|v| v.name == "all-terms")
        .expect("the quickstart has an all-terms variant")
        .clone();
    let mut cfg = v.learner.clone();
    cfg.lr_decay_steps = exp.study.budget as u64;
    let seed = 7;
    let shared = Arc::new(Mutex::new(RunShared::new(v.curriculum.build())));
    let mut tr = Trainer::new(cfg, build_envs(&v, seed, &shared), seed).unwrap();
    let every = exp.eval_every();
    let mut next = every;
    let mut best = 0.0f64;
    while tr.env_steps() < HARD_BUDGET {
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
            if s.success_rate >= HARD_TARGET {
                println!(
                    "first >= {HARD_TARGET} clean success at {} steps",
                    tr.env_steps()
                );
                return;
            }
        }
    }
    panic!("clean success at most {best} within {HARD_BUDGET} steps");
}
