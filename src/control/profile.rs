//! Scalar time-scalings of a path parameter u in [0, L]: a trapezoidal velocity profile and a quintic
//! polynomial, each starting from a given non-negative speed and ending at rest at u = L, under a speed
//! bound V and an acceleration bound A. The joint trajectory maps these through the path geometry.

/// How the path parameter is timed (the `baseline.time_scaling` key).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum TimeScaling {
    /// Constant acceleration, cruise at the speed bound, constant deceleration (bang-coast-bang): the fastest
    /// profile under the bounds; acceleration jumps at the phase changes. Default.
    #[default]
    Trapezoid,
    /// Quintic polynomial with zero acceleration at both ends: smooth (finite jerk) but slower, since its peak
    /// speed is 15/8 of the mean speed and its peak acceleration 10/sqrt(3) L / T^2.
    Quintic,
}

/// A timed scalar profile u(t), t >= 0 measured from its start; u(t) = L for t past the end.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Profile {
    /// Accelerate at `acc` from `v0` to `vp` for `t1`, cruise at `vp` for `t2`, decelerate at `dec` to rest for `t3`.
    Trapezoid {
        length: f64,
        v0: f64,
        vp: f64,
        acc: f64,
        dec: f64,
        t1: f64,
        t2: f64,
        t3: f64,
    },
    /// u(t) = sum c_k t^k for t in [0, duration].
    Quintic {
        length: f64,
        coef: [f64; 6],
        duration: f64,
    },
}

/// Peak velocity of the rest-to-rest quintic s(tau) = 10 tau^3 - 15 tau^4 + 6 tau^5 per unit L / T:
/// s'(1/2) = 30/4 - 60/8 + 30/16 = 15/8 (hand-derived).
pub const QUINTIC_PEAK_VEL: f64 = 1.875;
/// Peak acceleration of the same quintic per unit L / T^2: s''(1/2 - sqrt(3)/6) = 10/sqrt(3) (hand-derived).
pub const QUINTIC_PEAK_ACC: f64 = 5.773_502_691_896_258;

impl Profile {
    /// A profile that stays at u = 0.
    pub fn still() -> Profile {
        Profile::Trapezoid {
            length: 0.0,
            v0: 0.0,
            vp: 0.0,
            acc: 0.0,
            dec: 0.0,
            t1: 0.0,
            t2: 0.0,
            t3: 0.0,
        }
    }

    /// Build the chosen kind. `v0` is clamped to [0, v_max]; `v_max` may be infinite, `a_max` must be > 0.
    pub fn new(kind: TimeScaling, length: f64, v0: f64, v_max: f64, a_max: f64) -> Profile {
        match kind {
            TimeScaling::Trapezoid => Profile::trapezoid(length, v0, v_max, a_max),
            TimeScaling::Quintic => Profile::quintic(length, v0, v_max, a_max),
        }
    }

    /// Time-optimal trapezoid from speed `v0` to rest over `length`. When the arm cannot stop within `length`
    /// at `a_max` (v0^2 / 2 a_max > length) it decelerates harder, at v0^2 / (2 length), so the profile still
    /// ends exactly at the path's end (the tracking feedback and the simulator's clipping absorb the excess).
    pub fn trapezoid(length: f64, v0: f64, v_max: f64, a_max: f64) -> Profile {
        let v0 = v0.clamp(0.0, v_max);
        if length <= 0.0 || a_max <= 0.0 {
            return Profile::still();
        }
        if v0 * v0 / (2.0 * a_max) >= length {
            let dec = v0 * v0 / (2.0 * length);
            return Profile::Trapezoid {
                length,
                v0,
                vp: v0,
                acc: 0.0,
                dec,
                t1: 0.0,
                t2: 0.0,
                t3: v0 / dec,
            };
        }
        // Peak speed: the triangle's apex when the cruise phase vanishes, capped by v_max.
        let vp = ((2.0 * a_max * length + v0 * v0) / 2.0).sqrt().min(v_max);
        let t1 = (vp - v0) / a_max;
        let d1 = (vp * vp - v0 * v0) / (2.0 * a_max);
        let t3 = vp / a_max;
        let d3 = vp * vp / (2.0 * a_max);
        let t2 = ((length - d1 - d3) / vp).max(0.0);
        Profile::Trapezoid {
            length,
            v0,
            vp,
            acc: a_max,
            dec: a_max,
            t1,
            t2,
            t3,
        }
    }

    /// Quintic from (u, u', u'') = (0, v0, 0) to (L, 0, 0). From rest the duration is the smallest meeting both
    /// bounds, T = max(15/8 L / V, sqrt(10/sqrt(3) L / A)); with v0 > 0 it is lengthened until sampled peaks
    /// meet the bounds.
    pub fn quintic(length: f64, v0: f64, v_max: f64, a_max: f64) -> Profile {
        let v0 = v0.clamp(0.0, v_max);
        if length <= 0.0 || a_max <= 0.0 {
            return Profile::still();
        }
        let mut t =
            (QUINTIC_PEAK_VEL * length / v_max).max((QUINTIC_PEAK_ACC * length / a_max).sqrt());
        let mut p = Profile::quintic_with_duration(length, v0, t);
        for _ in 0..60 {
            let (pv, pa) = p.sampled_peaks(256);
            let r = (pv / v_max).max((pa / a_max).sqrt());
            if r <= 1.0 + 1e-9 {
                break;
            }
            t *= r.min(2.0) + 1e-6;
            p = Profile::quintic_with_duration(length, v0, t);
        }
        p
    }

