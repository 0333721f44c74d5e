//! The learned waypoint model (`plan::learned`, `termwise waypoint-model`): regression on a known linear map
//! against least squares, the waypoint error metric on hand-worked geometry, the data set reproducible from its
//! seed, the plain forward pass against candle's, the collision check on hand-placed paths, and a model refused
//! on an arm it was not trained for (library and command).

use candle_core::{Device, Tensor};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Arc;
use termwise::plan::learned::network::{forward_t, Network};
use termwise::plan::learned::{path_collides, WaypointModel};
use termwise::plan::{PlanSpec, ReferencePath};
use termwise::sim::{ArmEnv, Scenario, MAX_JOINTS};
use termwise::waypoint_model::quality::waypoint_errors;
use termwise::waypoint_model::train::train;
use termwise::waypoint_model::{DataSet, DataSpec, TrainSpec};

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("termwise-wm-{}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn scenario(file: &str) -> Scenario {
    Scenario::load(
        &Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("experiments/scenarios")
            .join(file),
    )
    .unwrap()
}

fn plan() -> PlanSpec {
    PlanSpec {
        clearance_margin: 0.02,
        ..PlanSpec::default()
    }
}

/// Solve the square system M b = r (row-major M, d x d) by Gaussian elimination with partial pivoting.
fn solve(mut m: Vec<f64>, mut r: Vec<f64>, d: usize) -> Vec<f64> {
    for c in 0..d {
        let p = (c..d)
            .max_by(|&a, &b| m[a * d + c].abs().total_cmp(&m[b * d + c].abs()))
            .unwrap();
        for k in 0..d {
            m.swap(c * d + k, p * d + k);
        }
        r.swap(c, p);
        for i in c + 1..d {
            let f = m[i * d + c] / m[c * d + c];
            for k in c..d {
                m[i * d + k] -= f * m[c * d + k];
            }
            r[i] -= f * r[c];
        }
    }
    let mut b = vec![0.0; d];
    for c in (0..d).rev() {
        let s: f64 = (c + 1..d).map(|k| m[c * d + k] * b[k]).sum();
        b[c] = (r[c] - s) / m[c * d + c];
    }
    b
}

#[test]
fn linear_map_is_recovered_as_least_squares_gives_it() {
    // y = A x + b + noise with 3 inputs, 2 outputs, uniform noise in [-0.02, 0.02] (seeded). The trained linear
    // model (no hidden layer) must match the ordinary least-squares fit, computed here independently from the
    // normal equations (X^T X) beta = X^T y with X = [1, x] (Montgomery, Peck & Vining, "Introduction to
    // Linear Regression Analysis", Wiley, 5th ed. 2012, section 3.2.1, eq. 3.12; from memory), and both must lie
    // near the true map.
    let a = [[1.5, -0.7, 0.25], [-0.4, 2.0, 0.9]];
    let b = [0.3, -1.1];
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let rows = 400;
    let (mut x, mut y) = (Vec::new(), Vec::new());
    for _ in 0..rows {
        let xi: [f64; 3] = [
            rng.gen_range(-1.0..1.0),
            rng.gen_range(0.0..3.0),
            rng.gen_range(-2.0..0.5),
        ];
        x.extend(xi);
        for j in 0..2 {
            y.push(
                b[j] + (0..3).map(|i| a[j][i] * xi[i]).sum::<f64>() + rng.gen_range(-0.02..0.02),
            );
        }
    }
    let spec = TrainSpec {
        hidden: vec![],
        max_epochs: 3000,
        patience: 200,
        batch: rows,
        learning_rate: 3e-3,
        validation_fraction: 0.0,
        seed: 5,
    };
    let t = train(&x, &y, 3, 2, &spec).unwrap();
    let f = |xi: [f64; 3]| {
        let mut out = [0.0; 2];
        t.net.predict(&t.scaling, &xi, &mut out);
        out
    };
    let f0 = f([0.0; 3]);
    for j in 0..2 {
        // Normal equations for output j.
        let d = 4;
        let (mut m, mut r) = (vec![0.0; d * d], vec![0.0; d]);
        for k in 0..rows {
            let row = [1.0, x[3 * k], x[3 * k + 1], x[3 * k + 2]];
            for p in 0..d {
                r[p] += row[p] * y[2 * k + j];
                for q in 0..d {
                    m[p * d + q] += row[p] * row[q];
                }
            }
        }
        let beta = solve(m, r, d);
        assert!(
            (f0[j] - beta[0]).abs() < 2e-3,
            "intercept {j}: {} vs OLS {}",
            f0[j],
            beta[0]
        );
        assert!(
            (beta[0] - b[j]).abs() < 0.01,
            "OLS intercept {} vs true {}",
            beta[0],
            b[j]
        );
        for i in 0..3 {
            let mut e = [0.0; 3];
            e[i] = 1.0;
            let slope = f(e)[j] - f0[j];
            assert!(
                (slope - beta[i + 1]).abs() < 2e-3,
                "A[{j}][{i}]: {slope} vs OLS {}",
                beta[i + 1]
            );
            assert!(
                (beta[i + 1] - a[j][i]).abs() < 0.01,
                "OLS A[{j}][{i}] {}",
                beta[i + 1]
            );
        }
    }
    assert_eq!(t.summary.train_rows, rows);
    assert!(t.summary.train_mse < 1e-3, "{:?}", t.summary);
}

