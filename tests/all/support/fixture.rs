//! Seeded generator of the small fixture results folder (tests/fixtures/study-small). The numbers are
//! synthetic test data shaped like learning curves, written in the results layout of
//! notes/results-layout.md; they are not the output of any training run.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde_json::json;
use std::fmt::Write as _;
use std::path::Path;

pub const BUDGET: u64 = 40_960;
pub const EVAL_EVERY: u64 = 4_096;
pub const EPISODES: u32 = 20;
pub const SEEDS: [u64; 5] = [0, 1, 2, 3, 4];

/// How a synthetic variant behaves.
#[derive(Clone, Copy)]
enum Shape {
    /// Logistic rise of success: midpoint (steps), plateau.
    Rise { mid: f64, cap: f64 },
    /// Success rises, peaks, then falls while a shaping term keeps growing.
    Gamed,
    /// Classical controller: one evaluation.
    Baseline { success: f64 },
}

struct Spec {
    name: &'static str,
    shape: Shape,
    /// Scales the RMS joint acceleration (lower = smoother).
    acc_factor: f64,
    curriculum: &'static str,
    changes: &'static [(&'static str, &'static str, &'static str)],
    grid: Option<(f64, f64)>,
    /// (seed, status, last env step written) for runs that did not finish normally.
    odd_runs: &'static [(u64, &'static str, u64)],
}

const SPECS: [Spec; 9] = [
    Spec {
        name: "all-terms",
        shape: Shape::Rise {
            mid: 15_000.0,
            cap: 0.95,
        },
        acc_factor: 1.0,
        curriculum: "uniform",
        changes: &[],
        grid: None,
        odd_runs: &[],
    },
    Spec {
        name: "no-progress-term",
        shape: Shape::Rise {
            mid: 25_000.0,
            cap: 0.9,
        },
        acc_factor: 1.1,
        curriculum: "uniform",
        changes: &[("reward.waypoint_progress.weight", "1.0", "0.0")],
        grid: None,
        odd_runs: &[(3, "diverged", 20_480)],
    },
    Spec {
        name: "heavy-shaping",
        shape: Shape::Gamed,
        acc_factor: 1.3,
        curriculum: "uniform",
        changes: &[("reward.shaping.weight", "0.5", "5.0")],
        grid: None,
        odd_runs: &[],
    },
    Spec {
        name: "reverse-curriculum",
        shape: Shape::Rise {
            mid: 11_000.0,
            cap: 0.97,
        },
        acc_factor: 0.9,
        curriculum: "reverse",
        changes: &[("curriculum.kind", "uniform", "reverse")],
        grid: None,
        odd_runs: &[(2, "missing", 0), (4, "interrupted", 24_576)],
    },
    Spec {
        name: "grid-t0.01-a0.001",
        shape: Shape::Rise {
            mid: 14_000.0,
            cap: 0.95,
        },
        acc_factor: 1.0,
        curriculum: "uniform",
        changes: &[
            ("reward.time.weight", "0.05", "0.01"),
            ("reward.acceleration.weight", "0.005", "0.001"),
        ],
        grid: Some((0.01, 0.001)),
        odd_runs: &[],
    },
    Spec {
        name: "grid-t0.01-a0.01",
        shape: Shape::Rise {
            mid: 19_000.0,
            cap: 0.93,
        },
        acc_factor: 0.6,
        curriculum: "uniform",
        changes: &[
            ("reward.time.weight", "0.05", "0.01"),
            ("reward.acceleration.weight", "0.005", "0.01"),
        ],
        grid: Some((0.01, 0.01)),
        odd_runs: &[],
    },
    Spec {
        name: "grid-t0.1-a0.001",
        shape: Shape::Rise {
            mid: 24_000.0,
            cap: 0.9,
        },
        acc_factor: 1.2,
        curriculum: "uniform",
        changes: &[
            ("reward.time.weight", "0.05", "0.1"),
            ("reward.acceleration.weight", "0.005", "0.001"),
        ],
        grid: Some((0.1, 0.001)),
        odd_runs: &[],
    },
    Spec {
        name: "grid-t0.1-a0.01",
        shape: Shape::Rise {
            mid: 36_000.0,
            cap: 0.85,
        },
        acc_factor: 0.7,
        curriculum: "uniform",
        changes: &[
            ("reward.time.weight", "0.05", "0.1"),
            ("reward.acceleration.weight", "0.005", "0.01"),
        ],
        grid: Some((0.1, 0.01)),
        odd_runs: &[(4, "running", 16_384)],
    },
    Spec {
        name: "pd-tracking",
        shape: Shape::Baseline { success: 0.7 },
        acc_factor: 0.8,
        curriculum: "uniform",
        changes: &[("controller", "ppo", "computed-torque")],
        grid: None,
        odd_runs: &[],
    },
];

