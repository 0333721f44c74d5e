//! The fused update's inner loops, written for the network's small shapes and chosen at run time
//! by what the CPU has: AVX-512 (16 f32 lanes), AVX2 + FMA (8 lanes) or portable Rust. The
//! binary stays generic (no `-C target-cpu`): each path is compiled with `#[target_feature]` and
//! picked with `is_x86_feature_detected!`; `TERMWISE_KERNEL=avx512|avx2|portable` forces a path
//! (for A/B runs; a path the CPU lacks falls back to the best one it has, with a warning).
//!
//! Every path gives the same bits: each output of a product is accumulated in the same order
//! with fused multiply-adds (the vector width only decides how many outputs are done at once),
//! the narrow products reduce 16 fixed partial sums in a fixed tree, and the element-wise loops
//! use no fused operations. So a study gives the same numbers on every node of a cluster,
//! whatever its vector unit; the tests check the paths against each other bit for bit and
//! against plain reference loops.
//!
//! The products:
//! - [`KernelPath::bcast`]: `C[i][j] = init[j] + sum_k A(i, k) B[k][j]`, `A` read through any
//!   strides and broadcast, `B` rows contiguous; vectors along `j`, register tiles of rows x
//!   vectors (the forward pass `H W^T`, the input gradient `dZ W`, the weight gradient `dZ^T H`).
//! - [`KernelPath::dots`]: `C[i][j] = sum_k A[i][k] W[j][k] + b[j]` for outputs too narrow to
//!   vectorise along `j` (the policy and value heads, 1 to 4 outputs).

