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
    // ragged ones that exercise every row and column tail; sums of more than 128 terms run in
    // blocks of 64 (the last ones here of 3 and 1 terms).
    let shapes = [
        (256, 64, 25),
        (7, 70, 131),
        (100, 70, 131),
        (13, 33, 129),
        (256, 64, 64),
        (64, 64, 256),
        (64, 25, 256),
        (2, 64, 256),
        (256, 64, 2),
        (16, 64, 64),
        (7, 70, 13),
        (9, 20, 7),
        (11, 40, 9),
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
                // The documented order: each output is one chain of f32 fused multiply-adds in
                // `kk` order from its init, whatever tile the output falls in.
                let chain = |i: usize, j: usize| {
                    (0..k).fold(init.map_or(0.0, |r| r[j]), |s, kk| {
                        a[i * a_rs + kk * a_cs].mul_add(b[kk * ldb + j], s)
                    })
                };
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
                    for (idx, g) in got.iter().enumerate() {
                        let c = chain(idx / n, idx % n);
                        assert_eq!(
                            g.to_bits(),
                            c.to_bits(),
                            "{ctx}: output {idx} not the chain"
                        );
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
        // Column sums: one chain of additions per column in row order, for widths below one vector,
        // of whole vectors, and beyond one register block (64 columns) with a ragged end. The reference
        // is the sum's definition taken in row order (common practice; no outside source applies).
        for (w, rows) in [
            (1, 1000),
            (2, 500),
            (7, 143),
            (16, 62),
            (64, 15),
            (70, 14),
            (129, 7),
        ] {
            let mut g = vec![f32::NAN; w];
            p.column_sums(&mut g, &x[..w * rows]);
            let mut want = vec![f32::NAN; w];
            super::column_sums_body(&mut want, &x[..w * rows]);
            for (j, got) in g.iter().enumerate() {
                let mut s = 0.0f32;
                for i in 0..rows {
                    s += x[i * w + j];
                }
                assert_eq!(want[j].to_bits(), s.to_bits());
                assert_eq!(
                    got.to_bits(),
                    s.to_bits(),
                    "{} width {w} column {j}",
                    p.name()
                );
            }
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

/// A moment `m0` (found by a seeded search just above the subnormal range) whose decayed value
/// `decay * m0` the reciprocal division gets wrong for the divisor `c`: what the range check is for.
fn moment_the_fast_division_misses(decay: f64, c: f64, rng: &mut ChaCha8Rng) -> f64 {
    let y = 1.0 / c;
    (0..1_000_000)
        .map(|_| f64::from_bits(rng.gen_range(1u64..1u64 << 55)))
        .find(|&m0| {
            let a = decay * m0;
            div_by_reciprocal(a, c, y).to_bits() != (a / c).to_bits()
        })
        .expect("a dividend near the subnormal range that the reciprocal division misses")
}

#[test]
fn adam_gives_the_scalar_statement_for_moments_the_fast_division_leaves_to_the_divider() {
    // Blocks holding a tiny moment, NaN or a huge one take the divider; the others the reciprocal. The
    // scalar statement is Kingma & Ba 2015, Algorithm 1, with the bias corrections as divisions. (A 1-ulp
    // error in a tiny moment's quotient would not show in the f32 parameter, so the range check itself is
    // asserted to reject the moments the reciprocal division gets wrong.)
    let mut rng = ChaCha8Rng::seed_from_u64(41);
    let n = 5 * ADAM_BLOCK + 17;
    let h = random(n, &mut rng);
    for t in [1, 2, 50, 100] {
        let k = AdamK {
            b1: 0.9,
            b2: 0.999,
            c1: 1.0 - 0.9f64.powi(t),
            c2: 1.0 - 0.999f64.powi(t),
            lr: 3e-4,
            eps: 1e-8,
        };
        let mut x = random(n, &mut rng);
        let mut m0: Vec<f64> = (0..n).map(|_| rng.gen_range(-0.05..0.05)).collect();
        let mut v0: Vec<f64> = (0..n).map(|_| rng.gen_range(0.0..0.05)).collect();
        // Block 0: a tiny first moment and block 4 a tiny second one, each wrong on the fast path
        // (gradient 0, so the moment is its decay).
        m0[3] = moment_the_fast_division_misses(0.9, k.c1, &mut rng);
        x[3] = 0.0;
        v0[4 * ADAM_BLOCK + 2] = moment_the_fast_division_misses(0.999, k.c2, &mut rng);
        x[4 * ADAM_BLOCK + 2] = 0.0;
        assert!(
            !dividend_in_range(0.9 * m0[3]) && !dividend_in_range(0.999 * v0[4 * ADAM_BLOCK + 2])
        );
        m0[ADAM_BLOCK + 5] = f64::NAN; // block 1
        v0[2 * ADAM_BLOCK + 9] = 1e300; // block 2: above 2^400
        m0[3 * ADAM_BLOCK + 1] = 0.0; // block 3: +0 moments with a +0 gradient stay on the fast path
        v0[3 * ADAM_BLOCK + 1] = 0.0;
        x[3 * ADAM_BLOCK + 1] = 0.0;
        for p in supported() {
            let (mut th, mut m, mut v) = (h.clone(), m0.clone(), v0.clone());
            p.adam(&mut th, &x, &mut m, &mut v, &k);
            for i in 0..n {
                let g = x[i] as f64;
                let mi = 0.9 * m0[i] + (1.0 - 0.9) * g;
                let vi = 0.999 * v0[i] + (1.0 - 0.999) * g * g;
                let want = (h[i] as f64 - 3e-4 * (mi / k.c1) / ((vi / k.c2).sqrt() + 1e-8)) as f32;
                let same = th[i].to_bits() == want.to_bits() || (th[i].is_nan() && want.is_nan());
                assert!(same, "{} t={t} adam {i}: {} vs {want}", p.name(), th[i]);
            }
        }
    }
}

#[test]
fn division_by_a_rounded_reciprocal_is_the_divider_bit_for_bit() {
    // Markstein's theorem (IBM J. Res. Dev. 34(1), 1990, quoted from memory) makes `div_by_reciprocal`
    // the correctly rounded quotient, which IEEE 754-2019 section 5.4.1 requires of `/`. Checked here on
    // the divisors Adam uses (1 - beta^t for the usual betas, Kingma & Ba 2015) and random ones, with
    // dividends across the whole accepted range, its ends and significands of all ones.
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let mut divisors: Vec<f64> = (1..=20_000)
        .step_by(37)
        .flat_map(|t| [1.0 - 0.9f64.powi(t), 1.0 - 0.999f64.powi(t)])
        .collect();
    divisors.extend((0..200).map(|_| {
        let e: i32 = rng.gen_range(-200..200);
        rng.gen_range(1.0f64..2.0) * pow2(e)
    }));
    divisors.extend([1.0, 3.0, 0.1, DIVISOR_LO, DIVISOR_HI / 2.0]);
    let ones = f64::from_bits(0x3FFF_FFFF_FFFF_FFFF); // 2 - 2^-52
    let mut checked = 0usize;
    for &b in &divisors {
        let y = 1.0 / b;
        assert!(divisor_in_range(b, y), "{b}");
        let below_hi = f64::from_bits(DIV_HI.to_bits() - 1);
        let mut dividends = vec![
            0.0,
            DIV_LO,
            below_hi,
            -DIV_LO,
            -below_hi,
            ones,
            -ones,
            ones * DIV_LO,
        ];
        dividends.extend((0..2_000).map(|_| {
            let e: i32 = rng.gen_range(-400..400);
            let s = if rng.gen::<bool>() { 1.0 } else { -1.0 };
            s * rng.gen_range(1.0f64..2.0) * pow2(e)
        }));
        for a in dividends {
            assert!(dividend_in_range(a), "{a}");
            let want = a / b;
            let got = div_by_reciprocal(a, b, y);
            assert_eq!(got.to_bits(), want.to_bits(), "{a} / {b}");
            checked += 1;
        }
    }
    assert!(checked > 1_000_000, "{checked}");
    // What the range checks leave to the divider.
    let below_lo = f64::from_bits(DIV_LO.to_bits() - 1);
    for a in [
        -0.0,
        f64::NAN,
        f64::INFINITY,
        1e-300,
        -1e300,
        DIV_HI,
        -DIV_HI,
        below_lo,
    ] {
        assert!(!dividend_in_range(a), "{a}");
    }
    assert!(!divisor_in_range(1e-100, 1e100));
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

// No outside source: the reference is the one-sample forward pass (`Mlp::forward` of a one-layer network),
// whose arithmetic each lane must repeat bit for bit, on every path, at widths with and without a tail
// beyond `dot`'s 8-entry chunks, with and without tanh, and with inputs beyond tanh's clamp.
#[test]
fn dense_lanes_gives_each_lane_the_one_sample_forward_pass_on_every_path() {
    use super::super::activation::tanh_fast;
    use super::super::mlp::{Dense, Mlp};
    let mut rng = ChaCha8Rng::seed_from_u64(29);
    for (n_in, n_out) in [(45, 64), (64, 64), (3, 5), (8, 1), (64, 2), (1, 3)] {
        let w: Vec<f32> = random(n_in * n_out, &mut rng);
        let b: Vec<f32> = random(n_out, &mut rng);
        let mut xt = vec![[0.0f32; LANES]; n_in];
        for x in xt.iter_mut().flatten() {
            *x = rng.gen_range(-12.0f32..12.0);
        }
        let layer = Mlp {
            layers: vec![Dense {
                n_in,
                n_out,
                w: w.clone(),
                b: b.clone(),
            }],
        };
        for tanh in [false, true] {
            let mut expect = vec![[0.0f32; LANES]; n_out];
            for l in 0..LANES {
                let x: Vec<f32> = xt.iter().map(|v| v[l]).collect();
                let mut y = vec![0.0f32; n_out];
                layer.forward_alloc(&x, &mut y);
                for (e, v) in expect.iter_mut().zip(y) {
                    e[l] = if tanh { tanh_fast(v) } else { v };
                }
            }
            for p in supported() {
                let mut out = vec![[0.0f32; LANES]; n_out];
                p.dense_lanes(&w, &b, &xt, &mut out, tanh);
                for (o, (g, e)) in out.iter().zip(&expect).enumerate() {
                    for l in 0..LANES {
                        assert_eq!(
                            g[l].to_bits(),
                            e[l].to_bits(),
                            "{p:?} {n_in}x{n_out} tanh {tanh} output {o} lane {l}"
                        );
                    }
                }
            }
        }
    }
}
