//! The timed joint-space reference the baseline tracks: a C1 cubic Hermite spline through the reference path's
//! waypoints (chord-length knots), timed by one scalar profile (trapezoid or quintic) whose bounds keep every
//! joint within its speed and acceleration budget, plus a fading blend that makes the reference start at the
//! arm's current velocity (so a replan while moving needs no jump).

use super::profile::{Profile, TimeScaling};
use crate::sim::{JointVec, MAX_JOINTS};

/// Reference position, velocity and acceleration at one instant (first n entries used).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct RefSample {
    pub q: JointVec,
    pub dq: JointVec,
    pub ddq: JointVec,
}

/// Per-joint budgets the time-scaling must respect.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Budget {
    /// Joint speed budget for the path motion, rad/s (may be infinite).
    pub v: JointVec,
    /// Joint acceleration budget for the path motion, rad/s^2 (finite, > 0).
    pub a: JointVec,
    /// Joint acceleration available to the start-velocity blend, rad/s^2 (finite, > 0).
    pub a_blend: JointVec,
    /// Shortest blend duration, s.
    pub blend_min: f64,
}

/// A timed joint trajectory through waypoints; t = 0 is when it was built.
#[derive(Clone, Debug, PartialEq)]
pub struct Trajectory {
    n: usize,
    /// Knot parameters u_k (cumulative joint-space chord length, rad).
    knots: Vec<f64>,
    points: Vec<JointVec>,
    /// dq/du at each knot.
    tangents: Vec<JointVec>,
    profile: Profile,
    /// Velocity left over after projecting the start velocity onto the path, faded out over `blend_time`.
    blend_vel: JointVec,
    blend_time: f64,
}

fn norm(v: &JointVec, n: usize) -> f64 {
    v[..n].iter().map(|x| x * x).sum::<f64>().sqrt()
}

impl Trajectory {
    /// Build from the current state (q, dq) through `waypoints` (K >= 1; the first is normally the current
    /// configuration — if it is not, the current configuration is prepended as an extra knot).
    ///
    /// Geometry: cubic Hermite segments with knots at cumulative chord length and tangents from the weighted
    /// three-point difference (one-sided at the ends), so a straight line of waypoints gives a straight line at
    /// unit speed in u. Timing: along-path speed bound V = min_i v_i / max|q_i'(u)|, further capped so the
    /// curvature term max|q_i''| V^2 uses at most half of a_i, and along-path acceleration bound
    /// A = min_i (a_i - max|q_i''| V^2) / max|q_i'|; maxima are sampled 8 times per segment. Hence
    /// |dq_i| = |q_i'| |u'| <= v_i and |ddq_i| <= |q_i''| u'^2 + |q_i'| |u''| <= a_i along the path.
    ///
    /// Start velocity: the profile starts at the along-path speed u'(0) = dq . q'(0) / |q'(0)|^2 (clamped to
    /// [0, V]); the rest r = dq - q'(0) u'(0) is added as b(t) = r t (1 - t/T_b)^3, which has b(0) = 0,
    /// b'(0) = r and fades out with zero velocity and acceleration at T_b = max(blend_min, max_i 6 |r_i| / a_blend_i)
    /// (its peak acceleration is 6 |r| / T_b, at t = 0). So the reference starts exactly at (q, dq).
    pub fn new(
        n: usize,
        waypoints: &[JointVec],
        q: &[f64],
        dq: &[f64],
        kind: TimeScaling,
        budget: &Budget,
    ) -> Trajectory {
        let mut start = [0.0; MAX_JOINTS];
        start[..n].copy_from_slice(&q[..n]);
        let mut points: Vec<JointVec> = Vec::with_capacity(waypoints.len() + 1);
        points.push(start);
        for w in waypoints {
            let last = points.last().expect("non-empty");
            let d: f64 = (0..n).map(|i| (w[i] - last[i]).powi(2)).sum::<f64>().sqrt();
            if d > 1e-9 {
                let mut p = [0.0; MAX_JOINTS];
                p[..n].copy_from_slice(&w[..n]);
                points.push(p);
            }
        }
        let k = points.len();
        let mut knots = vec![0.0; k];
        for j in 1..k {
            let d: f64 = (0..n)
                .map(|i| (points[j][i] - points[j - 1][i]).powi(2))
                .sum::<f64>()
                .sqrt();
            knots[j] = knots[j - 1] + d;
        }
        let mut tangents = vec![[0.0; MAX_JOINTS]; k];
        if k >= 2 {
            let chord = |j: usize| -> JointVec {
                let h = knots[j + 1] - knots[j];
                let mut c = [0.0; MAX_JOINTS];
                for i in 0..n {
                    c[i] = (points[j + 1][i] - points[j][i]) / h;
                }
                c
            };
            tangents[0] = chord(0);
            tangents[k - 1] = chord(k - 2);
            for j in 1..k - 1 {
                let (h0, h1) = (knots[j] - knots[j - 1], knots[j + 1] - knots[j]);
                let (c0, c1) = (chord(j - 1), chord(j));
                for i in 0..n {
                    tangents[j][i] = (h1 * c0[i] + h0 * c1[i]) / (h0 + h1);
                }
            }
        }
        let mut traj = Trajectory {
            n,
            knots,
            points,
            tangents,
            profile: Profile::still(),
            blend_vel: [0.0; MAX_JOINTS],
            blend_time: 0.0,
        };
        let length = traj.length();
        let (v_path, a_path) = traj.path_bounds(budget);
        let t0 = traj.tangents[0];
        let t0n = norm(&t0, n);
        let mut u0 = 0.0;
        if length > 0.0 && t0n > 0.0 {
            u0 = ((0..n).map(|i| dq[i] * t0[i]).sum::<f64>() / (t0n * t0n)).clamp(0.0, v_path);
        }
        traj.profile = Profile::new(kind, length, u0, v_path, a_path);
        let mut blend_time = 0.0f64;
        for i in 0..n {
            traj.blend_vel[i] = dq[i] - t0[i] * u0;
            let r = traj.blend_vel[i].abs();
            if r > 0.0 {
                blend_time = blend_time.max(6.0 * r / budget.a_blend[i]);
            }
        }
        traj.blend_time = if norm(&traj.blend_vel, n) > 0.0 {
            blend_time.max(budget.blend_min).max(1e-6)
        } else {
            0.0
        };
        traj
    }