use std::sync::OnceLock;

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
    mv_column_sums => column_sums_body(g: &mut [f32], rows: &[f32]);
    mv_adam => adam_body(theta: &mut [f32], g: &[f32], m: &mut [f64], v: &mut [f64], k: &AdamK);
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

    /// `x = tanh_fast(x)` element-wise.
    pub fn tanh_in_place(self, x: &mut [f32]) {
        elementwise!(self, mv_tanh, tanh_body(x))
    }

    /// `d *= 1 - h^2` element-wise (the tanh derivative from its output).
    pub fn tanh_grad_in_place(self, d: &mut [f32], h: &[f32]) {
        assert_eq!(d.len(), h.len(), "tanh_grad: length mismatch");
        elementwise!(self, mv_tanh_grad, tanh_grad_body(d, h))
    }

    /// `g[j] = sum_i rows[i][j]` over the `rows.len() / g.len()` rows, in row order.
    pub fn column_sums(self, g: &mut [f32], rows: &[f32]) {
        elementwise!(self, mv_column_sums, column_sums_body(g, rows))
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

#[inline(always)]
fn tanh_grad_body(d: &mut [f32], h: &[f32]) {
    d.iter_mut().zip(h).for_each(|(d, &h)| *d *= 1.0 - h * h);
}

#[inline(always)]
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

/// Arguments of [`KernelPath::bcast`] as raw pointers (checked by the caller).
struct Bcast {
    m: usize,
    n: usize,
    k: usize,
    c: *mut f32,
    ldc: usize,
    init: Option<*const f32>,
    a: *const f32,
    a_rs: usize,
    a_cs: usize,
    b: *const f32,
    ldb: usize,
}

/// Arguments of [`KernelPath::dots`] as raw pointers (checked by the caller).
struct Dots {
    m: usize,
    n: usize,
    k: usize,
    c: *mut f32,
    a: *const f32,
    w: *const f32,
    bias: *const f32,
}

/// A vector of `L` f32 lanes. The methods are unsafe: they read and write through raw pointers
/// and use instructions the caller must have checked for.
trait Lanes {
    const L: usize;
    type V: Copy;
    unsafe fn zero() -> Self::V;
    unsafe fn splat(x: f32) -> Self::V;
    /// The first `cnt` lanes from `p` (at most `L`), the others zero; nothing read beyond.
    unsafe fn load(p: *const f32, cnt: usize) -> Self::V;
    /// The first `cnt` lanes to `p`.
    unsafe fn store(p: *mut f32, v: Self::V, cnt: usize);
    /// `a * b + c` with one rounding.
    unsafe fn fma(a: Self::V, b: Self::V, c: Self::V) -> Self::V;
}

/// Plain-Rust lanes: eight f32 in an array, `f32::mul_add`.
struct Portable;

impl Lanes for Portable {
    const L: usize = 8;
    type V = [f32; 8];
    #[inline(always)]
    unsafe fn zero() -> [f32; 8] {
        [0.0; 8]
    }
    #[inline(always)]
    unsafe fn splat(x: f32) -> [f32; 8] {
        [x; 8]
    }
    #[inline(always)]
    unsafe fn load(p: *const f32, cnt: usize) -> [f32; 8] {
        let mut v = [0.0; 8];
        for (l, x) in v.iter_mut().enumerate().take(cnt.min(8)) {
            *x = *p.add(l);
        }
        v
    }
    #[inline(always)]
    unsafe fn store(p: *mut f32, v: [f32; 8], cnt: usize) {
        for (l, x) in v.iter().enumerate().take(cnt.min(8)) {
            *p.add(l) = *x;
        }
    }
    #[inline(always)]
    unsafe fn fma(a: [f32; 8], b: [f32; 8], c: [f32; 8]) -> [f32; 8] {
        let mut r = [0.0; 8];
        for l in 0..8 {
            r[l] = a[l].mul_add(b[l], c[l]);
        }
        r
    }
}

/// One register tile of [`KernelPath::bcast`]: `MR` rows x `NV` vectors (the last of which
/// holds `last` valid lanes; all `L` when `FULL`, which keeps masks out of the inner loop)
/// starting at row `i0`, column `j0`.
#[inline(always)]
unsafe fn bcast_tile<S: Lanes, const MR: usize, const NV: usize, const FULL: bool>(
    p: &Bcast,
    i0: usize,
    j0: usize,
    last: usize,
) {
    let cnt = |v: usize| if FULL || v + 1 != NV { S::L } else { last };
    let mut acc = [[S::zero(); NV]; MR];
    if let Some(init) = p.init {
        for v in 0..NV {
            let x = S::load(init.add(j0 + v * S::L), cnt(v));
            for row in acc.iter_mut() {
                row[v] = x;
            }
        }
    }
    let a0 = p.a.add(i0 * p.a_rs);
    let b0 = p.b.add(j0);
    for kk in 0..p.k {
        let brow = b0.add(kk * p.ldb);
        let mut bv = [S::zero(); NV];
        for (v, x) in bv.iter_mut().enumerate() {
            *x = S::load(brow.add(v * S::L), cnt(v));
        }
        let acol = a0.add(kk * p.a_cs);
        for (r, row) in acc.iter_mut().enumerate() {
            let av = S::splat(*acol.add(r * p.a_rs));
            for v in 0..NV {
                row[v] = S::fma(av, bv[v], row[v]);
            }
        }
    }
    for (r, row) in acc.iter().enumerate() {
        let crow = p.c.add((i0 + r) * p.ldc + j0);
        for (v, x) in row.iter().enumerate() {
            S::store(crow.add(v * S::L), *x, cnt(v));
        }
    }
}

/// Rows in tiles of `MR` (the rest one by one), columns in blocks of up to `NVMAX` vectors.
#[inline(always)]
unsafe fn bcast_driver<S: Lanes, const MR: usize, const NVMAX: usize>(p: &Bcast) {
    let mut j0 = 0;
    while j0 < p.n {
        let cols = (p.n - j0).min(NVMAX * S::L);
        let nv = cols.div_ceil(S::L);
        let last = cols - (nv - 1) * S::L;
        let mut i0 = 0;
        while i0 + MR <= p.m {
            bcast_nv::<S, MR>(p, i0, j0, nv, last);
            i0 += MR;
        }
        while i0 < p.m {
            bcast_nv::<S, 1>(p, i0, j0, nv, last);
            i0 += 1;
        }
        j0 += cols;
    }
}

#[inline(always)]
unsafe fn bcast_nv<S: Lanes, const MR: usize>(
    p: &Bcast,
    i0: usize,
    j0: usize,
    nv: usize,
    last: usize,
) {
    match (nv, last == S::L) {
        (1, true) => bcast_tile::<S, MR, 1, true>(p, i0, j0, last),
        (1, false) => bcast_tile::<S, MR, 1, false>(p, i0, j0, last),
        (2, true) => bcast_tile::<S, MR, 2, true>(p, i0, j0, last),
        (2, false) => bcast_tile::<S, MR, 2, false>(p, i0, j0, last),
        (3, true) => bcast_tile::<S, MR, 3, true>(p, i0, j0, last),
        (3, false) => bcast_tile::<S, MR, 3, false>(p, i0, j0, last),
        (_, true) => bcast_tile::<S, MR, 4, true>(p, i0, j0, last),
        (_, false) => bcast_tile::<S, MR, 4, false>(p, i0, j0, last),
    }
}

/// 16 partial sums of `a[kk] * w[kk]` (lane `l` takes `kk = l + 16 t`, in `t` order), added in
/// the fixed tree `((p0+p8)+(p4+p12)) + ...` that [`reduce16`] spells out.
#[inline(always)]
unsafe fn dot16<S: Lanes>(a: *const f32, w: *const f32, k: usize) -> f32 {
    let per = 16 / S::L;
    let mut acc = [S::zero(); 2];
    let mut kk = 0;
    while kk + 16 <= k {
        for (v, x) in acc.iter_mut().enumerate().take(per) {
            let o = kk + v * S::L;
            *x = S::fma(S::load(a.add(o), S::L), S::load(w.add(o), S::L), *x);
        }
        kk += 16;
    }
    if kk < k {
        for (v, x) in acc.iter_mut().enumerate().take(per) {
            let o = kk + v * S::L;
            let cnt = (k - kk).saturating_sub(v * S::L).min(S::L);
            *x = S::fma(S::load(a.add(o), cnt), S::load(w.add(o), cnt), *x);
        }
    }
    let mut parts = [0.0f32; 16];
    for (v, x) in acc.iter().enumerate().take(per) {
        S::store(parts.as_mut_ptr().add(v * S::L), *x, S::L);
    }
    reduce16(&parts)
}

/// The fixed summation tree of [`dot16`]'s partial sums (halving: lanes `l` and `l + 8`, then
/// `l` and `l + 4`, ...).
#[inline(always)]
fn reduce16(p: &[f32; 16]) -> f32 {
    let mut h = [0.0f32; 8];
    for l in 0..8 {
        h[l] = p[l] + p[l + 8];
    }
    let q = [h[0] + h[4], h[1] + h[5], h[2] + h[6], h[3] + h[7]];
    let r = [q[0] + q[2], q[1] + q[3]];
    r[0] + r[1]
}

#[inline(always)]
unsafe fn dots_driver<S: Lanes>(p: &Dots) {
    for i in 0..p.m {
        let arow = p.a.add(i * p.k);
        for j in 0..p.n {
            let d = dot16::<S>(arow, p.w.add(j * p.k), p.k);
            *p.c.add(i * p.n + j) = d + *p.bias.add(j);
        }
    }
}

#[cfg(target_arch = "x86_64")]
mod x86 {
    //! The x86-64 instantiations: each entry point is compiled with its instruction set
    //! enabled and must only be called where the CPU has it.

    use super::{bcast_driver, dots_driver, Bcast, Dots, Lanes};
    use std::arch::x86_64::*;

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
    pub(super) unsafe fn dots_avx2(p: &Dots) {
        dots_driver::<Avx2>(p)
    }

    #[target_feature(enable = "avx512f,avx512vl,avx512bw,avx512dq,avx2,fma")]
    pub(super) unsafe fn dots_avx512(p: &Dots) {
        dots_driver::<Avx512>(p)
    }
}

#[cfg(test)]
mod tests {
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
                                let same =
                                    f.iter().zip(&got).all(|(x, y)| x.to_bits() == y.to_bits());
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
}
