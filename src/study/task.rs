//! The reaching task a run trains on: the simulator, a reference path from the planner, the reward composer and
//! (in training) a reset curriculum, wrapped as a `learn::Environment`; plus the episode metrics that
//! evaluation and replay record (success, time to goal, smoothness, clearance, path deviation, replans).

use super::experiment::ObservationSpec;
use crate::curriculum::{Curriculum, EpisodeDraw};
use crate::learn::{Environment, Transition};
use crate::plan::connectivity::ConnectivityGrid;
use crate::plan::{plan_path, PlanSpec, ReferencePath};
use crate::reward::{Composer, RewardSpec};
use crate::sim::{ArmEnv, ArmState, Scenario, Shape, StepReport, MAX_JOINTS};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::sync::{Arc, Mutex};

/// Metrics of one finished episode.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EpisodeMetrics {
    /// Clean success: the goal region was reached and no contact happened in the episode.
    pub success: bool,
    /// The goal region was reached (contact allowed).
    pub reached: bool,
    /// Some step of the episode had the arm in contact (obstacle, boundary or itself).
    pub collided: bool,
    /// Time at which the goal was reached, s (None when it was not).
    pub time_to_goal: Option<f64>,
    /// Undiscounted sum of rewards.
    pub ret: f64,
    /// Per-term sums, in the composer's order.
    pub terms: Vec<f64>,
    pub steps: usize,
    /// RMS joint acceleration over steps and joints, rad/s^2.
    pub rms_acc: f64,
    /// Largest |joint acceleration|, rad/s^2.
    pub peak_acc: f64,
    /// RMS joint jerk (finite difference of the per-step accelerations), rad/s^3.
    pub rms_jerk: f64,
    /// Effector path length, m.
    pub path_length: f64,
    /// Smallest signed clearance seen, m.
    pub min_clearance: f64,
    /// Mean effector distance from the reference path, m.
    pub path_deviation: f64,
    /// Replans after scenario events.
    pub replans: usize,
    /// Plans that fell back to the straight line.
    pub fallbacks: usize,
}

/// Running sums for `EpisodeMetrics` (no allocation per step).
#[derive(Clone, Debug, Default)]
struct Accum {
    sum_sq_acc: f64,
    peak_acc: f64,
    sum_sq_jerk: f64,
    jerk_samples: usize,
    prev_ddq: Option<[f64; MAX_JOINTS]>,
    path_length: f64,
    min_clearance: f64,
    sum_dev: f64,
    steps: usize,
    ret: f64,
    replans: usize,
    fallbacks: usize,
    collided: bool,
    time_to_goal: Option<f64>,
}

/// Most times an episode's start and goal are drawn again because no collision-free path joins them.
pub const MAX_REDRAWS: usize = 50;

/// How an episode's draw went: draws rejected as unsolvable, and whether the one used is still unsolved
/// (only after `MAX_REDRAWS`).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Redraws {
    pub redraws: usize,
    pub unsolved: bool,
}

/// The planner settings that decide whether a start and goal are joined by a collision-free path: the
/// episode's planner with ten times its iterations (at least 6000) and no wall-clock limit, so the decision is
/// deterministic whatever the machine.
pub fn feasibility_spec(plan: &PlanSpec) -> PlanSpec {
    PlanSpec {
        iterations: (plan.iterations.saturating_mul(10)).max(6000),
        time_budget_ms: 1e9,
        ..plan.clone()
    }
}

/// One episode of the task: simulator + reference path + reward composer + metrics.
pub struct Episode {
    pub sim: ArmEnv,
    pub composer: Composer,
    plan: PlanSpec,
    pub path: ReferencePath,
    prev: StepReport,
    acc: Accum,
    /// What the policy observes beyond the simulator's physical observation.
    obs: ObservationSpec,
    plan_rng: ChaCha8Rng,
    /// Joint-space connectivity of the obstacle layouts episodes began with (two-link arms; curricula may
    /// vary the obstacle count, so a few layouts are kept).
    grids: Vec<(Vec<Shape>, Option<ConnectivityGrid>)>,
}

