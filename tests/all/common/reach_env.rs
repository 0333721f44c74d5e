//! A minimal `learn::Environment` over the 2-link `ArmEnv` for the learner's tests and bench:
//! reward = goal bonus on reach (terminal) + constant time cost + dense negative distance. The
//! reward composer module replaces it in real studies; this adapter stays deliberately simple.

use std::sync::Arc;

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use termwise::learn::{Environment, Transition};
use termwise::sim::{ArmEnv, Scenario};
use termwise::task::observation::{arm_obs_dim, observe_arm};

/// Bonus for reaching the goal (episode ends).
pub const GOAL_BONUS: f32 = 10.0;
/// Cost per control step.
pub const TIME_COST: f32 = 0.05;
/// Cost per metre of effector-goal distance per control step.
pub const DIST_COST: f32 = 1.0;

/// The default 2-link reaching scenario (no obstacles, acceleration control, 5 cm tolerance,
/// 200-step episodes), read from the repository.
pub fn reach_scenario() -> Arc<Scenario> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/reach-2link.toml"
    );
    let src = std::fs::read_to_string(path).expect("scenario file");
    Arc::new(Scenario::from_toml_str(&src, path).expect("valid scenario"))
}

/// Where each episode's goal comes from.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Goals {
    /// A random reachable goal per episode (`ArmEnv::sample_goal`).
    Random,
    /// The scenario's fixed goal.
    Scenario,
}

/// Random start each episode, goal per [`Goals`]; owns its seeded RNG.
pub struct Reach {
    env: ArmEnv,
    goals: Goals,
    rng: ChaCha8Rng,
    limits: Vec<f64>,
    phys: Vec<f64>,
}

impl Reach {
    pub fn new(sc: Arc<Scenario>, goals: Goals, seed: u64) -> Reach {
        let env = ArmEnv::new(sc);
        let limits = env.action_limits().to_vec();
        let phys = vec![0.0; limits.len()];
        Reach {
            env,
            goals,
            rng: ChaCha8Rng::seed_from_u64(seed),
            limits,
            phys,
        }
    }
}

impl Environment for Reach {
    fn obs_dim(&self) -> usize {
        arm_obs_dim(&self.env)
    }
    fn act_dim(&self) -> usize {
        self.limits.len()
    }
    fn reset(&mut self, obs: &mut [f32]) {
        let start = self.env.sample_start(&mut self.rng);
        let random_goal = self.env.sample_goal(&mut self.rng);
        let goal = match self.goals {
            Goals::Random => random_goal,
            Goals::Scenario => self.env.scenario().goal,
        };
        let event_seed = self.rng.gen::<u64>();
        self.env.reset(start, goal, event_seed);
        observe_arm(&self.env, obs);
    }
    fn step(&mut self, action: &[f32], obs: &mut [f32]) -> Transition {
        for ((p, &a), &l) in self.phys.iter_mut().zip(action).zip(&self.limits) {
            *p = a as f64 * l;
        }
        let r = self.env.step(&self.phys);
        observe_arm(&self.env, obs);
        let terminated = r.reached_goal;
        let reward =
            -TIME_COST - DIST_COST * r.goal_dist as f32 + if terminated { GOAL_BONUS } else { 0.0 };
        Transition {
            reward,
            terminated,
            truncated: r.timed_out && !terminated,
        }
    }
}

/// `n` training environments with distinct seeds derived from `seed`.
pub fn reach_envs(n: usize, goals: Goals, seed: u64) -> Vec<Box<dyn Environment>> {
    let sc = reach_scenario();
    (0..n)
        .map(|i| {
            let s = seed.wrapping_mul(1_000_003) + i as u64;
            Box::new(Reach::new(sc.clone(), goals, s)) as Box<dyn Environment>
        })
        .collect()
}

/// Success rate of the deterministic policy over `episodes` held-out episodes (own seed).
pub fn success_rate(
    policy: &termwise::learn::Policy,
    goals: Goals,
    episodes: usize,
    seed: u64,
) -> f64 {
    let mut env = Reach::new(reach_scenario(), goals, seed);
    let mut obs = vec![0.0f32; env.obs_dim()];
    let mut act = vec![0.0f32; env.act_dim()];
    let mut ok = 0usize;
    for _ in 0..episodes {
        env.reset(&mut obs);
        loop {
            policy.act_deterministic(&obs, &mut act);
            let tr = env.step(&act, &mut obs);
            if tr.terminated {
                ok += 1;
            }
            if tr.terminated || tr.truncated {
                break;
            }
        }
    }
    ok as f64 / episodes as f64
}
