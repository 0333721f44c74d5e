//! Tests of the racing decision on synthetic learning curves: a known winner, and the rate at which
//! variants without any true difference are all kept.

use super::*;
use crate::results::{EvalRow, RunStatus, VariantKind};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const BUDGET: u64 = 100_000;
const EVERY: u64 = 10_000;
const EPISODES: u32 = 30;

const CTX: RunContext = RunContext {
    budget_steps: BUDGET,
    success_threshold: 0.5,
    final_window: 3,
    kind: VariantKind::Learned,
};

/// Standard normal draw by the Box-Muller transform (Box & Muller, Ann. Math. Statist. 1958).
fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = 1.0 - rng.gen::<f64>();
    let u2: f64 = rng.gen::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

/// How a synthetic variant learns: plateau clean success and time constant (steps), with their spread
/// across seeds.
#[derive(Clone, Copy)]
struct Learner {
    plateau: f64,
    plateau_sd: f64,
    tau: f64,
}

/// One synthetic run: success(t) = plateau (1 - exp(-t / tau)) with a per-seed plateau (normal, sd
/// `plateau_sd`) and time constant (log-normal, sd 0.3 in log), each evaluation the fraction of
/// `EPISODES` Bernoulli episodes that succeed (evaluation noise).
fn run(l: Learner, seed: u64, rng: &mut ChaCha8Rng) -> RunResults {
    let plateau = (l.plateau + l.plateau_sd * normal(rng)).clamp(0.0, 1.0);
    let tau = l.tau * (0.3 * normal(rng)).exp();
    let progress = (0..=BUDGET / EVERY)
        .map(|k| {
            let t = k * EVERY;
            let p = plateau * (1.0 - (-(t as f64) / tau).exp());
            let hits = (0..EPISODES).filter(|_| rng.gen::<f64>() < p).count();
            EvalRow {
                env_steps: t,
                success_rate: hits as f64 / EPISODES as f64,
                ..EvalRow::default()
            }
        })
        .collect();
    RunResults {
        seed,
        status: RunStatus::Done,
        meta: None,
        progress,
        terms: Default::default(),
        training: Vec::new(),
        probes: Vec::new(),
    }
}

fn study(learners: &[Learner], seeds: u64, rng: &mut ChaCha8Rng) -> Vec<Vec<RunResults>> {
    learners
        .iter()
        .map(|&l| (0..seeds).map(|s| run(l, s, rng)).collect())
        .collect()
}

fn decide(runs: &[Vec<RunResults>], seed: u64) -> Rung {
    decide_at(runs, seed, 0.95)
}

fn decide_at(runs: &[Vec<RunResults>], seed: u64, confidence: f64) -> Rung {
    let entrants: Vec<Entrant> = runs
        .iter()
        .enumerate()
        .map(|(index, r)| Entrant { index, runs: r })
        .collect();
    decide_rung(&entrants, &CTX, confidence, 2000, seed)
}

fn kept(r: &Rung, index: usize) -> bool {
    r.verdicts.iter().find(|v| v.index == index).unwrap().kept
}

const GOOD: Learner = Learner {
    plateau: 0.9,
    plateau_sd: 0.04,
    tau: 12_000.0,
};

/// The racing default (`study.racing.confidence`).
const RACING: f64 = 0.99;

