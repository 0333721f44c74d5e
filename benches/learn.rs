//! Speed of the PPO learner on one core: a full iteration (rollout + update: 16 environments x
//! 128 steps, 10 epochs, minibatch 256, 64x64 tanh networks) on the default 2-link reaching
//! scenario, with the fused update path and with the candle autograd path, reported as
//! environment steps per second with a printed breakdown (rollout steps/s, update samples/s,
//! end-to-end env-steps/s); the same iteration on the quickstart study's own task (its
//! environments, with obstacles, planned reference paths and 45 observation entries, built as a
//! run builds them, timed from the middle of a run on), which shows what a study's task adds before
//! its evaluations and files; plus
//! the iteration's parts — the fused rollout forward, GAE, one Adam step over the quickstart's networks,
//! and one minibatch loss-and-gradients at several minibatch sizes by both paths.

#[allow(dead_code)] // shared with the tests; the bench uses part of it
#[path = "../tests/all/common/reach_env.rs"]
mod reach_env;

use std::hint::black_box;
use std::path::Path;
use std::sync::{Arc, Mutex};

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use reach_env::{reach_envs, Goals};
use termwise::learn::fused::{self, FusedWorkspace};
use termwise::learn::gae::{advantages, Segment};
use termwise::learn::kernels::KernelPath;
use termwise::learn::ppo::{loss_and_grads, Minibatch};
use termwise::learn::{pin_kernel_threads, Adam, AdamParams, Mlp, NoObserver, PpoConfig, Trainer};
use termwise::study::{experiment, run};
use termwise::task::RunShared;

/// The calling thread's CPU time in seconds (`CLOCK_THREAD_CPUTIME_ID`, Linux; elsewhere wall
/// time since the first call).
fn thread_cpu_seconds() -> f64 {
    #[cfg(target_os = "linux")]
    {
        #[repr(C)]
        struct Timespec {
            tv_sec: i64,
            tv_nsec: i64,
        }
        extern "C" {
            fn clock_gettime(clock: i32, tp: *mut Timespec) -> i32;
        }
        let mut ts = Timespec {
            tv_sec: 0,
            tv_nsec: 0,
        };
        // SAFETY: `ts` is a valid, writable timespec; 3 is CLOCK_THREAD_CPUTIME_ID.
        let rc = unsafe { clock_gettime(3, &mut ts) };
        assert_eq!(rc, 0, "clock_gettime failed");
        ts.tv_sec as f64 + ts.tv_nsec as f64 * 1e-9
    }
    #[cfg(not(target_os = "linux"))]
    {
        static START: std::sync::OnceLock<std::time::Instant> = std::sync::OnceLock::new();
        START
            .get_or_init(std::time::Instant::now)
            .elapsed()
            .as_secs_f64()
    }
}

fn iteration(c: &mut Criterion) {
    pin_kernel_threads();
    for (name, fused) in [("fused", true), ("candle", false)] {
        let cfg = PpoConfig {
            fused_update: fused,
            ..PpoConfig::default()
        };
        let tr = Trainer::new(cfg, reach_envs(16, Goals::Random, 3), 3).expect("trainer");
        measure(c, &format!("{name}_reach2link_16envs_x128"), name, tr);
    }
    // The quickstart's first variant, seed 0, as `termwise run` builds its environments and learner.
    let exp = experiment::load(Path::new("experiments/quickstart.toml")).expect("quickstart");
    let v = &exp.variants[0];
    let mut cfg = v.learner.clone();
    cfg.lr_decay_steps = exp.study.budget as u64;
    let seed = run::run_seed(&exp, v, 0);
    let shared = Arc::new(Mutex::new(RunShared::new(v.curriculum.build())));
    let mut tr = Trainer::new(cfg, run::build_envs(v, seed, &shared), seed).expect("trainer");
    // Timed from the middle of a run on: as the policy learns, episodes end sooner and more of them
    // begin, each drawing and planning its reference path, so a run's rollout roughly doubles from its
    // first iterations to its last, and the first ones alone overstate what a whole run can do.
    let half_run = exp.study.budget as u64 / 2 / tr.config().batch_size() as u64;
    for _ in 0..half_run {
        tr.iterate(&mut NoObserver)
            .expect("iterate to the middle of a run");
    }
    measure(
        c,
        "fused_quickstart_task_midrun_16envs_x128",
        "quickstart task from mid-run, fused",
        tr,
    );
}

