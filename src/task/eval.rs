//! Evaluation episodes: the fixed, solvable episodes every variant and seed is evaluated on, rolled out by
//! a deterministic controller (a policy or the classical baseline) and averaged into an `EvalSummary`.

use super::episode::{ChosenStart, Episode, Redraws};
use super::metrics::{EpisodeMetrics, EvalSummary};
use crate::control::BaselineSpec;
use crate::learn::{Policy, RowsScratch};
use crate::plan::PlanSpec;
use crate::sim::{ArmEnv, Scenario};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use std::sync::Arc;

/// Begin the fixed evaluation episode `j` of a study: uniform start and goal from a seed shared by every variant
/// and seed, the scenario's full obstacle set and events, drawn again (deterministically, from the same seeded
/// stream) while no collision-free path joins them. So the evaluation episodes are identical for every variant
/// and seed, and each is solvable. Returns the redraws.
pub fn begin_eval(ep: &mut Episode, eval_seed: u64, j: u64) -> Redraws {
    let (chosen, mut rng) = choose_eval(ep, eval_seed, j);
    ep.begin_chosen(&chosen, &mut rng);
    chosen.redraws
}

/// The start `begin_eval` chooses for episode `j`, and its seeded stream as the choice left it.
fn choose_eval(ep: &mut Episode, eval_seed: u64, j: u64) -> (ChosenStart, ChaCha8Rng) {
    let mut rng = ChaCha8Rng::seed_from_u64(eval_seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ j);
    let mut draw = |sim: &ArmEnv, rng: &mut ChaCha8Rng| {
        let mut full = sim.clone();
        let sc = full.scenario().clone();
        full.set_difficulty(sc.obstacles.len(), sc.events.goal_jump_rate);
        crate::curriculum::full_task_draw(&full, rng)
    };
    let chosen = ep.choose_feasible(&mut draw, &mut rng);
    (chosen, rng)
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
    roll_out(ep, act)
}

