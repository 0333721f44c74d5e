//! Control-step cost of the simulator on the default two-link scenario with four obstacles
//! (RK4, 10 physics substeps per control step), in acceleration and torque mode, with solid contact (the default)
//! and pass-through obstacles (the cost of contact detection), plus an arm held pressed against a disc (the cost
//! of resolving a contact every physics step).

use criterion::{criterion_group, criterion_main, Criterion};
use std::hint::black_box;
use std::sync::Arc;
use termwise::sim::{ArmEnv, ContactMode, Scenario};
use termwise::task::observation::{arm_obs_dim, observe_arm};

fn scenario(control: &str, contact: ContactMode) -> Arc<Scenario> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/table-2link-4obs.toml"
    );
    let src = std::fs::read_to_string(path).expect("scenario file");
    let src = src.replace(
        "control = \"acceleration\"",
        &format!("control = \"{control}\""),
    );
    let mut sc = Scenario::from_toml_str(&src, path).expect("valid scenario");
    sc.contact = contact;
    Arc::new(sc)
}

fn bench_step(c: &mut Criterion) {
    for (mode, contact, tag) in [
        ("acceleration", ContactMode::Solid, "solid"),
        ("acceleration", ContactMode::PassThrough, "pass_through"),
        ("torque", ContactMode::Solid, "solid"),
        ("torque", ContactMode::PassThrough, "pass_through"),
    ] {
        let sc = scenario(mode, contact);
        let mut env = ArmEnv::new(sc.clone());
        let start = *env.state();
        let goal = env.goal();
        let mut k = 0u64;
        let mut obs = vec![0f32; arm_obs_dim(&env)];
        c.bench_function(&format!("control_step_{mode}_rk4_10sub_{tag}"), |b| {
            b.iter(|| {
                k += 1;
                // A gentle oscillating command keeps the arm moving without hitting its stops.
                let s = ((k % 200) as f64 * 0.0314).sin();
                let u = [2.0 * s, -1.5 * s];
                let r = env.step(black_box(&u));
                observe_arm(&env, &mut obs);
                if r.timed_out {
                    env.reset(start, goal, k);
                }
                black_box(r.min_clearance)
            })
        });
    }
}

fn bench_pressed(c: &mut Criterion) {
    // One link pushed by a constant torque against a disc: one contact resolved in every physics step.
    let src =
        "[arm]\ncontrol = \"torque\"\n[[arm.link]]\nlength = 0.6\nmass = 1.0\ntau_max = 10.0\n\
               [start]\nq = [0.0]\n[goal]\nposition = [0.0, 0.6]\n\
               [[obstacle]]\nshape = \"disc\"\ncenter = [0.3, 0.2]\nradius = 0.08\n";
    let sc = Arc::new(Scenario::from_toml_str(src, "pressed").expect("valid scenario"));
    let mut env = ArmEnv::new(sc);
    for _ in 0..100 {
        env.step(&[0.7]);
    }
    assert!(
        env.last_report().collided,
        "the bench needs the arm in contact"
    );
    c.bench_function(
        "control_step_torque_rk4_10sub_pressed_against_a_disc",
        |b| b.iter(|| black_box(env.step(black_box(&[0.7])).min_clearance)),
    );
}

// No criterion plots: plotters is built with the pure-Rust text path and no system fonts, on which
// criterion's own charts cannot find a font (our charts register an embedded one).
criterion_group! {
    name = benches;
    config = Criterion::default().without_plots();
    targets = bench_step, bench_pressed
}
criterion_main!(benches);