impl Episode {
    pub fn new(
        scenario: Arc<Scenario>,
        reward: &RewardSpec,
        plan: &PlanSpec,
        gamma: f64,
        obs: &ObservationSpec,
    ) -> Episode {
        let sim = ArmEnv::new(scenario);
        let prev = sim.last_report();
        let composer = Composer::new(reward, gamma);
        let n = sim.n();
        let q = sim.state().q;
        Episode {
            path: ReferencePath {
                joints: vec![q; plan.waypoints.max(2)],
                points: vec![prev.ee; plan.waypoints.max(2)],
                fallback: false,
            },
            sim,
            composer,
            plan: plan.clone(),
            prev,
            acc: Accum::default(),
            obs: obs.clone(),
            plan_rng: ChaCha8Rng::seed_from_u64(n as u64),
            grids: Vec::new(),
        }
    }

    /// Observation length: the simulator's, plus 2 per waypoint when the policy is path-conditioned, plus n per
    /// waypoint with joint-space waypoints, plus 2n with the clearance entries.
    pub fn obs_dim(&self) -> usize {
        let n = self.sim.n();
        let o = &self.obs;
        self.sim.obs_dim()
            + if o.waypoints {
                2 * self.plan.waypoints
            } else {
                0
            }
            + if o.joint_waypoints {
                n * self.plan.waypoints
            } else {
                0
            }
            + if o.clearance {
                self.sim.clearance_obs_dim()
            } else {
                0
            }
    }

    pub fn act_dim(&self) -> usize {
        self.sim.n()
    }

    /// Start an episode from a draw: plan the reference path (from the nominal start), optionally move the
    /// start onto a random waypoint, reset the simulator, the composer and the metrics. The draw is used as it
    /// is, solvable or not (see `begin_feasible`).
    pub fn begin(&mut self, d: &EpisodeDraw, rng: &mut ChaCha8Rng) {
        self.sim.set_difficulty(d.obstacles, d.jump_rate);
        self.plan_rng = ChaCha8Rng::seed_from_u64(rng.gen());
        let path = plan_path(
            &self.sim,
            &d.start.q[..self.sim.n()],
            d.goal,
            &self.plan,
            &mut self.plan_rng,
        );
        self.begin_with_path(d, path, rng);
    }

    /// Start an episode whose start and goal are joined by a collision-free path: draw with `draw`, plan, and
    /// when the episode's planner finds no path, check again with a generous, deterministic budget
    /// (`feasibility_spec`); draw again while that fails too, at most `MAX_REDRAWS` times (then the last draw
    /// is used and counted as unsolved). Feasibility is checked at the start of the episode, with the obstacles
    /// where they begin: with moving obstacles or goal jumps a later replan may still find no path. Returns the
    /// number of redraws.
    pub fn begin_feasible(
        &mut self,
        draw: &mut dyn FnMut(&ArmEnv, &mut ChaCha8Rng) -> EpisodeDraw,
        rng: &mut ChaCha8Rng,
    ) -> Redraws {
        let n = self.sim.n();
        let mut redraws = Redraws::default();
        loop {
            let d = draw(&self.sim, rng);
            self.sim.set_difficulty(d.obstacles, d.jump_rate);
            self.plan_rng = ChaCha8Rng::seed_from_u64(rng.gen());
            if !self.may_connect(&d) && redraws.redraws < MAX_REDRAWS {
                redraws.redraws += 1;
                continue;
            }
            let mut path = plan_path(
                &self.sim,
                &d.start.q[..n],
                d.goal,
                &self.plan,
                &mut self.plan_rng,
            );
            if path.fallback {
                let generous = feasibility_spec(&self.plan);
                path = plan_path(
                    &self.sim,
                    &d.start.q[..n],
                    d.goal,
                    &generous,
                    &mut self.plan_rng,
                );
            }
            if !path.fallback || redraws.redraws >= MAX_REDRAWS {
                redraws.unsolved = path.fallback;
                self.begin_with_path(&d, path, rng);
                return redraws;
            }
            redraws.redraws += 1;
        }
    }

    /// False when the joint-space grid (two-link arms) shows the draw's start and goal in different free
    /// regions: no collision-free path, so no planning is spent on it. True otherwise.
    fn may_connect(&mut self, d: &EpisodeDraw) -> bool {
        let layout = self.sim.obstacles();
        let k = match self.grids.iter().position(|(l, _)| l.as_slice() == layout) {
            Some(k) => k,
            None => {
                if self.grids.len() >= 8 {
                    self.grids.remove(0);
                }
                let g = ConnectivityGrid::build(&self.sim, self.plan.clearance_margin);
                self.grids.push((layout.to_vec(), g));
                self.grids.len() - 1
            }
        };
        match &self.grids[k].1 {
            Some(g) => g.may_connect(&self.sim, &d.start.q, d.goal),
            None => true,
        }
    }

