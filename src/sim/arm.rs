//! The planar serial arm: forward kinematics and rigid-body dynamics M(q) ddq + C(q,dq) dq + G(q) + B dq = tau
//! for 1..=6 revolute joints, in f64, with no heap allocation on the hot path.
//!
//! Inverse dynamics is the recursive Newton-Euler algorithm specialised to the plane; the mass matrix is
//! assembled from link Jacobians (equivalent to the composite-rigid-body algorithm, Featherstone,
//! "Rigid Body Dynamics Algorithms", 2008, ch. 6); forward dynamics solves with a Cholesky factorisation.

/// Most joints an arm may have.
pub const MAX_JOINTS: usize = 6;
/// A per-joint vector; only the first `n` entries are used.
pub type JointVec = [f64; MAX_JOINTS];

/// One rigid link and the revolute joint at its base.
#[derive(Clone, Debug, PartialEq)]
pub struct Link {
    /// Length from this joint to the next, m.
    pub length: f64,
    /// Mass, kg.
    pub mass: f64,
    /// Distance of the centre of mass from this joint along the link, m (uniform rod: length / 2).
    pub com: f64,
    /// Moment of inertia about the centre of mass, kg m^2 (uniform rod: m l^2 / 12).
    pub inertia: f64,
    /// Viscous joint damping, N m s/rad.
    pub damping: f64,
    /// Capsule radius for collision checks, m.
    pub radius: f64,
    /// Joint position limits, rad (relative angle). Infinite means free rotation.
    pub q_min: f64,
    pub q_max: f64,
    /// Joint speed limit, rad/s (|dq| is clamped to it).
    pub v_max: f64,
    /// Joint torque limit, N m.
    pub tau_max: f64,
    /// Joint acceleration limit, rad/s^2 (bounds the commanded acceleration in acceleration mode).
    pub acc_max: f64,
}

/// A planar arm in the x-y plane, base at the origin, gravity along -y.
#[derive(Clone, Debug, PartialEq)]
pub struct Arm {
    pub links: Vec<Link>,
    /// Gravitational acceleration, m/s^2, acting along -y (0 for a table-top plane).
    pub gravity: f64,
}

#[inline]
fn cross(a: [f64; 2], b: [f64; 2]) -> f64 {
    a[0] * b[1] - a[1] * b[0]
}

/// Sines and cosines of the absolute link angles (theta_i = q_1 + ... + q_i), computed once per state.
#[derive(Clone, Copy, Debug)]
pub struct Trig {
    pub cos: JointVec,
    pub sin: JointVec,
}

impl Trig {
    /// Absolute-angle trigonometry for the first `n` joints of `q`.
    #[inline]
    pub fn new(q: &[f64], n: usize) -> Trig {
        let mut t = Trig {
            cos: [0.0; MAX_JOINTS],
            sin: [0.0; MAX_JOINTS],
        };
        let mut th = 0.0;
        for i in 0..n {
            th += q[i];
            let (s, c) = th.sin_cos();
            t.sin[i] = s;
            t.cos[i] = c;
        }
        t
    }
}

impl Arm {
    /// Number of joints.
    #[inline]
    pub fn n(&self) -> usize {
        self.links.len()
    }

    /// Total reach (sum of link lengths), m.
    pub fn reach(&self) -> f64 {
        self.links.iter().map(|l| l.length).sum()
    }

    /// Joint positions: `pts[0]` is the base, `pts[i+1]` the end of link i; returns the count `n + 1`.
    pub fn joint_points(&self, q: &[f64], pts: &mut [[f64; 2]; MAX_JOINTS + 1]) -> usize {
        let mut th = 0.0;
        pts[0] = [0.0, 0.0];
        for (i, l) in self.links.iter().enumerate() {
            th += q[i];
            let (s, c) = th.sin_cos();
            pts[i + 1] = [pts[i][0] + l.length * c, pts[i][1] + l.length * s];
        }
        self.n() + 1
    }