#[test]
fn waypoint_error_matches_hand_worked_two_link_geometry() {
    // Two links l1 = 0.42, l2 = 0.33 (table-2link-2obs). Forward kinematics x = l1 cos q1 + l2 cos(q1 + q2),
    // y = l1 sin q1 + l2 sin(q1 + q2):
    //   planner w1 = (0, pi/2) -> (0.42, 0.33); model w1 = (0, 0) -> (0.75, 0): error sqrt(0.33^2 + 0.33^2) = 0.46669.
    //   planner w2 = (0, pi) -> (0.42 - 0.33, 0) = (0.09, 0); model w2 = (pi, 0) -> (-0.75, 0): error 0.84.
    // Waypoint 0 (the start) is not counted, however far apart.
    let sc = scenario("table-2link-2obs.toml");
    let pi = std::f64::consts::PI;
    let q = |a: f64, b: f64| {
        let mut j = [0.0; MAX_JOINTS];
        j[0] = a;
        j[1] = b;
        j
    };
    let planner = [q(0.0, 0.0), q(0.0, pi / 2.0), q(0.0, pi)];
    let model = [q(1.0, 1.0), q(0.0, 0.0), q(pi, 0.0)];
    let mut e = Vec::new();
    waypoint_errors(&sc.arm, &model, &planner, &mut e);
    assert_eq!(e.len(), 2);
    assert!((e[0] - 0.33 * 2f64.sqrt()).abs() < 1e-12, "{}", e[0]);
    assert!((e[1] - 0.84).abs() < 1e-12, "{}", e[1]);
}

#[test]
fn data_set_is_reproducible_from_its_seed() {
    let sc = Arc::new(scenario("table-2link-2obs.toml"));
    let spec = DataSpec {
        samples: 40,
        mid_path: 1,
        obstacle_shift: 0.1,
        seed: 3,
    };
    let a = DataSet::generate(&sc, &plan(), &spec).to_csv();
    let b = DataSet::generate(&sc, &plan(), &spec).to_csv();
    assert_eq!(a.as_bytes(), b.as_bytes());
    assert_eq!(a.lines().count(), 41);
    assert!(a.lines().skip(1).any(|l| l.starts_with("mid,")));
    let c = DataSet::generate(&sc, &plan(), &DataSpec { seed: 4, ..spec }).to_csv();
    assert_ne!(a, c);
    // Reading the file back gives the same numbers (shortest round-trip formatting).
    let layout = termwise::plan::learned::Layout::of(&sc, &plan());
    let back = DataSet::from_csv(&a, layout).unwrap();
    let orig = DataSet::generate(&sc, &plan(), &spec);
    assert_eq!(back.rows.len(), orig.rows.len());
    for (r, o) in back.rows.iter().zip(&orig.rows) {
        assert_eq!((&r.input, &r.target), (&o.input, &o.target));
    }
}