    fn begin_with_path(&mut self, d: &EpisodeDraw, path: ReferencePath, rng: &mut ChaCha8Rng) {
        let mut start = d.start;
        if d.start_on_path && path.joints.len() > 1 {
            let k = rng.gen_range(0..path.joints.len() - 1);
            let cand = ArmState::at_rest(&path.joints[k][..self.sim.n()]);
            if self.sim.config_free(&cand.q) {
                start = cand;
            }
        }
        let first = self.sim.reset(start, d.goal, rng.gen());
        self.acc = Accum {
            min_clearance: first.min_clearance,
            fallbacks: path.fallback as usize,
            ..Accum::default()
        };
        self.path = path;
        self.composer.reset(&first, Some(&self.path));
        self.prev = first;
    }

    /// Apply a normalised action in [-1, 1]^n; returns the report, the reward and whether the episode is terminal.
    pub fn step(&mut self, action: &[f32]) -> (StepReport, f64, bool) {
        let n = self.sim.n();
        let mut u = [0.0; MAX_JOINTS];
        for i in 0..n {
            u[i] = action[i].clamp(-1.0, 1.0) as f64 * self.sim.action_limits()[i];
        }
        let now = self.sim.step(&u[..n]);
        if now.goal_jumped || now.obstacle_moved {
            let path = plan_path(
                &self.sim,
                &now.q[..n],
                now.goal,
                &self.plan,
                &mut self.plan_rng,
            );
            self.acc.replans += 1;
            self.acc.fallbacks += path.fallback as usize;
            self.path = path;
            self.sim.mark_planned();
            self.composer.set_path(Some(&self.path));
        }
        let r = self.composer.step(&self.prev, &now);
        let terminal = self.composer.ends_episode(&now);
        // Metrics.
        let a = &mut self.acc;
        let dt = self.sim.scenario().control_dt();
        for i in 0..n {
            a.sum_sq_acc += now.ddq[i] * now.ddq[i];
            a.peak_acc = a.peak_acc.max(now.ddq[i].abs());
        }
        if let Some(p) = a.prev_ddq {
            for i in 0..n {
                let j = (now.ddq[i] - p[i]) / dt;
                a.sum_sq_jerk += j * j;
            }
            a.jerk_samples += 1;
        }
        a.prev_ddq = Some(now.ddq);
        a.path_length += crate::sim::geometry::dist(now.ee, now.ee_prev);
        a.min_clearance = a.min_clearance.min(now.min_clearance);
        a.sum_dev += self.path.polyline().project(now.ee).distance;
        a.steps += 1;
        a.ret += r;
        a.collided |= now.collided;
        if now.reached_goal && a.time_to_goal.is_none() {
            a.time_to_goal = Some(now.t);
        }
        self.prev = now;
        (now, r, terminal)
    }

    /// Replans so far in this episode.
    pub fn replans(&self) -> usize {
        self.acc.replans
    }

    /// Metrics of the episode so far.
    pub fn metrics(&self) -> EpisodeMetrics {
        let a = &self.acc;
        let n = self.sim.n() as f64;
        let steps = a.steps.max(1) as f64;
        EpisodeMetrics {
            success: a.time_to_goal.is_some() && !a.collided,
            reached: a.time_to_goal.is_some(),
            collided: a.collided,
            time_to_goal: a.time_to_goal,
            ret: a.ret,
            terms: self.composer.episode_sums().to_vec(),
            steps: a.steps,
            rms_acc: (a.sum_sq_acc / (steps * n)).sqrt(),
            peak_acc: a.peak_acc,
            rms_jerk: if a.jerk_samples > 0 {
                (a.sum_sq_jerk / (a.jerk_samples as f64 * n)).sqrt()
            } else {
                0.0
            },
            path_length: a.path_length,
            min_clearance: a.min_clearance,
            path_deviation: a.sum_dev / steps,
            replans: a.replans,
            fallbacks: a.fallbacks,
        }
    }

