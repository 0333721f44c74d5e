//! The simulated episode: arm state, moving obstacles, the goal and its seeded jumps, stepped one control
//! step at a time. Reports everything reward terms need; knows nothing about rewards or learning.
//! `step` does not allocate.

use super::arm::{JointVec, Trig, MAX_JOINTS};
use super::contact::{self, ContactMode, Surroundings};
use super::geometry::{
    capsule_boundary_clearance, capsule_capsule_distance, capsule_shape_distance, dist, Capsule,
    Shape,
};
use super::scenario::{ControlMode, Integrator, Motion, Scenario};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::sync::Arc;

/// Obstacles described in each observation (nearest first).
pub const OBS_OBSTACLES: usize = 2;

/// Joint positions and velocities.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ArmState {
    pub q: JointVec,
    pub dq: JointVec,
}

impl ArmState {
    /// A state at rest at configuration `q` (first n entries used).
    pub fn at_rest(q: &[f64]) -> ArmState {
        let mut s = ArmState {
            q: [0.0; MAX_JOINTS],
            dq: [0.0; MAX_JOINTS],
        };
        s.q[..q.len()].copy_from_slice(q);
        s
    }
}

/// What one control step produced (all fields for the first n joints only).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StepReport {
    /// Time since the episode began, s.
    pub t: f64,
    /// Control steps taken in this episode.
    pub steps: usize,
    pub q: JointVec,
    pub dq: JointVec,
    /// Mean joint acceleration over the control step, rad/s^2.
    pub ddq: JointVec,
    /// The action actually applied (after clipping), physical units.
    pub action: JointVec,
    /// The action applied in the previous control step.
    pub prev_action: JointVec,
    /// Effector position now and one control step ago, m.
    pub ee: [f64; 2],
    pub ee_prev: [f64; 2],
    /// Effector velocity, m/s.
    pub ee_vel: [f64; 2],
    /// Current goal, m, and the effector's distance to it.
    pub goal: [f64; 2],
    pub goal_dist: f64,
    /// Smallest signed clearance between the arm and any obstacle, the boundary or (optionally) itself, m.
    pub min_clearance: f64,
    /// Smallest clearance to an obstacle only (infinite without obstacles), m.
    pub obstacle_clearance: f64,
    pub collided: bool,
    pub reached_goal: bool,
    /// The episode horizon was reached.
    pub timed_out: bool,
    /// Control steps left until the horizon.
    pub steps_left: usize,
    /// The goal jumped during this step.
    pub goal_jumped: bool,
    /// Some obstacle moved more than the replan margin since `mark_planned`.
    pub obstacle_moved: bool,
}

/// Velocity of an obstacle with motion `m` at time t, m/s (`linear` is the current velocity of a linear one).
fn obstacle_velocity(m: &Motion, linear: [f64; 2], t: f64) -> [f64; 2] {
    match *m {
        Motion::Still => [0.0; 2],
        Motion::Linear { .. } => linear,
        Motion::Sine {
            amplitude,
            period,
            phase,
        } => {
            let w = 2.0 * std::f64::consts::PI / period;
            let c = (w * t + phase).cos();
            [amplitude[0] * w * c, amplitude[1] * w * c]
        }
    }
}

/// One episode of the arm in its scenario.
#[derive(Clone, Debug)]
pub struct ArmEnv {
    sc: Arc<Scenario>,
    state: ArmState,
    t: f64,
    steps: usize,
    goal: [f64; 2],
    shapes: Vec<Shape>,
    velocities: Vec<[f64; 2]>,
    /// Current velocity of each obstacle, m/s (what a solid contact with it must match along the normal).
    shape_vels: Vec<[f64; 2]>,
    /// Scratch space of the contact solver.
    contacts: Box<contact::Contacts>,
    /// Sum of the generalised contact impulses J^T lambda over the last control step, N m s per joint.
    contact_impulse: JointVec,
    planned_centres: Vec<[f64; 2]>,
    active_obstacles: usize,
    jump_rate: f64,
    next_random_jump: f64,
    next_timed_jump: usize,
    event_rng: ChaCha8Rng,
    prev_action: JointVec,
    last: Option<StepReport>,
    action_limits: Vec<f64>,
}