    /// Quintic with boundary conditions (0, v0, 0) at t = 0 and (L, 0, 0) at t = T, solved in closed form.
    pub fn quintic_with_duration(length: f64, v0: f64, t: f64) -> Profile {
        let (l, t2) = (length, t * t);
        let t3 = t2 * t;
        let coef = [
            0.0,
            v0,
            0.0,
            (10.0 * l - 6.0 * v0 * t) / t3,
            (-15.0 * l + 8.0 * v0 * t) / (t3 * t),
            (6.0 * l - 3.0 * v0 * t) / (t3 * t2),
        ];
        Profile::Quintic {
            length,
            coef,
            duration: t,
        }
    }

    /// Largest |u'| and |u''| over `samples` + 1 evenly spaced times.
    pub fn sampled_peaks(&self, samples: usize) -> (f64, f64) {
        let d = self.duration();
        let (mut pv, mut pa) = (0.0f64, 0.0f64);
        for k in 0..=samples {
            let (_, v, a) = self.eval(d * k as f64 / samples as f64);
            pv = pv.max(v.abs());
            pa = pa.max(a.abs());
        }
        (pv, pa)
    }

    /// Total duration, s.
    pub fn duration(&self) -> f64 {
        match *self {
            Profile::Trapezoid { t1, t2, t3, .. } => t1 + t2 + t3,
            Profile::Quintic { duration, .. } => duration,
        }
    }

    /// Path length L covered.
    pub fn length(&self) -> f64 {
        match *self {
            Profile::Trapezoid { length, .. } | Profile::Quintic { length, .. } => length,
        }
    }