    /// `joint_points` from precomputed trigonometry.
    pub fn joint_points_trig(&self, tr: &Trig, pts: &mut [[f64; 2]; MAX_JOINTS + 1]) -> usize {
        pts[0] = [0.0, 0.0];
        for (i, l) in self.links.iter().enumerate() {
            pts[i + 1] = [
                pts[i][0] + l.length * tr.cos[i],
                pts[i][1] + l.length * tr.sin[i],
            ];
        }
        self.n() + 1
    }

    /// `effector_velocity` from precomputed trigonometry.
    pub fn effector_velocity_trig(&self, tr: &Trig, dq: &[f64]) -> [f64; 2] {
        let mut w = 0.0;
        let mut v = [0.0; 2];
        for (i, l) in self.links.iter().enumerate() {
            w += dq[i];
            v[0] -= w * l.length * tr.sin[i];
            v[1] += w * l.length * tr.cos[i];
        }
        v
    }

    /// End-effector position, m.
    pub fn effector(&self, q: &[f64]) -> [f64; 2] {
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        let n = self.joint_points(q, &mut pts);
        pts[n - 1]
    }

    /// End-effector velocity, m/s (J(q) dq).
    pub fn effector_velocity(&self, q: &[f64], dq: &[f64]) -> [f64; 2] {
        let mut th = 0.0;
        let mut w = 0.0;
        let mut v = [0.0; 2];
        for (i, l) in self.links.iter().enumerate() {
            th += q[i];
            w += dq[i];
            let (s, c) = th.sin_cos();
            v[0] -= w * l.length * s;
            v[1] += w * l.length * c;
        }
        v
    }

    /// Joint-space mass matrix M(q), written into the top-left n x n block of `m`.
    pub fn mass_matrix(&self, q: &[f64], m: &mut [[f64; MAX_JOINTS]; MAX_JOINTS]) {
        self.mass_matrix_trig(&Trig::new(q, self.n()), m)
    }

    /// `mass_matrix` from precomputed trigonometry.
    pub fn mass_matrix_trig(&self, tr: &Trig, m: &mut [[f64; MAX_JOINTS]; MAX_JOINTS]) {
        let n = self.n();
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        for (i, l) in self.links.iter().enumerate() {
            pts[i + 1] = [
                pts[i][0] + l.length * tr.cos[i],
                pts[i][1] + l.length * tr.sin[i],
            ];
        }
        for row in m.iter_mut().take(n) {
            row[..n].fill(0.0);
        }
        for (i, l) in self.links.iter().enumerate() {
            let (s, c) = (tr.sin[i], tr.cos[i]);
            let ci = [pts[i][0] + l.com * c, pts[i][1] + l.com * s];
            // Linear Jacobian column j (j <= i): z x (c_i - p_j); angular Jacobian column: 1.
            let mut jv = [[0.0; 2]; MAX_JOINTS];
            for (j, col) in jv.iter_mut().enumerate().take(i + 1) {
                *col = [-(ci[1] - pts[j][1]), ci[0] - pts[j][0]];
            }
            for a in 0..=i {
                for b in a..=i {
                    let v = l.mass * (jv[a][0] * jv[b][0] + jv[a][1] * jv[b][1]) + l.inertia;
                    m[a][b] += v;
                }
            }
        }
        for a in 0..n {
            for b in 0..a {
                m[a][b] = m[b][a];
            }
        }
    }

    /// Recursive Newton-Euler inverse dynamics: the joint torques that produce `ddq` at (q, dq),
    /// including gravity and viscous damping: tau = M ddq + C dq + G + B dq.
    pub fn inverse_dynamics(&self, q: &[f64], dq: &[f64], ddq: &[f64]) -> JointVec {
        self.inverse_dynamics_trig(&Trig::new(q, self.n()), dq, ddq)
    }

