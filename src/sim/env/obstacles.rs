//! Clearance and obstacles: signed distances from the arm to obstacles, boundary and itself, per-link
//! clearances, collision-free checks, obstacle motion, and random starts, configurations and goals.

use super::*;

impl ArmEnv {
    /// Signed clearances for configuration q: (overall minimum, obstacles only).
    pub fn clearances(&self, q: &[f64]) -> (f64, f64) {
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        self.sc.arm.joint_points(q, &mut pts);
        self.clearances_from_points(&pts)
    }

    /// `clearances` from the joint points of a configuration (base first).
    pub(super) fn clearances_from_points(&self, pts: &[[f64; 2]; MAX_JOINTS + 1]) -> (f64, f64) {
        let n = self.sc.n();
        let mut caps = [Capsule {
            a: [0.0; 2],
            b: [0.0; 2],
            radius: 0.0,
        }; MAX_JOINTS];
        for (i, c) in caps.iter_mut().enumerate().take(n) {
            *c = Capsule {
                a: pts[i],
                b: pts[i + 1],
                radius: self.sc.arm.links[i].radius,
            };
        }
        let mut obs = f64::INFINITY;
        let mut all = f64::INFINITY;
        for (i, c) in caps[..n].iter().enumerate() {
            for s in &self.shapes[..self.active_obstacles] {
                obs = obs.min(capsule_shape_distance(c, s));
            }
            all = all.min(capsule_boundary_clearance(
                c,
                self.sc.workspace_min,
                self.sc.workspace_max,
            ));
            if self.sc.self_collision {
                for c2 in caps[..n].iter().skip(i + 2) {
                    all = all.min(capsule_capsule_distance(c, c2));
                }
            }
        }
        (all.min(obs), obs)
    }

    /// Each link's signed clearance to the nearest current obstacle (infinite without obstacles), m, for
    /// configuration q; writes n values (the observation's clearance entries, `task::observation`).
    pub fn link_obstacle_clearances(&self, q: &[f64], out: &mut [f64]) {
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        self.sc.arm.joint_points(q, &mut pts);
        for (i, o) in out.iter_mut().enumerate().take(self.sc.n()) {
            let cap = Capsule {
                a: pts[i],
                b: pts[i + 1],
                radius: self.sc.arm.links[i].radius,
            };
            *o = self.shapes[..self.active_obstacles]
                .iter()
                .map(|s| capsule_shape_distance(&cap, s))
                .fold(f64::INFINITY, f64::min);
        }
    }

    /// Whether configuration q is free of collisions with the current obstacles, the boundary and (if enabled) itself.
    pub fn config_free(&self, q: &[f64]) -> bool {
        self.clearances(q).0 >= 0.0
    }

    pub(super) fn move_obstacles(&mut self, t: f64, dt: f64) {
        for i in 0..self.active_obstacles {
            let o = &self.sc.obstacles[i];
            self.shape_vels[i] = obstacle_velocity(&o.motion, self.velocities[i], t);
            match o.motion {
                Motion::Still => {}
                Motion::Sine {
                    amplitude,
                    period,
                    phase,
                } => {
                    let c0 = o.shape.center();
                    let s = (2.0 * std::f64::consts::PI * t / period + phase).sin();
                    self.shapes[i] = o
                        .shape
                        .at([c0[0] + amplitude[0] * s, c0[1] + amplitude[1] * s]);
                }
                Motion::Linear { .. } => {
                    let r = self.shapes[i].bounding_radius();
                    let mut c = self.shapes[i].center();
                    let v = &mut self.velocities[i];
                    for k in 0..2 {
                        c[k] += v[k] * dt;
                        if c[k] - r < self.sc.workspace_min[k] && v[k] < 0.0 {
                            c[k] = 2.0 * (self.sc.workspace_min[k] + r) - c[k];
                            v[k] = -v[k];
                        } else if c[k] + r > self.sc.workspace_max[k] && v[k] > 0.0 {
                            c[k] = 2.0 * (self.sc.workspace_max[k] - r) - c[k];
                            v[k] = -v[k];
                        }
                    }
                    self.shapes[i] = self.shapes[i].at(c);
                    self.shape_vels[i] = *v;
                }
            }
        }
    }

    /// A random start at rest: joint angles uniform within limits (or [-pi, pi] for free joints), collision-free.
    pub fn sample_start<R: Rng>(&self, rng: &mut R) -> ArmState {
        for _ in 0..10_000 {
            let q = self.sample_config(rng);
            if self.config_free(&q) {
                return ArmState::at_rest(&q);
            }
        }
        ArmState::at_rest(&self.sc.start_q)
    }

    /// A uniformly random configuration within the joint limits (not checked for collisions).
    pub fn sample_config<R: Rng>(&self, rng: &mut R) -> JointVec {
        let mut q = [0.0; MAX_JOINTS];
        for (i, l) in self.sc.arm.links.iter().enumerate() {
            let lo = l.q_min.max(-std::f64::consts::PI);
            let hi = l.q_max.min(std::f64::consts::PI);
            q[i] = if hi > lo { rng.gen_range(lo..hi) } else { lo };
        }
        q
    }

    /// A random goal the arm can reach without collision: the effector of a random collision-free configuration
    /// whose tip lies inside the workspace and clear of obstacles by the goal tolerance.
    pub fn sample_goal<R: Rng>(&self, rng: &mut R) -> [f64; 2] {
        for _ in 0..10_000 {
            let q = self.sample_config(rng);
            if !self.config_free(&q) {
                continue;
            }
            let p = self.sc.arm.effector(&q);
            let clear = self.shapes[..self.active_obstacles]
                .iter()
                .all(|s| s.point_distance(p) > self.sc.goal_tolerance);
            if clear {
                return p;
            }
        }
        self.sc.goal
    }
}
