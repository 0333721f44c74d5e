//! Speed of the PPO learner on one core: a full iteration (rollout + update) on the default
//! 2-link reaching scenario with 16 environments, reported as environment steps per second,
//! plus its parts — the fused rollout forward, GAE, and one candle minibatch step at several
//! minibatch sizes — and a printed rollout/update breakdown.

#[allow(dead_code)] // shared with the tests; the bench uses part of it
#[path = "../tests/common/reach_env.rs"]
mod reach_env;

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use reach_env::{reach_envs, Goals};
use termwise::learn::gae::{advantages, Segment};
use termwise::learn::ppo::{loss_and_grads, Minibatch};
use termwise::learn::{pin_kernel_threads, Mlp, NoObserver, PpoConfig, Trainer};

fn iteration(c: &mut Criterion) {
    pin_kernel_threads();
    let cfg = PpoConfig::default();
    let batch = cfg.batch_size() as u64;
    let mut tr = Trainer::new(cfg, reach_envs(16, Goals::Random, 3), 3).expect("trainer");
    tr.iterate(&mut NoObserver).expect("warm-up");
    let mut g = c.benchmark_group("ppo");
    g.throughput(Throughput::Elements(batch));
    g.sample_size(20);
    g.bench_function("iteration_reach2link_16envs_x128", |b| {
        b.iter(|| black_box(tr.iterate(&mut NoObserver).expect("iterate")))
    });
    g.finish();
    // Breakdown from the trainer's own timers over 10 more iterations.
    let (mut ro, mut up) = (0.0, 0.0);
    for _ in 0..10 {
        let s = tr.iterate(&mut NoObserver).expect("iterate");
        ro += s.rollout_seconds;
        up += s.update_seconds;
    }
    println!(
        "breakdown per iteration of {batch} steps: rollout {:.1} ms, update {:.1} ms, {:.0} steps/s end to end",
        ro * 100.0,
        up * 100.0,
        10.0 * batch as f64 / (ro + up)
    );
}

fn parts(c: &mut Criterion) {
    pin_kernel_threads();
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let actor = Mlp::orthogonal(&[21, 64, 64, 2], 1.4, 0.01, &mut rng);
    let critic = Mlp::orthogonal(&[21, 64, 64, 1], 1.4, 1.0, &mut rng);
    let x = vec![0.3f32; 21];
    let (mut s0, mut s1) = (vec![0.0; 64], vec![0.0; 64]);
    let (mut a, mut v) = ([0.0f32; 2], [0.0f32; 1]);
    c.bench_function("fused_forward_policy_and_value_21x64x64", |b| {
        b.iter(|| {
            actor.forward(black_box(&x), &mut s0, &mut s1, &mut a);
            critic.forward(black_box(&x), &mut s0, &mut s1, &mut v);
            black_box((a, v))
        })
    });

    let n = 128;
    let r: Vec<f32> = (0..n).map(|i| (i as f32 * 0.37).sin()).collect();
    let vals: Vec<f32> = (0..n).map(|i| (i as f32 * 0.11).cos()).collect();
    let term: Vec<bool> = (0..n).map(|i| i % 61 == 60).collect();
    let trunc: Vec<bool> = (0..n).map(|i| i % 97 == 96).collect();
    let cut = vec![0.5f32; n];
    let (mut adv, mut tgt) = (vec![0.0; n], vec![0.0; n]);
    c.bench_function("gae_128_steps", |b| {
        b.iter(|| {
            let seg = Segment {
                rewards: &r,
                values: &vals,
                terminated: &term,
                truncated: &trunc,
                cut_values: &cut,
                last_value: 0.1,
            };
            advantages(&seg, 0.99, 0.95, &mut adv, &mut tgt);
            black_box(adv[0])
        })
    });

    // One candle forward + backward of the PPO loss at several minibatch sizes.
    let cfg = PpoConfig::default();
    let mut tr = Trainer::new(cfg.clone(), reach_envs(16, Goals::Random, 4), 4).expect("trainer");
    tr.iterate(&mut NoObserver).expect("iterate");
    let policy = tr.policy().clone();
    let critic = tr.value_network().clone();
    let mut g = c.benchmark_group("candle_minibatch_step");
    for mb in [64usize, 256, 512, 2048] {
        let batch = Minibatch {
            len: mb,
            obs: (0..mb * 21)
                .map(|i| ((i % 13) as f32 - 6.0) * 0.2)
                .collect(),
            actions: (0..mb * 2).map(|i| ((i % 7) as f32 - 3.0) * 0.3).collect(),
            old_log_probs: vec![-2.0; mb],
            advantages: (0..mb).map(|i| ((i % 5) as f32 - 2.0) * 0.5).collect(),
            targets: vec![0.5; mb],
            old_values: vec![0.4; mb],
        };
        g.throughput(Throughput::Elements(mb as u64));
        g.bench_function(format!("samples_{mb}"), |b| {
            b.iter(|| black_box(loss_and_grads(&policy, &critic, &batch, &cfg).expect("step")))
        });
    }
    g.finish();
}

criterion_group!(benches, iteration, parts);
criterion_main!(benches);