    /// Write the observation: the simulator's, then the next K waypoints relative to the effector (scaled by reach).
    /// Then, when enabled, the same waypoints' joint offsets and the clearance entries.
    pub fn observe(&self, out: &mut [f32]) {
        let mut d = self.sim.obs_dim();
        self.sim.observe(&mut out[..d]);
        let o = &self.obs;
        if o.waypoints || o.joint_waypoints {
            let ee = self.prev.ee;
            let reach = self.sim.scenario().arm.reach();
            let seg = self.path.polyline().project(ee).segment;
            let last = self.path.points.len() - 1;
            if o.waypoints {
                for k in 0..self.plan.waypoints {
                    let p = self.path.points[(seg + 1 + k).min(last)];
                    out[d] = ((p[0] - ee[0]) / reach) as f32;
                    out[d + 1] = ((p[1] - ee[1]) / reach) as f32;
                    d += 2;
                }
            }
            if o.joint_waypoints {
                let n = self.sim.n();
                let q = self.sim.state().q;
                for k in 0..self.plan.waypoints {
                    let w = self.path.joints[(seg + 1 + k).min(last)];
                    for i in 0..n {
                        out[d] = ((w[i] - q[i]) / std::f64::consts::PI) as f32;
                        d += 1;
                    }
                }
            }
        }
        if o.clearance {
            let c = self.sim.clearance_obs_dim();
            self.sim.observe_clearance(&mut out[d..d + c]);
        }
    }
}

/// What the environments of one run share: the curriculum, the step counter and training-episode tallies.
pub struct RunShared {
    pub curriculum: Box<dyn Curriculum>,
    pub env_steps: u64,
    pub episodes: u64,
    pub successes: u64,
    /// Training draws rejected because no collision-free path joined start and goal.
    pub redraws: u64,
    /// Training episodes that still had no such path after `MAX_REDRAWS` draws.
    pub unsolved: u64,
}

impl RunShared {
    /// Fresh tallies around a run's curriculum.
    pub fn new(curriculum: Box<dyn Curriculum>) -> RunShared {
        RunShared {
            curriculum,
            env_steps: 0,
            episodes: 0,
            successes: 0,
            redraws: 0,
            unsolved: 0,
        }
    }
}

/// A training environment: an `Episode` whose starts come from the run's curriculum.
pub struct TaskEnv {
    ep: Episode,
    rng: ChaCha8Rng,
    shared: Arc<Mutex<RunShared>>,
}

impl TaskEnv {
    pub fn new(ep: Episode, seed: u64, shared: Arc<Mutex<RunShared>>) -> TaskEnv {
        TaskEnv {
            ep,
            rng: ChaCha8Rng::seed_from_u64(seed),
            shared,
        }
    }
}

impl Environment for TaskEnv {
    fn obs_dim(&self) -> usize {
        self.ep.obs_dim()
    }
    fn act_dim(&self) -> usize {
        self.ep.act_dim()
    }
    fn reset(&mut self, obs: &mut [f32]) {
        let shared = self.shared.clone();
        let mut draw = |sim: &ArmEnv, rng: &mut ChaCha8Rng| {
            let mut sh = shared.lock().expect("run state lock");
            let steps = sh.env_steps;
            let mut probe = sim.clone();
            let n_obs = probe.scenario().obstacles.len();
            let rate = probe.scenario().events.goal_jump_rate;
            probe.set_difficulty(n_obs, rate);
            sh.curriculum.draw(&probe, steps, rng)
        };
        let r = self.ep.begin_feasible(&mut draw, &mut self.rng);
        {
            let mut sh = self.shared.lock().expect("run state lock");
            sh.redraws += r.redraws as u64;
            sh.unsolved += r.unsolved as u64;
        }
        self.ep.observe(obs);
    }
    fn step(&mut self, action: &[f32], obs: &mut [f32]) -> Transition {
        let (now, r, terminal) = self.ep.step(action);
        self.ep.observe(obs);
        let truncated = !terminal && now.timed_out;
        let mut sh = self.shared.lock().expect("run state lock");
        sh.env_steps += 1;
        if terminal || truncated {
            sh.episodes += 1;
            sh.successes += now.reached_goal as u64;
            let steps = sh.env_steps;
            sh.curriculum.feedback(now.reached_goal, steps);
        }
        Transition {
            reward: r as f32,
            terminated: terminal,
            truncated,
        }
    }
}

