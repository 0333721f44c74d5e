//! A uniform-grid spatial index over a bounded configuration space, for the search tree's two queries:
//! the nearest node to a sample and the nodes within the RRT* connection radius of a new node. Both are
//! exact and break ties as the linear scan over nodes in insertion order does (lowest index first), so a
//! tree answers identically with or without the index; the index only skips nodes that cannot qualify.
//! Bucketing points in cells at least as wide as the query radius is the fixed-radius near-neighbour
//! method of Bentley, Stanat & Williams, "The complexity of finding fixed-radius near neighbors",
//! Information Processing Letters 6(6), 1977.

use crate::sim::{JointVec, MAX_JOINTS};

/// Most cells the dense grid may hold (cells grow wider in higher dimensions to stay within it).
const MAX_CELLS: usize = 1 << 16;

/// Below this many nodes the nearest node is found by a linear scan (faster than visiting empty cells; the
/// answer is the same).
const LINEAR_BELOW: usize = 1024;

/// Nodes bucketed by grid cell. Nodes outside the bounds are kept in a list of their own, scanned always.
pub struct GridIndex {
    n: usize,
    lo: [f64; MAX_JOINTS],
    /// Cell width (the same in every coordinate), at least the widest radius query asked of it.
    h: f64,
    dims: [usize; MAX_JOINTS],
    cells: Vec<Vec<u32>>,
    outside: Vec<u32>,
    /// Two-dimensional spaces: every node's coordinates by id, one array per coordinate, for the linear
    /// scan of small trees.
    xs: Vec<f64>,
    ys: Vec<f64>,
}

impl GridIndex {
    /// An empty index over the box `bounds[i] = (lo, hi)`, i < n, with cells at least `min_width` wide.
    pub fn new(bounds: &[(f64, f64)], min_width: f64) -> GridIndex {
        let n = bounds.len();
        let widest = bounds.iter().map(|(l, h)| h - l).fold(0.0_f64, f64::max);
        let per_dim = ((MAX_CELLS as f64).powf(1.0 / n.max(1) as f64))
            .floor()
            .max(1.0);
        let h = min_width.max(widest / per_dim).max(1e-9);
        let mut lo = [0.0; MAX_JOINTS];
        let mut dims = [1; MAX_JOINTS];
        let mut total = 1;
        for (i, &(l, u)) in bounds.iter().enumerate() {
            lo[i] = l;
            dims[i] = (((u - l) / h).floor() as usize + 1).max(1);
            total *= dims[i];
        }
        GridIndex {
            n,
            lo,
            h,
            dims,
            cells: vec![Vec::new(); total],
            outside: Vec::new(),
            xs: Vec::new(),
            ys: Vec::new(),
        }
    }

    /// Cell coordinates of `q`, or None when `q` lies outside the grid.
    fn cell_of(&self, q: &JointVec) -> Option<[usize; MAX_JOINTS]> {
        let mut c = [0; MAX_JOINTS];
        for i in 0..self.n {
            let x = ((q[i] - self.lo[i]) / self.h).floor();
            if !(x >= 0.0 && x < self.dims[i] as f64) {
                return None;
            }
            c[i] = x as usize;
        }
        Some(c)
    }

    fn flat(&self, c: &[usize; MAX_JOINTS]) -> usize {
        let mut k = 0;
        for i in (0..self.n).rev() {
            k = k * self.dims[i] + c[i];
        }
        k
    }

    /// Add node `id` at `q`. Ids are given in order: 0, 1, 2, ...
    pub fn insert(&mut self, id: usize, q: &JointVec) {
        if self.n == 2 {
            assert_eq!(
                id,
                self.xs.len(),
                "grid index ids must be inserted in order"
            );
            self.xs.push(q[0]);
            self.ys.push(q[1]);
        }
        match self.cell_of(q) {
            Some(c) => {
                let k = self.flat(&c);
                self.cells[k].push(id as u32);
            }
            None => self.outside.push(id as u32),
        }
    }

    /// Call `f` on every node in the cells of the box `[lo_c, hi_c]` (inclusive, clamped to the grid),
    /// skipping cells strictly inside `[skip_lo, skip_hi]` when `skip` is set.
    fn for_box(
        &self,
        lo_c: &[i64; MAX_JOINTS],
        hi_c: &[i64; MAX_JOINTS],
        skip: Option<(&[i64; MAX_JOINTS], &[i64; MAX_JOINTS])>,
        f: &mut dyn FnMut(usize),
    ) {
        let n = self.n;
        let mut a = [0i64; MAX_JOINTS];
        let mut b = [0i64; MAX_JOINTS];
        for i in 0..n {
            a[i] = lo_c[i].max(0);
            b[i] = hi_c[i].min(self.dims[i] as i64 - 1);
            if a[i] > b[i] {
                return;
            }
        }
        let mut c = a;
        loop {
            let inner = skip.is_some_and(|(sl, sh)| (0..n).all(|i| c[i] >= sl[i] && c[i] <= sh[i]));
            if !inner {
                let mut cu = [0usize; MAX_JOINTS];
                for i in 0..n {
                    cu[i] = c[i] as usize;
                }
                for &id in &self.cells[self.flat(&cu)] {
                    f(id as usize);
                }
            }
            // Odometer increment over the box.
            let mut i = 0;
            loop {
                if i == n {
                    return;
                }
                if c[i] < b[i] {
                    c[i] += 1;
                    break;
                }
                c[i] = a[i];
                i += 1;
            }
        }
    }