/// Run a begun episode to its end with `act`.
fn roll_out(ep: &mut Episode, act: &mut Actor<'_>) -> EpisodeMetrics {
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

/// A run's evaluation episodes on one `Episode`, each start drawn and planned once and kept for the run's
/// later evaluations. `begin_eval` depends only on the seed, `j` and the episode's settings, so a kept start
/// begins the very episode a new choice would; on the quickstart the choosing was about a third of an
/// evaluation's time. With a way to make more episodes (`with_lanes`), a policy is evaluated on all the
/// episodes in step (`run_policy`), its network taking their observations together as the rollout's does.
pub struct EvalEpisodes {
    ep: Episode,
    eval_seed: u64,
    kept: Vec<Option<(ChosenStart, ChaCha8Rng)>>,
    /// Makes an episode like `ep`, one per evaluation episode for `run_policy`.
    make: Option<Box<dyn Fn() -> Episode>>,
    /// The episodes `run_policy` steps together (made on first use, kept for the run).
    lanes: Vec<Episode>,
    scratch: RowsScratch,
}

impl EvalEpisodes {
    pub fn new(ep: Episode, eval_seed: u64) -> EvalEpisodes {
        EvalEpisodes {
            ep,
            eval_seed,
            kept: Vec::new(),
            make: None,
            lanes: Vec::new(),
            scratch: RowsScratch::default(),
        }
    }

    /// Let `run_policy` step the episodes together, on episodes `make` builds (each like the one given to
    /// `new`; without this, `run_policy` runs them one after the other on that one).
    pub fn with_lanes(mut self, make: impl Fn() -> Episode + 'static) -> EvalEpisodes {
        self.make = Some(Box::new(make));
        self
    }

    /// Run evaluation episodes `0..episodes` with a policy's deterministic action and average their metrics.
    pub fn evaluate_policy(&mut self, episodes: u64, policy: &Policy) -> EvalSummary {
        EvalSummary::from_episodes(&self.run_policy(episodes, policy))
    }

    /// Run evaluation episodes `0..episodes` with a policy's deterministic action: their metrics, in order,
    /// the same as `run` with `Policy::act_deterministic` gives. With `with_lanes` the episodes run in step,
    /// each on an episode of its own, and the policy acts for all that have not ended at once
    /// (`Policy::act_deterministic_rows`, the same bits as one at a time).
    pub fn run_policy(&mut self, episodes: u64, policy: &Policy) -> Vec<EpisodeMetrics> {
        if self.make.is_none() {
            let mut act =
                |_: &Episode, obs: &[f32], a: &mut [f32]| policy.act_deterministic(obs, a);
            return self.run(episodes, &mut act);
        }
        let count = episodes as usize;
        self.keep_starts(count);
        if let Some(make) = &self.make {
            while self.lanes.len() < count {
                self.lanes.push(make());
            }
        }
        let lanes = &mut self.lanes[..count];
        for (lane, kept) in lanes.iter_mut().zip(&self.kept) {
            let (chosen, rng) = kept.as_ref().expect("kept above");
            lane.begin_chosen(chosen, &mut rng.clone());
        }
        let (od, ad) = (policy.obs_dim(), policy.act_dim());
        let mut obs = vec![0f32; count * od];
        let mut act = vec![0f32; count * ad];
        let mut ended: Vec<Option<EpisodeMetrics>> = (0..count).map(|_| None).collect();
        let mut active: Vec<usize> = (0..count).collect();
        while !active.is_empty() {
            let rows = active.len();
            for (row, &j) in obs.chunks_exact_mut(od).zip(&active) {
                lanes[j].observe(row);
            }
            policy.act_deterministic_rows(
                &obs[..rows * od],
                &mut act[..rows * ad],
                &mut self.scratch,
            );
            let mut still = 0;
            for r in 0..rows {
                let j = active[r];
                let (now, _, terminal) = lanes[j].step(&act[r * ad..(r + 1) * ad]);
                if terminal || now.timed_out {
                    ended[j] = Some(lanes[j].metrics());
                } else {
                    active[still] = j;
                    still += 1;
                }
            }
            active.truncate(still);
        }
        ended
            .into_iter()
            .map(|m| m.expect("every episode ran to its end"))
            .collect()
    }

    /// Choose and keep the starts of evaluation episodes `0..count` not kept yet.
    fn keep_starts(&mut self, count: usize) {
        if self.kept.len() < count {
            self.kept.resize(count, None);
        }
        for j in 0..count {
            if self.kept[j].is_none() {
                self.kept[j] = Some(choose_eval(&mut self.ep, self.eval_seed, j as u64));
            }
        }
    }

    /// Run evaluation episodes `0..episodes` with `act` and average their metrics.
    pub fn evaluate(&mut self, episodes: u64, act: &mut Actor<'_>) -> EvalSummary {
        EvalSummary::from_episodes(&self.run(episodes, act))
    }

    /// Run evaluation episodes `0..episodes` with `act`: their metrics, in order.
    pub fn run(&mut self, episodes: u64, act: &mut Actor<'_>) -> Vec<EpisodeMetrics> {
        let mut eps = Vec::with_capacity(episodes as usize);
        for j in 0..episodes as usize {
            if self.kept.len() <= j {
                self.kept.resize(j + 1, None);
            }
            let (chosen, rng) = match &self.kept[j] {
                Some(kept) => kept,
                None => self.kept[j].insert(choose_eval(&mut self.ep, self.eval_seed, j as u64)),
            };
            self.ep.begin_chosen(chosen, &mut rng.clone());
            eps.push(roll_out(&mut self.ep, act));
        }
        eps
    }
}

/// Redraws evaluation episodes `0..episodes` of `eval_seed` need (rejected draws, episodes left unsolved).
pub fn eval_redraws(ep: &mut Episode, eval_seed: u64, episodes: u64) -> (u64, u64) {
    let (mut redraws, mut unsolved) = (0, 0);
    for j in 0..episodes {
        let r = begin_eval(ep, eval_seed, j);
        redraws += r.redraws as u64;
        unsolved += r.unsolved as u64;
    }
    (redraws, unsolved)
}

/// A controller closure driving an `Episode` with the classical baseline (normalised actions): it plans and
/// follows its own route with its clearance (`control::RouteFollower`), and replans after the episode's
/// scenario events.
pub fn baseline_actor(
    baseline: &BaselineSpec,
    plan: &PlanSpec,
    scenario: &Arc<Scenario>,
) -> impl FnMut(&Episode, &[f32], &mut [f32]) {
    let mut follower = crate::control::RouteFollower::new(baseline, plan, scenario);
    let mut seen: Option<(usize, f64)> = None;
    let mut out = vec![0.0; scenario.n()];
    move |ep: &Episode, _obs: &[f32], action: &mut [f32]| {
        let n = ep.sim.n();
        let t = ep.sim.time();
        // A new episode (time went back) or a scenario event: plan from here.
        let key = (ep.replans(), t);
        if seen.is_none_or(|(r, t0)| r != key.0 || t < t0) {
            follower.reset();
        }
        seen = Some(key);
        follower.action(&ep.sim, &mut out);
        for i in 0..n {
            action[i] = (out[i] / ep.sim.action_limits()[i]) as f32;
        }
    }
}