/// Begin the fixed evaluation episode `j` of a study: uniform start and goal from a seed shared by every variant
/// and seed, the scenario's full obstacle set and events, drawn again (deterministically, from the same seeded
/// stream) while no collision-free path joins them. So the evaluation episodes are identical for every variant
/// and seed, and each is solvable. Returns the redraws.
pub fn begin_eval(ep: &mut Episode, eval_seed: u64, j: u64) -> Redraws {
    let mut rng = ChaCha8Rng::seed_from_u64(eval_seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ j);
    let mut draw = |sim: &ArmEnv, rng: &mut ChaCha8Rng| {
        let mut full = sim.clone();
        let sc = full.scenario().clone();
        full.set_difficulty(sc.obstacles.len(), sc.events.goal_jump_rate);
        crate::curriculum::full_task_draw(&full, rng)
    };
    ep.begin_feasible(&mut draw, &mut rng)
}

/// A deterministic controller: (episode, observation, normalised action out).
pub type Actor<'a> = dyn FnMut(&Episode, &[f32], &mut [f32]) + 'a;

/// Run evaluation episode `j` (see `begin_eval`) with a deterministic controller `act(obs, action_out)`.
pub fn run_episode(
    ep: &mut Episode,
    eval_seed: u64,
    j: u64,
    act: &mut Actor<'_>,
) -> EpisodeMetrics {
    begin_eval(ep, eval_seed, j);
    let mut obs = vec![0f32; ep.obs_dim()];
    let mut action = vec![0f32; ep.act_dim()];
    loop {
        ep.observe(&mut obs);
        act(ep, &obs, &mut action);
        let (now, _, terminal) = ep.step(&action);
        if terminal || now.timed_out {
            return ep.metrics();
        }
    }
}

/// Means over a set of evaluation episodes (the columns of evaluations.csv and term_contributions.csv).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct EvalSummary {
    /// Fraction of episodes with clean success (goal reached, no contact).
    pub success_rate: f64,
    /// Fraction of episodes that reached the goal, contact allowed.
    pub reached_rate: f64,
    pub mean_return: f64,
    /// Mean over successful episodes, s (NaN when none succeeded).
    pub time_to_goal: f64,
    pub collision_rate: f64,
    /// Mean episode length, control steps.
    pub episode_steps: f64,
    pub rms_joint_acc: f64,
    pub peak_joint_acc: f64,
    pub rms_jerk: f64,
    pub path_length: f64,
    pub min_clearance: f64,
    pub path_deviation: f64,
    pub replans: f64,
    pub planner_fallbacks: f64,
    pub terms: Vec<f64>,
}

impl EvalSummary {
    /// Average episode metrics.
    pub fn from_episodes(eps: &[EpisodeMetrics]) -> EvalSummary {
        let n = eps.len().max(1) as f64;
        let mean = |f: &dyn Fn(&EpisodeMetrics) -> f64| eps.iter().map(f).sum::<f64>() / n;
        let succ: Vec<f64> = eps.iter().filter_map(|e| e.time_to_goal).collect();
        let n_terms = eps.first().map(|e| e.terms.len()).unwrap_or(0);
        EvalSummary {
            success_rate: mean(&|e| e.success as u8 as f64),
            reached_rate: mean(&|e| e.reached as u8 as f64),
            mean_return: mean(&|e| e.ret),
            time_to_goal: if succ.is_empty() {
                f64::NAN
            } else {
                succ.iter().sum::<f64>() / succ.len() as f64
            },
            collision_rate: mean(&|e| e.collided as u8 as f64),
            episode_steps: mean(&|e| e.steps as f64),
            rms_joint_acc: mean(&|e| e.rms_acc),
            peak_joint_acc: mean(&|e| e.peak_acc),
            rms_jerk: mean(&|e| e.rms_jerk),
            path_length: mean(&|e| e.path_length),
            min_clearance: eps
                .iter()
                .map(|e| e.min_clearance)
                .fold(f64::INFINITY, f64::min),
            path_deviation: mean(&|e| e.path_deviation),
            replans: mean(&|e| e.replans as f64),
            planner_fallbacks: mean(&|e| e.fallbacks as f64),
            terms: (0..n_terms).map(|k| mean(&|e| e.terms[k])).collect(),
        }
    }
}
