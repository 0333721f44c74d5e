//! The generic kernels over a vector of lanes (the `Lanes` trait): the register-tiled broadcast product and
//! the narrow dot products, with the portable lanes; the x86 instantiations are in `kernels::x86`.

/// Arguments of [`super::KernelPath::bcast`] as raw pointers (checked by the caller).
pub(super) struct Bcast {
    pub(super) m: usize,
    pub(super) n: usize,
    pub(super) k: usize,
    pub(super) c: *mut f32,
    pub(super) ldc: usize,
    pub(super) init: Option<*const f32>,
    pub(super) a: *const f32,
    pub(super) a_rs: usize,
    pub(super) a_cs: usize,
    pub(super) b: *const f32,
    pub(super) ldb: usize,
}

/// Arguments of [`super::KernelPath::dots`] as raw pointers (checked by the caller).
pub(super) struct Dots {
    pub(super) m: usize,
    pub(super) n: usize,
    pub(super) k: usize,
    pub(super) c: *mut f32,
    pub(super) a: *const f32,
    pub(super) w: *const f32,
    pub(super) bias: *const f32,
}

/// A vector of `L` f32 lanes. The methods are unsafe: they read and write through raw pointers
/// and use instructions the caller must have checked for.
pub(super) trait Lanes {
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
    /// `a + b`.
    unsafe fn add(a: Self::V, b: Self::V) -> Self::V;
}

/// Plain-Rust lanes: eight f32 in an array, `f32::mul_add`.
pub(super) struct Portable;

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
    #[inline(always)]
    unsafe fn add(a: [f32; 8], b: [f32; 8]) -> [f32; 8] {
        let mut r = [0.0; 8];
        for l in 0..8 {
            r[l] = a[l] + b[l];
        }
        r
    }
}

