//! Trajectory-quality metrics over a joint trajectory sampled at a fixed interval: RMS and peak joint
//! acceleration and RMS jerk by finite differences, and the effector's path length. Small pure functions for
//! the controller checks; the RMS figures use the same definition as the episode metrics
//! (`metrics::rms_per_joint`), so learned policies and the baseline are measured alike.

use crate::sim::{Arm, JointVec};

/// Quality numbers of one sampled trajectory.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct TrajectoryMetrics {
    /// RMS joint acceleration: sqrt of the mean of ddq_i^2 over samples and joints, rad/s^2.
    pub rms_acceleration: f64,
    /// Largest |ddq_i| over samples and joints, rad/s^2.
    pub peak_acceleration: f64,
    /// RMS joint jerk: sqrt of the mean of dddq_i^2 over samples and joints, rad/s^3.
    pub rms_jerk: f64,
    /// Length of the effector's path, m.
    pub effector_path_length: f64,
}

/// Central second differences (q[k+1] - 2 q[k] + q[k-1]) / dt^2 at the interior samples; n joints each.
pub fn accelerations(q: &[JointVec], n: usize, dt: f64) -> Vec<JointVec> {
    q.windows(3)
        .map(|w| {
            let mut a = [0.0; crate::sim::MAX_JOINTS];
            for i in 0..n {
                a[i] = (w[2][i] - 2.0 * w[1][i] + w[0][i]) / (dt * dt);
            }
            a
        })
        .collect()
}

/// Third differences (q[k+2] - 3 q[k+1] + 3 q[k] - q[k-1]) / dt^3, centred between samples k and k+1.
pub fn jerks(q: &[JointVec], n: usize, dt: f64) -> Vec<JointVec> {
    q.windows(4)
        .map(|w| {
            let mut j = [0.0; crate::sim::MAX_JOINTS];
            for i in 0..n {
                j[i] = (w[3][i] - 3.0 * w[2][i] + 3.0 * w[1][i] - w[0][i]) / (dt * dt * dt);
            }
            j
        })
        .collect()
}

fn rms(v: &[JointVec], n: usize) -> f64 {
    if v.is_empty() || n == 0 {
        return 0.0;
    }
    let s: f64 = v
        .iter()
        .map(|x| x[..n].iter().map(|a| a * a).sum::<f64>())
        .sum();
    super::metrics::rms_per_joint(s, v.len() as f64, n as f64)
}

/// RMS joint acceleration, rad/s^2 (0 with fewer than 3 samples).
pub fn rms_acceleration(q: &[JointVec], n: usize, dt: f64) -> f64 {
    rms(&accelerations(q, n, dt), n)
}

/// Peak |ddq_i| over samples and joints, rad/s^2.
pub fn peak_acceleration(q: &[JointVec], n: usize, dt: f64) -> f64 {
    accelerations(q, n, dt)
        .iter()
        .flat_map(|a| a[..n].iter().map(|x| x.abs()))
        .fold(0.0, f64::max)
}

/// RMS joint jerk, rad/s^3 (0 with fewer than 4 samples).
pub fn rms_jerk(q: &[JointVec], n: usize, dt: f64) -> f64 {
    rms(&jerks(q, n, dt), n)
}

/// Length of the effector polyline through the sampled configurations, m.
pub fn effector_path_length(arm: &Arm, q: &[JointVec]) -> f64 {
    q.windows(2)
        .map(|w| {
            let (a, b) = (arm.effector(&w[0]), arm.effector(&w[1]));
            (b[0] - a[0]).hypot(b[1] - a[1])
        })
        .sum()
}

