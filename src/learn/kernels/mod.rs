//! The fused update's inner loops, written for the network's small shapes and chosen at run time
//! by what the CPU has: AVX-512 (16 f32 lanes), AVX2 + FMA (8 lanes) or portable Rust. The
//! binary stays generic (no `-C target-cpu`): each path is compiled with `#[target_feature]` and
//! picked with `is_x86_feature_detected!`; `TERMWISE_KERNEL=avx512|avx2|portable` forces a path
//! (for A/B runs; a path the CPU lacks falls back to the best one it has, with a warning).
//!
//! Every path gives the same bits: each output of a product is accumulated in the same order
//! with fused multiply-adds (the vector width only decides how many outputs are done at once),
//! the narrow products reduce 16 fixed partial sums in a fixed tree, and the element-wise loops
//! use no fused operations, except where they compute an exactly rounded result that the plain
//! operation gives too (Adam's bias corrections on the vector paths: a division by a correctly
//! rounded reciprocal with two fused corrections, see [`div_by_reciprocal`]). So a study gives the
//! same numbers on every node of a cluster, whatever its vector unit; the tests check the paths
//! against each other bit for bit and against plain reference loops.
//!
//! The products:
//! - [`KernelPath::bcast`]: `C[i][j] = init[j] + sum_k A(i, k) B[k][j]`, `A` read through any
//!   strides and broadcast, `B` rows contiguous; vectors along `j`, register tiles of rows x
//!   vectors (the forward pass `H W^T`, the input gradient `dZ W`, the weight gradient `dZ^T H`).
//! - [`KernelPath::dots`]: `C[i][j] = sum_k A[i][k] W[j][k] + b[j]` for outputs too narrow to
//!   vectorise along `j` (the policy and value heads, 1 to 4 outputs).

use std::sync::OnceLock;

mod generic;
#[cfg(test)]
mod tests;
use generic::*;

/// For each plain `#[inline(always)]` body, a module with the body compiled for AVX2 and for
/// AVX-512 (the element-wise loops are written plainly and vectorised by the compiler; Rust
/// never fuses a multiply and an add on its own, so every path gives the same bits).
macro_rules! multiversion {
    ($($module:ident => $body:ident($($arg:ident: $ty:ty),*) $(-> $ret:ty)?;)*) => {$(
        #[cfg(target_arch = "x86_64")]
        mod $module {
            #[allow(unused_imports)]
            use super::*;
            #[target_feature(enable = "avx2,fma")]
            pub(super) unsafe fn avx2($($arg: $ty),*) $(-> $ret)? {
                super::$body($($arg),*)
            }
            #[target_feature(enable = "avx512f,avx512vl,avx512bw,avx512dq,avx2,fma")]
            pub(super) unsafe fn avx512($($arg: $ty),*) $(-> $ret)? {
                super::$body($($arg),*)
            }
        }
    )*};
}

multiversion! {
    mv_tanh => tanh_body(x: &mut [f32]);
    mv_tanh_grad => tanh_grad_body(d: &mut [f32], h: &[f32]);
    // The vector paths' Adam (the portable path calls `adam_body`, which gives the same bits).
    mv_adam => adam_body_fma(theta: &mut [f32], g: &[f32], m: &mut [f64], v: &mut [f64], k: &AdamK);
    mv_sum_squares => sum_squares_body(x: &[f32]) -> f64;
    mv_scale => scale_body(x: &mut [f32], s: f32);
}

/// Calls the body's version for the path (the plain one for the portable path).
macro_rules! elementwise {
    ($path:expr, $module:ident, $body:ident($($arg:expr),*)) => {
        match $path.checked() {
            #[cfg(target_arch = "x86_64")]
            // SAFETY: `checked` made sure the CPU has AVX2 + FMA.
            KernelPath::Avx2 => unsafe { $module::avx2($($arg),*) },
            #[cfg(target_arch = "x86_64")]
            // SAFETY: `checked` made sure the CPU has AVX-512.
            KernelPath::Avx512 => unsafe { $module::avx512($($arg),*) },
            _ => $body($($arg),*),
        }
    };
}