    /// Path length in the spline parameter (joint-space chord length), rad.
    pub fn length(&self) -> f64 {
        *self.knots.last().expect("at least the start knot")
    }

    /// The timing profile along the path.
    pub fn profile(&self) -> &Profile {
        &self.profile
    }

    /// Time until the reference comes to rest at the last waypoint, s.
    pub fn duration(&self) -> f64 {
        self.profile.duration().max(self.blend_time)
    }

    /// The knot points (the current configuration at build time first, then the distinct waypoints).
    pub fn points(&self) -> &[JointVec] {
        &self.points
    }

    /// Along-path speed and acceleration bounds (V, A) from the joint budgets (see `new`).
    fn path_bounds(&self, b: &Budget) -> (f64, f64) {
        let n = self.n;
        let mut d1 = [0.0f64; MAX_JOINTS];
        let mut d2 = [0.0f64; MAX_JOINTS];
        for s in 0..self.knots.len().saturating_sub(1) {
            for m in 0..=8 {
                let u = self.knots[s] + (self.knots[s + 1] - self.knots[s]) * m as f64 / 8.0;
                let (_, g1, g2) = self.geometry(u);
                for i in 0..n {
                    d1[i] = d1[i].max(g1[i].abs());
                    d2[i] = d2[i].max(g2[i].abs());
                }
            }
        }
        let mut v = f64::INFINITY;
        for i in 0..n {
            if d1[i] > 0.0 {
                v = v.min(b.v[i] / d1[i]);
            }
            if d2[i] > 0.0 {
                v = v.min((0.5 * b.a[i] / d2[i]).sqrt());
            }
        }
        let mut a = f64::INFINITY;
        for i in 0..n {
            if d1[i] > 0.0 {
                let curv = if v.is_finite() { d2[i] * v * v } else { 0.0 };
                a = a.min((b.a[i] - curv) / d1[i]);
            }
        }
        if !a.is_finite() {
            a = 1.0; // no joint moves: the path is a point and the profile is still
        }
        (v, a)
    }