    /// The nearest node to `q` among `nodes` (all of them indexed) and its squared distance; ties go to
    /// the lowest index. `nodes` must not be empty.
    pub fn nearest(&self, nodes: &[JointVec], q: &JointVec) -> (usize, f64) {
        let n = self.n;
        let mut best = (usize::MAX, f64::INFINITY);
        let consider = |best: &mut (usize, f64), i: usize| {
            let d2 = sq_dist(&nodes[i], q, n);
            if d2 < best.1 || (d2 == best.1 && i < best.0) {
                *best = (i, d2);
            }
        };
        for &id in &self.outside {
            consider(&mut best, id as usize);
        }
        let cell = if nodes.len() < LINEAR_BELOW {
            None
        } else {
            self.cell_of(q)
        };
        let Some(c) = cell else {
            // A small tree, or a query outside the grid: scan everything.
            if n == 2 && self.xs.len() == nodes.len() {
                let (i, d2) = nearest_2d(&self.xs, &self.ys, q[0], q[1]);
                if d2 < best.1 || (d2 == best.1 && i < best.0) {
                    best = (i, d2);
                }
            } else {
                for i in 0..nodes.len() {
                    consider(&mut best, i);
                }
            }
            return best;
        };
        let mut centre = [0i64; MAX_JOINTS];
        let mut reach = 0i64;
        for i in 0..n {
            centre[i] = c[i] as i64;
            reach = reach
                .max(centre[i])
                .max(self.dims[i] as i64 - 1 - centre[i]);
        }
        // Rings of growing Chebyshev radius k around the query's cell: a node in ring k + 1 or beyond is at
        // least k cell widths from `q`, so once the best distance is below that, no farther ring can win
        // (the margin keeps rounding from ending the search early; equal distances are then still seen).
        for k in 0..=reach {
            let mut lo_c = [0i64; MAX_JOINTS];
            let mut hi_c = [0i64; MAX_JOINTS];
            let mut in_lo = [0i64; MAX_JOINTS];
            let mut in_hi = [0i64; MAX_JOINTS];
            for i in 0..n {
                lo_c[i] = centre[i] - k;
                hi_c[i] = centre[i] + k;
                in_lo[i] = centre[i] - k + 1;
                in_hi[i] = centre[i] + k - 1;
            }
            let skip = (k > 0).then_some((&in_lo, &in_hi));
            self.for_box(&lo_c, &hi_c, skip, &mut |i| consider(&mut best, i));
            let bound = k as f64 * self.h * (1.0 - 1e-9);
            if best.1.is_finite() && best.1.sqrt() < bound {
                break;
            }
        }
        best
    }

    /// Every node that may lie within `r` (<= the cell width) of `q`: the nodes of the cells the ball
    /// touches, and those outside the grid. The caller checks the distance; order is unspecified.
    pub fn candidates(&self, q: &JointVec, r: f64, out: &mut Vec<usize>) {
        out.clear();
        out.extend(self.outside.iter().map(|&id| id as usize));
        let mut lo_c = [0i64; MAX_JOINTS];
        let mut hi_c = [0i64; MAX_JOINTS];
        // A little wider than r, so rounding at a cell boundary never drops a node at distance r.
        let r = r * (1.0 + 1e-9) + 1e-12;
        for i in 0..self.n {
            lo_c[i] = ((q[i] - r - self.lo[i]) / self.h).floor() as i64;
            hi_c[i] = ((q[i] + r - self.lo[i]) / self.h).floor() as i64;
        }
        self.for_box(&lo_c, &hi_c, None, &mut |id| out.push(id));
    }
}

/// The nearest of the points `(xs[i], ys[i])` to `(q0, q1)` and its squared distance, ties to the lowest
/// index: the smallest squared distance first (eight running minima, which the compiler keeps in vector
/// registers), then the first index that has it. The sums are `sq_dist`'s (0 + a^2 + b^2 is a^2 + b^2
/// exactly), so the answer is the linear scan's, bit for bit. (usize::MAX, inf) when no distance is below
/// infinity.
fn nearest_2d(xs: &[f64], ys: &[f64], q0: f64, q1: f64) -> (usize, f64) {
    const LANES: usize = 8;
    let d2 = |x: f64, y: f64| {
        let (d0, d1) = (x - q0, y - q1);
        d0 * d0 + d1 * d1
    };
    let mut lanes = [f64::INFINITY; LANES];
    let (xc, yc) = (xs.chunks_exact(LANES), ys.chunks_exact(LANES));
    let (xr, yr) = (xc.remainder(), yc.remainder());
    for (x, y) in xc.zip(yc) {
        for l in 0..LANES {
            let d = d2(x[l], y[l]);
            lanes[l] = if d < lanes[l] { d } else { lanes[l] };
        }
    }
    let mut min = f64::INFINITY;
    for d in lanes
        .into_iter()
        .chain(xr.iter().zip(yr).map(|(&x, &y)| d2(x, y)))
    {
        min = if d < min { d } else { min };
    }
    if min < f64::INFINITY {
        if let Some(i) = xs.iter().zip(ys).position(|(&x, &y)| d2(x, y) == min) {
            return (i, min);
        }
    }
    (usize::MAX, f64::INFINITY)
}

/// Squared Euclidean distance over the first `n` coordinates (the same sum, in the same order, as
/// `space::distance` before its square root).
#[inline]
pub fn sq_dist(a: &JointVec, b: &JointVec, n: usize) -> f64 {
    let mut s = 0.0;
    for i in 0..n {
        let d = a[i] - b[i];
        s += d * d;
    }
    s
}