/// The environment variable that forces a kernel path (`avx512`, `avx2`, `portable`, `auto`).
pub const KERNEL_ENV: &str = "TERMWISE_KERNEL";

/// One implementation of the kernels.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum KernelPath {
    /// Plain Rust (`f32::mul_add`); any CPU.
    Portable,
    /// x86-64 AVX2 + FMA, 256-bit vectors.
    Avx2,
    /// x86-64 AVX-512 (F, VL, BW, DQ), 512-bit vectors.
    Avx512,
}

impl KernelPath {
    /// All paths, slowest first.
    pub const ALL: [KernelPath; 3] = [KernelPath::Portable, KernelPath::Avx2, KernelPath::Avx512];

    /// The name used by [`KERNEL_ENV`].
    pub fn name(self) -> &'static str {
        match self {
            KernelPath::Portable => "portable",
            KernelPath::Avx2 => "avx2",
            KernelPath::Avx512 => "avx512",
        }
    }

    /// Whether this CPU can run the path.
    pub fn supported(self) -> bool {
        match self {
            KernelPath::Portable => true,
            #[cfg(target_arch = "x86_64")]
            KernelPath::Avx2 => {
                std::arch::is_x86_feature_detected!("avx2")
                    && std::arch::is_x86_feature_detected!("fma")
            }
            #[cfg(target_arch = "x86_64")]
            KernelPath::Avx512 => {
                KernelPath::Avx2.supported()
                    && std::arch::is_x86_feature_detected!("avx512f")
                    && std::arch::is_x86_feature_detected!("avx512vl")
                    && std::arch::is_x86_feature_detected!("avx512bw")
                    && std::arch::is_x86_feature_detected!("avx512dq")
            }
            #[cfg(not(target_arch = "x86_64"))]
            _ => false,
        }
    }

    /// The fastest path this CPU supports.
    pub fn best() -> KernelPath {
        *Self::ALL
            .iter()
            .rev()
            .find(|p| p.supported())
            .unwrap_or(&KernelPath::Portable)
    }

    /// The path named `s` (`auto` or empty: `None`, i.e. the best available).
    pub fn parse(s: &str) -> Result<Option<KernelPath>, String> {
        match s.trim().to_ascii_lowercase().as_str() {
            "" | "auto" => Ok(None),
            other => Self::ALL
                .iter()
                .find(|p| p.name() == other)
                .map(|p| Some(*p))
                .ok_or_else(|| {
                    format!("{KERNEL_ENV}={s:?}: expected one of auto, avx512, avx2, portable")
                }),
        }
    }

    /// The path the process uses: [`KERNEL_ENV`] if set and supported, else the best one.
    /// Read once.
    pub fn active() -> KernelPath {
        static ACTIVE: OnceLock<KernelPath> = OnceLock::new();
        *ACTIVE.get_or_init(|| {
            let raw = std::env::var(KERNEL_ENV).unwrap_or_default();
            match Self::parse(&raw) {
                Ok(None) => Self::best(),
                Ok(Some(p)) if p.supported() => p,
                Ok(Some(p)) => {
                    let b = Self::best();
                    eprintln!(
                        "warning: {KERNEL_ENV}={}: this CPU lacks it; using {}",
                        p.name(),
                        b.name()
                    );
                    b
                }
                Err(e) => {
                    let b = Self::best();
                    eprintln!("warning: {e}; using {}", b.name());
                    b
                }
            }
        })
    }

    /// `C[i][j] = init[j] + sum_{kk < k} A(i, kk) B[kk][j]` for `i < m`, `j < n`, each output
    /// accumulated in `kk` order with fused multiply-adds. `A(i, kk) = a[i * a_rs + kk * a_cs]`;
    /// `B[kk][j] = b[kk * ldb + j]`; `C[i][j] = c[i * ldc + j]`; `init` is a row of `n` values
    /// (a bias) or zero.
    #[allow(clippy::too_many_arguments)]
    pub fn bcast(
        self,
        (m, n, k): (usize, usize, usize),
        c: &mut [f32],
        ldc: usize,
        init: Option<&[f32]>,
        a: &[f32],
        (a_rs, a_cs): (usize, usize),
        b: &[f32],
        ldb: usize,
    ) {
        if m == 0 || n == 0 {
            return;
        }
        assert!(
            ldc >= n && (m - 1) * ldc + n <= c.len(),
            "bcast: C out of bounds"
        );
        if let Some(init) = init {
            assert!(init.len() >= n, "bcast: init shorter than a row");
        }
        if k > 0 {
            assert!(
                (m - 1) * a_rs + (k - 1) * a_cs < a.len(),
                "bcast: A out of bounds"
            );
            assert!((k - 1) * ldb + n <= b.len(), "bcast: B out of bounds");
        }
        let args = Bcast {
            m,
            n,
            k,
            c: c.as_mut_ptr(),
            ldc,
            init: init.map(|s| s.as_ptr()),
            a: a.as_ptr(),
            a_rs,
            a_cs,
            b: b.as_ptr(),
            ldb,
        };
        // SAFETY: the asserts keep every access inside the slices; `c` is borrowed mutably so
        // it aliases neither `a`, `b` nor `init`; a SIMD path runs only where the CPU has it.
        unsafe {
            match self.checked() {
                KernelPath::Portable => bcast_driver::<Portable, 4, 2>(&args),
                #[cfg(target_arch = "x86_64")]
                KernelPath::Avx2 => x86::bcast_avx2(&args),
                #[cfg(target_arch = "x86_64")]
                KernelPath::Avx512 => x86::bcast_avx512(&args),
                #[cfg(not(target_arch = "x86_64"))]
                _ => unreachable!(),
            }
        }
    }

    /// `C[i][j] = sum_{kk < k} A[i][kk] W[j][kk] + bias[j]` for `i < m`, `j < n` (row-major
    /// `A` m x k, `W` n x k, `C` m x n): each dot product as 16 interleaved partial sums
    /// (lane `l` takes `kk = l, l + 16, ...`) added in a fixed tree.
    pub fn dots(
        self,
        (m, n, k): (usize, usize, usize),
        c: &mut [f32],
        a: &[f32],
        w: &[f32],
        bias: &[f32],
    ) {
        assert!(c.len() >= m * n, "dots: C out of bounds");
        assert!(a.len() >= m * k, "dots: A out of bounds");
        assert!(w.len() >= n * k && bias.len() >= n, "dots: W out of bounds");
        let args = Dots {
            m,
            n,
            k,
            c: c.as_mut_ptr(),
            a: a.as_ptr(),
            w: w.as_ptr(),
            bias: bias.as_ptr(),
        };
        // SAFETY: as in `bcast`.
        unsafe {
            match self.checked() {
                KernelPath::Portable => dots_driver::<Portable>(&args),
                #[cfg(target_arch = "x86_64")]
                KernelPath::Avx2 => x86::dots_avx2(&args),
                #[cfg(target_arch = "x86_64")]
                KernelPath::Avx512 => x86::dots_avx512(&args),
                #[cfg(not(target_arch = "x86_64"))]
                _ => unreachable!(),
            }
        }
    }

    /// One dense layer for [`LANES`] samples side by side (`input[i][l]`: input `i` of sample `l`):
    /// `out[o][l] = dot(w[o], input[..][l]) + b[o]`, then `tanh_fast` when `tanh`, each exactly as the
    /// one-sample forward pass computes it (`mlp::dot`: eight accumulators, a fixed tree, the tail in
    /// order, no fused operations), so every path and every lane give that pass's bits.
    pub fn dense_lanes(
        self,
        w: &[f32],
        b: &[f32],
        input: &[[f32; LANES]],
        out: &mut [[f32; LANES]],
        tanh: bool,
    ) {
        assert_eq!(w.len(), input.len() * b.len(), "dense_lanes: weight shape");
        assert_eq!(out.len(), b.len(), "dense_lanes: output length");
        match self.checked() {
            #[cfg(target_arch = "x86_64")]
            // SAFETY: `checked` made sure the CPU has AVX2 (the AVX-512 path's CPUs have it too; eight
            // lanes fill one 256-bit vector).
            KernelPath::Avx2 | KernelPath::Avx512 => unsafe {
                x86::dense_lanes_avx2(w, b, input, out, tanh)
            },
            _ => dense_lanes_body(w, b, input, out, tanh),
        }
    }

    /// `x = tanh_fast(x)` element-wise.
    pub fn tanh_in_place(self, x: &mut [f32]) {
        elementwise!(self, mv_tanh, tanh_body(x))
    }

    /// `d *= 1 - h^2` element-wise (the tanh derivative from its output).
    pub fn tanh_grad_in_place(self, d: &mut [f32], h: &[f32]) {
        assert_eq!(d.len(), h.len(), "tanh_grad: length mismatch");
        elementwise!(self, mv_tanh_grad, tanh_grad_body(d, h))
    }

    /// `g[j] = sum_i rows[i][j]` over the `rows.len() / g.len()` rows, in row order (each column one
    /// chain of additions from zero, the plain loop `g = 0; for row { g += row }`).
    pub fn column_sums(self, g: &mut [f32], rows: &[f32]) {
        let w = g.len();
        if w == 0 {
            return;
        }
        let m = rows.len() / w;
        let (gp, rp) = (g.as_mut_ptr(), rows.as_ptr());
        // SAFETY: `m` whole rows of `w` values lie in `rows` and `g` holds `w`; a SIMD path runs only
        // where the CPU has it.
        unsafe {
            match self.checked() {
                KernelPath::Portable => column_sums_driver::<Portable, 4>(gp, w, rp, m),
                #[cfg(target_arch = "x86_64")]
                KernelPath::Avx2 => x86::column_sums_avx2(gp, w, rp, m),
                #[cfg(target_arch = "x86_64")]
                KernelPath::Avx512 => x86::column_sums_avx512(gp, w, rp, m),
                #[cfg(not(target_arch = "x86_64"))]
                _ => unreachable!(),
            }
        }
    }

    /// One Adam update of a tensor (f64 moments), see `adam::Adam::step`.
    pub(crate) fn adam(
        self,
        theta: &mut [f32],
        g: &[f32],
        m: &mut [f64],
        v: &mut [f64],
        k: &AdamK,
    ) {
        assert!(
            theta.len() == g.len() && m.len() == g.len() && v.len() == g.len(),
            "adam: length mismatch"
        );
        elementwise!(self, mv_adam, adam_body(theta, g, m, v, k))
    }

    /// Sum of squares in f64 as 8 interleaved partial sums added in a fixed tree.
    pub fn sum_squares(self, x: &[f32]) -> f64 {
        elementwise!(self, mv_sum_squares, sum_squares_body(x))
    }

    /// `x *= s` element-wise.
    pub fn scale(self, x: &mut [f32], s: f32) {
        elementwise!(self, mv_scale, scale_body(x, s))
    }

    /// `self` if the CPU has it (a guard against calling a path directly where it cannot run).
    fn checked(self) -> KernelPath {
        assert!(
            self.supported(),
            "kernel path {} is not supported by this CPU",
            self.name()
        );
        self
    }
}