    /// `inverse_dynamics` from precomputed trigonometry.
    pub fn inverse_dynamics_trig(&self, tr: &Trig, dq: &[f64], ddq: &[f64]) -> JointVec {
        let n = self.n();
        // Forward pass: kinematics of each link. Gravity enters as an upward base acceleration.
        let mut alpha = [0.0; MAX_JOINTS];
        let mut ac = [[0.0; 2]; MAX_JOINTS];
        let mut lvec = [[0.0; 2]; MAX_JOINTS];
        let mut rc = [[0.0; 2]; MAX_JOINTS];
        let mut a_p = [0.0, self.gravity];
        let (mut w, mut al) = (0.0, 0.0);
        for (i, l) in self.links.iter().enumerate() {
            w += dq[i];
            al += ddq[i];
            let u = [tr.cos[i], tr.sin[i]];
            let r = [l.com * u[0], l.com * u[1]];
            let lv = [l.length * u[0], l.length * u[1]];
            ac[i] = [
                a_p[0] - al * r[1] - w * w * r[0],
                a_p[1] + al * r[0] - w * w * r[1],
            ];
            a_p = [
                a_p[0] - al * lv[1] - w * w * lv[0],
                a_p[1] + al * lv[0] - w * w * lv[1],
            ];
            alpha[i] = al;
            rc[i] = r;
            lvec[i] = lv;
        }
        // Backward pass: forces and moments about each joint.
        let mut tau = [0.0; MAX_JOINTS];
        let mut f_next = [0.0; 2];
        let mut n_next = 0.0;
        for i in (0..n).rev() {
            let l = &self.links[i];
            let ma = [l.mass * ac[i][0], l.mass * ac[i][1]];
            let n_i = n_next + l.inertia * alpha[i] + cross(rc[i], ma) + cross(lvec[i], f_next);
            f_next = [ma[0] + f_next[0], ma[1] + f_next[1]];
            n_next = n_i;
            tau[i] = n_i + l.damping * dq[i];
        }
        tau
    }

    /// Bias torques h(q, dq) = C(q,dq) dq + G(q) + B dq (inverse dynamics at zero acceleration).
    pub fn bias(&self, q: &[f64], dq: &[f64]) -> JointVec {
        self.inverse_dynamics(q, dq, &[0.0; MAX_JOINTS])
    }

    /// Forward dynamics: ddq = M(q)^-1 (tau - h(q, dq)), by Cholesky factorisation.
    pub fn forward_dynamics(&self, q: &[f64], dq: &[f64], tau: &[f64]) -> JointVec {
        self.forward_dynamics_trig(&Trig::new(q, self.n()), dq, tau)
    }

    /// `forward_dynamics` from precomputed trigonometry (one set of sines and cosines serves M and h).
    pub fn forward_dynamics_trig(&self, tr: &Trig, dq: &[f64], tau: &[f64]) -> JointVec {
        let n = self.n();
        let mut m = [[0.0; MAX_JOINTS]; MAX_JOINTS];
        self.mass_matrix_trig(tr, &mut m);
        let h = self.inverse_dynamics_trig(tr, dq, &[0.0; MAX_JOINTS]);
        let mut rhs = [0.0; MAX_JOINTS];
        for i in 0..n {
            rhs[i] = tau[i] - h[i];
        }
        cholesky_solve(&mut m, n, &mut rhs);
        rhs
    }

    /// Total energy: kinetic 1/2 dq' M dq plus gravitational potential sum m_i g y_ci, J.
    pub fn energy(&self, q: &[f64], dq: &[f64]) -> f64 {
        let n = self.n();
        let mut m = [[0.0; MAX_JOINTS]; MAX_JOINTS];
        self.mass_matrix(q, &mut m);
        let mut ke = 0.0;
        for a in 0..n {
            for b in 0..n {
                ke += 0.5 * dq[a] * m[a][b] * dq[b];
            }
        }
        let mut pe = 0.0;
        let mut th = 0.0;
        let mut y = 0.0;
        for (i, l) in self.links.iter().enumerate() {
            th += q[i];
            let s = th.sin();
            pe += l.mass * self.gravity * (y + l.com * s);
            y += l.length * s;
        }
        ke + pe
    }
}