/// Time `tr`'s iterations with criterion as `ppo_iteration/<id>`, then print the breakdown from the
/// trainer's own timers, labelled `label`.
fn measure(c: &mut Criterion, id: &str, label: &str, mut tr: Trainer) {
    let (batch, epochs) = (tr.config().batch_size() as u64, tr.config().epochs as f64);
    tr.iterate(&mut NoObserver).expect("warm-up");
    let mut g = c.benchmark_group("ppo_iteration");
    g.throughput(Throughput::Elements(batch));
    g.sample_size(20);
    g.bench_function(id, |b| {
        b.iter(|| black_box(tr.iterate(&mut NoObserver).expect("iterate")))
    });
    g.finish();
    // Breakdown from the trainer's own timers over 20 more iterations.
    let (mut ro, mut up, mut cpu) = (0.0, 0.0, 0.0);
    let k = 20.0;
    for _ in 0..20 {
        let c0 = thread_cpu_seconds();
        let s = tr.iterate(&mut NoObserver).expect("iterate");
        cpu += thread_cpu_seconds() - c0;
        ro += s.rollout_seconds;
        up += s.update_seconds;
    }
    let b = batch as f64;
    println!(
        "{label} update ({} kernels), per iteration of {batch} steps: rollout {:.1} ms ({:.0} steps/s), update {:.1} ms \
         ({:.0} samples/s through {epochs} epochs), end to end {:.0} env-steps/s",
        KernelPath::active().name(),
        ro / k * 1e3,
        k * b / ro,
        up / k * 1e3,
        k * b * epochs / up,
        k * b / (ro + up)
    );
    // On a shared machine the wall figures include time the thread spent descheduled; its
    // own CPU time does not (the update's share split as in wall time).
    let share = cpu / (ro + up);
    println!(
        "{label} update, thread CPU time: {:.1} ms per iteration (rollout {:.1} ms, update {:.1} ms), \
         end to end {:.0} env-steps/s; CPU share {share:.2}",
        cpu / k * 1e3,
        ro * share / k * 1e3,
        up * share / k * 1e3,
        k * b / cpu
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

    // One Adam step over the quickstart task's policy and value networks (45 inputs, 64x64, 2 actions
    // with their log standard deviations, 1 value): 14 405 parameters, 80 steps per iteration.
    let sizes = [
        45 * 64,
        64,
        64 * 64,
        64,
        64 * 2,
        2,
        2,
        45 * 64,
        64,
        64 * 64,
        64,
        64,
        1,
    ];
    let mut params: Vec<Vec<f32>> = sizes
        .iter()
        .map(|&n| (0..n).map(|i| ((i % 17) as f32 - 8.0) * 0.01).collect())
        .collect();
    let grads: Vec<Vec<f32>> = sizes
        .iter()
        .map(|&n| (0..n).map(|i| ((i % 11) as f32 - 5.0) * 1e-3).collect())
        .collect();
    let mut adam = Adam::new(&sizes, AdamParams::default());
    c.bench_function("adam_step_policy_and_value_14405_params", |b| {
        b.iter(|| {
            let mut views: Vec<&mut [f32]> = params.iter_mut().map(|p| p.as_mut_slice()).collect();
            adam.step(3e-4, &mut views, black_box(&grads));
        })
    });

    // One forward + backward of the PPO loss at several minibatch sizes, both paths.
    let cfg = PpoConfig::default();
    let mut tr = Trainer::new(cfg.clone(), reach_envs(16, Goals::Random, 4), 4).expect("trainer");
    tr.iterate(&mut NoObserver).expect("iterate");
    let policy = tr.policy().clone();
    let critic = tr.value_network().clone();
    let o = policy.obs_dim();
    let mut ws = FusedWorkspace::default();
    let mut out = fused::empty_result();
    let mut g = c.benchmark_group("minibatch_loss_and_grads");
    for mb in [64usize, 256, 512, 2048] {
        let batch = Minibatch {
            len: mb,
            obs: (0..mb * o).map(|i| ((i % 13) as f32 - 6.0) * 0.2).collect(),
            actions: (0..mb * 2).map(|i| ((i % 7) as f32 - 3.0) * 0.3).collect(),
            old_log_probs: vec![-2.0; mb],
            advantages: (0..mb).map(|i| ((i % 5) as f32 - 2.0) * 0.5).collect(),
            targets: vec![0.5; mb],
            old_values: vec![0.4; mb],
        };
        g.throughput(Throughput::Elements(mb as u64));
        g.bench_function(format!("candle_{mb}"), |b| {
            b.iter(|| black_box(loss_and_grads(&policy, &critic, &batch, &cfg).expect("step")))
        });
        g.bench_function(format!("fused_{mb}"), |b| {
            b.iter(|| {
                fused::loss_and_grads_into(&policy, &critic, &batch, &cfg, &mut ws, &mut out);
                black_box(out.policy_loss)
            })
        });
    }
    g.finish();
}

// No criterion plots: plotters is built with the pure-Rust text path and no system fonts, on which
// criterion's own charts cannot find a font (our charts register an embedded one).
criterion_group! {
    name = benches;
    config = Criterion::default().without_plots();
    targets = iteration, parts
}
criterion_main!(benches);
