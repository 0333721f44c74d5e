//! One episode of the reaching task: the simulator, a reference path from the planner (with a feasibility
//! check of the start/goal draw), the reward composer, the observation the policy sees, and the metrics.

use super::metrics::{Accum, EpisodeMetrics};
use super::observation::{
    arm_obs_dim, clearance_obs_dim, observe_arm, observe_clearance, ObservationSpec,
};
use super::waypoints::WaypointSource;
use crate::curriculum::EpisodeDraw;
use crate::plan::connectivity::ConnectivityGrid;

use crate::plan::{path_collides, plan_path, PlanSpec, ReferencePath};
use crate::reward::{Composer, RewardSpec};
use crate::sim::{ArmEnv, ArmState, Scenario, Shape, StepReport, MAX_JOINTS};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::sync::Arc;

/// Most times an episode's start and goal are drawn again because no collision-free path joins them.
pub const MAX_REDRAWS: usize = 50;

/// A drawn start must keep this many times the reference path's clearance margin (`PlanSpec::
/// clearance_margin`) from contact, or it is drawn again: the planner keeps its full margin only from such
/// starts (closer ones make it lower the margin to half the start's clearance, `plan::plan_detailed`). On the
/// quickstart's evaluation episodes, the only ones every learned policy ended in contact began 1.3 and 3.1 cm
/// from an obstacle (margin 2 cm).
pub const START_CLEARANCE_FACTOR: f64 = 2.0;

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

/// An episode start chosen by `Episode::choose_feasible`: the draw, its reference path, the redraws it took,
/// and the states of the episode's planner and noise draws after the choice.
#[derive(Clone, Debug)]
pub struct ChosenStart {
    draw: EpisodeDraw,
    path: ReferencePath,
    pub redraws: Redraws,
    plan_rng: ChaCha8Rng,
    noise_rng: ChaCha8Rng,
}

/// One episode of the task: simulator + reference path + reward composer + metrics.
pub struct Episode {
    pub sim: ArmEnv,
    pub composer: Composer,
    plan: PlanSpec,
    pub path: ReferencePath,
    prev: StepReport,
    acc: Accum,
    /// What the policy observes beyond the arm's part of the observation.
    obs: ObservationSpec,
    plan_rng: ChaCha8Rng,
    /// Where the waypoints come from, and how they are degraded.
    source: WaypointSource,
    /// Draws of the waypoint noise (seeded with the plan's seed, so the planner's own draws are unchanged).
    noise_rng: ChaCha8Rng,
    /// A scenario event happened since the reference was last renewed.
    pending: bool,
    /// Time the reference was last renewed, s.
    renewed_at: f64,
    /// Joint-space connectivity of the obstacle layouts episodes began with (two-link arms; curricula may
    /// vary the obstacle count, so a few layouts are kept).
    grids: Vec<(Vec<Shape>, Arc<Option<ConnectivityGrid>>)>,
}