impl ArmEnv {
    /// An environment at the scenario's start state and goal.
    pub fn new(sc: Arc<Scenario>) -> ArmEnv {
        let action_limits = sc
            .arm
            .links
            .iter()
            .map(|l| match sc.control {
                ControlMode::Torque => l.tau_max,
                ControlMode::Acceleration => l.acc_max,
            })
            .collect();
        let n_obs = sc.obstacles.len();
        let mut env = ArmEnv {
            state: ArmState::at_rest(&sc.start_q),
            t: 0.0,
            steps: 0,
            goal: sc.goal,
            shapes: sc.obstacles.iter().map(|o| o.shape).collect(),
            velocities: vec![[0.0; 2]; n_obs],
            shape_vels: vec![[0.0; 2]; n_obs],
            contact_impulse: [0.0; MAX_JOINTS],
            contacts: Box::default(),
            planned_centres: vec![[0.0; 2]; n_obs],
            active_obstacles: n_obs,
            jump_rate: sc.events.goal_jump_rate,
            next_random_jump: f64::INFINITY,
            next_timed_jump: 0,
            event_rng: ChaCha8Rng::seed_from_u64(0),
            prev_action: [0.0; MAX_JOINTS],
            last: None,
            action_limits,
            sc,
        };
        let mut start = ArmState::at_rest(&env.sc.start_q);
        start.dq[..env.sc.n()].copy_from_slice(&env.sc.start_dq);
        env.reset(start, env.sc.goal, 0);
        env
    }

    pub fn scenario(&self) -> &Arc<Scenario> {
        &self.sc
    }
    pub fn n(&self) -> usize {
        self.sc.n()
    }
    pub fn state(&self) -> &ArmState {
        &self.state
    }
    pub fn time(&self) -> f64 {
        self.t
    }
    pub fn goal(&self) -> [f64; 2] {
        self.goal
    }
    /// Obstacles at their current positions (only the active ones).
    pub fn obstacles(&self) -> &[Shape] {
        &self.shapes[..self.active_obstacles]
    }
    /// The most recent step report (or the reset report).
    pub fn last_report(&self) -> StepReport {
        self.last.expect("reset always sets a report")
    }
    /// The generalised contact impulse J^T lambda summed over the last control step, N m s per joint (zero in
    /// pass-through mode or without contact). Divided by the control step it is the mean contact torque.
    pub fn contact_impulse(&self) -> &JointVec {
        &self.contact_impulse
    }

    /// Current obstacle velocities, m/s (only the active ones).
    pub fn obstacle_velocities(&self) -> &[[f64; 2]] {
        &self.shape_vels[..self.active_obstacles]
    }

    /// Resolve solid contact at state `s` with the obstacles where they are now (no-op in pass-through mode
    /// and without contact). Adds the impulse to `contact_impulse`.
    fn resolve_contact(&mut self, s: &mut ArmState) {
        if self.sc.contact != ContactMode::Solid {
            return;
        }
        let world = Surroundings {
            shapes: &self.shapes[..self.active_obstacles],
            velocities: &self.shape_vels[..self.active_obstacles],
            workspace_min: self.sc.workspace_min,
            workspace_max: self.sc.workspace_max,
            self_collision: self.sc.self_collision,
        };
        let (gen, touched) = contact::resolve(
            &self.sc.arm,
            &world,
            &mut s.q,
            &mut s.dq,
            &mut self.contacts,
        );
        if touched {
            for (c, g) in self.contact_impulse.iter_mut().zip(gen) {
                *c += g;
            }
        }
    }

    /// Per-joint action limit in physical units (tau_max in torque mode, acc_max in acceleration mode).
    pub fn action_limits(&self) -> &[f64] {
        &self.action_limits
    }

    /// Use only the first `count` scenario obstacles and this random goal-jump rate (per second) from the next
    /// reset on (difficulty curricula). Also puts the obstacles back at their t = 0 positions, so starts and
    /// goals sampled next are checked against the layout the episode will begin with.
    pub fn set_difficulty(&mut self, count: usize, jump_rate: f64) {
        self.active_obstacles = count.min(self.sc.obstacles.len());
        self.jump_rate = jump_rate.max(0.0);
        for (i, o) in self.sc.obstacles.iter().enumerate() {
            self.shapes[i] = o.shape;
        }
    }

