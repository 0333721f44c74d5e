//! Unit tests of the kernels: every path against the others bit for bit and against plain reference loops.

use super::*;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

fn supported() -> Vec<KernelPath> {
    KernelPath::ALL
        .into_iter()
        .filter(|p| p.supported())
        .collect()
}

fn random(n: usize, rng: &mut ChaCha8Rng) -> Vec<f32> {
    (0..n).map(|_| rng.gen_range(-1.0f32..1.0)).collect()
}

/// The matrix product by its definition, in f64 (C = init + A B; e.g. Golub & Van Loan,
/// "Matrix Computations", 4th ed., 2013, section 1.1.1, quoted from memory).
#[allow(clippy::too_many_arguments)]
fn reference_product(
    (m, n, k): (usize, usize, usize),
    init: Option<&[f32]>,
    a: &[f32],
    (a_rs, a_cs): (usize, usize),
    b: &[f32],
    ldb: usize,
) -> Vec<f64> {
    let mut c = vec![0.0f64; m * n];
    for i in 0..m {
        for j in 0..n {
            let mut s = init.map_or(0.0, |r| r[j] as f64);
            for kk in 0..k {
                s += a[i * a_rs + kk * a_cs] as f64 * b[kk * ldb + j] as f64;
            }
            c[i * n + j] = s;
        }
    }
    c
}

/// |got - want| within a few f32 roundings of the summed magnitudes.
fn assert_close(got: f32, want: f64, magnitude: f64, ctx: &str) {
    let tol = 1e-6 * (1.0 + magnitude);
    assert!(
        (got as f64 - want).abs() <= tol,
        "{ctx}: {got} vs {want} (tol {tol})"
    );
}

#[test]
fn every_path_computes_the_broadcast_product_and_all_agree_bit_for_bit() {
    let mut rng = ChaCha8Rng::seed_from_u64(11);
    let paths = supported();
    // Shapes of the learner (25 and 64 wide, minibatch 256, rollout 16, heads 1 and 2) and
    // ragged ones that exercise every row and column tail.
    let shapes = [
        (256, 64, 25),
        (256, 64, 64),
        (64, 64, 256),
        (64, 25, 256),
        (2, 64, 256),
        (256, 64, 2),
        (16, 64, 64),
        (7, 70, 13),
        (13, 33, 1),
        (1, 1, 5),
        (5, 17, 0),
    ];
    for (m, n, k) in shapes {
        for transposed_a in [false, true] {
            let (a_rs, a_cs) = if transposed_a { (1, m) } else { (k, 1) };
            let a = random(m * k + 1, &mut rng);
            let ldb = n + 3;
            let b = random(k.max(1) * ldb, &mut rng);
            let bias = random(n, &mut rng);
            for init in [None, Some(&bias[..])] {
                let want = reference_product((m, n, k), init, &a, (a_rs, a_cs), &b, ldb);
                let mut first: Option<Vec<f32>> = None;
                for &p in &paths {
                    let ldc = n + 1;
                    let mut c = vec![f32::NAN; m * ldc];
                    p.bcast((m, n, k), &mut c, ldc, init, &a, (a_rs, a_cs), &b, ldb);
                    let ctx = format!("{} m{m} n{n} k{k} t{transposed_a}", p.name());
                    let mut got = Vec::with_capacity(m * n);
                    for i in 0..m {
                        for j in 0..n {
                            got.push(c[i * ldc + j]);
                        }
                        // The padding column is never written.
                        assert!(c[i * ldc + n].is_nan(), "{ctx}: wrote past a row");
                    }
                    for (g, w) in got.iter().zip(&want) {
                        assert_close(*g, *w, k as f64, &ctx);
                    }
                    match &first {
                        None => first = Some(got),
                        Some(f) => {
                            let same = f.iter().zip(&got).all(|(x, y)| x.to_bits() == y.to_bits());
                            assert!(same, "{ctx}: differs from {}", paths[0].name());
                        }
                    }
                }
            }
        }
    }
}

#[test]
fn every_path_computes_the_narrow_dot_products_and_all_agree_bit_for_bit() {
    let mut rng = ChaCha8Rng::seed_from_u64(12);
    let paths = supported();
    for (m, n, k) in [
        (256, 2, 64),
        (256, 1, 64),
        (16, 4, 64),
        (9, 3, 25),
        (3, 2, 7),
        (2, 1, 0),
    ] {
        let a = random(m * k, &mut rng);
        let w = random(n * k, &mut rng);
        let bias = random(n, &mut rng);
        let mut first: Option<Vec<f32>> = None;
        for &p in &paths {
            let mut c = vec![f32::NAN; m * n];
            p.dots((m, n, k), &mut c, &a, &w, &bias);
            let ctx = format!("{} m{m} n{n} k{k}", p.name());
            for i in 0..m {
                for j in 0..n {
                    let want = bias[j] as f64
                        + (0..k)
                            .map(|t| a[i * k + t] as f64 * w[j * k + t] as f64)
                            .sum::<f64>();
                    assert_close(c[i * n + j], want, k as f64, &ctx);
                }
            }
            match &first {
                None => first = Some(c),
                Some(f) => assert!(
                    f.iter().zip(&c).all(|(x, y)| x.to_bits() == y.to_bits()),
                    "{ctx}: differs from {}",
                    paths[0].name()
                ),
            }
        }
    }
}

