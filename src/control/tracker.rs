//! The classical baseline controller: follows a reference path's waypoints with a time-scaled joint trajectory
//! and PD feedback — on acceleration in acceleration mode, computed torque (inverse-dynamics feed-forward plus
//! PD) in torque mode. Replanning is a new `follow` call from the current state.

use super::profile::TimeScaling;
use super::spec::BaselineSpec;
use super::trajectory::{Budget, RefSample, Trajectory};
use crate::plan::ReferencePath;
use crate::sim::{Arm, ControlMode, JointVec, Scenario, MAX_JOINTS};

/// Commanded joint acceleration of the tracking law: v = ddq_ref + kd (dq_ref - dq) + kp (q_ref - q).
pub fn feedback_acceleration(
    n: usize,
    kp: &JointVec,
    kd: &JointVec,
    q: &[f64],
    dq: &[f64],
    reference: &RefSample,
) -> JointVec {
    let mut v = [0.0; MAX_JOINTS];
    for i in 0..n {
        v[i] =
            reference.ddq[i] + kd[i] * (reference.dq[i] - dq[i]) + kp[i] * (reference.q[i] - q[i]);
    }
    v
}

/// Computed-torque law tau = M(q) v + C(q, dq) dq + G(q) + B dq with v from `feedback_acceleration`
/// (Spong, Hutchinson & Vidyasagar, "Robot Modeling and Control", 2006, sec. 8.3, eqs. for the inner loop
/// u = M(q) a_q + C dq + g and outer loop a_q = ddq_d + K_1 e' + K_0 e). Evaluated by Newton-Euler
/// inverse dynamics, so no matrix is formed.
pub fn computed_torque(
    arm: &Arm,
    kp: &JointVec,
    kd: &JointVec,
    q: &[f64],
    dq: &[f64],
    reference: &RefSample,
) -> JointVec {
    let v = feedback_acceleration(arm.n(), kp, kd, q, dq, reference);
    arm.inverse_dynamics(q, dq, &v)
}

/// The baseline tracking controller for one scenario (one instance per episode runner; cheap to clone).
///
/// Use: `follow` a path at the start of an episode and after every goal jump or obstacle move, then call
/// `action` once per control step. `action` writes physical units (N m or rad/s^2, clipped to the scenario's
/// limits); the study's episode runner divides them by `ArmEnv::action_limits()` to get the normalised
/// action in [-1, 1], exactly as it does for a policy.
#[derive(Clone, Debug)]
pub struct Tracker {
    n: usize,
    mode: ControlMode,
    kp: JointVec,
    kd: JointVec,
    scaling: TimeScaling,
    budget: Budget,
    limits: JointVec,
    control_dt: f64,
    trajectory: Option<(Trajectory, f64)>,
}

impl Tracker {
    /// A tracker with no path yet (it brakes, v = -kd dq, until `follow` is called).
    ///
    /// Joint budgets: speed `speed_fraction * v_max`; acceleration `accel_fraction * acc_max`. When a link's
    /// `acc_max` is infinite (allowed in torque mode) its acceleration limit is taken as tau_max / M_ii with M the
    /// mass matrix of the outstretched arm (the largest M_ii), or 10 rad/s^2 if tau_max is infinite too.
    ///
    /// Panics if a per-joint gain list does not match the arm (`BaselineSpec::check_joints` reports it).
    pub fn new(spec: &BaselineSpec, scenario: &Scenario) -> Tracker {
        let n = scenario.n();
        spec.check_joints(n, "baseline", "")
            .unwrap_or_else(|e| panic!("{e}"));
        let arm = &scenario.arm;
        let mut m = [[0.0; MAX_JOINTS]; MAX_JOINTS];
        arm.mass_matrix(&[0.0; MAX_JOINTS], &mut m);
        let mut kp = [0.0; MAX_JOINTS];
        let mut kd = [0.0; MAX_JOINTS];
        let mut budget = Budget {
            v: [f64::INFINITY; MAX_JOINTS],
            a: [1.0; MAX_JOINTS],
            a_blend: [1.0; MAX_JOINTS],
            blend_min: spec.blend_time,
        };
        let mut limits = [f64::INFINITY; MAX_JOINTS];
        for (i, l) in arm.links.iter().enumerate() {
            kp[i] = spec.kp_of(i);
            kd[i] = spec.kd_of(i);
            let a_full = if l.acc_max.is_finite() {
                l.acc_max
            } else if l.tau_max.is_finite() {
                l.tau_max / m[i][i]
            } else {
                10.0
            };
            budget.v[i] = spec.speed_fraction * l.v_max;
            budget.a[i] = spec.accel_fraction * a_full;
            budget.a_blend[i] = a_full;
            limits[i] = match scenario.control {
                ControlMode::Torque => l.tau_max,
                ControlMode::Acceleration => l.acc_max,
            };
        }
        Tracker {
            n,
            mode: scenario.control,
            kp,
            kd,
            scaling: spec.time_scaling,
            budget,
            limits,
            control_dt: scenario.control_dt(),
            trajectory: None,
        }
    }

