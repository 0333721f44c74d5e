//! Probe conditions: the fixed evaluation episodes of a changed task (a probe's scenario, an optional start
//! region, optional Gaussian noise on the observation) on which a finished policy or the controller is
//! evaluated after training. The episodes come from the study's evaluation seed exactly as `begin_eval`
//! draws them, so they are the same for every variant and seed, and a probe that changes nothing repeats
//! the training condition's evaluation; `digest` fingerprints them so this can be checked.

use super::episode::{Episode, Redraws};
use super::eval::Actor;
use super::metrics::{EpisodeMetrics, EvalSummary};
use crate::curriculum::EpisodeDraw;
use crate::sim::{ArmEnv, ArmState, MAX_JOINTS};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

/// A probe condition as the task sees it (the probe's scenario is the episode's).
#[derive(Clone, Debug, PartialEq)]
pub struct ProbeCondition {
    /// The probe's name (seeds its noise stream).
    pub name: String,
    /// Evaluation episodes.
    pub episodes: u64,
    /// Standard deviation of the noise on every observation entry (0: none).
    pub noise: f64,
    /// Start configurations drawn uniformly in (q_min, q_max), rad, within the joint limits.
    pub start_region: Option<(Vec<f64>, Vec<f64>)>,
}

/// FNV-1a 64-bit over the bytes, continuing from `h`.
fn fnv(mut h: u64, bytes: &[u8]) -> u64 {
    for b in bytes {
        h ^= *b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

const FNV_OFFSET: u64 = 0xcbf2_9ce4_8422_2325;

/// A start in the probe's region: uniform in the box (clipped to the joint limits), collision-free; after
/// 10 000 rejected draws the scenario's own start draw.
fn region_start(env: &ArmEnv, lo: &[f64], hi: &[f64], rng: &mut ChaCha8Rng) -> ArmState {
    let links = &env.scenario().arm.links;
    for _ in 0..10_000 {
        let mut q = [0.0; MAX_JOINTS];
        for (i, l) in links.iter().enumerate() {
            let a = lo[i].max(l.q_min);
            let b = hi[i].min(l.q_max);
            q[i] = if b > a { rng.gen_range(a..b) } else { a };
        }
        if env.config_free(&q) {
            return ArmState::at_rest(&q[..links.len()]);
        }
    }
    env.sample_start(rng)
}

/// Begin probe episode `j`: the seeded stream of `begin_eval`, the probe's start region when it has one.
/// Returns the redraws and the stream after the draw (it seeds the episode's observation noise).
pub fn begin_probe(
    ep: &mut Episode,
    cond: &ProbeCondition,
    eval_seed: u64,
    j: u64,
) -> (Redraws, ChaCha8Rng) {
    let mut rng = ChaCha8Rng::seed_from_u64(eval_seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ j);
    let mut draw = |sim: &ArmEnv, rng: &mut ChaCha8Rng| {
        let mut full = sim.clone();
        let sc = full.scenario().clone();
        full.set_difficulty(sc.obstacles.len(), sc.events.goal_jump_rate);
        match &cond.start_region {
            None => crate::curriculum::full_task_draw(&full, rng),
            Some((lo, hi)) => EpisodeDraw {
                start: region_start(&full, lo, hi, rng),
                goal: full.sample_goal(rng),
                obstacles: sc.obstacles.len(),
                jump_rate: sc.events.goal_jump_rate,
                start_on_path: false,
            },
        }
    };
    let r = ep.begin_feasible(&mut draw, &mut rng);
    // The noise stream: the probe's name mixed into the episode's stream, so every variant and seed sees
    // the same noise in the same episode.
    let noise_seed = fnv(
        fnv(FNV_OFFSET, cond.name.as_bytes()),
        &rng.gen::<u64>().to_le_bytes(),
    );
    (r, ChaCha8Rng::seed_from_u64(noise_seed))
}

/// The fingerprint of a begun episode: start state, goal, obstacles at t = 0, the scenario's events and the
/// noise stream.
fn episode_fingerprint(h: u64, ep: &Episode, noise: &ChaCha8Rng) -> u64 {
    let s = ep.sim.state();
    let n = ep.sim.n();
    let mut h = h;
    for x in s.q[..n].iter().chain(&s.dq[..n]).chain(&ep.sim.goal()) {
        h = fnv(h, &x.to_bits().to_le_bytes());
    }
    let sc = ep.sim.scenario();
    let text = format!(
        "{:?}|{:?}|{:?}",
        ep.sim.obstacles(),
        sc.obstacles,
        sc.events
    );
    h = fnv(h, text.as_bytes());
    fnv(h, &noise.get_seed())
}

/// Standard normal draw by the Box-Muller transform (Box & Muller, "A note on the generation of random
/// normal deviates", Ann. Math. Statist. 1958).
pub(crate) fn normal(rng: &mut ChaCha8Rng) -> f64 {
    let u1: f64 = 1.0 - rng.gen::<f64>();
    let u2: f64 = rng.gen::<f64>();
    (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
}

/// Run probe episode `j` with a deterministic controller; the controller sees the observation with the
/// probe's noise added. Returns the metrics and the episode's fingerprint.
pub fn run_probe_episode(
    ep: &mut Episode,
    cond: &ProbeCondition,
    eval_seed: u64,
    j: u64,
    act: &mut Actor<'_>,
) -> (EpisodeMetrics, u64) {
    let (_, mut noise) = begin_probe(ep, cond, eval_seed, j);
    let print = episode_fingerprint(fnv(FNV_OFFSET, &j.to_le_bytes()), ep, &noise);
    let mut obs = vec![0f32; ep.obs_dim()];
    let mut action = vec![0f32; ep.act_dim()];
    loop {
        ep.observe(&mut obs);
        if cond.noise > 0.0 {
            for o in obs.iter_mut() {
                *o += (cond.noise * normal(&mut noise)) as f32;
            }
        }
        act(ep, &obs, &mut action);
        let (now, _, terminal) = ep.step(&action);
        if terminal || now.timed_out {
            return (ep.metrics(), print);
        }
    }
}

/// What a probe evaluation gives: the means over its episodes and the digest of the episodes (16 hex digits).
#[derive(Clone, Debug)]
pub struct ProbeOutcome {
    pub summary: EvalSummary,
    pub digest: String,
}

/// Evaluate a controller on every episode of a probe. `make_actor` builds the controller for one episode (a
/// policy can reuse one; the tracking controller is built fresh per episode, as in the evaluation).
pub fn evaluate_probe<'a>(
    ep: &mut Episode,
    cond: &ProbeCondition,
    eval_seed: u64,
    make_actor: &mut dyn FnMut() -> Box<Actor<'a>>,
) -> ProbeOutcome {
    let mut eps = Vec::with_capacity(cond.episodes as usize);
    let mut digest = FNV_OFFSET;
    for j in 0..cond.episodes {
        let mut act = make_actor();
        let (m, print) = run_probe_episode(ep, cond, eval_seed, j, &mut *act);
        digest = fnv(digest, &print.to_le_bytes());
        eps.push(m);
    }
    ProbeOutcome {
        summary: EvalSummary::from_episodes(&eps),
        digest: format!("{digest:016x}"),
    }
}