/// Constants of one Adam step: decays, bias corrections, step size and epsilon.
#[derive(Clone, Copy, Debug)]
pub(crate) struct AdamK {
    pub b1: f64,
    pub b2: f64,
    pub c1: f64,
    pub c2: f64,
    pub lr: f64,
    pub eps: f64,
}

#[inline(always)]
fn tanh_body(x: &mut [f32]) {
    x.iter_mut()
        .for_each(|v| *v = super::activation::tanh_fast(*v));
}

/// Samples side by side in [`KernelPath::dense_lanes`].
pub const LANES: usize = 8;

#[inline(always)]
fn dense_lanes_body(
    w: &[f32],
    b: &[f32],
    input: &[[f32; LANES]],
    out: &mut [[f32; LANES]],
    tanh: bool,
) {
    let n_in = input.len();
    for ((row, &bias), dst) in w.chunks_exact(n_in.max(1)).zip(b).zip(out.iter_mut()) {
        let mut acc = [[0.0f32; LANES]; 8];
        let ca = row.chunks_exact(8);
        let cb = input.chunks_exact(8);
        let (ra, rb) = (ca.remainder(), cb.remainder());
        for (x, y) in ca.zip(cb) {
            for k in 0..8 {
                for l in 0..LANES {
                    acc[k][l] += x[k] * y[k][l];
                }
            }
        }
        let mut s = [0.0f32; LANES];
        for l in 0..LANES {
            s[l] = ((acc[0][l] + acc[4][l]) + (acc[1][l] + acc[5][l]))
                + ((acc[2][l] + acc[6][l]) + (acc[3][l] + acc[7][l]));
        }
        for (x, y) in ra.iter().zip(rb) {
            for l in 0..LANES {
                s[l] += x * y[l];
            }
        }
        for v in s.iter_mut() {
            *v += bias;
            if tanh {
                *v = super::activation::tanh_fast(*v);
            }
        }
        *dst = s;
    }
}