    /// Path geometry at parameter u: (q(u), q'(u), q''(u)). Outside [0, L] the path continues along its end
    /// tangents (straight lines), so an overshooting profile stays smooth.
    pub fn geometry(&self, u: f64) -> (JointVec, JointVec, JointVec) {
        let n = self.n;
        let (mut q, mut d1, mut d2) = ([0.0; MAX_JOINTS], [0.0; MAX_JOINTS], [0.0; MAX_JOINTS]);
        let k = self.knots.len();
        if k == 1 {
            return (self.points[0], d1, d2);
        }
        let l = self.length();
        if u <= 0.0 || u >= l {
            let (j, du) = if u <= 0.0 { (0, u) } else { (k - 1, u - l) };
            for i in 0..n {
                q[i] = self.points[j][i] + self.tangents[j][i] * du;
                d1[i] = self.tangents[j][i];
            }
            return (q, d1, d2);
        }
        let s = self.knots.partition_point(|&x| x <= u).clamp(1, k - 1) - 1;
        let h = self.knots[s + 1] - self.knots[s];
        let x = (u - self.knots[s]) / h;
        let (x2, x3) = (x * x, x * x * x);
        let (h00, h10, h01, h11) = (
            2.0 * x3 - 3.0 * x2 + 1.0,
            x3 - 2.0 * x2 + x,
            -2.0 * x3 + 3.0 * x2,
            x3 - x2,
        );
        let (g00, g10, g01, g11) = (
            6.0 * x2 - 6.0 * x,
            3.0 * x2 - 4.0 * x + 1.0,
            -6.0 * x2 + 6.0 * x,
            3.0 * x2 - 2.0 * x,
        );
        let (c00, c10, c01, c11) = (
            12.0 * x - 6.0,
            6.0 * x - 4.0,
            -12.0 * x + 6.0,
            6.0 * x - 2.0,
        );
        let (p0, p1, m0, m1) = (
            &self.points[s],
            &self.points[s + 1],
            &self.tangents[s],
            &self.tangents[s + 1],
        );
        for i in 0..n {
            q[i] = h00 * p0[i] + h10 * h * m0[i] + h01 * p1[i] + h11 * h * m1[i];
            d1[i] = (g00 * p0[i] + g10 * h * m0[i] + g01 * p1[i] + g11 * h * m1[i]) / h;
            d2[i] = (c00 * p0[i] + c10 * h * m0[i] + c01 * p1[i] + c11 * h * m1[i]) / (h * h);
        }
        (q, d1, d2)
    }

