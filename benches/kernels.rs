//! How close the update's matrix-product kernel comes to this core's own multiply-add peak, per
//! kernel path (AVX-512, AVX2 + FMA), at the learner's shapes: a hidden layer's forward product
//! (256 x 64 outputs, k = 64), the first layer's on the quickstart's 45-entry input (k = 45), and a
//! weight gradient (64 x 64 outputs summed over a minibatch of 256, its left operand read
//! transposed). The peak is measured, not looked up: a loop of independent fused multiply-adds on
//! registers only (12 chains of 8 lanes, 24 of 16 lanes: more than latency x throughput on the
//! cores this was tried on), so the ratio needs no clock frequency. Run with
//! `taskset -c 1 cargo bench --bench kernels`; it prints one line per path and shape.

use std::hint::black_box;
use std::time::Instant;

use criterion::{criterion_group, criterion_main, Criterion, Throughput};
use termwise::learn::kernels::KernelPath;

/// A product shape: name, (m, n, k), A's (row, column) strides.
type Shape = (&'static str, (usize, usize, usize), (usize, usize));

/// The learner's product shapes.
const SHAPES: [Shape; 3] = [
    ("hidden_forward_256x64_k64", (256, 64, 64), (64, 1)),
    ("input_forward_256x64_k45", (256, 64, 45), (45, 1)),
    ("weight_gradient_64x64_k256", (64, 64, 256), (1, 64)),
];

/// Multiply-adds per second of `chains` x `lanes` independent chains, `iters` steps each.
#[cfg(target_arch = "x86_64")]
fn peak(path: KernelPath) -> Option<f64> {
    use std::arch::x86_64::*;
    #[target_feature(enable = "avx2,fma")]
    unsafe fn avx2(iters: usize) -> f32 {
        let mut acc = [_mm256_set1_ps(0.0); 12];
        let (x, y) = (_mm256_set1_ps(0.999_999), _mm256_set1_ps(1e-7));
        for _ in 0..iters {
            for a in acc.iter_mut() {
                *a = _mm256_fmadd_ps(*a, x, y);
            }
        }
        let mut out = [0.0f32; 8];
        _mm256_storeu_ps(
            out.as_mut_ptr(),
            acc.iter().fold(x, |s, a| _mm256_add_ps(s, *a)),
        );
        out.iter().sum()
    }
    #[target_feature(enable = "avx512f")]
    unsafe fn avx512(iters: usize) -> f32 {
        let mut acc = [_mm512_set1_ps(0.0); 24];
        let (x, y) = (_mm512_set1_ps(0.999_999), _mm512_set1_ps(1e-7));
        for _ in 0..iters {
            for a in acc.iter_mut() {
                *a = _mm512_fmadd_ps(*a, x, y);
            }
        }
        _mm512_reduce_add_ps(acc.iter().fold(x, |s, a| _mm512_add_ps(s, *a)))
    }
    let iters = 2_000_000;
    let (macs, run): (usize, fn(usize) -> f32) = match path {
        // SAFETY: each loop runs only after `supported()` confirmed its instruction set.
        KernelPath::Avx2 => (iters * 12 * 8, |n| unsafe { avx2(n) }),
        KernelPath::Avx512 => (iters * 24 * 16, |n| unsafe { avx512(n) }),
        KernelPath::Portable => return None,
    };
    if !path.supported() {
        return None;
    }
    Some(macs as f64 / best_of(7, || black_box(run(black_box(iters)))))
}

#[cfg(not(target_arch = "x86_64"))]
fn peak(_: KernelPath) -> Option<f64> {
    None
}

/// Shortest wall time of `reps` calls of `f`, s.
fn best_of<T>(reps: usize, mut f: impl FnMut() -> T) -> f64 {
    (0..reps)
        .map(|_| {
            let t = Instant::now();
            black_box(f());
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

fn products(c: &mut Criterion) {
    // Deterministic operands (values do not change the timing; no NaN or subnormal).
    let a: Vec<f32> = (0..256 * 64)
        .map(|i| ((i * 7919) % 1000) as f32 * 1e-3)
        .collect();
    let b: Vec<f32> = (0..256 * 64)
        .map(|i| ((i * 104_729) % 1000) as f32 * 1e-3)
        .collect();
    let mut out = vec![0.0f32; 256 * 64];
    let mut lines = Vec::new();
    for path in [KernelPath::Avx512, KernelPath::Avx2] {
        let Some(peak) = peak(path) else { continue };
        let mut g = c.benchmark_group(format!("product_{}", path.name()));
        for (name, (m, n, k), strides) in SHAPES {
            let mut call = || {
                path.bcast((m, n, k), &mut out, n, None, &a, strides, &b, n);
                black_box(out[0])
            };
            g.throughput(Throughput::Elements((m * n * k) as u64));
            g.bench_function(name, |bch| bch.iter(&mut call));
            let per_call = best_of(7, || (0..500).map(|_| call()).sum::<f32>()) / 500.0;
            let rate = (m * n * k) as f64 / per_call;
            lines.push(format!(
                "{} {name}: {:.1} G multiply-adds/s = {:.0}% of this core's measured peak ({:.1} G/s)",
                path.name(),
                rate * 1e-9,
                100.0 * rate / peak,
                peak * 1e-9
            ));
        }
        g.finish();
    }
    for l in lines {
        println!("{l}");
    }
}

// No criterion plots (see benches/learn.rs).
criterion_group! {
    name = benches;
    config = Criterion::default().without_plots();
    targets = products
}
criterion_main!(benches);