#[inline(always)]
fn tanh_grad_body(d: &mut [f32], h: &[f32]) {
    d.iter_mut().zip(h).for_each(|(d, &h)| *d *= 1.0 - h * h);
}

/// The plain statement of [`KernelPath::column_sums`] (the tests' reference).
#[cfg(test)]
fn column_sums_body(g: &mut [f32], rows: &[f32]) {
    g.fill(0.0);
    if g.is_empty() {
        return;
    }
    let w = g.len();
    for row in rows.chunks_exact(w) {
        g.iter_mut().zip(row).for_each(|(g, d)| *g += d);
    }
}

/// The portable path's Adam update: the statement of `adam::Adam::step`, term by term.
#[inline(always)]
fn adam_body(theta: &mut [f32], g: &[f32], m: &mut [f64], v: &mut [f64], k: &AdamK) {
    let (b1, b2, c1, c2, lr, eps) = (k.b1, k.b2, k.c1, k.c2, k.lr, k.eps);
    let n = theta.len().min(g.len()).min(m.len()).min(v.len());
    let (theta, g, m, v) = (&mut theta[..n], &g[..n], &mut m[..n], &mut v[..n]);
    for i in 0..n {
        let gi = g[i] as f64;
        let mi = b1 * m[i] + (1.0 - b1) * gi;
        let vi = b2 * v[i] + (1.0 - b2) * gi * gi;
        m[i] = mi;
        v[i] = vi;
        let m_hat = mi / c1;
        let v_hat = vi / c2;
        theta[i] = (theta[i] as f64 - lr * m_hat / (v_hat.sqrt() + eps)) as f32;
    }
}