    /// Start following `path` from the current state at episode time `t`: the waypoints are joined by a smooth
    /// spline and time-scaled under the joint budgets, starting from the current velocity (see `Trajectory::new`).
    /// After the last waypoint the tracker holds it.
    pub fn follow(&mut self, path: &ReferencePath, q: &[f64], dq: &[f64], t: f64) {
        let traj = Trajectory::new(self.n, &path.joints, q, dq, self.scaling, &self.budget);
        self.trajectory = Some((traj, t));
    }

    /// The joint speed and acceleration budgets its references are timed with.
    pub fn budget(&self) -> Budget {
        self.budget
    }

    /// Start following a smooth timed spline through every point of `route` (see `Trajectory::new`).
    pub fn follow_through(&mut self, route: &[JointVec], q: &[f64], dq: &[f64], t: f64) {
        let traj = Trajectory::new(self.n, route, q, dq, self.scaling, &self.budget);
        self.trajectory = Some((traj, t));
    }

    /// Start following the straight joint-space line from the current state to `target` (a trapezoid or quintic
    /// along it, starting from the current velocity), at episode time `t`.
    pub fn follow_to(&mut self, target: &JointVec, q: &[f64], dq: &[f64], t: f64) {
        let traj = Trajectory::new(
            self.n,
            std::slice::from_ref(target),
            q,
            dq,
            self.scaling,
            &self.budget,
        );
        self.trajectory = Some((traj, t));
    }

    /// The current timed trajectory and the episode time it started at.
    pub fn trajectory(&self) -> Option<(&Trajectory, f64)> {
        self.trajectory.as_ref().map(|(tr, t0)| (tr, *t0))
    }

    /// The reference at episode time t (None before the first `follow`).
    pub fn reference(&self, t: f64) -> Option<RefSample> {
        self.trajectory.as_ref().map(|(tr, t0)| tr.sample(t - t0))
    }

    /// Episode time at which the reference comes to rest on the last waypoint (None before `follow`).
    pub fn arrival_time(&self) -> Option<f64> {
        self.trajectory.as_ref().map(|(tr, t0)| t0 + tr.duration())
    }

