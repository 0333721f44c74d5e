//! Learner checks on a toy 2-D point mass (no simulator needed): reproducibility, checkpoint
//! round trip, divergence handling, and that PPO actually learns to reach a target.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use termwise::learn::{
    checkpoint, Environment, IterationStats, LearnError, NoObserver, Policy, PpoConfig, Trainer,
    Transition,
};

/// A point mass in the unit square driven by accelerations; reach within 0.1 of the goal.
struct PointMass {
    rng: ChaCha8Rng,
    pos: [f32; 2],
    vel: [f32; 2],
    goal: [f32; 2],
    t: u32,
    /// Return NaN rewards from this step on (divergence test).
    poison_after: Option<u32>,
    steps_total: u32,
}

const DT: f32 = 0.1;
const HORIZON: u32 = 60;
const TOL: f32 = 0.1;

impl PointMass {
    fn new(seed: u64) -> Self {
        PointMass {
            rng: ChaCha8Rng::seed_from_u64(seed),
            pos: [0.0; 2],
            vel: [0.0; 2],
            goal: [0.0; 2],
            t: 0,
            poison_after: None,
            steps_total: 0,
        }
    }
    fn dist(&self) -> f32 {
        ((self.goal[0] - self.pos[0]).powi(2) + (self.goal[1] - self.pos[1]).powi(2)).sqrt()
    }
    fn write(&self, obs: &mut [f32]) {
        obs.copy_from_slice(&[
            self.pos[0],
            self.pos[1],
            self.vel[0],
            self.vel[1],
            self.goal[0] - self.pos[0],
            self.goal[1] - self.pos[1],
        ]);
    }
}

impl Environment for PointMass {
    fn obs_dim(&self) -> usize {
        6
    }
    fn act_dim(&self) -> usize {
        2
    }
    fn reset(&mut self, obs: &mut [f32]) {
        for k in 0..2 {
            self.pos[k] = self.rng.gen_range(-1.0..1.0);
            self.goal[k] = self.rng.gen_range(-1.0..1.0);
        }
        self.vel = [0.0; 2];
        self.t = 0;
        self.write(obs);
    }
    fn step(&mut self, action: &[f32], obs: &mut [f32]) -> Transition {
        assert!(
            action.iter().all(|a| (-1.0..=1.0).contains(a)),
            "learner must clip"
        );
        for ((v, p), a) in self.vel.iter_mut().zip(&mut self.pos).zip(action) {
            *v = (*v + 2.0 * a * DT).clamp(-1.0, 1.0);
            *p = (*p + *v * DT).clamp(-1.5, 1.5);
        }
        self.t += 1;
        self.steps_total += 1;
        self.write(obs);
        let d = self.dist();
        let reached = d < TOL;
        let mut reward = -0.1 * d - 0.01 + if reached { 1.0 } else { 0.0 };
        if self.poison_after.is_some_and(|p| self.steps_total > p) {
            reward = f32::NAN;
        }
        Transition {
            reward,
            terminated: reached,
            truncated: !reached && self.t >= HORIZON,
        }
    }
}

fn envs(n: usize, seed: u64) -> Vec<Box<dyn Environment>> {
    (0..n)
        .map(|i| Box::new(PointMass::new(seed * 1000 + i as u64)) as Box<dyn Environment>)
        .collect()
}

fn small_config() -> PpoConfig {
    PpoConfig {
        num_envs: 4,
        rollout_steps: 64,
        epochs: 2,
        minibatch_size: 64,
        ..PpoConfig::default()
    }
}

fn run(seed: u64, iters: usize) -> Vec<IterationStats> {
    let mut tr = Trainer::new(small_config(), envs(4, 1), seed).unwrap();
    let mut log: Vec<IterationStats> = Vec::new();
    for _ in 0..iters {
        tr.iterate(&mut log).unwrap();
    }
    log.iter().map(|s| s.without_timings()).collect()
}