/// Elements per block of [`adam_body_fma`]: the moments of a block are updated, checked, then used.
const ADAM_BLOCK: usize = 128;

/// The vector paths' Adam update, bit for bit [`adam_body`]: the two bias corrections `m / c1` and
/// `v / c2` (the same divisor for a whole tensor) are [`div_by_reciprocal`] instead of the divider, which
/// the update waits on (one division and one square root per element remain). A block with a moment outside
/// the range where that quotient is exact divides as `adam_body` does.
#[inline(always)]
fn adam_body_fma(theta: &mut [f32], g: &[f32], m: &mut [f64], v: &mut [f64], k: &AdamK) {
    let (b1, b2, c1, c2, lr, eps) = (k.b1, k.b2, k.c1, k.c2, k.lr, k.eps);
    let (y1, y2) = (1.0 / c1, 1.0 / c2);
    if !(divisor_in_range(c1, y1) && divisor_in_range(c2, y2)) {
        return adam_body(theta, g, m, v, k);
    }
    let n = theta.len().min(g.len()).min(m.len()).min(v.len());
    let blocks = theta[..n]
        .chunks_mut(ADAM_BLOCK)
        .zip(g[..n].chunks(ADAM_BLOCK))
        .zip(
            m[..n]
                .chunks_mut(ADAM_BLOCK)
                .zip(v[..n].chunks_mut(ADAM_BLOCK)),
        );
    for ((theta, g), (m, v)) in blocks {
        let mut out_of_range = false;
        for ((m, v), &gi) in m.iter_mut().zip(v.iter_mut()).zip(g) {
            let gi = gi as f64;
            let mi = b1 * *m + (1.0 - b1) * gi;
            let vi = b2 * *v + (1.0 - b2) * gi * gi;
            *m = mi;
            *v = vi;
            out_of_range |= !(dividend_in_range(mi) & dividend_in_range(vi));
        }
        if out_of_range {
            for ((t, &mi), &vi) in theta.iter_mut().zip(m.iter()).zip(v.iter()) {
                let (m_hat, v_hat) = (mi / c1, vi / c2);
                *t = (*t as f64 - lr * m_hat / (v_hat.sqrt() + eps)) as f32;
            }
        } else {
            for ((t, &mi), &vi) in theta.iter_mut().zip(m.iter()).zip(v.iter()) {
                let m_hat = div_by_reciprocal(mi, c1, y1);
                let v_hat = div_by_reciprocal(vi, c2, y2);
                *t = (*t as f64 - lr * m_hat / (v_hat.sqrt() + eps)) as f32;
            }
        }
    }
}