/// Solve M x = b in place (b becomes x) for a symmetric positive-definite n x n block, by Cholesky
/// (M = L L^T); `m` is overwritten with L in its lower triangle.
pub fn cholesky_solve(
    m: &mut [[f64; MAX_JOINTS]; MAX_JOINTS],
    n: usize,
    b: &mut [f64; MAX_JOINTS],
) {
    cholesky_factor(m, n);
    cholesky_substitute(m, n, b);
}

/// Overwrite the lower triangle of the n x n block of `m` with its Cholesky factor L (M = L L^T).
pub fn cholesky_factor(m: &mut [[f64; MAX_JOINTS]; MAX_JOINTS], n: usize) {
    for j in 0..n {
        let mut d = m[j][j];
        for k in 0..j {
            d -= m[j][k] * m[j][k];
        }
        let d = d.max(f64::MIN_POSITIVE).sqrt();
        m[j][j] = d;
        for i in j + 1..n {
            let mut s = m[i][j];
            for k in 0..j {
                s -= m[i][k] * m[j][k];
            }
            m[i][j] = s / d;
        }
    }
}

/// Solve L L^T x = b in place (b becomes x) with a factor from `cholesky_factor`.
pub fn cholesky_substitute(
    l: &[[f64; MAX_JOINTS]; MAX_JOINTS],
    n: usize,
    b: &mut [f64; MAX_JOINTS],
) {
    for i in 0..n {
        let mut s = b[i];
        for k in 0..i {
            s -= l[i][k] * b[k];
        }
        b[i] = s / l[i][i];
    }
    for i in (0..n).rev() {
        let mut s = b[i];
        for k in i + 1..n {
            s -= l[k][i] * b[k];
        }
        b[i] = s / l[i][i];
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use approx::assert_relative_eq;

    pub(crate) fn rod(length: f64, mass: f64) -> Link {
        Link {
            length,
            mass,
            com: length / 2.0,
            inertia: mass * length * length / 12.0,
            damping: 0.0,
            radius: 0.02,
            q_min: f64::NEG_INFINITY,
            q_max: f64::INFINITY,
            v_max: f64::INFINITY,
            tau_max: f64::INFINITY,
            acc_max: f64::INFINITY,
        }
    }

    /// Two-link closed forms from Spong, Hutchinson & Vidyasagar, "Robot Modeling and Control" (Wiley 2006),
    /// section 7.4.1 (two-link revolute planar arm): d11, d12, d22, the Christoffel term h = -m2 l1 lc2 sin q2,
    /// and phi1, phi2 with gravity along -y.
    #[allow(clippy::type_complexity)]
    fn spong_two_link(
        p: (f64, f64, f64, f64, f64, f64, f64, f64),
        g: f64,
        q: [f64; 2],
        dq: [f64; 2],
    ) -> ([[f64; 2]; 2], [f64; 2], [f64; 2]) {
        let (m1, m2, l1, _l2, lc1, lc2, i1, i2) = p;
        let c2 = q[1].cos();
        let d11 = m1 * lc1 * lc1 + m2 * (l1 * l1 + lc2 * lc2 + 2.0 * l1 * lc2 * c2) + i1 + i2;
        let d12 = m2 * (lc2 * lc2 + l1 * lc2 * c2) + i2;
        let d22 = m2 * lc2 * lc2 + i2;
        let h = -m2 * l1 * lc2 * q[1].sin();
        let cdq = [
            h * dq[1] * dq[0] + h * (dq[0] + dq[1]) * dq[1],
            -h * dq[0] * dq[0],
        ];
        let phi2 = m2 * lc2 * g * (q[0] + q[1]).cos();
        let phi1 = (m1 * lc1 + m2 * l1) * g * q[0].cos() + phi2;
        ([[d11, d12], [d12, d22]], cdq, [phi1, phi2])
    }

    #[test]
    fn two_link_matches_spong_closed_forms() {
        let params = [
            (1.0, 1.0, 1.0, 1.0, 0.5, 0.5, 1.0 / 12.0, 1.0 / 12.0),
            (2.3, 0.7, 0.6, 0.45, 0.21, 0.3, 0.05, 0.013),
            (0.5, 1.9, 0.35, 0.8, 0.1, 0.55, 0.02, 0.2),
        ];
        let states = [
            ([0.3, -1.1], [0.7, 2.0]),
            ([2.5, 0.4], [-1.5, 0.3]),
            ([-0.8, 2.9], [3.0, -2.2]),
        ];
        for p in params {
            let (m1, m2, l1, l2, lc1, lc2, i1, i2) = p;
            let mut a = rod(l1, m1);
            a.com = lc1;
            a.inertia = i1;
            let mut b = rod(l2, m2);
            b.com = lc2;
            b.inertia = i2;
            let g = 9.81;
            let arm = Arm {
                links: vec![a, b],
                gravity: g,
            };
            for (q, dq) in states {
                let (d, cdq, phi) = spong_two_link(p, g, q, dq);
                let mut m = [[0.0; MAX_JOINTS]; MAX_JOINTS];
                arm.mass_matrix(&q, &mut m);
                for r in 0..2 {
                    for c in 0..2 {
                        assert_relative_eq!(m[r][c], d[r][c], max_relative = 1e-12);
                    }
                }
                let grav = arm.bias(&q, &[0.0, 0.0]);
                let h = arm.bias(&q, &dq);
                for i in 0..2 {
                    assert_relative_eq!(grav[i], phi[i], max_relative = 1e-12, epsilon = 1e-12);
                    assert_relative_eq!(
                        h[i] - grav[i],
                        cdq[i],
                        max_relative = 1e-12,
                        epsilon = 1e-12
                    );
                }
            }
        }
    }

    #[test]
    fn forward_dynamics_inverts_inverse_dynamics() {
        // Consistency of Cholesky forward dynamics with Newton-Euler inverse dynamics (identity check, no source needed).
        let mut links = vec![rod(0.4, 1.2), rod(0.3, 0.8), rod(0.25, 0.5)];
        links[1].damping = 0.3;
        let arm = Arm {
            links,
            gravity: 9.81,
        };
        let q = [0.2, -0.7, 1.3, 0.0, 0.0, 0.0];
        let dq = [1.0, -0.5, 2.0, 0.0, 0.0, 0.0];
        let ddq = [0.3, 4.0, -2.5, 0.0, 0.0, 0.0];
        let tau = arm.inverse_dynamics(&q, &dq, &ddq);
        let back = arm.forward_dynamics(&q, &dq, &tau);
        for i in 0..3 {
            assert_relative_eq!(back[i], ddq[i], max_relative = 1e-10);
        }
    }

    #[test]
    fn forward_kinematics_hand_worked() {
        // Hand-worked: links 0.5 and 0.3; q = (90 deg, -90 deg) puts the elbow at (0, 0.5) and the tip at (0.3, 0.5).
        let arm = Arm {
            links: vec![rod(0.5, 1.0), rod(0.3, 1.0)],
            gravity: 0.0,
        };
        let p = arm.effector(&[std::f64::consts::FRAC_PI_2, -std::f64::consts::FRAC_PI_2]);
        assert_relative_eq!(p[0], 0.3, epsilon = 1e-12);
        assert_relative_eq!(p[1], 0.5, epsilon = 1e-12);
        // q = (0, 180 deg): folded back, tip at (0.2, 0).
        let p = arm.effector(&[0.0, std::f64::consts::PI]);
        assert_relative_eq!(p[0], 0.2, epsilon = 1e-12);
        assert_relative_eq!(p[1], 0.0, epsilon = 1e-12);
        // Three links of 1 m at 30 deg each: absolute angles 30, 60, 90 deg.
        let arm3 = Arm {
            links: vec![rod(1.0, 1.0), rod(1.0, 1.0), rod(1.0, 1.0)],
            gravity: 0.0,
        };
        let d = std::f64::consts::PI / 6.0;
        let p = arm3.effector(&[d, d, d]);
        assert_relative_eq!(p[0], 3f64.sqrt() / 2.0 + 0.5, epsilon = 1e-12);
        assert_relative_eq!(p[1], 0.5 + 3f64.sqrt() / 2.0 + 1.0, epsilon = 1e-12);
    }
}