#[test]
fn same_seed_gives_bit_identical_metrics_and_other_seeds_differ() {
    let a = run(11, 3);
    let b = run(11, 3);
    let c = run(12, 3);
    assert_eq!(a.len(), 3);
    for (x, y) in a.iter().zip(&b) {
        // Bit-identical, compared through the raw bits (NaN-safe).
        let bits = |s: &IterationStats| {
            [
                s.policy_loss,
                s.value_loss,
                s.entropy,
                s.approx_kl,
                s.clip_fraction,
                s.explained_variance,
                s.mean_episode_return,
                s.policy_grad_norm,
                s.value_grad_norm,
            ]
            .map(f64::to_bits)
        };
        assert_eq!(bits(x), bits(y));
        assert_eq!(x.env_steps, y.env_steps);
    }
    assert_ne!(a[2].policy_loss.to_bits(), c[2].policy_loss.to_bits());
    assert!(a[0].approx_kl.is_finite() && a[0].approx_kl >= 0.0);
}

fn eval_success(policy: &Policy, episodes: usize, seed: u64) -> f64 {
    let mut env = PointMass::new(seed);
    let (mut obs, mut act) = (vec![0.0f32; 6], vec![0.0f32; 2]);
    let mut ok = 0;
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

#[test]
fn checkpoint_round_trip_acts_identically() {
    let mut tr = Trainer::new(small_config(), envs(4, 2), 5).unwrap();
    for _ in 0..2 {
        tr.iterate(&mut NoObserver).unwrap();
    }
    let dir = std::env::temp_dir().join(format!("termwise-ckpt-{}", std::process::id()));
    let path = dir.join("policy.safetensors");
    tr.save_checkpoint(&path).unwrap();
    let loaded = checkpoint::load(&path).unwrap();
    assert_eq!(&loaded.policy, tr.policy());
    assert_eq!(&loaded.critic, tr.value_network());
    assert_eq!(loaded.sidecar.config, *tr.config());
    assert_eq!(loaded.sidecar.env_steps, tr.env_steps());
    let mut rng = ChaCha8Rng::seed_from_u64(9);
    let (mut a, mut b) = ([0.0f32; 2], [0.0f32; 2]);
    for _ in 0..100 {
        let obs: Vec<f32> = (0..6).map(|_| rng.gen_range(-2.0..2.0)).collect();
        tr.policy().act_deterministic(&obs, &mut a);
        loaded.policy.act_deterministic(&obs, &mut b);
        assert_eq!(a.map(f32::to_bits), b.map(f32::to_bits));
        assert!(a.iter().all(|x| (-1.0..=1.0).contains(x)));
    }
    // A truncated file is rejected with an error, not a panic.
    let bytes = std::fs::read(&path).unwrap();
    std::fs::write(&path, &bytes[..bytes.len() / 2]).unwrap();
    assert!(checkpoint::load_policy(&path).is_err());
    std::fs::remove_dir_all(&dir).unwrap();
}

#[test]
fn non_finite_rewards_stop_the_run_and_keep_the_last_good_weights() {
    let mut list = envs(4, 3);
    let mut poisoned = PointMass::new(77);
    poisoned.poison_after = Some(100);
    list[2] = Box::new(poisoned);
    let mut tr = Trainer::new(small_config(), list, 3).unwrap();
    tr.iterate(&mut NoObserver).unwrap(); // 64 steps of env 2: still clean
    let good = tr.policy().clone();
    let err = tr.iterate(&mut NoObserver).unwrap_err();
    assert!(
        matches!(err, LearnError::Diverged { iteration: 1, .. }),
        "{err}"
    );
    assert!(err.is_divergence());
    assert_eq!(tr.policy().network(), good.network());
}

#[test]
fn ppo_learns_the_point_mass_task() {
    let cfg = PpoConfig {
        num_envs: 8,
        rollout_steps: 128,
        ..PpoConfig::default()
    };
    let mut tr = Trainer::new(cfg, envs(8, 4), 21).unwrap();
    let before = eval_success(tr.policy(), 100, 999);
    let mut after = 0.0;
    while tr.env_steps() < 150_000 {
        tr.iterate(&mut NoObserver).unwrap();
        if tr.iteration() % 10 == 0 {
            after = eval_success(tr.policy(), 100, 999);
            if after >= 0.95 {
                break;
            }
        }
    }
    println!(
        "point mass: success {before} -> {after} after {} steps",
        tr.env_steps()
    );
    assert!(before < 0.5, "untrained policy already succeeds: {before}");
    assert!(after >= 0.95, "success {after}");
}
