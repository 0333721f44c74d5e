//! Reference-path planning time, the cost paid at every episode reset: the default two-link scenario with
//! four obstacles and the three-link scenario, random goals reachable from the start (the goal set is
//! drawn once with a fixed seed; goals the planner cannot reach even with 20x the budget are set aside and
//! timed separately, since they always use the whole budget and end in the fallback). Besides criterion's
//! estimates, the per-plan distribution (median, 95th percentile) over goals x seeds is printed.

use criterion::{criterion_group, criterion_main, Criterion};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::hint::black_box;
use std::sync::Arc;
use std::time::Instant;
use termwise::plan::{plan_detailed, plan_path, PlanSpec};
use termwise::sim::{ArmEnv, Scenario};

fn env(file: &str) -> ArmEnv {
    let path = format!(
        "{}/experiments/scenarios/{file}",
        env!("CARGO_MANIFEST_DIR")
    );
    ArmEnv::new(Arc::new(
        Scenario::load(std::path::Path::new(&path)).expect("scenario"),
    ))
}

/// (reachable, unreachable) random goals: reachability judged by a 20x-budget search.
fn goals(env: &ArmEnv, count: usize, spec: &PlanSpec) -> (Vec<[f64; 2]>, Vec<[f64; 2]>) {
    let big = PlanSpec {
        iterations: spec.iterations * 20,
        time_budget_ms: 1e6,
        ..spec.clone()
    };
    let start = env.scenario().start_q.clone();
    let mut rng = ChaCha8Rng::seed_from_u64(2024);
    let (mut ok, mut blocked) = (Vec::new(), Vec::new());
    while ok.len() < count {
        let g = env.sample_goal(&mut rng);
        let r = plan_detailed(
            env,
            &start,
            g,
            &big,
            &mut ChaCha8Rng::seed_from_u64(1),
            false,
        );
        if r.path.fallback {
            blocked.push(g);
        } else {
            ok.push(g);
        }
    }
    (ok, blocked)
}

fn distribution(label: &str, env: &ArmEnv, goals: &[[f64; 2]], spec: &PlanSpec) {
    let start = env.scenario().start_q.clone();
    let mut times = Vec::new();
    let mut searched = Vec::new();
    let mut fallbacks = 0;
    for (i, g) in goals.iter().enumerate() {
        for seed in 0..5u64 {
            let mut rng = ChaCha8Rng::seed_from_u64(seed * 1000 + i as u64);
            let t = Instant::now();
            let r = plan_detailed(env, &start, *g, spec, &mut rng, false);
            let ms = t.elapsed().as_secs_f64() * 1e3;
            times.push(ms);
            if r.iterations > 0 {
                searched.push(ms);
            }
            fallbacks += r.path.fallback as usize;
        }
    }
    let summary = |times: &mut Vec<f64>| {
        if times.is_empty() {
            return "none".to_string();
        }
        times.sort_by(f64::total_cmp);
        let q = |f: f64| times[((times.len() - 1) as f64 * f).round() as usize];
        format!(
            "{} plans: median {:.3} ms, p95 {:.3} ms, max {:.3} ms",
            times.len(),
            q(0.5),
            q(0.95),
            q(1.0)
        )
    };
    println!(
        "{label} ({} goals x 5 seeds, {fallbacks} fallbacks)\n    all: {}\n    needing a search (straight line blocked): {}",
        goals.len(),
        summary(&mut times),
        summary(&mut searched)
    );
}

fn bench_plan(c: &mut Criterion) {
    for (file, label) in [
        ("table-2link-4obs.toml", "plan_2link_4obs"),
        ("table-3link.toml", "plan_3link"),
    ] {
        let e = env(file);
        for planner in ["bi-rrt-star", "rrt-star"] {
            let spec = PlanSpec {
                planner: planner.into(),
                ..PlanSpec::default()
            };
            let (ok, blocked) = goals(&e, 40, &spec);
            distribution(&format!("{label}/{planner}/reachable"), &e, &ok, &spec);
            if !blocked.is_empty() {
                distribution(
                    &format!("{label}/{planner}/unreachable"),
                    &e,
                    &blocked,
                    &spec,
                );
            }
            let start = e.scenario().start_q.clone();
            let mut k = 0usize;
            c.bench_function(&format!("{label}/{planner}/reachable"), |b| {
                b.iter(|| {
                    k += 1;
                    let mut rng = ChaCha8Rng::seed_from_u64(k as u64);
                    black_box(plan_path(&e, &start, ok[k % ok.len()], &spec, &mut rng))
                })
            });
        }
    }
}

// No criterion plots: plotters is built with the pure-Rust text path and no system fonts, on which
// criterion's own charts cannot find a font (our charts register an embedded one).
criterion_group! {
    name = benches;
    config = Criterion::default().without_plots();
    targets = bench_plan
}
criterion_main!(benches);