/// One register tile of [`super::KernelPath::bcast`]: `MR` rows x `NV` vectors (the last of which
/// holds `last` valid lanes; all `L` when `FULL`, which keeps masks out of the inner loop)
/// starting at row `i0`, column `j0`, over the terms `kk` in `ks`. The first block of terms starts
/// from `init` (or zero); a later one (`ks.start > 0`) from the partial sums the block before it
/// stored in `C`, which are the f32 accumulators themselves, so each output is still one chain of
/// fused multiply-adds in `kk` order.
#[inline(always)]
pub(super) unsafe fn bcast_tile<S: Lanes, const MR: usize, const NV: usize, const FULL: bool>(
    p: &Bcast,
    i0: usize,
    j0: usize,
    last: usize,
    ks: std::ops::Range<usize>,
) {
    let cnt = |v: usize| if FULL || v + 1 != NV { S::L } else { last };
    let mut acc = [[S::zero(); NV]; MR];
    if ks.start > 0 {
        for (r, row) in acc.iter_mut().enumerate() {
            let crow = p.c.add((i0 + r) * p.ldc + j0);
            for (v, x) in row.iter_mut().enumerate() {
                *x = S::load(crow.add(v * S::L), cnt(v));
            }
        }
    } else if let Some(init) = p.init {
        for v in 0..NV {
            let x = S::load(init.add(j0 + v * S::L), cnt(v));
            for row in acc.iter_mut() {
                row[v] = x;
            }
        }
    }
    let a0 = p.a.add(i0 * p.a_rs);
    let b0 = p.b.add(j0);
    for kk in ks {
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

/// Terms per block of a long sum in [`bcast_driver`] (sums of at most `2 KC` terms run in one block).
pub(super) const KC: usize = 64;

/// Rows in tiles of `MR` (`MR` at most 6; the remaining rows in one tile of their own, so no row is
/// left to a one-row pass that reloads `B` for a single output row), columns in blocks of up to
/// `NVMAX` vectors.
#[inline(always)]
pub(super) unsafe fn bcast_driver<S: Lanes, const MR: usize, const NVMAX: usize>(p: &Bcast) {
    const { assert!(MR >= 1 && MR <= 6, "row tiles of 1 to 6") };
    let mut j0 = 0;
    while j0 < p.n {
        let cols = (p.n - j0).min(NVMAX * S::L);
        let nv = cols.div_ceil(S::L);
        let last = cols - (nv - 1) * S::L;
        // Long sums in blocks of `KC` terms, every row tile per block: a block's rows of `B` stay in
        // the first-level cache for all the tiles, where a weight gradient's whole `B` (a minibatch of
        // 256 rows) would not.
        let mut k0 = 0;
        loop {
            let k1 = if p.k > 2 * KC {
                (k0 + KC).min(p.k)
            } else {
                p.k
            };
            let mut i0 = 0;
            while i0 + MR <= p.m {
                bcast_nv::<S, MR>(p, i0, j0, nv, last, k0..k1);
                i0 += MR;
            }
            match p.m - i0 {
                0 => {}
                1 => bcast_nv::<S, 1>(p, i0, j0, nv, last, k0..k1),
                2 => bcast_nv::<S, 2>(p, i0, j0, nv, last, k0..k1),
                3 => bcast_nv::<S, 3>(p, i0, j0, nv, last, k0..k1),
                4 => bcast_nv::<S, 4>(p, i0, j0, nv, last, k0..k1),
                5 => bcast_nv::<S, 5>(p, i0, j0, nv, last, k0..k1),
                rest => unreachable!("{rest} rows left over by tiles of {MR} (at most 6)"),
            }
            if k1 >= p.k {
                break;
            }
            k0 = k1;
        }
        j0 += cols;
    }
}

#[inline(always)]
pub(super) unsafe fn bcast_nv<S: Lanes, const MR: usize>(
    p: &Bcast,
    i0: usize,
    j0: usize,
    nv: usize,
    last: usize,
    ks: std::ops::Range<usize>,
) {
    match (nv, last == S::L) {
        (1, true) => bcast_tile::<S, MR, 1, true>(p, i0, j0, last, ks),
        (1, false) => bcast_tile::<S, MR, 1, false>(p, i0, j0, last, ks),
        (2, true) => bcast_tile::<S, MR, 2, true>(p, i0, j0, last, ks),
        (2, false) => bcast_tile::<S, MR, 2, false>(p, i0, j0, last, ks),
        (3, true) => bcast_tile::<S, MR, 3, true>(p, i0, j0, last, ks),
        (3, false) => bcast_tile::<S, MR, 3, false>(p, i0, j0, last, ks),
        (_, true) => bcast_tile::<S, MR, 4, true>(p, i0, j0, last, ks),
        (_, false) => bcast_tile::<S, MR, 4, false>(p, i0, j0, last, ks),
    }
}

/// 16 partial sums of `a[kk] * w[kk]` (lane `l` takes `kk = l + 16 t`, in `t` order), added in
/// the fixed tree `((p0+p8)+(p4+p12)) + ...` that [`reduce16`] spells out.
#[inline(always)]
pub(super) unsafe fn dot16<S: Lanes>(a: *const f32, w: *const f32, k: usize) -> f32 {
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
pub(super) fn reduce16(p: &[f32; 16]) -> f32 {
    let mut h = [0.0f32; 8];
    for l in 0..8 {
        h[l] = p[l] + p[l + 8];
    }
    let q = [h[0] + h[4], h[1] + h[5], h[2] + h[6], h[3] + h[7]];
    let r = [q[0] + q[2], q[1] + q[3]];
    r[0] + r[1]
}

#[inline(always)]
pub(super) unsafe fn dots_driver<S: Lanes>(p: &Dots) {
    for i in 0..p.m {
        let arow = p.a.add(i * p.k);
        for j in 0..p.n {
            let d = dot16::<S>(arow, p.w.add(j * p.k), p.k);
            *p.c.add(i * p.n + j) = d + *p.bias.add(j);
        }
    }
}

/// `g[j] = sum_i rows[i][j]` for `m` rows of `w` values (`rows[i][j] = rows[i * w + j]`), each column one
/// chain of additions in row order starting from zero, as the plain loop `g += row` gives. The
/// partial sums stay in registers: columns in blocks of up to `NV` vectors, every row per block (the
/// plain loop stores and reloads `g` once per row, and each row then waits on the store before it).
#[inline(always)]
pub(super) unsafe fn column_sums_driver<S: Lanes, const NV: usize>(
    g: *mut f32,
    w: usize,
    rows: *const f32,
    m: usize,
) {
    let mut j0 = 0;
    while j0 < w {
        let cols = (w - j0).min(NV * S::L);
        let nv = cols.div_ceil(S::L);
        let cnt = |v: usize| (cols - v * S::L).min(S::L);
        let mut acc = [S::zero(); NV];
        for i in 0..m {
            let row = rows.add(i * w + j0);
            for (v, x) in acc.iter_mut().enumerate().take(nv) {
                *x = S::add(*x, S::load(row.add(v * S::L), cnt(v)));
            }
        }
        for (v, x) in acc.iter().enumerate().take(nv) {
            S::store(g.add(j0 + v * S::L), *x, cnt(v));
        }
        j0 += cols;
    }
}