/// Dividends whose [`div_by_reciprocal`] quotient is exact: +0, or a magnitude in [2^-400, 2^400) (no
/// quotient or remainder comes near the subnormal or overflow range for a divisor that passes
/// [`divisor_in_range`]). NaN, infinities, -0 and tiny values are left to the divider.
#[inline(always)]
#[allow(clippy::manual_range_contains)] // `&` of two comparisons keeps the loop branch-free
fn dividend_in_range(a: f64) -> bool {
    let x = a.abs();
    ((x >= DIV_LO) & (x < DIV_HI)) | (a.to_bits() == 0)
}

/// Divisors (and their correctly rounded reciprocals) [`div_by_reciprocal`] takes: magnitudes in
/// [2^-200, 2^200].
#[inline(always)]
fn divisor_in_range(b: f64, y: f64) -> bool {
    let (b, y) = (b.abs(), y.abs());
    (DIVISOR_LO..=DIVISOR_HI).contains(&b) && (DIVISOR_LO..=DIVISOR_HI).contains(&y)
}

/// 2^e for an exponent of a normal f64.
const fn pow2(e: i32) -> f64 {
    f64::from_bits(((1023 + e) as u64) << 52)
}
/// The ends of [`dividend_in_range`]'s magnitudes.
const DIV_LO: f64 = pow2(-400);
const DIV_HI: f64 = pow2(400);
const DIVISOR_LO: f64 = pow2(-200);
const DIVISOR_HI: f64 = pow2(200);