#[test]
fn plain_forward_equals_candles() {
    // A 5 -> 16 -> 16 -> 3 tanh network with random weights: the f64 forward pass used for queries against
    // candle's f32 forward (the one training differentiates), within f32 rounding.
    let mut rng = ChaCha8Rng::seed_from_u64(2);
    let sizes = [5usize, 16, 16, 3];
    let net = Network {
        layers: sizes
            .windows(2)
            .map(|s| termwise::plan::learned::network::Layer {
                n_in: s[0],
                n_out: s[1],
                w: (0..s[0] * s[1])
                    .map(|_| rng.gen_range(-0.8f32..0.8))
                    .collect(),
                b: (0..s[1]).map(|_| rng.gen_range(-0.3f32..0.3)).collect(),
            })
            .collect(),
    };
    let rows = 32;
    let x: Vec<f32> = (0..rows * 5).map(|_| rng.gen_range(-2.0f32..2.0)).collect();
    let t = Tensor::from_slice(&x, (rows, 5), &Device::Cpu).unwrap();
    let y = forward_t(&t, &net.vars().unwrap())
        .unwrap()
        .to_vec2::<f32>()
        .unwrap();
    let mut worst: f64 = 0.0;
    for (r, yr) in y.iter().enumerate() {
        let xr: Vec<f64> = x[r * 5..(r + 1) * 5].iter().map(|v| *v as f64).collect();
        let mut out = [0.0; 3];
        net.forward(&xr, &mut out);
        for j in 0..3 {
            worst = worst.max((out[j] - yr[j] as f64).abs());
        }
    }
    assert!(worst < 1e-5, "largest difference {worst}");
}

#[test]
fn path_collision_check_on_hand_placed_paths() {
    // table-2link-2obs: disc r = 0.09 at (0.5, -0.2), link radii 0.035 / 0.03. The arm stretched along +x
    // (q = 0) clears it by 0.2 - 0.09 - 0.035 = 0.075 m; swinging down to q1 = -0.8 passes through the disc
    // (it lies at atan2(-0.2, 0.5) = -0.38 rad, 0.54 m out); swinging up to q1 = 0.3 meets nothing (the other disc
    // is at (0.05, 0.55), far from the arm at q1 <= 0.3).
    let env = ArmEnv::new(Arc::new(scenario("table-2link-2obs.toml")));
    let path = |end: f64| {
        let mut e = [0.0; MAX_JOINTS];
        e[0] = end;
        let joints = vec![[0.0; MAX_JOINTS], e];
        ReferencePath {
            points: joints
                .iter()
                .map(|j| env.scenario().arm.effector(&j[..2]))
                .collect(),
            joints,
            fallback: false,
        }
    };
    assert!(path_collides(&env, &path(-0.8)));
    assert!(!path_collides(&env, &path(0.3)));
    // A start already in contact collides whatever the path.
    let mut inside = path(0.3);
    inside.joints[0][0] = -0.38;
    assert!(path_collides(&env, &inside));
}

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_termwise"))
}

/// A tiny model of the moving-goal experiment's scenario in `dir` (few rows, few epochs).
fn tiny_model(dir: &Path) -> std::process::Output {
    bin()
        .args([
            "waypoint-model",
            "experiments/moving-goal.toml",
            "--variant",
            "path-terms",
        ])
        .args([
            "--samples",
            "60",
            "--holdout",
            "10",
            "--epochs",
            "3",
            "--hidden",
            "8",
            "--seed",
            "2",
        ])
        .arg("--out")
        .arg(dir)
        .output()
        .unwrap()
}

