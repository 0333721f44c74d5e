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

/// Clearance held back from a contact certificate (`ArmEnv::contact_free_radius`), m: far above the rounding of
/// the distance computations (about 1e-16 m at these sizes), far below any contact depth that matters.
const CERTIFICATE_SLACK: f64 = 1e-9;

mod integrate;
mod obstacles;

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
    /// `Scenario::lever_arms`, kept for the contact certificate's per-substep test.
    lever: JointVec,
    /// Skip contact resolution in substeps the certificate proves contact-free (default on).
    certify: bool,
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
            lever: sc.lever_arms(),
            certify: true,
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

    /// How far the arm may move from configuration `q` before any contact can arise with the obstacles where
    /// they are now, the workspace boundary or itself, measured as `sum_i |dq_i| R_i` with the lever arms R_i
    /// (`Scenario::lever_arms`): its clearance less `CERTIFICATE_SLACK`. Clearance is 1-Lipschitz in the
    /// position of the links' axes, which move at most that much (the bound behind adaptive collision checking,
    /// Schwarzer, Saha & Latombe, IEEE T-RO 2005; from memory; `plan::ArmSpace` walks edges by it). Zero
    /// (nothing certified) outside solid contact mode or when less is left.
    fn contact_free_radius(&self, q: &JointVec) -> f64 {
        if self.sc.contact != ContactMode::Solid || !self.certify {
            return 0.0;
        }
        (self.clearances(&q[..self.sc.n()]).0 - CERTIFICATE_SLACK).max(0.0)
    }

    /// Turn the contact certificate off (contact is then resolved after every substep) or back on. Results are
    /// the same bit for bit either way; off is for checking exactly that, and for timing what it saves.
    pub fn set_contact_certificate(&mut self, on: bool) {
        self.certify = on;
    }

    /// The action applied in the last control step, physical units (zero after a reset).
    pub fn previous_action(&self) -> &JointVec {
        &self.prev_action
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
        let certified = self.contact_free_radius(&before.q);
        for _ in 0..self.sc.substeps {
            self.physics_step(&mut s, &a);
            // The obstacles stand still within a control step, so a substep whose configuration lies within
            // the certified radius of the step's start has no contact: resolving it would find none and change
            // nothing, and it is skipped (bit-identical; `tests/all/sim_contact.rs`).
            let moved: f64 = (0..n)
                .map(|i| (s.q[i] - before.q[i]).abs() * self.lever[i])
                .sum();
            if moved < certified {
                continue;
            }
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
}
