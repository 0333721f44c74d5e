//! Cost of the classical baseline: time-scaling a 32-waypoint reference path (`Tracker::follow`, done at every
//! episode start and replan) and one control action (`Tracker::action`) in acceleration and torque mode.

use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use std::sync::Arc;
use termwise::control::{BaselineSpec, TimeScaling, Tracker};
use termwise::plan::ReferencePath;
use termwise::sim::{Scenario, MAX_JOINTS};

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

/// A curved 32-waypoint path (a quarter of an ellipse in joint space).
fn path(sc: &Scenario) -> ReferencePath {
    let joints: Vec<_> = (0..32)
        .map(|k| {
            let a = k as f64 / 31.0 * std::f64::consts::FRAC_PI_2;
            let mut q = [0.0; MAX_JOINTS];
            q[0] = 0.3 + 1.5 * a.sin();
            q[1] = 0.8 - 1.2 * (1.0 - a.cos());
            q
        })
        .collect();
    let points = joints.iter().map(|q| sc.arm.effector(q)).collect();
    ReferencePath {
        joints,
        points,
        fallback: false,
    }
}

fn bench_tracker(c: &mut Criterion) {
    for mode in ["acceleration", "torque"] {
        let sc = scenario(mode);
        let p = path(&sc);
        for kind in [TimeScaling::Trapezoid, TimeScaling::Quintic] {
            let spec = BaselineSpec {
                time_scaling: kind,
                ..BaselineSpec::default()
            };
            let mut tr = Tracker::new(&spec, &sc);
            let q = [0.3, 0.8];
            let dq = [0.5, -0.2];
            c.bench_function(&format!("follow_32wp_{kind:?}_{mode}"), |b| {
                b.iter(|| tr.follow(black_box(&p), &q, &dq, 0.0))
            });
        }
        let mut tr = Tracker::new(&BaselineSpec::default(), &sc);
        tr.follow(&p, &[0.3, 0.8], &[0.0, 0.0], 0.0);
        let mut u = [0.0; 2];
        let mut k = 0u64;
        c.bench_function(&format!("action_{mode}"), |b| {
            b.iter(|| {
                k += 1;
                let t = (k % 150) as f64 * 0.01;
                tr.action(&sc.arm, black_box(&[0.5, 0.4]), &[0.3, -0.2], t, &mut u);
                black_box(u[0])
            })
        });
    }
}

// No criterion plots: plotters is built with the pure-Rust text path and no system fonts, on which
// criterion's own charts cannot find a font (our charts register an embedded one).
criterion_group! {
    name = benches;
    config = Criterion::default().without_plots();
    targets = bench_tracker
}
criterion_main!(benches);
