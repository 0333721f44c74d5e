//! Control-step cost of the simulator on the default two-link scenario with four obstacles
//! (RK4, 10 physics substeps per control step), in acceleration and torque mode.

use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use std::sync::Arc;
use termwise::sim::{ArmEnv, Scenario};

fn scenario(control: &str) -> Arc<Scenario> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/table-2link-4obs.toml"
    );
    let src = std::fs::read_to_string(path).expect("scenario file");
    let src = src.replace(
        "control = \"acceleration\"",
        &format!("control = \"{control}\""),
    );
    Arc::new(Scenario::from_toml_str(&src, path).expect("valid scenario"))
}

fn bench_step(c: &mut Criterion) {
    for mode in ["acceleration", "torque"] {
        let sc = scenario(mode);
        let mut env = ArmEnv::new(sc.clone());
        let start = *env.state();
        let goal = env.goal();
        let mut k = 0u64;
        let mut obs = vec![0f32; env.obs_dim()];
        c.bench_function(&format!("control_step_{mode}_rk4_10sub"), |b| {
            b.iter(|| {
                k += 1;
                // A gentle oscillating command keeps the arm moving without hitting its stops.
                let s = ((k % 200) as f64 * 0.0314).sin();
                let u = [2.0 * s, -1.5 * s];
                let r = env.step(black_box(&u));
                env.observe(&mut obs);
                if r.timed_out {
                    env.reset(start, goal, k);
                }
                black_box(r.min_clearance)
            })
        });
    }
}

criterion_group!(benches, bench_step);
criterion_main!(benches);