const TERMS: [&str; 6] = [
    "goal",
    "time",
    "acceleration",
    "waypoint_progress",
    "collision",
    "shaping",
];

/// Standard normal by Box-Muller (Box & Muller 1958).
fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = 1.0 - rng.gen::<f64>();
    let u2: f64 = rng.gen::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

fn f(x: f64) -> String {
    if x.is_finite() {
        format!("{x:.4}")
    } else {
        "NaN".into()
    }
}

/// Write the fixture results folder into `dir` (created if needed).
pub fn write_fixture(dir: &Path) {
    std::fs::create_dir_all(dir).unwrap();
    let variants: Vec<serde_json::Value> = SPECS
        .iter()
        .map(|s| {
            json!({
                "name": s.name,
                "kind": if matches!(s.shape, Shape::Baseline { .. }) { "baseline" } else { "learned" },
                "changes": s.changes.iter().map(|(k, b, v)| json!({"key": k, "base": b, "value": v})).collect::<Vec<_>>(),
                "grid": s.grid.map(|(t, a)| json!({"reward.time.weight": t, "reward.acceleration.weight": a})),
                "curriculum": s.curriculum,
            })
        })
        .collect();
    let study = json!({
        "name": "fixture-small",
        "seeds": SEEDS,
        "budget_steps": BUDGET,
        "eval_every": EVAL_EVERY,
        "eval_episodes": EPISODES,
        "success_threshold": 0.8,
        "reference_variant": "all-terms",
        "final_window": 3,
        "variants": variants,
        "config_toml": "# test fixture: synthetic data, not a real experiment\nname = \"fixture-small\"\nseeds = 5\n",
    });
    std::fs::write(
        dir.join("study.json"),
        serde_json::to_string_pretty(&study).unwrap() + "\n",
    )
    .unwrap();
    for (vi, spec) in SPECS.iter().enumerate() {
        for &seed in &SEEDS {
            let mut rng = ChaCha8Rng::seed_from_u64(1000 * vi as u64 + seed);
            write_run(dir, spec, seed, &mut rng);
        }
    }
}