#[test]
fn a_known_winner_is_kept_and_clearly_worse_variants_stop() {
    // Four variants, 5 seeds each: one good learner, a somewhat worse one, a slow one with a low plateau
    // and one that never learns. Over 40 synthetic studies the winner is never stopped and the two
    // clearly worse ones always are; the somewhat worse one (plateau 0.75 against 0.9) mostly stops.
    let mid = Learner {
        plateau: 0.75,
        plateau_sd: 0.04,
        tau: 20_000.0,
    };
    let slow = Learner {
        plateau: 0.45,
        plateau_sd: 0.04,
        tau: 40_000.0,
    };
    let none = Learner {
        plateau: 0.05,
        plateau_sd: 0.02,
        tau: 12_000.0,
    };
    let mut rng = ChaCha8Rng::seed_from_u64(2016);
    let mut mid_stopped = 0;
    for trial in 0..40 {
        let runs = study(&[slow, mid, none, GOOD], 5, &mut rng);
        let r = decide_at(&runs, trial, RACING);
        assert!(kept(&r, 3), "trial {trial}: {r:#?}");
        assert_eq!(r.verdicts[0].index, 3, "the winner leads");
        assert!(!kept(&r, 0) && !kept(&r, 2), "trial {trial}: {r:#?}");
        mid_stopped += usize::from(!kept(&r, 1));
        for v in r.verdicts.iter().filter(|v| !v.kept) {
            // Each stopped for a reason the report states: an interval entirely on the worse side.
            assert!(v.success_diff.hi < 0.0 || v.steps_ratio.lo > 1.0, "{v:?}");
        }
    }
    assert!(
        mid_stopped >= 30,
        "the somewhat worse variant stopped {mid_stopped} of 40 times"
    );
}

#[test]
fn the_same_runs_give_the_same_decision() {
    // Determinism: the same runs and seed give the same decision.
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let runs = study(&[GOOD, GOOD, GOOD], 3, &mut rng);
    assert_eq!(
        format!("{:?}", decide(&runs, 1)),
        format!("{:?}", decide(&runs, 1))
    );
}

/// Over null studies (every variant the same learner): the fraction in which the rung keeps every variant,
/// and the fraction of variants it stops.
fn null_rates(variants: usize, seeds: u64, trials: u64, seed: u64, confidence: f64) -> (f64, f64) {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let (mut all, mut stopped) = (0, 0);
    for t in 0..trials {
        let runs = study(&vec![GOOD; variants], seeds, &mut rng);
        let r = decide_at(&runs, t, confidence);
        let n = r.verdicts.iter().filter(|v| !v.kept).count();
        all += usize::from(n == 0);
        stopped += n;
    }
    (
        all as f64 / trials as f64,
        stopped as f64 / (trials as usize * variants) as f64,
    )
}

fn keep_all_rate(variants: usize, seeds: u64, trials: u64, seed: u64, confidence: f64) -> f64 {
    null_rates(variants, seeds, trials, seed, confidence).0
}

#[test]
#[ignore = "measurement behind the documented rates (README, racing); run with --ignored --nocapture"]
fn measure_keep_all_rates() {
    let conf: f64 = std::env::var("RACE_CONF")
        .ok()
        .and_then(|s| s.parse().ok())
        .unwrap_or(RACING);
    for variants in [3, 5, 8, 15] {
        for seeds in [3, 4, 5, 6, 8] {
            let (all, each) = null_rates(variants, seeds, 400, 99, conf);
            println!(
                "confidence {conf} variants {variants:>2} seeds {seeds}: keep-all rate {all:.3}, variants stopped {each:.3}"
            );
        }
    }
}

#[test]
fn with_no_true_difference_all_variants_are_kept_at_the_documented_rate() {
    // The documented rate (README, "Racing"): with no true difference between 5 variants and 5 seeds each,
    // a rung at the racing default confidence keeps all five in at least 90% of studies (measured 0.94 over
    // these 400 synthetic studies; `measure_keep_all_rates` gives the other shapes). A property over random
    // studies, checked by Monte Carlo on a fixed stream, so the check is reproducible and can fail.
    let rate = keep_all_rate(5, 5, 400, 1979, RACING);
    assert!(rate >= 0.90, "keep-all rate {rate}");
    // The rule is not vacuous at this shape: it does stop a variant that is clearly behind (see above), and
    // at the report's own 95% it keeps all five less often.
    let report_level = keep_all_rate(5, 5, 400, 1979, 0.95);
    assert!(report_level < rate, "{report_level} vs {rate}");
}