/// `a / b` correctly rounded, given `y` = the correctly rounded `1 / b`, with fused multiply-adds only:
/// `q0 = a y` is within 1.5 ulp of `a / b`; one correction `q1 = q0 + (a - b q0) y` brings it within
/// 1 ulp; a second, `q1 + (a - b q1) y`, is then the correctly rounded quotient by Markstein's theorem
/// (P. W. Markstein, "Computation of elementary functions on the IBM RISC System/6000 processor", IBM J.
/// Res. Dev. 34(1), 1990; stated as: y within 1/2 ulp of 1/b and q within 1 ulp of a/b give
/// RN(q + RN(a - bq) y) = RN(a/b), quoted from memory). Valid for round-to-nearest and operands that
/// pass [`dividend_in_range`] and [`divisor_in_range`]; the kernel tests check it against the divider.
#[inline(always)]
pub(super) fn div_by_reciprocal(a: f64, b: f64, y: f64) -> f64 {
    let q0 = a * y;
    let q1 = (-b).mul_add(q0, a).mul_add(y, q0);
    (-b).mul_add(q1, a).mul_add(y, q1)
}

#[inline(always)]
fn sum_squares_body(x: &[f32]) -> f64 {
    let mut acc = [0.0f64; 8];
    let chunks = x.chunks_exact(8);
    let rest = chunks.remainder();
    for c in chunks {
        for l in 0..8 {
            acc[l] += c[l] as f64 * c[l] as f64;
        }
    }
    for (l, &v) in rest.iter().enumerate() {
        acc[l] += v as f64 * v as f64;
    }
    ((acc[0] + acc[4]) + (acc[2] + acc[6])) + ((acc[1] + acc[5]) + (acc[3] + acc[7]))
}

#[inline(always)]
fn scale_body(x: &mut [f32], s: f32) {
    x.iter_mut().for_each(|v| *v *= s);
}

#[cfg(target_arch = "x86_64")]
mod x86 {
    //! The x86-64 instantiations: each entry point is compiled with its instruction set
    //! enabled and must only be called where the CPU has it.

    use super::{bcast_driver, column_sums_driver, dots_driver, Bcast, Dots, Lanes};
    use std::arch::x86_64::*;

    /// [`super::KernelPath::dense_lanes`] with one 256-bit vector per input (its eight samples): the
    /// statement of `dense_lanes_body`, operation for operation.
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn dense_lanes_avx2(
        w: &[f32],
        b: &[f32],
        input: &[[f32; super::LANES]],
        out: &mut [[f32; super::LANES]],
        tanh: bool,
    ) {
        let n_in = input.len();
        for ((row, &bias), dst) in w.chunks_exact(n_in.max(1)).zip(b).zip(out.iter_mut()) {
            let mut acc = [_mm256_setzero_ps(); 8];
            let ca = row.chunks_exact(8);
            let cb = input.chunks_exact(8);
            let (ra, rb) = (ca.remainder(), cb.remainder());
            for (x, y) in ca.zip(cb) {
                for k in 0..8 {
                    let p = _mm256_mul_ps(_mm256_set1_ps(x[k]), _mm256_loadu_ps(y[k].as_ptr()));
                    acc[k] = _mm256_add_ps(acc[k], p);
                }
            }
            let mut s = _mm256_add_ps(
                _mm256_add_ps(_mm256_add_ps(acc[0], acc[4]), _mm256_add_ps(acc[1], acc[5])),
                _mm256_add_ps(_mm256_add_ps(acc[2], acc[6]), _mm256_add_ps(acc[3], acc[7])),
            );
            for (&x, y) in ra.iter().zip(rb) {
                s = _mm256_add_ps(
                    s,
                    _mm256_mul_ps(_mm256_set1_ps(x), _mm256_loadu_ps(y.as_ptr())),
                );
            }
            s = _mm256_add_ps(s, _mm256_set1_ps(bias));
            _mm256_storeu_ps(dst.as_mut_ptr(), s);
            if tanh {
                for v in dst.iter_mut() {
                    *v = super::super::activation::tanh_fast(*v);
                }
            }
        }
    }

    /// AVX2 + FMA lanes (8 x f32).
    pub(super) struct Avx2;