    /// Start an episode from `start` with goal `goal`; `event_seed` seeds goal jumps.
    pub fn reset(&mut self, start: ArmState, goal: [f64; 2], event_seed: u64) -> StepReport {
        self.state = start;
        self.t = 0.0;
        self.steps = 0;
        self.goal = goal;
        for (i, o) in self.sc.obstacles.iter().enumerate() {
            self.shapes[i] = o.shape;
            self.velocities[i] = match o.motion {
                Motion::Linear { velocity } => velocity,
                _ => [0.0; 2],
            };
            self.shape_vels[i] = obstacle_velocity(&o.motion, self.velocities[i], 0.0);
        }
        self.contact_impulse = [0.0; MAX_JOINTS];
        self.mark_planned();
        self.event_rng = ChaCha8Rng::seed_from_u64(event_seed);
        self.next_timed_jump = 0;
        self.next_random_jump = self.draw_jump_gap();
        self.prev_action = [0.0; MAX_JOINTS];
        let ee = self.sc.arm.effector(&self.state.q);
        let (min_c, obs_c) = self.clearances(&self.state.q);
        let r = StepReport {
            t: 0.0,
            steps: 0,
            q: self.state.q,
            dq: self.state.dq,
            ddq: [0.0; MAX_JOINTS],
            action: [0.0; MAX_JOINTS],
            prev_action: [0.0; MAX_JOINTS],
            ee,
            ee_prev: ee,
            ee_vel: self.sc.arm.effector_velocity(&self.state.q, &self.state.dq),
            goal,
            goal_dist: dist(ee, goal),
            min_clearance: min_c,
            obstacle_clearance: obs_c,
            collided: min_c < 0.0,
            reached_goal: dist(ee, goal) < self.sc.goal_tolerance,
            timed_out: false,
            steps_left: self.sc.horizon,
            goal_jumped: false,
            obstacle_moved: false,
        };
        self.last = Some(r);
        r
    }

    fn draw_jump_gap(&mut self) -> f64 {
        if self.jump_rate > 0.0 {
            let u: f64 = self.event_rng.gen::<f64>();
            -(1.0 - u).ln() / self.jump_rate
        } else {
            f64::INFINITY
        }
    }

    /// Remember the obstacles' current positions as those the current reference path was planned for.
    pub fn mark_planned(&mut self) {
        for (i, s) in self.shapes.iter().enumerate() {
            self.planned_centres[i] = s.center();
        }
    }

    /// Joint acceleration under torque `tau` (clipped to the torque limits).
    #[inline]
    fn torque_accel(&self, q: &JointVec, dq: &JointVec, tau: &JointVec) -> JointVec {
        let arm = &self.sc.arm;
        arm.forward_dynamics_trig(&Trig::new(q, arm.n()), dq, tau)
    }