#[test]
fn element_wise_loops_give_the_scalar_results_on_every_path() {
    let mut rng = ChaCha8Rng::seed_from_u64(13);
    let x = random(1001, &mut rng);
    let h = random(1001, &mut rng);
    for p in supported() {
        let mut t = x.clone();
        p.tanh_in_place(&mut t);
        for (got, &v) in t.iter().zip(&x) {
            assert_eq!(
                got.to_bits(),
                super::super::activation::tanh_fast(v).to_bits()
            );
        }
        let mut d = x.clone();
        p.tanh_grad_in_place(&mut d, &h);
        for ((got, &v), &hv) in d.iter().zip(&x).zip(&h) {
            assert_eq!(got.to_bits(), (v * (1.0 - hv * hv)).to_bits());
        }
        let mut g = vec![0.0f32; 7];
        p.column_sums(&mut g, &x[..7 * 143]);
        for (j, got) in g.iter().enumerate() {
            let mut s = 0.0f32;
            for i in 0..143 {
                s += x[i * 7 + j];
            }
            assert_eq!(got.to_bits(), s.to_bits(), "{} column {j}", p.name());
        }
        // Sum of squares against the f64 sum in index order (rounding-level agreement).
        let exact: f64 = x.iter().map(|&v| v as f64 * v as f64).sum();
        assert!(
            (p.sum_squares(&x) - exact).abs() < 1e-12 * exact,
            "{}",
            p.name()
        );
        let mut s = x.clone();
        p.scale(&mut s, 0.37);
        assert!(s
            .iter()
            .zip(&x)
            .all(|(a, b)| a.to_bits() == (b * 0.37).to_bits()));
        // Adam (Kingma & Ba 2015, Algorithm 1) against its scalar statement.
        let k = AdamK {
            b1: 0.9,
            b2: 0.999,
            c1: 1.0 - 0.9f64.powi(3),
            c2: 1.0 - 0.999f64.powi(3),
            lr: 3e-4,
            eps: 1e-8,
        };
        let (mut th, mut m, mut v) = (h.clone(), vec![0.01f64; 1001], vec![0.02f64; 1001]);
        p.adam(&mut th, &x, &mut m, &mut v, &k);
        for i in 0..1001 {
            let g = x[i] as f64;
            let mi = 0.9 * 0.01 + (1.0 - 0.9) * g;
            let vi = 0.999 * 0.02 + (1.0 - 0.999) * g * g;
            let want = (h[i] as f64 - 3e-4 * (mi / k.c1) / ((vi / k.c2).sqrt() + 1e-8)) as f32;
            assert_eq!(m[i].to_bits(), mi.to_bits());
            assert_eq!(v[i].to_bits(), vi.to_bits());
            assert_eq!(th[i].to_bits(), want.to_bits(), "{} adam {i}", p.name());
        }
    }
}

#[test]
fn the_avx512_path_is_tested_where_the_cpu_has_it() {
    // The tests above run every supported path; this one makes sure AVX-512 is among them
    // on a CPU that reports it (and says so where it does not).
    #[cfg(target_arch = "x86_64")]
    {
        let has = std::arch::is_x86_feature_detected!("avx512f")
            && std::arch::is_x86_feature_detected!("avx512vl")
            && std::arch::is_x86_feature_detected!("avx512bw")
            && std::arch::is_x86_feature_detected!("avx512dq");
        assert_eq!(KernelPath::Avx512.supported(), has);
        if has {
            assert_eq!(KernelPath::best(), KernelPath::Avx512);
        } else {
            eprintln!("this CPU lacks AVX-512: its kernel path is not exercised here");
        }
    }
    assert!(supported().contains(&KernelPath::Portable));
}

#[test]
fn kernel_names_parse() {
    assert_eq!(KernelPath::parse("avx2"), Ok(Some(KernelPath::Avx2)));
    assert_eq!(KernelPath::parse(" AVX512 "), Ok(Some(KernelPath::Avx512)));
    assert_eq!(
        KernelPath::parse("portable"),
        Ok(Some(KernelPath::Portable))
    );
    assert_eq!(KernelPath::parse("auto"), Ok(None));
    assert_eq!(KernelPath::parse(""), Ok(None));
    let e = KernelPath::parse("sse9").unwrap_err();
    assert!(e.contains(KERNEL_ENV) && e.contains("sse9"), "{e}");
}
