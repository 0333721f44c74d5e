//! Inverse kinematics for goal configurations: the closed-form two-link solution (law of cosines) and
//! damped least squares for any number of links (Wampler, "Manipulator inverse kinematic solutions based on
//! vector formulations and damped least-squares methods", IEEE Trans. SMC 1986; Nakamura & Hanafusa,
//! "Inverse kinematic solutions with singularity robustness for robot manipulator control", J. Dyn. Sys.
//! Meas. Control 1986).

use crate::sim::{Arm, JointVec, MAX_JOINTS};
use std::f64::consts::PI;

/// Wrap an angle into (-pi, pi].
pub fn wrap_angle(a: f64) -> f64 {
    let mut w = a.rem_euclid(2.0 * PI);
    if w > PI {
        w -= 2.0 * PI;
    }
    w
}

/// Both closed-form solutions (q1, q2) placing a two-link arm's tip at `p` (one when the arm is fully
/// stretched or folded; none when `p` is out of reach). With c2 = (x^2 + y^2 - l1^2 - l2^2) / (2 l1 l2):
/// q2 = atan2(+-sqrt(1 - c2^2), c2), q1 = atan2(y, x) - atan2(l2 sin q2, l1 + l2 cos q2). Angles in (-pi, pi].
pub fn two_link(l1: f64, l2: f64, p: [f64; 2]) -> Vec<[f64; 2]> {
    let r2 = p[0] * p[0] + p[1] * p[1];
    let c2 = (r2 - l1 * l1 - l2 * l2) / (2.0 * l1 * l2);
    if !c2.is_finite() || c2.abs() > 1.0 + 1e-12 {
        return Vec::new();
    }
    let c2 = c2.clamp(-1.0, 1.0);
    let s2 = (1.0 - c2 * c2).sqrt();
    let mut out: Vec<[f64; 2]> = Vec::with_capacity(2);
    for s in [s2, -s2] {
        let q2 = s.atan2(c2);
        let q1 = wrap_angle(p[1].atan2(p[0]) - (l2 * q2.sin()).atan2(l1 + l2 * q2.cos()));
        let q = [q1, wrap_angle(q2)];
        if !out
            .iter()
            .any(|o| (o[0] - q[0]).abs() < 1e-12 && (o[1] - q[1]).abs() < 1e-12)
        {
            out.push(q);
        }
    }
    out
}

/// Settings of the damped-least-squares solver.
#[derive(Clone, Copy, Debug)]
pub struct DlsSettings {
    /// Damping lambda, m (the update is J^T (J J^T + lambda^2 I)^-1 e).
    pub damping: f64,
    /// Stop when the tip is this close to the goal, m.
    pub tolerance: f64,
    /// Most updates.
    pub max_iterations: usize,
    /// Largest joint-space step per update, rad.
    pub max_step: f64,
}

impl Default for DlsSettings {
    fn default() -> Self {
        DlsSettings {
            damping: 0.05,
            tolerance: 1e-6,
            max_iterations: 200,
            max_step: 0.5,
        }
    }
}