    impl Lanes for Avx2 {
        const L: usize = 8;
        type V = __m256;
        #[inline(always)]
        unsafe fn zero() -> __m256 {
            _mm256_setzero_ps()
        }
        #[inline(always)]
        unsafe fn splat(x: f32) -> __m256 {
            _mm256_set1_ps(x)
        }
        #[inline(always)]
        unsafe fn load(p: *const f32, cnt: usize) -> __m256 {
            if cnt >= 8 {
                _mm256_loadu_ps(p)
            } else {
                _mm256_maskload_ps(p, mask8(cnt))
            }
        }
        #[inline(always)]
        unsafe fn store(p: *mut f32, v: __m256, cnt: usize) {
            if cnt >= 8 {
                _mm256_storeu_ps(p, v)
            } else {
                _mm256_maskstore_ps(p, mask8(cnt), v)
            }
        }
        #[inline(always)]
        unsafe fn fma(a: __m256, b: __m256, c: __m256) -> __m256 {
            _mm256_fmadd_ps(a, b, c)
        }
        #[inline(always)]
        unsafe fn add(a: __m256, b: __m256) -> __m256 {
            _mm256_add_ps(a, b)
        }
    }

    /// Lanes below `cnt` set (sign bit), for the AVX2 masked loads and stores.
    #[inline(always)]
    unsafe fn mask8(cnt: usize) -> __m256i {
        let iota = _mm256_setr_epi32(0, 1, 2, 3, 4, 5, 6, 7);
        _mm256_cmpgt_epi32(_mm256_set1_epi32(cnt as i32), iota)
    }

    /// AVX-512 lanes (16 x f32), masked loads and stores for partial vectors.
    pub(super) struct Avx512;

    impl Lanes for Avx512 {
        const L: usize = 16;
        type V = __m512;
        #[inline(always)]
        unsafe fn zero() -> __m512 {
            _mm512_setzero_ps()
        }
        #[inline(always)]
        unsafe fn splat(x: f32) -> __m512 {
            _mm512_set1_ps(x)
        }
        #[inline(always)]
        unsafe fn load(p: *const f32, cnt: usize) -> __m512 {
            if cnt >= 16 {
                _mm512_loadu_ps(p)
            } else {
                _mm512_maskz_loadu_ps(((1u32 << cnt) - 1) as u16, p)
            }
        }
        #[inline(always)]
        unsafe fn store(p: *mut f32, v: __m512, cnt: usize) {
            if cnt >= 16 {
                _mm512_storeu_ps(p, v)
            } else {
                _mm512_mask_storeu_ps(p, ((1u32 << cnt) - 1) as u16, v)
            }
        }
        #[inline(always)]
        unsafe fn fma(a: __m512, b: __m512, c: __m512) -> __m512 {
            _mm512_fmadd_ps(a, b, c)
        }
        #[inline(always)]
        unsafe fn add(a: __m512, b: __m512) -> __m512 {
            _mm512_add_ps(a, b)
        }
    }

    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn bcast_avx2(p: &Bcast) {
        bcast_driver::<Avx2, 6, 2>(p)
    }

    #[target_feature(enable = "avx512f,avx512vl,avx512bw,avx512dq,avx2,fma")]
    pub(super) unsafe fn bcast_avx512(p: &Bcast) {
        bcast_driver::<Avx512, 6, 4>(p)
    }

    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn column_sums_avx2(g: *mut f32, w: usize, rows: *const f32, m: usize) {
        column_sums_driver::<Avx2, 8>(g, w, rows, m)
    }

    #[target_feature(enable = "avx512f,avx512vl,avx512bw,avx512dq,avx2,fma")]
    pub(super) unsafe fn column_sums_avx512(g: *mut f32, w: usize, rows: *const f32, m: usize) {
        column_sums_driver::<Avx512, 4>(g, w, rows, m)
    }

    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn dots_avx2(p: &Dots) {
        dots_driver::<Avx2>(p)
    }

    #[target_feature(enable = "avx512f,avx512vl,avx512bw,avx512dq,avx2,fma")]
    pub(super) unsafe fn dots_avx512(p: &Dots) {
        dots_driver::<Avx512>(p)
    }
}