fn write_run(dir: &Path, spec: &Spec, seed: u64, rng: &mut ChaCha8Rng) {
    let odd = spec.odd_runs.iter().find(|(s, _, _)| *s == seed);
    let (status, last) = match odd {
        Some((_, "missing", _)) => return,
        Some((_, status, last)) => (*status, *last),
        None => ("done", BUDGET),
    };
    let run_dir = dir.join(spec.name).join(format!("seed-{seed}"));
    std::fs::create_dir_all(&run_dir).unwrap();
    let steps: Vec<u64> = match spec.shape {
        Shape::Baseline { .. } => vec![0],
        _ => (0..=BUDGET / EVAL_EVERY)
            .map(|k| k * EVAL_EVERY)
            .filter(|&s| s <= last)
            .collect(),
    };
    let speed = (0.12 * normal(rng)).exp();
    let mut progress = String::from("env_steps,clean_success_rate,reached_rate,collision_rate,mean_return,time_to_goal,episode_steps,rms_joint_acc,peak_joint_acc,rms_jerk,path_length,min_clearance,path_deviation,replans,planner_fallbacks,curriculum_level\n");
    let mut terms = format!("env_steps,{}\n", TERMS.join(","));
    for &t in &steps {
        let x = t as f64;
        let raw = match spec.shape {
            Shape::Rise { mid, cap } => {
                cap / (1.0 + (-(x - mid * speed) / 3_000.0).exp()) + 0.03 * normal(rng)
            }
            Shape::Gamed => {
                let rise = 0.68 / (1.0 + (-(x - 9_000.0 * speed) / 2_500.0).exp());
                let fall = if x > 18_000.0 {
                    (x - 18_000.0) / 22_960.0 * 0.4
                } else {
                    0.0
                };
                rise - fall + 0.03 * normal(rng)
            }
            Shape::Baseline { success } => success + 0.05 * normal(rng),
        };
        // Success rates are counts out of EPISODES evaluation episodes.
        let success = (raw.clamp(0.0, 1.0) * EPISODES as f64).round() / EPISODES as f64;
        let collision = ((1.0 - success) * 0.3 + 0.02 * normal(rng)).clamp(0.0, 1.0);
        let ttg = if success > 0.0 {
            4.0 - 1.5 * success + 0.1 * normal(rng)
        } else {
            f64::NAN
        };
        let rms = spec.acc_factor * (3.0 + 2.0 * (1.0 - success) + 0.2 * normal(rng));
        let level = match (spec.curriculum, spec.shape) {
            ("reverse", _) => (x / (0.6 * BUDGET as f64) * speed).min(1.0),
            _ => 1.0,
        };
        let shaping = match spec.shape {
            Shape::Gamed => 14.0 * x / BUDGET as f64 + 0.3 * normal(rng),
            _ => 0.5 * success + 0.05 * normal(rng),
        };
        let progress_w = if spec.name == "no-progress-term" {
            0.0
        } else {
            1.0
        };
        let term_values = [
            10.0 * success,
            -(1.0 - 0.6 * success) * 2.0,
            -0.02 * rms * rms,
            progress_w * (2.0 * success + 0.5 * (1.0 - success) * x / BUDGET as f64),
            -5.0 * collision,
            shaping,
        ];
        let ret: f64 = term_values.iter().sum();
        // Reached (contact allowed) is at least clean success: half the episodes with contact
        // still reach the goal. Episodes end at the goal, so they shorten as success rises.
        let reached =
            ((success + 0.5 * collision).min(1.0) * EPISODES as f64).round() / EPISODES as f64;
        let episode_steps = 200.0 * (1.0 - 0.4 * success);
        let _ = writeln!(
            progress,
            "{t},{},{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
            f(success),
            f(reached),
            f(collision),
            f(ret),
            f(ttg),
            f(episode_steps),
            f(rms),
            f(3.0 * rms),
            f(20.0 * rms),
            f(0.9 + 0.3 * (1.0 - success)),
            f(0.05 + 0.05 * success),
            f(0.1 * (1.0 - success)),
            f(0.2),
            f(0.0),
            f(level)
        );
        let _ = writeln!(
            terms,
            "{t},{}",
            term_values
                .iter()
                .map(|&v| f(v))
                .collect::<Vec<_>>()
                .join(",")
        );
    }
    let message = match status {
        "diverged" => json!("non-finite policy loss (synthetic fixture)"),
        _ => serde_json::Value::Null,
    };
    let run = json!({
        "study": "fixture-small",
        "variant": spec.name,
        "seed": seed,
        "config_hash": "f1x7ure",
        "status": status,
        "env_steps": steps.last().copied().unwrap_or(0),
        "wall_seconds": 1.0,
        "heartbeat_unix": 0,
        "version": "0.1.0",
        "message": message,
    });
    std::fs::write(
        run_dir.join("run.json"),
        serde_json::to_string_pretty(&run).unwrap() + "\n",
    )
    .unwrap();
    std::fs::write(run_dir.join("evaluations.csv"), progress).unwrap();
    std::fs::write(run_dir.join("term_contributions.csv"), terms).unwrap();
}