#[test]
fn command_builds_reproducibly_and_refuses_a_mismatched_arm() {
    let d1 = scratch("model-a");
    let d2 = scratch("model-b");
    for d in [&d1, &d2] {
        let o = tiny_model(d);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        for f in [
            "dataset.csv",
            "dataset.json",
            "model.json",
            "model.safetensors",
            "quality.json",
        ] {
            assert!(d.join(f).is_file(), "{f} missing");
        }
    }
    let bytes = |d: &Path, f: &str| std::fs::read(d.join(f)).unwrap();
    assert_eq!(bytes(&d1, "dataset.csv"), bytes(&d2, "dataset.csv"));
    assert_eq!(
        bytes(&d1, "model.safetensors"),
        bytes(&d2, "model.safetensors")
    );
    // A rerun with the same inputs reuses both stages.
    let o = tiny_model(&d1);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        o.status.success() && err.contains("(reused") && err.contains("model reused"),
        "{err}"
    );
    let q: serde_json::Value = serde_json::from_slice(&bytes(&d1, "quality.json")).unwrap();
    let set = &q["sets"][0];
    assert_eq!(set["rows"], 10);
    for k in [
        "waypoint_error_mean_m",
        "waypoint_error_p95_m",
        "ms_per_query_median",
        "ms_per_plan_median",
    ] {
        assert!(
            set[k].as_f64().is_some_and(|v| v.is_finite() && v >= 0.0),
            "{k}: {set}"
        );
    }

    // Library: refused on another link length, link count, obstacle set or K, naming the difference.
    let m = WaypointModel::load(&d1).unwrap();
    let base = scenario("table-2link-2obs.toml");
    assert!(m.check_fits(&base, &plan()).is_ok());
    let mut longer = base.clone();
    longer.arm.links[1].length = 0.5;
    let e = m.check_fits(&longer, &plan()).unwrap_err();
    assert!(
        e.contains("link lengths [0.42, 0.33] m") && e.contains("[0.42, 0.5] m"),
        "{e}"
    );
    let e = m
        .check_fits(&scenario("table-3link.toml"), &plan())
        .unwrap_err();
    assert!(e.contains("2-joint arm") && e.contains("3 joints"), "{e}");
    let e = m
        .check_fits(&scenario("table-2link-4obs.toml"), &plan())
        .unwrap_err();
    assert!(
        e.contains("2 obstacle slot(s)") && e.contains("4 obstacle(s)"),
        "{e}"
    );
    let e = m
        .check_fits(
            &base,
            &PlanSpec {
                waypoints: 7,
                ..plan()
            },
        )
        .unwrap_err();
    assert!(
        e.contains("K = 5") && e.contains("plan.waypoints = 7"),
        "{e}"
    );

    // Command: assessing the model on a variant whose scenario has three links is bad input (exit 2), no panic.
    let exp = d2.join("three.toml");
    std::fs::write(
        &exp,
        format!(
            "[study]\nname = \"three\"\nseeds = 1\nbudget = 4096\n[scenario]\nfile = \"{}\"\n[reward.goal]\n[[variant]]\nname = \"arm3\"\n",
            Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("experiments/scenarios/table-3link.toml")
                .display()
        ),
    )
    .unwrap();
    let o = bin()
        .args(["waypoint-model"])
        .arg(&exp)
        .args(["--variant", "arm3", "--holdout", "5", "--model"])
        .arg(&d1)
        .arg("--out")
        .arg(d2.join("assess"))
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("2-joint arm") && err.contains("3 joints") && !err.contains("panicked"),
        "{err}"
    );
    let _ = std::fs::remove_dir_all(&d1);
    let _ = std::fs::remove_dir_all(&d2);
}

/// The model is shared across threads in an `Arc` (episodes of one run query it concurrently).
const _: fn() = || {
    fn shareable<T: Send + Sync>() {}
    shareable::<WaypointModel>();
};