    /// The reference at time t since the trajectory was built (at rest on the last waypoint after `duration`).
    pub fn sample(&self, t: f64) -> RefSample {
        let t = t.max(0.0);
        let (u, ud, udd) = self.profile.eval(t);
        let (g0, g1, g2) = self.geometry(u);
        let mut r = RefSample {
            q: g0,
            dq: [0.0; MAX_JOINTS],
            ddq: [0.0; MAX_JOINTS],
        };
        for i in 0..self.n {
            r.dq[i] = g1[i] * ud;
            r.ddq[i] = g2[i] * ud * ud + g1[i] * udd;
        }
        if t < self.blend_time {
            // b(t) = r t (1 - x)^3, x = t / T_b: b' = r (1 - x)^2 (1 - 4x), b'' = r (6 / T_b) (1 - x)(2x - 1).
            let tb = self.blend_time;
            let x = t / tb;
            let (f, f1, f2) = (
                t * (1.0 - x).powi(3),
                (1.0 - x).powi(2) * (1.0 - 4.0 * x),
                6.0 / tb * (1.0 - x) * (2.0 * x - 1.0),
            );
            for i in 0..self.n {
                r.q[i] += self.blend_vel[i] * f;
                r.dq[i] += self.blend_vel[i] * f1;
                r.ddq[i] += self.blend_vel[i] * f2;
            }
        }
        r
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn budget(v: [f64; 2], a: [f64; 2]) -> Budget {
        let mut b = Budget {
            v: [f64::INFINITY; MAX_JOINTS],
            a: [1.0; MAX_JOINTS],
            a_blend: [1.0; MAX_JOINTS],
            blend_min: 0.1,
        };
        b.v[..2].copy_from_slice(&v);
        b.a[..2].copy_from_slice(&a);
        b.a_blend[..2].copy_from_slice(&a);
        b
    }

    fn jv(a: f64, b: f64) -> JointVec {
        let mut v = [0.0; MAX_JOINTS];
        v[0] = a;
        v[1] = b;
        v
    }

    #[test]
    fn single_joint_move_takes_the_trapezoid_time() {
        // Joint 1 moves 2 rad, joint 2 still; v = 2.7 rad/s, a = 8.4 rad/s^2:
        // T = d/v + v/a = 0.7407 + 0.3214 (trapezoidal profile, common practice).
        let b = budget([2.7, 3.0], [8.4, 10.0]);
        let tr = Trajectory::new(
            2,
            &[jv(0.5, 0.2), jv(2.5, 0.2)],
            &[0.5, 0.2],
            &[0.0, 0.0],
            TimeScaling::Trapezoid,
            &b,
        );
        assert_relative_eq!(tr.duration(), 2.0 / 2.7 + 2.7 / 8.4, epsilon = 1e-12);
        let mid = tr.sample(tr.duration() / 2.0);
        assert_relative_eq!(mid.q[0], 1.5, epsilon = 1e-12);
        assert_relative_eq!(mid.dq[0], 2.7, epsilon = 1e-12);
        assert_eq!(mid.q[1], 0.2);
        let end = tr.sample(10.0);
        assert_eq!((end.q[0], end.dq[0], end.ddq[0]), (2.5, 0.0, 0.0));
    }

    #[test]
    fn straight_diagonal_line_is_synchronised() {
        // Both joints arrive together; the joint with the tighter budget (relative to its distance) sets the pace:
        // joint 1 moves 1 rad at <= 1 rad/s, joint 2 moves 3 rad at <= 6 rad/s -> joint 2 is limited to 3 rad/s.
        let b = budget([1.0, 6.0], [100.0, 100.0]);
        let tr = Trajectory::new(
            2,
            &[jv(0.0, 0.0), jv(1.0, 3.0)],
            &[0.0, 0.0],
            &[0.0, 0.0],
            TimeScaling::Trapezoid,
            &b,
        );
        let t = tr.duration() / 2.0;
        let s = tr.sample(t);
        assert_relative_eq!(s.dq[0], 1.0, epsilon = 1e-9);
        assert_relative_eq!(s.dq[1], 3.0, epsilon = 1e-9);
        assert_relative_eq!(s.q[1], 3.0 * s.q[0], epsilon = 1e-9);
    }

    #[test]
    fn curved_path_passes_waypoints_within_budget() {
        // An L-shaped path with many waypoints: the reference passes through every waypoint, finite-difference
        // speeds and accelerations respect the budget, and it ends at rest on the last waypoint.
        let mut w = Vec::new();
        for k in 0..=10 {
            w.push(jv(0.2 * k as f64, 0.0));
        }
        for k in 1..=10 {
            w.push(jv(2.0, 0.15 * k as f64));
        }
        let b = budget([2.0, 2.5], [6.0, 8.0]);
        for kind in [TimeScaling::Trapezoid, TimeScaling::Quintic] {
            let tr = Trajectory::new(2, &w, &[0.0, 0.0], &[0.0, 0.0], kind, &b);
            let d = tr.duration();
            let m = 20_000;
            let h = d / m as f64;
            let mut closest = vec![f64::INFINITY; w.len()];
            for k in 0..=m {
                let s = tr.sample(k as f64 * h);
                for i in 0..2 {
                    assert!(s.dq[i].abs() <= b.v[i] * (1.0 + 1e-3), "{kind:?} speed {i}");
                    assert!(s.ddq[i].abs() <= b.a[i] * (1.0 + 1e-3), "{kind:?} acc {i}");
                }
                for (j, p) in w.iter().enumerate() {
                    closest[j] = closest[j].min((s.q[0] - p[0]).hypot(s.q[1] - p[1]));
                }
                // Analytic velocity agrees with a finite difference of positions.
                if k > 0 && k < m {
                    let (a, c) = (tr.sample((k - 1) as f64 * h), tr.sample((k + 1) as f64 * h));
                    let fd = (c.q[0] - a.q[0]) / (2.0 * h);
                    assert!(
                        (fd - s.dq[0]).abs() < 1e-3,
                        "{kind:?} fd {fd} vs {}",
                        s.dq[0]
                    );
                }
            }
            assert!(closest.iter().all(|&c| c < 2e-3), "{kind:?} {closest:?}");
            let end = tr.sample(d + 0.1);
            assert_eq!((end.q[0], end.q[1], end.dq[0]), (2.0, 1.5, 0.0));
        }
    }

    #[test]
    fn replan_starts_at_the_current_state() {
        // Moving at (1.0, -2.0) rad/s with a path heading mostly along joint 1: the reference starts exactly at the
        // current position and velocity, and the off-path part fades out by the blend time.
        let b = budget([3.0, 3.0], [10.0, 10.0]);
        let q = [0.3, 0.4];
        let dq = [1.0, -2.0];
        let tr = Trajectory::new(
            2,
            &[jv(0.3, 0.4), jv(2.0, 0.6)],
            &q,
            &dq,
            TimeScaling::Trapezoid,
            &b,
        );
        let s0 = tr.sample(0.0);
        for i in 0..2 {
            assert_relative_eq!(s0.q[i], q[i], epsilon = 1e-12);
            assert_relative_eq!(s0.dq[i], dq[i], epsilon = 1e-12);
        }
        let end = tr.sample(tr.duration());
        assert_relative_eq!(end.q[0], 2.0, epsilon = 1e-12);
        assert_relative_eq!(end.q[1], 0.6, epsilon = 1e-12);
        assert_eq!(end.dq[0], 0.0);
        // A start off the path's first waypoint is prepended as a knot.
        let tr = Trajectory::new(
            2,
            &[jv(0.0, 0.0), jv(1.0, 0.0)],
            &[0.1, 0.1],
            &[0.0, 0.0],
            TimeScaling::Quintic,
            &b,
        );
        assert_eq!(tr.points().len(), 3);
        assert_relative_eq!(tr.sample(0.0).q[1], 0.1, epsilon = 1e-12);
    }
}
