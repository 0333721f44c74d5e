//! Evaluation episodes: the fixed, solvable episodes every variant and seed is evaluated on, rolled out by
//! a deterministic controller (a policy or the classical baseline) and averaged into an `EvalSummary`.

use super::episode::{ChosenStart, Episode, Redraws};
use super::metrics::{EpisodeMetrics, EvalSummary};
use crate::control::BaselineSpec;
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
/// evaluation's time.
pub struct EvalEpisodes {
    ep: Episode,
    eval_seed: u64,
    kept: Vec<Option<(ChosenStart, ChaCha8Rng)>>,
}

impl EvalEpisodes {
    pub fn new(ep: Episode, eval_seed: u64) -> EvalEpisodes {
        EvalEpisodes {
            ep,
            eval_seed,
            kept: Vec::new(),
        }
    }

    /// Run evaluation episodes `0..episodes` with `act` and average their metrics.
    pub fn evaluate(&mut self, episodes: u64, act: &mut Actor<'_>) -> EvalSummary {
        EvalSummary::from_episodes(&self.run(episodes, act))
    }

    /// Run evaluation episodes `0..episodes` with `act`: their metrics, in order.
    pub fn run(&mut self, episodes: u64, act: &mut Actor<'_>) -> Vec<EpisodeMetrics> {
        let mut eps = Vec::with_capacity(episodes as usize);
        for j in 0..episodes {
            let k = j as usize;
            if self.kept.len() <= k {
                self.kept.resize(k + 1, None);
            }
            let (chosen, rng) = match &self.kept[k] {
                Some(kept) => kept,
                None => self.kept[k].insert(choose_eval(&mut self.ep, self.eval_seed, j)),
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