    /// Enforce joint position and speed limits after a physics step (a joint at its stop loses its outward speed).
    #[inline]
    fn apply_limits(&self, s: &mut ArmState) {
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
    fn torque_step(&self, s: &mut ArmState, tau: &JointVec) {
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
    /// for the step and integrated through the forward dynamics, so the limits bite.
    fn physics_step(&self, s: &mut ArmState, u: &JointVec) {
        let arm = &self.sc.arm;
        let n = arm.n();
        match self.sc.control {
            ControlMode::Torque => self.torque_step(s, u),
            ControlMode::Acceleration => {
                let mut tau = arm.inverse_dynamics_trig(&Trig::new(&s.q, n), &s.dq, u);
                let mut clipped = false;
                for (t, l) in tau.iter_mut().zip(&arm.links) {
                    if t.abs() > l.tau_max {
                        *t = t.clamp(-l.tau_max, l.tau_max);
                        clipped = true;
                    }
                }
                if clipped {
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

    /// Signed clearances for configuration q: (overall minimum, obstacles only).
    pub fn clearances(&self, q: &[f64]) -> (f64, f64) {
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        self.sc.arm.joint_points(q, &mut pts);
        self.clearances_from_points(&pts)
    }

    /// `clearances` from the joint points of a configuration (base first).
    fn clearances_from_points(&self, pts: &[[f64; 2]; MAX_JOINTS + 1]) -> (f64, f64) {
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
                for c2 in &caps[i + 2..n] {
                    all = all.min(capsule_capsule_distance(c, c2));
                }
            }
        }
        (all.min(obs), obs)
    }

    /// Each link's signed clearance to the nearest current obstacle (infinite without obstacles), m, for
    /// configuration q; writes n values.
    fn link_obstacle_clearances(&self, q: &[f64], out: &mut [f64]) {
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

    /// Length of `observe_clearance`'s output: 2 per joint.
    pub fn clearance_obs_dim(&self) -> usize {
        2 * self.n()
    }

    /// The arm's clearance to the obstacles as the policy sees it (2n values): each link's signed clearance to the
    /// nearest obstacle, scaled by the reach and capped at 1, then the joint-space gradient of the smallest of them
    /// (d clearance / d q_i, scaled by the reach; zero without obstacles). The observation's obstacle entries
    /// describe the effector's surroundings only, while contact mostly happens along the links; the gradient is the
    /// joint-space direction that moves the arm away from its nearest obstacle, the repulsive direction of a
    /// potential field (Khatib 1986, "Real-time obstacle avoidance for manipulators and mobile robots", IJRR 5(1),
    /// eq. 14: the obstacle force mapped to the joints through the transposed Jacobian). It is taken by central
    /// differences of the exact capsule distances (step 1e-6 rad), which is shape-agnostic (discs and boxes alike).
    pub fn observe_clearance(&self, out: &mut [f32]) {
        let n = self.n();
        let reach = self.sc.arm.reach();
        let q = self.state.q;
        let mut per_link = [0.0; MAX_JOINTS];
        self.link_obstacle_clearances(&q[..n], &mut per_link[..n]);
        for i in 0..n {
            out[i] = (per_link[i] / reach).min(1.0) as f32;
        }
        let nearest = |env: &ArmEnv, q: &[f64]| {
            let mut c = [0.0; MAX_JOINTS];
            env.link_obstacle_clearances(q, &mut c[..n]);
            c[..n].iter().copied().fold(f64::INFINITY, f64::min)
        };
        const H: f64 = 1e-6;
        for i in 0..n {
            let mut qp = q;
            let mut qm = q;
            qp[i] += H;
            qm[i] -= H;
            let g = (nearest(self, &qp[..n]) - nearest(self, &qm[..n])) / (2.0 * H);
            out[n + i] = if g.is_finite() {
                (g / reach) as f32
            } else {
                0.0
            };
        }
    }

    /// Whether configuration q is free of collisions with the current obstacles, the boundary and (if enabled) itself.
    pub fn config_free(&self, q: &[f64]) -> bool {
        self.clearances(q).0 >= 0.0
    }

    fn move_obstacles(&mut self, t: f64, dt: f64) {
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

    /// Advance one control step with action `u` (physical units; clipped to the limits).
    pub fn step(&mut self, u: &[f64]) -> StepReport {
        let n = self.sc.n();
        let mut a = [0.0; MAX_JOINTS];
        for i in 0..n {
            let lim = self.action_limits[i];
            a[i] = if u[i].is_nan() {
                0.0
            } else {
                u[i].clamp(-lim, lim)
            };
        }
        let before = self.state;
        let ee_prev = self
            .last
            .map(|r| r.ee)
            .unwrap_or_else(|| self.sc.arm.effector(&before.q));
        let mut s = self.state;
        self.contact_impulse = [0.0; MAX_JOINTS];
        for _ in 0..self.sc.substeps {
            self.physics_step(&mut s, &a);
            self.resolve_contact(&mut s);
        }
        let cdt = self.sc.control_dt();
        self.t += cdt;
        self.steps += 1;
        // Obstacles and the goal move on the control grid; a solid obstacle that moved into the arm pushes it
        // at once (the contact is resolved again after the move).
        self.move_obstacles(self.t, cdt);
        self.resolve_contact(&mut s);
        self.state = s;
        let mut goal_jumped = false;
        while self.next_timed_jump < self.sc.events.goal_jump_times.len()
            && self.sc.events.goal_jump_times[self.next_timed_jump] <= self.t + 1e-12
        {
            self.next_timed_jump += 1;
            goal_jumped = true;
        }
        if self.t >= self.next_random_jump {
            self.next_random_jump = self.t + self.draw_jump_gap();
            goal_jumped = true;
        }
        if goal_jumped {
            let mut rng = self.event_rng.clone();
            self.goal = self.sample_goal(&mut rng);
            self.event_rng = rng;
        }
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        let tr = Trig::new(&s.q, n);
        self.sc.arm.joint_points_trig(&tr, &mut pts);
        let ee = pts[n];
        let (min_c, obs_c) = self.clearances_from_points(&pts);
        let mut ddq = [0.0; MAX_JOINTS];
        for i in 0..n {
            ddq[i] = (s.dq[i] - before.dq[i]) / cdt;
        }
        let moved = self.shapes[..self.active_obstacles]
            .iter()
            .zip(&self.planned_centres)
            .any(|(sh, c)| dist(sh.center(), *c) > self.sc.events.replan_margin);
        let goal_dist = dist(ee, self.goal);
        let r = StepReport {
            t: self.t,
            steps: self.steps,
            q: s.q,
            dq: s.dq,
            ddq,
            action: a,
            prev_action: self.prev_action,
            ee,
            ee_prev,
            ee_vel: self.sc.arm.effector_velocity_trig(&tr, &s.dq),
            goal: self.goal,
            goal_dist,
            min_clearance: min_c,
            obstacle_clearance: obs_c,
            collided: min_c < 0.0,
            reached_goal: goal_dist < self.sc.goal_tolerance,
            timed_out: self.steps >= self.sc.horizon,
            steps_left: self.sc.horizon.saturating_sub(self.steps),
            goal_jumped,
            obstacle_moved: moved,
        };
        self.prev_action = a;
        self.last = Some(r);
        r
    }

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
        // (tests/learn_reach.rs): without it the failures were arms pressed into a stop of joint 1, the goal lying
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
        // reach (tests/learn_reach.rs), adding it alone lifted PPO from 0.09 to 0.68 success at 200k steps.
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