impl Episode {
    pub fn new(
        scenario: Arc<Scenario>,
        reward: &RewardSpec,
        plan: &PlanSpec,
        gamma: f64,
        obs: &ObservationSpec,
        source: &WaypointSource,
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
            source: source.clone(),
            noise_rng: ChaCha8Rng::seed_from_u64(n as u64),
            pending: false,
            renewed_at: 0.0,
            grids: Vec::new(),
        }
    }

    /// Observation length: the arm's part (`observation::arm_obs_dim`), plus 2 per waypoint when the policy is path-conditioned, plus n per
    /// waypoint with joint-space waypoints, plus 2n with the clearance entries.
    pub fn obs_dim(&self) -> usize {
        let n = self.sim.n();
        let o = &self.obs;
        arm_obs_dim(&self.sim)
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
                clearance_obs_dim(&self.sim)
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
        self.seed_plans(rng.gen());
        let path = plan_path(
            &self.sim,
            &d.start.q[..self.sim.n()],
            d.goal,
            &self.plan,
            &mut self.plan_rng,
        );
        self.begin_with_path(d, path, rng);
    }

    /// Start an episode whose start and goal are joined by a collision-free path: draw with `draw` (again
    /// while the start is closer to contact than `START_CLEARANCE_FACTOR` times the margin, or the joint-space
    /// grid shows no path), plan, and when the episode's planner finds no path, check again with a generous, deterministic budget
    /// (`feasibility_spec`); draw again while that fails too, at most `MAX_REDRAWS` times (then the last draw
    /// is used and counted as unsolved). Feasibility is checked at the start of the episode, with the obstacles
    /// where they begin: with moving obstacles or goal jumps a later replan may still find no path. Returns the
    /// number of redraws.
    pub fn begin_feasible(
        &mut self,
        draw: &mut dyn FnMut(&ArmEnv, &mut ChaCha8Rng) -> EpisodeDraw,
        rng: &mut ChaCha8Rng,
    ) -> Redraws {
        // The choice leaves the difficulty and the planner's and noise's draws as `begin_chosen` would set
        // them, so the path moves in without a copy.
        let chosen = self.choose_feasible(draw, rng);
        self.begin_with_path(&chosen.draw, chosen.path, rng);
        chosen.redraws
    }

    /// The drawing and planning of `begin_feasible`, without beginning the episode: what `begin_chosen` needs
    /// to begin it. Depends only on the draws of `rng` and on the episode's scenario and planner settings (its
    /// observation and waypoint source play no part before the episode begins), so an episode that repeats
    /// (an evaluation episode) can keep the result and begin again from it without planning again.
    pub fn choose_feasible(
        &mut self,
        draw: &mut dyn FnMut(&ArmEnv, &mut ChaCha8Rng) -> EpisodeDraw,
        rng: &mut ChaCha8Rng,
    ) -> ChosenStart {
        let n = self.sim.n();
        let mut redraws = Redraws::default();
        loop {
            let d = draw(&self.sim, rng);
            self.sim.set_difficulty(d.obstacles, d.jump_rate);
            self.seed_plans(rng.gen());
            // A start closer to contact than twice the margin would make the planner lower its margin for
            // the whole reference path, and the episode would begin all but touching an obstacle.
            let start_clear = self.sim.clearances(&d.start.q[..n]).0;
            let clear_start = start_clear >= START_CLEARANCE_FACTOR * self.plan.clearance_margin;
            if (!clear_start || !self.may_connect(&d)) && redraws.redraws < MAX_REDRAWS {
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
                return ChosenStart {
                    draw: d,
                    path,
                    redraws,
                    plan_rng: self.plan_rng.clone(),
                    noise_rng: self.noise_rng.clone(),
                };
            }
            redraws.redraws += 1;
        }
    }

    /// Begin the episode `choose_feasible` chose, exactly as `begin_feasible` would have (the planner's and
    /// the noise's draws go on from where the choice left them; `rng` from where it left `rng`).
    pub fn begin_chosen(&mut self, c: &ChosenStart, rng: &mut ChaCha8Rng) {
        self.sim.set_difficulty(c.draw.obstacles, c.draw.jump_rate);
        self.plan_rng = c.plan_rng.clone();
        self.noise_rng = c.noise_rng.clone();
        self.begin_with_path(&c.draw, c.path.clone(), rng);
    }

    /// Seed the planner's draws and the waypoint noise's for one episode.
    fn seed_plans(&mut self, seed: u64) {
        self.plan_rng = ChaCha8Rng::seed_from_u64(seed);
        self.noise_rng = ChaCha8Rng::seed_from_u64(seed ^ 0x0A15_E5EE_D000_0001);
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
                let g = ConnectivityGrid::shared(&self.sim, self.plan.clearance_margin);
                self.grids.push((layout.to_vec(), g));
                self.grids.len() - 1
            }
        };
        match self.grids[k].1.as_ref() {
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
        // A learned source replaces the planner's path (planned anyway: it decides whether the draw is
        // solvable, and keeps every source's episodes the same).
        let path = match &self.source.model {
            Some(m) => m.predict(&self.sim, &first.q[..self.sim.n()], first.goal),
            None => path,
        };
        self.pending = false;
        self.renewed_at = first.t;
        self.hand_over(path);
        self.composer.reset(&first, Some(&self.path));
        self.prev = first;
    }

    /// Make `path` (degraded as the source says) the episode's reference, and count whether it touches an
    /// obstacle.
    fn hand_over(&mut self, path: ReferencePath) {
        let path = self.source.degrade(&self.sim, path, &mut self.noise_rng);
        self.acc.references += 1;
        self.acc.colliding_references += path_collides(&self.sim, &path) as usize;
        self.path = path;
    }

    /// Renew the reference after control step `now` when the source says it is due: the planner from the
    /// arm's configuration (after events, as `refresh` allows), or the learned model (every `every` steps and
    /// after events).
    fn renew(&mut self, now: &StepReport) {
        let n = self.sim.n();
        self.pending |= now.goal_jumped || now.obstacle_moved;
        if !self
            .source
            .due(self.pending, now.steps, now.t, self.renewed_at)
        {
            return;
        }
        let path = match &self.source.model {
            Some(m) => m.predict(&self.sim, &now.q[..n], now.goal),
            None => {
                let path = plan_path(
                    &self.sim,
                    &now.q[..n],
                    now.goal,
                    &self.plan,
                    &mut self.plan_rng,
                );
                self.acc.fallbacks += path.fallback as usize;
                path
            }
        };
        if self.pending {
            self.acc.replans += 1;
        }
        self.pending = false;
        self.renewed_at = now.t;
        self.hand_over(path);
        self.sim.mark_planned();
        self.composer.set_path(Some(&self.path));
    }

    /// Apply a normalised action in [-1, 1]^n; returns the report, the reward and whether the episode is terminal.
    pub fn step(&mut self, action: &[f32]) -> (StepReport, f64, bool) {
        let n = self.sim.n();
        let mut u = [0.0; MAX_JOINTS];
        for i in 0..n {
            u[i] = action[i].clamp(-1.0, 1.0) as f64 * self.sim.action_limits()[i];
        }
        let now = self.sim.step(&u[..n]);
        // The transition's reward and path deviation are measured on the reference the policy saw when it
        // acted; a reference renewed after an event (or every step, by a learned source) is what it sees next.
        // (Renewing first measured both ends on the new path: one rooted at the arm every step left the path
        // terms nothing to pay — progress along it and distance from it are then zero.)
        let r = self.composer.step(&self.prev, &now);
        let terminal = self.composer.ends_episode(&now);
        let deviation = self.path.polyline().project(now.ee).distance;
        let dt = self.sim.scenario().control_dt();
        self.acc.record(&now, n, dt, r, deviation);
        self.renew(&now);
        self.prev = now;
        (now, r, terminal)
    }

    /// Replans so far in this episode.
    pub fn replans(&self) -> usize {
        self.acc.replans
    }

    /// Metrics of the episode so far.
    pub fn metrics(&self) -> EpisodeMetrics {
        self.acc.metrics(self.sim.n(), self.composer.episode_sums())
    }

    /// Write the observation: the arm's part (`observation::observe_arm`), then the next K waypoints relative to the effector (scaled by reach).
    /// Then, when enabled, the same waypoints' joint offsets and the clearance entries.
    pub fn observe(&self, out: &mut [f32]) {
        let mut d = arm_obs_dim(&self.sim);
        observe_arm(&self.sim, &mut out[..d]);
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
            let c = clearance_obs_dim(&self.sim);
            observe_clearance(&self.sim, &mut out[d..d + c]);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::study::experiment;
    use std::path::Path;

    // The reference is the definition itself (no outside source): beginning from a kept choice must leave the
    // episode exactly as `begin_feasible` leaves it, the planner's and the noise's draws included (replans
    // after scenario events and degraded waypoints draw from them), whatever the episode ran in between.
    #[test]
    fn a_kept_choice_begins_the_episode_begin_feasible_begins() {
        let exp = experiment::load(Path::new("experiments/quickstart.toml")).unwrap();
        let v = &exp.variants[0];
        let mut draw =
            |sim: &ArmEnv, rng: &mut ChaCha8Rng| crate::curriculum::full_task_draw(sim, rng);
        let mut direct = v.episode();
        let mut rng_direct = ChaCha8Rng::seed_from_u64(5);
        direct.begin_feasible(&mut draw, &mut rng_direct);

        let mut kept = v.episode();
        let mut rng_kept = ChaCha8Rng::seed_from_u64(5);
        let choice = kept.choose_feasible(&mut draw, &mut rng_kept);
        // Another episode in between moves every draw on.
        kept.begin_feasible(&mut draw, &mut ChaCha8Rng::seed_from_u64(9));
        assert_ne!(kept.plan_rng, direct.plan_rng);
        kept.begin_chosen(&choice, &mut rng_kept);

        assert_eq!(rng_kept, rng_direct);
        assert_eq!(kept.plan_rng, direct.plan_rng);
        assert_eq!(kept.noise_rng, direct.noise_rng);
        assert_eq!(kept.path, direct.path);
        assert_eq!(kept.sim.state().q, direct.sim.state().q);
        assert_eq!(kept.sim.goal(), direct.sim.goal());
        assert_eq!(kept.sim.obstacles(), direct.sim.obstacles());
    }
}