/// Damped least squares from `seed`, keeping joints inside [lo, hi]. Returns the final configuration and its
/// tip distance to `goal` (m); the caller decides whether that is close enough.
pub fn damped_least_squares(
    arm: &Arm,
    goal: [f64; 2],
    seed: &JointVec,
    lo: &JointVec,
    hi: &JointVec,
    s: &DlsSettings,
) -> (JointVec, f64) {
    let n = arm.n();
    let mut q = *seed;
    let lam2 = s.damping * s.damping;
    for _ in 0..s.max_iterations {
        let p = arm.effector(&q);
        let e = [goal[0] - p[0], goal[1] - p[1]];
        if e[0].hypot(e[1]) < s.tolerance {
            break;
        }
        // Jacobian columns: d(tip)/dq_i = sum_{k >= i} l_k (-sin th_k, cos th_k).
        let mut jac = [[0.0; 2]; MAX_JOINTS];
        let mut th = 0.0;
        let mut terms = [[0.0; 2]; MAX_JOINTS];
        for (k, l) in arm.links.iter().enumerate() {
            th += q[k];
            terms[k] = [-l.length * th.sin(), l.length * th.cos()];
        }
        let mut acc = [0.0; 2];
        for i in (0..n).rev() {
            acc = [acc[0] + terms[i][0], acc[1] + terms[i][1]];
            jac[i] = acc;
        }
        // A = J J^T + lambda^2 I (2 x 2), solve A y = e, dq = J^T y.
        let (mut a, mut b, mut d) = (lam2, 0.0, lam2);
        for c in &jac[..n] {
            a += c[0] * c[0];
            b += c[0] * c[1];
            d += c[1] * c[1];
        }
        let det = a * d - b * b;
        let y = [(d * e[0] - b * e[1]) / det, (a * e[1] - b * e[0]) / det];
        let mut dq = [0.0; MAX_JOINTS];
        let mut norm = 0.0;
        for i in 0..n {
            dq[i] = jac[i][0] * y[0] + jac[i][1] * y[1];
            norm += dq[i] * dq[i];
        }
        let scale = (s.max_step / norm.sqrt()).min(1.0);
        for i in 0..n {
            q[i] = (q[i] + scale * dq[i]).clamp(lo[i], hi[i]);
        }
    }
    let p = arm.effector(&q);
    (q, (goal[0] - p[0]).hypot(goal[1] - p[1]))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    fn tip2(l1: f64, l2: f64, q: [f64; 2]) -> [f64; 2] {
        [
            l1 * q[0].cos() + l2 * (q[0] + q[1]).cos(),
            l1 * q[0].sin() + l2 * (q[0] + q[1]).sin(),
        ]
    }

    #[test]
    fn two_link_matches_hand_worked_configurations() {
        // Law of cosines for the planar two-link arm (Spong, Hutchinson & Vidyasagar, "Robot Modeling and
        // Control", 2006, the two-link inverse kinematics example; from memory), worked by hand:
        // l1 = l2 = 1, tip (1, 1): c2 = (2 - 2) / 2 = 0, so q2 = +-pi/2;
        // q1 = atan2(1, 1) - atan2(+-1, 1) = 0 (elbow +pi/2) or pi/2 (elbow -pi/2).
        let s = two_link(1.0, 1.0, [1.0, 1.0]);
        assert_eq!(s.len(), 2);
        let h = std::f64::consts::FRAC_PI_2;
        assert!(
            (s[0][0] - 0.0).abs() < 1e-12 && (s[0][1] - h).abs() < 1e-12,
            "{s:?}"
        );
        assert!(
            (s[1][0] - h).abs() < 1e-12 && (s[1][1] + h).abs() < 1e-12,
            "{s:?}"
        );
        // 3-4-5 triangle: l1 = 3, l2 = 4, tip (5, 0): c2 = (25 - 9 - 16) / 24 = 0, q2 = pi/2,
        // q1 = 0 - atan2(4, 3) = -0.927295218 (atan(4/3)).
        let s = two_link(3.0, 4.0, [5.0, 0.0]);
        assert!((s[0][0] + (4.0f64 / 3.0).atan()).abs() < 1e-12 && (s[0][1] - h).abs() < 1e-12);
        assert!((s[1][0] - (4.0f64 / 3.0).atan()).abs() < 1e-12 && (s[1][1] + h).abs() < 1e-12);
        // Fully stretched: tip at l1 + l2 on the x axis gives the single solution (0, 0).
        let s = two_link(0.42, 0.33, [0.75, 0.0]);
        assert_eq!(s.len(), 1);
        assert!(s[0][0].abs() < 1e-7 && s[0][1].abs() < 1e-7);
        // Out of reach (|p| > l1 + l2) and inside the hole (|p| < |l1 - l2|): no solution.
        assert!(two_link(0.42, 0.33, [0.8, 0.0]).is_empty());
        assert!(two_link(0.42, 0.33, [0.05, 0.0]).is_empty());
        // Both solutions reproduce the tip by forward kinematics (round trip over random targets).
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        for _ in 0..200 {
            let q = [rng.gen_range(-3.0..3.0), rng.gen_range(-3.0..3.0)];
            let p = tip2(0.42, 0.33, q);
            let sols = two_link(0.42, 0.33, p);
            assert!(!sols.is_empty());
            for s in sols {
                let t = tip2(0.42, 0.33, s);
                assert!((t[0] - p[0]).hypot(t[1] - p[1]) < 1e-9);
            }
        }
    }

    #[test]
    fn damped_least_squares_reaches_three_link_targets() {
        // DLS update dq = J^T (J J^T + lambda^2 I)^-1 e (Wampler 1986; Nakamura & Hanafusa 1986) must bring
        // the tip of a 3-link arm to reachable targets (tips of random configurations) within 1e-6 m.
        let link = |l: f64| crate::sim::Link {
            length: l,
            mass: 1.0,
            com: l / 2.0,
            inertia: l * l / 12.0,
            damping: 0.0,
            radius: 0.02,
            q_min: -3.0,
            q_max: 3.0,
            v_max: 3.0,
            tau_max: 10.0,
            acc_max: 10.0,
        };
        let arm = Arm {
            links: vec![link(0.36), link(0.28), link(0.19)],
            gravity: 0.0,
        };
        let lo = [-3.0; MAX_JOINTS];
        let hi = [3.0; MAX_JOINTS];
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let settings = DlsSettings::default();
        for _ in 0..100 {
            let mut q = [0.0; MAX_JOINTS];
            for v in q.iter_mut().take(3) {
                *v = rng.gen_range(-2.5..2.5);
            }
            let goal = arm.effector(&q[..3]);
            // Several seeds, as the planner does: at least one must converge; all converged ones are exact.
            let mut best = f64::INFINITY;
            for _ in 0..4 {
                let mut seed = [0.0; MAX_JOINTS];
                for v in seed.iter_mut().take(3) {
                    *v = rng.gen_range(-3.0..3.0);
                }
                let (sol, res) = damped_least_squares(&arm, goal, &seed, &lo, &hi, &settings);
                let tip = arm.effector(&sol[..3]);
                assert!(((tip[0] - goal[0]).hypot(tip[1] - goal[1]) - res).abs() < 1e-15);
                best = best.min(res);
            }
            assert!(best < 1e-6, "goal {goal:?}: best residual {best}");
        }
    }
}
