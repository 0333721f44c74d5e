//! The arm's motion within one control step: forward dynamics under torque, joint limits, and the integrators
//! (semi-implicit Euler, RK4).

use super::*;

impl ArmEnv {
    /// Joint acceleration under torque `tau` (clipped to the torque limits).
    #[inline]
    pub(super) fn torque_accel(&self, q: &JointVec, dq: &JointVec, tau: &JointVec) -> JointVec {
        let arm = &self.sc.arm;
        arm.forward_dynamics_trig(&Trig::new(q, arm.n()), dq, tau)
    }

    /// Enforce joint position and speed limits after a physics step (a joint at its stop loses its outward speed).
    #[inline]
    pub(super) fn apply_limits(&self, s: &mut ArmState) {
        for (i, l) in self.sc.arm.links.iter().enumerate() {
            if s.dq[i].abs() > l.v_max {
                s.dq[i] = s.dq[i].clamp(-l.v_max, l.v_max);
            }
            if s.q[i] < l.q_min {
                s.q[i] = l.q_min;
                s.dq[i] = s.dq[i].max(0.0);
            } else if s.q[i] > l.q_max {
                s.q[i] = l.q_max;
                s.dq[i] = s.dq[i].min(0.0);
            }
        }
    }

    /// One physics step under a constant torque.
    pub(super) fn torque_step(&self, s: &mut ArmState, tau: &JointVec) {
        let n = self.sc.n();
        let h = self.sc.dt;
        match self.sc.integrator {
            Integrator::SemiImplicitEuler => {
                let a = self.torque_accel(&s.q, &s.dq, tau);
                for i in 0..n {
                    s.dq[i] += h * a[i];
                    s.q[i] += h * s.dq[i];
                }
            }
            Integrator::Rk4 => {
                let (q0, v0) = (s.q, s.dq);
                let a1 = self.torque_accel(&q0, &v0, tau);
                let mut q = q0;
                let mut v = v0;
                for i in 0..n {
                    q[i] = q0[i] + 0.5 * h * v0[i];
                    v[i] = v0[i] + 0.5 * h * a1[i];
                }
                let v2 = v;
                let a2 = self.torque_accel(&q, &v2, tau);
                for i in 0..n {
                    q[i] = q0[i] + 0.5 * h * v2[i];
                    v[i] = v0[i] + 0.5 * h * a2[i];
                }
                let v3 = v;
                let a3 = self.torque_accel(&q, &v3, tau);
                for i in 0..n {
                    q[i] = q0[i] + h * v3[i];
                    v[i] = v0[i] + h * a3[i];
                }
                let a4 = self.torque_accel(&q, &v, tau);
                for i in 0..n {
                    s.q[i] = q0[i] + h / 6.0 * (v0[i] + 2.0 * v2[i] + 2.0 * v3[i] + v[i]);
                    s.dq[i] = v0[i] + h / 6.0 * (a1[i] + 2.0 * a2[i] + 2.0 * a3[i] + a4[i]);
                }
            }
        }
        self.apply_limits(s);
    }

    /// One physics step with action `u` in the scenario's control mode.
    ///
    /// Torque mode integrates the forward dynamics under the (clipped) torque. Acceleration mode computes, at
    /// the start of each physics step, the torque that produces the commanded acceleration (inverse dynamics);
    /// when it is within the torque limits the commanded acceleration is realised exactly over the step
    /// (constant-acceleration update, exact for either integrator); when it is not, the clipped torque is held
    /// for the step and integrated through the forward dynamics, so the limits bite. With a `control_model`
    /// (model error) the torque comes from the model's inverse dynamics and always goes through the simulated
    /// arm's forward dynamics, so the realised acceleration differs from the command.
    pub(super) fn physics_step(&self, s: &mut ArmState, u: &JointVec) {
        let arm = &self.sc.arm;
        let n = arm.n();
        match self.sc.control {
            ControlMode::Torque => self.torque_step(s, u),
            ControlMode::Acceleration => {
                let model = self.sc.control_model.as_ref().unwrap_or(arm);
                let mut tau = model.inverse_dynamics_trig(&Trig::new(&s.q, n), &s.dq, u);
                let mut clipped = false;
                for (t, l) in tau.iter_mut().zip(&arm.links) {
                    if t.abs() > l.tau_max {
                        *t = t.clamp(-l.tau_max, l.tau_max);
                        clipped = true;
                    }
                }
                if clipped || self.sc.control_model.is_some() {
                    self.torque_step(s, &tau);
                } else {
                    let h = self.sc.dt;
                    for i in 0..n {
                        s.q[i] += h * s.dq[i] + 0.5 * h * h * u[i];
                        s.dq[i] += h * u[i];
                    }
                    self.apply_limits(s);
                }
            }
        }
    }
}