    /// The action to apply from episode time t for one control step, in physical units of the scenario's control
    /// mode, clipped to its limits; written to `out[..n]`.
    ///
    /// The PD terms use the reference at t; the feed-forward acceleration is taken at the middle of the control
    /// step (t + dt/2), since the action is held constant over the step. In torque mode the computed torque
    /// M v + h is evaluated at the state predicted for mid-step (see `computed_torque` for the continuous law).
    pub fn action(&mut self, arm: &Arm, q: &[f64], dq: &[f64], t: f64, out: &mut [f64]) {
        let n = self.n;
        let reference = match &self.trajectory {
            Some((tr, t0)) => {
                let mut r = tr.sample(t - t0);
                r.ddq = tr.sample(t - t0 + 0.5 * self.control_dt).ddq;
                r
            }
            None => {
                let mut r = RefSample {
                    q: [0.0; MAX_JOINTS],
                    dq: [0.0; MAX_JOINTS],
                    ddq: [0.0; MAX_JOINTS],
                };
                r.q[..n].copy_from_slice(&q[..n]);
                r
            }
        };
        let v = feedback_acceleration(n, &self.kp, &self.kd, q, dq, &reference);
        let u = match self.mode {
            ControlMode::Acceleration => v,
            ControlMode::Torque => {
                // The torque is held for the whole step while the state moves; evaluating the inverse dynamics
                // at the state predicted for mid-step (constant acceleration v) makes the held torque produce
                // v on average to second order in dt, instead of first.
                let h = 0.5 * self.control_dt;
                let mut qm = [0.0; MAX_JOINTS];
                let mut dqm = [0.0; MAX_JOINTS];
                for i in 0..n {
                    qm[i] = q[i] + h * dq[i] + 0.5 * h * h * v[i];
                    dqm[i] = dq[i] + h * v[i];
                }
                arm.inverse_dynamics(&qm, &dqm, &v)
            }
        };
        for i in 0..n {
            out[i] = u[i].clamp(-self.limits[i], self.limits[i]);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::arm::tests::rod;
    use approx::assert_relative_eq;

    fn arm() -> Arm {
        let mut a = rod(0.42, 1.6);
        a.damping = 0.05;
        let mut b = rod(0.33, 0.9);
        b.damping = 0.04;
        Arm {
            links: vec![a, b],
            gravity: 9.81,
        }
    }

    /// A smooth desired joint trajectory (sinusoids) with its exact derivatives.
    fn desired(t: f64) -> RefSample {
        let mut r = RefSample {
            q: [0.0; MAX_JOINTS],
            dq: [0.0; MAX_JOINTS],
            ddq: [0.0; MAX_JOINTS],
        };
        let (w1, w2) = (2.0, 3.1);
        r.q[0] = 0.4 + 0.8 * (w1 * t).sin();
        r.dq[0] = 0.8 * w1 * (w1 * t).cos();
        r.ddq[0] = -0.8 * w1 * w1 * (w1 * t).sin();
        r.q[1] = -0.5 + 0.6 * (w2 * t).cos();
        r.dq[1] = -0.6 * w2 * (w2 * t).sin();
        r.ddq[1] = -0.6 * w2 * w2 * (w2 * t).cos();
        r
    }

    /// Closed-form solution of e'' + kd e' + kp e = 0 with e(0) = e0, e'(0) = v0 (standard second-order linear
    /// ODE solution, any differential-equations text): under-, critically and over-damped cases.
    fn closed_form(kp: f64, kd: f64, e0: f64, v0: f64, t: f64) -> f64 {
        let wn = kp.sqrt();
        let zeta = kd / (2.0 * wn);
        let s = zeta * wn;
        if (zeta - 1.0).abs() < 1e-12 {
            (e0 + (v0 + wn * e0) * t) * (-wn * t).exp()
        } else if zeta < 1.0 {
            let wd = wn * (1.0 - zeta * zeta).sqrt();
            (-s * t).exp() * (e0 * (wd * t).cos() + (v0 + s * e0) / wd * (wd * t).sin())
        } else {
            let r = wn * (zeta * zeta - 1.0).sqrt();
            let (l1, l2) = (-s + r, -s - r);
            let c2 = (v0 - l1 * e0) / (l2 - l1);
            let c1 = e0 - c2;
            c1 * (l1 * t).exp() + c2 * (l2 * t).exp()
        }
    }

    /// Integrate the arm under the continuous computed-torque law with RK4 (law evaluated at every stage).
    fn run_closed_loop(
        kp: [f64; 2],
        kd: [f64; 2],
        e0: [f64; 2],
        v0: [f64; 2],
        h: f64,
        t_end: f64,
    ) -> Vec<(f64, [f64; 2], [f64; 2])> {
        let arm = arm();
        let mut kpv = [0.0; MAX_JOINTS];
        let mut kdv = [0.0; MAX_JOINTS];
        kpv[..2].copy_from_slice(&kp);
        kdv[..2].copy_from_slice(&kd);
        let f = |t: f64, q: &JointVec, dq: &JointVec| -> JointVec {
            let tau = computed_torque(&arm, &kpv, &kdv, q, dq, &desired(t));
            arm.forward_dynamics(q, dq, &tau)
        };
        let d0 = desired(0.0);
        let mut q = [0.0; MAX_JOINTS];
        let mut dq = [0.0; MAX_JOINTS];
        for i in 0..2 {
            q[i] = d0.q[i] - e0[i];
            dq[i] = d0.dq[i] - v0[i];
        }
        let mut out = Vec::new();
        let steps = (t_end / h).round() as usize;
        for k in 0..=steps {
            let t = k as f64 * h;
            let d = desired(t);
            out.push((t, [d.q[0] - q[0], d.q[1] - q[1]], [q[0], q[1]]));
            let a1 = f(t, &q, &dq);
            let (mut q2, mut v2, mut q3, mut v3, mut q4, mut v4) = (q, dq, q, dq, q, dq);
            for i in 0..2 {
                q2[i] = q[i] + 0.5 * h * dq[i];
                v2[i] = dq[i] + 0.5 * h * a1[i];
            }
            let a2 = f(t + 0.5 * h, &q2, &v2);
            for i in 0..2 {
                q3[i] = q[i] + 0.5 * h * v2[i];
                v3[i] = dq[i] + 0.5 * h * a2[i];
            }
            let a3 = f(t + 0.5 * h, &q3, &v3);
            for i in 0..2 {
                q4[i] = q[i] + h * v3[i];
                v4[i] = dq[i] + h * a3[i];
            }
            let a4 = f(t + h, &q4, &v4);
            for i in 0..2 {
                q[i] += h / 6.0 * (dq[i] + 2.0 * v2[i] + 2.0 * v3[i] + v4[i]);
                dq[i] += h / 6.0 * (a1[i] + 2.0 * a2[i] + 2.0 * a3[i] + a4[i]);
            }
        }
        out
    }

    #[test]
    fn computed_torque_tracks_a_smooth_trajectory_exactly() {
        // Exact model, no initial error: the error obeys e'' + kd e' + kp e = 0 with e(0) = e'(0) = 0, so it
        // stays zero (Spong, Hutchinson & Vidyasagar, "Robot Modeling and Control", 2006, sec. 8.3). The
        // trajectory swings the arm through 1.6 and 1.2 rad under gravity; the check asks for < 1e-3 rad.
        let run = run_closed_loop(
            [400.0, 400.0],
            [40.0, 40.0],
            [0.0, 0.0],
            [0.0, 0.0],
            1e-3,
            4.0,
        );
        let worst = run
            .iter()
            .map(|(_, e, _)| e[0].abs().max(e[1].abs()))
            .fold(0.0, f64::max);
        assert!(worst < 1e-3, "max tracking error {worst}");
        assert!(
            worst < 1e-9,
            "max tracking error {worst} (expected integration error only)"
        );
    }

    #[test]
    fn computed_torque_error_decays_as_the_gains_imply() {
        // Initial offset e0 and rate error v0: each joint's error must follow the closed-form solution of
        // e'' + kd e' + kp e = 0 (Spong et al. 2006, sec. 8.3: the computed-torque closed loop is linear and
        // decoupled). Joint 1 critically damped (kp = 400, kd = 40), joint 2 underdamped (kp = 100, kd = 8,
        // zeta = 0.4), then an overdamped pair.
        for (kp, kd) in [([400.0, 100.0], [40.0, 8.0]), ([225.0, 64.0], [45.0, 20.0])] {
            let (e0, v0) = ([0.15, -0.1], [0.0, 0.5]);
            let run = run_closed_loop(kp, kd, e0, v0, 1e-3, 2.0);
            for (t, e, _) in &run {
                for i in 0..2 {
                    let want = closed_form(kp[i], kd[i], e0[i], v0[i], *t);
                    assert!(
                        (e[i] - want).abs() < 1e-8,
                        "t={t} joint {i}: {} vs {want}",
                        e[i]
                    );
                }
            }
            // And the decay is real: after 1 s the errors are tiny compared with the offset.
            let last = run.last().unwrap().1;
            assert!(last[0].abs() < 1e-5 && last[1].abs() < 1e-2);
        }
        // The closed form itself, hand-checked: critically damped with e0 = 1, v0 = 0, wn = 20 at t = 0.1:
        // (1 + 20 * 0.1) e^-2 = 3 e^-2 = 0.40601.
        assert_relative_eq!(
            closed_form(400.0, 40.0, 1.0, 0.0, 0.1),
            3.0 * (-2.0f64).exp(),
            epsilon = 1e-15
        );
    }
}