    /// (u, u', u'') at time t since the start (clamped to [0, duration]).
    pub fn eval(&self, t: f64) -> (f64, f64, f64) {
        let t = t.max(0.0);
        match *self {
            Profile::Trapezoid {
                length,
                v0,
                vp,
                acc,
                dec,
                t1,
                t2,
                t3,
            } => {
                if t < t1 {
                    (v0 * t + 0.5 * acc * t * t, v0 + acc * t, acc)
                } else if t < t1 + t2 {
                    let d1 = v0 * t1 + 0.5 * acc * t1 * t1;
                    (d1 + vp * (t - t1), vp, 0.0)
                } else if t < t1 + t2 + t3 {
                    // Count back from the end so the profile lands exactly on `length`.
                    let r = t1 + t2 + t3 - t;
                    (length - 0.5 * dec * r * r, dec * r, -dec)
                } else {
                    (length, 0.0, 0.0)
                }
            }
            Profile::Quintic {
                length,
                coef: c,
                duration,
            } => {
                if t >= duration {
                    return (length, 0.0, 0.0);
                }
                let u = c[0] + t * (c[1] + t * (c[2] + t * (c[3] + t * (c[4] + t * c[5]))));
                let v =
                    c[1] + t * (2.0 * c[2] + t * (3.0 * c[3] + t * (4.0 * c[4] + t * 5.0 * c[5])));
                let a = 2.0 * c[2] + t * (6.0 * c[3] + t * (12.0 * c[4] + t * 20.0 * c[5]));
                (u, v, a)
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    #[test]
    fn trapezoid_hand_worked() {
        // L = 1, V = 1, A = 2 from rest: T = L/V + V/A = 1.5 s (trapezoidal velocity profile, common practice),
        // accelerating for V/A = 0.5 s over V^2/(2A) = 0.25.
        let p = Profile::trapezoid(1.0, 0.0, 1.0, 2.0);
        assert_relative_eq!(p.duration(), 1.5, epsilon = 1e-12);
        let (u, v, a) = p.eval(0.25);
        assert_relative_eq!(u, 0.0625, epsilon = 1e-12); // A t^2 / 2 = 2 * 0.0625 / 2
        assert_relative_eq!(v, 0.5, epsilon = 1e-12);
        assert_relative_eq!(a, 2.0, epsilon = 1e-12);
        assert_relative_eq!(p.eval(0.75).0, 0.5, epsilon = 1e-12); // 0.25 + 1 * 0.25 (mid-cruise)
        assert_relative_eq!(p.eval(1.25).0, 0.9375, epsilon = 1e-12); // 1 - A (0.25)^2 / 2
        assert_eq!(p.eval(2.0), (1.0, 0.0, 0.0));
        // Triangle: V never reached when L < V^2 / A. L = 1, A = 1: T = 2 sqrt(L/A) = 2, apex speed 1.
        let p = Profile::trapezoid(1.0, 0.0, 10.0, 1.0);
        assert_relative_eq!(p.duration(), 2.0, epsilon = 1e-12);
        assert_relative_eq!(p.eval(1.0).1, 1.0, epsilon = 1e-12);
        // From v0 = 0.5 (V = 1, A = 1, L = 2), hand-worked: accelerate 0.5 s over 0.375, brake 1 s over 0.5,
        // cruise 1.125 over 1.125 s: T = 2.625.
        let p = Profile::trapezoid(2.0, 0.5, 1.0, 1.0);
        assert_relative_eq!(p.duration(), 2.625, epsilon = 1e-12);
        assert_relative_eq!(p.eval(0.0).1, 0.5, epsilon = 1e-12);
        assert_relative_eq!(p.eval(0.5).0, 0.375, epsilon = 1e-12);
    }

    #[test]
    fn trapezoid_that_cannot_stop_brakes_harder_and_ends_on_length() {
        // v0 = 2, A = 1 needs 2 to stop; only 1 available: dec = v0^2 / (2 L) = 2, T = v0 / dec = 1.
        let p = Profile::trapezoid(1.0, 2.0, 3.0, 1.0);
        assert_relative_eq!(p.duration(), 1.0, epsilon = 1e-12);
        assert_relative_eq!(p.eval(0.0).1, 2.0, epsilon = 1e-12);
        assert_relative_eq!(p.eval(0.999_999).0, 1.0, epsilon = 1e-9);
    }

    #[test]
    fn quintic_from_rest_has_the_textbook_peaks() {
        // s(tau) = 10 tau^3 - 15 tau^4 + 6 tau^5: peak s' = 15/8 at tau = 1/2, peak s'' = 10/sqrt(3) at
        // tau = 1/2 - sqrt(3)/6 (hand-derived; 5.7735 is the common-practice constant).
        assert_relative_eq!(QUINTIC_PEAK_ACC, 10.0 / 3f64.sqrt(), epsilon = 1e-15);
        let (l, v, a) = (2.0, 1.5, 4.0);
        let p = Profile::quintic(l, 0.0, v, a);
        // Speed-bound: T = 1.875 * 2 / 1.5 = 2.5; acceleration-bound: sqrt(5.7735 * 2 / 4) = 1.699.
        assert_relative_eq!(p.duration(), 2.5, epsilon = 1e-12);
        let (pv, pa) = p.sampled_peaks(100_000);
        assert_relative_eq!(pv, 1.5, max_relative = 1e-9);
        assert_relative_eq!(pa, QUINTIC_PEAK_ACC * l / 6.25, max_relative = 1e-6);
        assert_relative_eq!(p.eval(1.25).0, 1.0, epsilon = 1e-12); // symmetric: half-way at T/2
    }

    #[test]
    fn quintic_from_speed_meets_its_boundary_conditions() {
        let t = 1.3;
        let p = Profile::quintic_with_duration(2.0, 0.7, t);
        let (u0, v0, a0) = p.eval(0.0);
        assert_eq!((u0, v0, a0), (0.0, 0.7, 0.0));
        if let Profile::Quintic { coef: c, .. } = p {
            let u = (0..6).map(|k| c[k] * t.powi(k as i32)).sum::<f64>();
            let v = (1..6)
                .map(|k| k as f64 * c[k] * t.powi(k as i32 - 1))
                .sum::<f64>();
            let a = (2..6)
                .map(|k| (k * (k - 1)) as f64 * c[k] * t.powi(k as i32 - 2))
                .sum::<f64>();
            assert_relative_eq!(u, 2.0, epsilon = 1e-12);
            assert_relative_eq!(v, 0.0, epsilon = 1e-12);
            assert_relative_eq!(a, 0.0, epsilon = 1e-12);
        } else {
            unreachable!();
        }
    }

    proptest! {
        // Invariants of both profiles when stopping is feasible: start speed, bounds, monotone, land on L.
        #[test]
        fn profiles_respect_bounds(l in 0.01f64..6.0, frac in 0.0f64..1.0, v in 0.2f64..4.0, a in 0.5f64..20.0,
                                   quintic in any::<bool>()) {
            let v0 = frac * v.min((2.0 * a * l).sqrt());
            let kind = if quintic { TimeScaling::Quintic } else { TimeScaling::Trapezoid };
            let p = Profile::new(kind, l, v0, v, a);
            let d = p.duration();
            prop_assert!((p.eval(0.0).1 - v0).abs() < 1e-9);
            let mut prev = 0.0;
            for k in 0..=400 {
                let (u, ud, udd) = p.eval(d * k as f64 / 400.0);
                // The quintic's duration is found from 256 samples, so allow a sliver above the bound.
                let tol = if quintic { 1e-3 } else { 1e-9 };
                prop_assert!(ud.abs() <= v * (1.0 + tol) && udd.abs() <= a * (1.0 + tol));
                if !quintic {
                    prop_assert!(u >= prev - 1e-12);
                }
                prev = u;
            }
            prop_assert!((p.eval(d).0 - l).abs() < 1e-9 && p.eval(d + 1.0).1 == 0.0);
        }
    }
}
