//! The baseline as it runs in studies and replays: it plans its own collision-free route with a clearance that
//! covers its tracking error, and follows the whole route (every corner of it, not a few waypoints): as one
//! smooth timed spline through all corners when the timed reference keeps half the margin everywhere, else
//! every straight edge in turn (each timed from the arm's current state, coming to rest at the corner, so the
//! reference never cuts a corner the planner certified), each timed edge checked for collisions before use. It
//! replans from where it is after a scenario event or when its clearance falls below half its margin.

use super::profile::TimeScaling;
use super::spec::BaselineSpec;
use super::tracker::Tracker;
use super::trajectory::{Budget, Trajectory};
use crate::plan::{plan_detailed, PlanSpec};
use crate::sim::{ArmEnv, JointVec, Scenario, MAX_JOINTS};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;

/// Control steps between two clearance-triggered replans at least.
const REPLAN_COOLDOWN: usize = 10;

/// Timed samples per edge checked for collisions.
const EDGE_CHECKS: usize = 24;

/// Smallest clearance of a timed reference over `samples` + 1 instants from its start to its end, with the
/// obstacles where they are now, m.
fn timed_clearance(traj: &Trajectory, env: &ArmEnv, samples: usize) -> f64 {
    let n = env.n();
    let d = traj.duration();
    (0..=samples)
        .map(|k| {
            env.clearances(&traj.sample(d * k as f64 / samples as f64).q[..n])
                .0
        })
        .fold(f64::INFINITY, f64::min)
}

/// Follows a planned route edge by edge (see the module docs).
pub struct RouteFollower {
    tracker: Tracker,
    scaling: TimeScaling,
    budget: Budget,
    clearance: f64,
    plan: PlanSpec,
    route: Vec<JointVec>,
    next: usize,
    last_plan_step: Option<usize>,
    /// Routes planned so far (episode start included).
    pub plans: usize,
    /// Routes that had to use a margin below `clearance`.
    pub narrowed: usize,
}

impl RouteFollower {
    /// A follower with the baseline's gains and clearance; `plan` supplies the planner and its settings (it is
    /// given a generous, deterministic budget: ten times the iterations, at least 6000, no wall-clock limit).
    pub fn new(spec: &BaselineSpec, plan: &PlanSpec, scenario: &Scenario) -> RouteFollower {
        let tracker = Tracker::new(spec, scenario);
        RouteFollower {
            budget: tracker.budget(),
            tracker,
            scaling: spec.time_scaling,
            clearance: spec.clearance,
            plan: PlanSpec {
                iterations: plan.iterations.saturating_mul(10).max(6000),
                time_budget_ms: 1e9,
                ..plan.clone()
            },
            route: Vec::new(),
            next: 0,
            last_plan_step: None,
            plans: 0,
            narrowed: 0,
        }
    }

    /// The reference the tracker follows at episode time t (None before the first plan).
    pub fn reference(&self, t: f64) -> Option<super::trajectory::RefSample> {
        self.tracker.reference(t)
    }

    /// Forget the current route (a new episode begins).
    pub fn reset(&mut self) {
        self.route.clear();
        self.next = 0;
        self.last_plan_step = None;
    }

    /// Plan a route from the current state to the current goal with the widest margin that works: the
    /// baseline clearance, halved down to the planner's own margin. The planner's RNG is seeded from the state
    /// and goal, so the route does not depend on which episodes ran before.
    pub fn replan(&mut self, env: &ArmEnv) {
        let n = env.n();
        let s = env.state();
        let goal = env.goal();
        let mut seed = 0x5EED_u64;
        for x in s.q[..n].iter().chain(&goal) {
            seed = seed.rotate_left(13) ^ x.to_bits();
        }
        let floor = self.plan.clearance_margin;
        let mut margin = self.clearance.max(floor);
        self.plans += 1;
        self.last_plan_step = Some(env.last_report().steps);
        loop {
            let spec = PlanSpec {
                clearance_margin: margin,
                ..self.plan.clone()
            };
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            let rep = plan_detailed(env, &s.q[..n], goal, &spec, &mut rng, false);
            if !rep.path.fallback || margin <= floor {
                self.narrowed += (margin < self.clearance) as usize;
                self.route = rep.route;
                self.next = 1;
                // Fastest first: one smooth spline through every corner of the route, used only when its timed
                // samples keep half the margin; else edge by edge, at rest in each corner.
                self.tracker
                    .follow_through(&self.route, &s.q[..n], &s.dq[..n], env.time());
                let (traj, _) = self.tracker.trajectory().expect("just followed");
                let spline_time = traj.duration();
                let safe = timed_clearance(traj, env, 4 * EDGE_CHECKS) >= 0.5 * margin;
                if safe && spline_time <= self.edges_time(n) {
                    self.next = self.route.len();
                } else {
                    self.start_edge(env);
                }
                return;
            }
            margin = (0.5 * margin).max(floor);
        }
    }

    /// Time to follow the route edge by edge from rest to rest, s.
    fn edges_time(&self, n: usize) -> f64 {
        self.route
            .windows(2)
            .map(|w| {
                Trajectory::new(
                    n,
                    &w[1..],
                    &w[0][..n],
                    &[0.0; MAX_JOINTS][..n],
                    self.scaling,
                    &self.budget,
                )
                .duration()
            })
            .sum()
    }

    /// Time the next edge from the current state and check the timed reference against the obstacles where
    /// they are now; an edge that would collide (the arm has drifted off the route) makes a new route.
    fn start_edge(&mut self, env: &ArmEnv) {
        let n = env.n();
        let s = env.state();
        let Some(target) = self.route.get(self.next).copied() else {
            return;
        };
        self.tracker
            .follow_to(&target, &s.q[..n], &s.dq[..n], env.time());
        let (traj, _) = self.tracker.trajectory().expect("just followed");
        if timed_clearance(traj, env, EDGE_CHECKS) < 0.0
            && self.last_plan_step != Some(env.last_report().steps)
        {
            self.replan(env);
        }
    }

    /// The action for the next control step in the scenario's physical units, written to `out[..n]`.
    pub fn action(&mut self, env: &ArmEnv, out: &mut [f64]) {
        let n = env.n();
        let r = env.last_report();
        let cooled = self
            .last_plan_step
            .is_none_or(|k| r.steps >= k + REPLAN_COOLDOWN || r.steps < k);
        if self.route.is_empty()
            || (cooled && r.min_clearance < 0.5 * self.clearance && !r.reached_goal)
        {
            self.replan(env);
        } else if self
            .tracker
            .arrival_time()
            .is_some_and(|t_end| env.time() >= t_end)
            && self.next + 1 < self.route.len()
        {
            self.next += 1;
            self.start_edge(env);
        }
        let s = env.state();
        let mut u = [0.0; MAX_JOINTS];
        self.tracker.action(
            &env.scenario().arm,
            &s.q[..n],
            &s.dq[..n],
            env.time(),
            &mut u,
        );
        out[..n].copy_from_slice(&u[..n]);
    }
}