/// All metrics of a trajectory sampled every `dt` seconds.
pub fn trajectory_metrics(arm: &Arm, q: &[JointVec], dt: f64) -> TrajectoryMetrics {
    let n = arm.n();
    TrajectoryMetrics {
        rms_acceleration: rms_acceleration(q, n, dt),
        peak_acceleration: peak_acceleration(q, n, dt),
        rms_jerk: rms_jerk(q, n, dt),
        effector_path_length: effector_path_length(arm, q),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::arm::tests::rod;
    use crate::sim::MAX_JOINTS;
    use approx::assert_relative_eq;

    /// Rest-to-rest quintic q = q0 + D s(x), s(x) = 10 x^3 - 15 x^4 + 6 x^5, at m + 1 evenly spaced x in [0, 1].
    fn quintic(q0: [f64; 2], d: [f64; 2], m: usize) -> Vec<JointVec> {
        (0..=m)
            .map(|k| {
                let x = k as f64 / m as f64;
                let s = x * x * x * (10.0 - 15.0 * x + 6.0 * x * x);
                let mut q = [0.0; MAX_JOINTS];
                q[0] = q0[0] + d[0] * s;
                q[1] = q0[1] + d[1] * s;
                q
            })
            .collect()
    }

    #[test]
    fn quintic_metrics_match_hand_worked_integrals() {
        // Hand-worked for s(x) = 10 x^3 - 15 x^4 + 6 x^5 on [0, 1]:
        //   s'' = 60 x - 180 x^2 + 120 x^3, peak at x = 1/2 - sqrt(3)/6 equal to 10/sqrt(3) = 5.7735 (common
        //   practice constant), and int s''^2 = 3600 (1/3 - 6/4 + 13/5 - 2 + 4/7) = 3600/210 = 120/7;
        //   s''' = 60 - 360 x + 360 x^2, int s'''^2 = 3600 (1 - 6 + 16 - 18 + 36/5) = 720.
        // So for q = D s(t/T): peak |ddq| = 5.7735 D / T^2 and, per joint, RMS ddq_i = |D_i| sqrt(120/7) / T^2,
        // RMS dddq_i = |D_i| sqrt(720) / T^3; the RMS over joints and samples takes the quadratic mean of
        // |D_i| over the joints, |D|_rms = sqrt((D_1^2 + D_2^2) / 2).
        let (t, m) = (1.6, 16_000);
        let d = [1.2, -0.5];
        let q = quintic([0.1, 0.3], d, m);
        let dt = t / m as f64;
        let dn = d[0].hypot(d[1]) / 2f64.sqrt();
        assert_relative_eq!(
            peak_acceleration(&q, 2, dt),
            10.0 / 3f64.sqrt() * 1.2 / (t * t),
            max_relative = 1e-6
        );
        assert_relative_eq!(
            rms_acceleration(&q, 2, dt),
            dn * (120.0f64 / 7.0).sqrt() / (t * t),
            max_relative = 1e-3
        );
        assert_relative_eq!(
            rms_jerk(&q, 2, dt),
            dn * 720f64.sqrt() / t.powi(3),
            max_relative = 1e-3
        );
        // Finite-difference jerk at the start approaches the analytic s'''(0) D / T^3 = 60 D / T^3.
        let j = jerks(&q, 2, dt);
        assert_relative_eq!(j[0][0], 60.0 * 1.2 / t.powi(3), max_relative = 1e-3);
    }

    #[test]
    fn effector_path_length_of_an_arc() {
        // Joint 1 turns by 1.3 rad with joint 2 fixed at 90 deg: the effector moves on a circle of radius
        // sqrt(l1^2 + l2^2) (right triangle), so its path is that radius times 1.3 (hand-worked geometry).
        let arm = Arm {
            links: vec![rod(0.42, 1.6), rod(0.33, 0.9)],
            gravity: 0.0,
        };
        let q = quintic([0.2, std::f64::consts::FRAC_PI_2], [1.3, 0.0], 4000);
        let want = 0.42f64.hypot(0.33) * 1.3;
        assert_relative_eq!(effector_path_length(&arm, &q), want, max_relative = 1e-6);
        let m = trajectory_metrics(&arm, &q, 1.0 / 4000.0);
        assert_relative_eq!(m.effector_path_length, want, max_relative = 1e-6);
        // A still arm: all zero.
        let still = vec![q[0]; 10];
        let m = trajectory_metrics(&arm, &still, 0.01);
        assert_eq!(
            (
                m.rms_acceleration,
                m.peak_acceleration,
                m.rms_jerk,
                m.effector_path_length
            ),
            (0.0, 0.0, 0.0, 0.0)
        );
    }
}
