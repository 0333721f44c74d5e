//! The simulator's part of the policy's observation (joint angles as cos/sin, place within the limits,
//! speeds, effector, goal, nearest obstacles, previous action, joint-space goal direction).

use super::*;

impl ArmEnv {
    /// Length of the physical observation vector: cos/sin q (2n), q within its limits (n), scaled dq (n), effector
    /// (2), goal - effector (2), goal distance (1), nearest obstacles (4 each: relative x, y, radius, clearance),
    /// previous action (n), joint-space goal direction J^T (goal - effector) (n).
    pub fn obs_dim(&self) -> usize {
        6 * self.n() + 5 + 4 * OBS_OBSTACLES
    }

    /// Write the physical observation (lengths scaled by the arm's reach, speeds by their limits).
    pub fn observe(&self, out: &mut [f32]) {
        let n = self.n();
        let s = &self.state;
        let reach = self.sc.arm.reach();
        let mut k = 0;
        for i in 0..n {
            out[k] = s.q[i].cos() as f32;
            out[k + 1] = s.q[i].sin() as f32;
            k += 2;
        }
        // Where each joint sits between its stops, -1 at q_min and +1 at q_max (0 for a joint without finite
        // stops): cos/sin alone cannot tell the policy which way is blocked. Measured on the random-goal reach
        // (tests/all/learn_reach.rs): without it the failures were arms pressed into a stop of joint 1, the goal lying
        // beyond it (the way round is the long one).
        for (i, l) in self.sc.arm.links.iter().enumerate() {
            out[k] = if l.q_min.is_finite() && l.q_max.is_finite() && l.q_max > l.q_min {
                let mid = 0.5 * (l.q_min + l.q_max);
                ((s.q[i] - mid) / (0.5 * (l.q_max - l.q_min))) as f32
            } else {
                0.0
            };
            k += 1;
        }
        for (i, l) in self.sc.arm.links.iter().enumerate() {
            let scale = if l.v_max.is_finite() { l.v_max } else { 10.0 };
            out[k] = (s.dq[i] / scale) as f32;
            k += 1;
        }
        let r = self.last.expect("reset sets a report");
        out[k] = (r.ee[0] / reach) as f32;
        out[k + 1] = (r.ee[1] / reach) as f32;
        out[k + 2] = ((self.goal[0] - r.ee[0]) / reach) as f32;
        out[k + 3] = ((self.goal[1] - r.ee[1]) / reach) as f32;
        out[k + 4] = (r.goal_dist / reach) as f32;
        k += 5;
        // Nearest obstacles by centre distance to the effector (fixed-size selection, no allocation).
        let mut chosen = [usize::MAX; OBS_OBSTACLES];
        for slot in 0..OBS_OBSTACLES {
            let mut best = f64::INFINITY;
            for (i, sh) in self.obstacles().iter().enumerate() {
                if chosen[..slot].contains(&i) {
                    continue;
                }
                let d = dist(sh.center(), r.ee);
                if d < best {
                    best = d;
                    chosen[slot] = i;
                }
            }
        }
        for &c in &chosen {
            if c == usize::MAX {
                out[k..k + 4].copy_from_slice(&[0.0, 0.0, 0.0, 1.0]);
            } else {
                let sh = self.obstacles()[c];
                let cc = sh.center();
                out[k] = ((cc[0] - r.ee[0]) / reach) as f32;
                out[k + 1] = ((cc[1] - r.ee[1]) / reach) as f32;
                out[k + 2] = (sh.bounding_radius() / reach) as f32;
                out[k + 3] = (sh.point_distance(r.ee) / reach).min(1.0) as f32;
            }
            k += 4;
        }
        for i in 0..n {
            out[k] = (self.prev_action[i] / self.action_limits[i]) as f32;
            k += 1;
        }
        // Joint-space goal direction: the transposed effector Jacobian times the effector-goal vector, i.e. the
        // gradient of -|goal - ee|^2 / 2 over q. Column i of the planar Jacobian is z x (ee - p_i) (any robotics
        // textbook, e.g. Siciliano et al., Robotics: Modelling, Planning and Control, 2009, eq. 3.30), so entry i is
        // the planar cross product (ee - p_i) x (goal - ee). Scaled by reach^2 (dimensionless). Without it the
        // policy has to learn this product of trigonometric and Cartesian inputs itself; measured on the random-goal
        // reach (tests/all/learn_reach.rs), adding it alone lifted PPO from 0.09 to 0.68 success at 200k steps.
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        self.sc.arm.joint_points(&s.q, &mut pts);
        let e = [self.goal[0] - r.ee[0], self.goal[1] - r.ee[1]];
        for p in pts.iter().take(n) {
            let rx = r.ee[0] - p[0];
            let ry = r.ee[1] - p[1];
            out[k] = ((rx * e[1] - ry * e[0]) / (reach * reach)) as f32;
            k += 1;
        }
        debug_assert_eq!(k, self.obs_dim());
    }
}
