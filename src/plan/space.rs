//! The configuration spaces the planners search: a small trait (bounds, point check, edge check) with two
//! implementations — the arm's joint space with exact capsule clearances, and a point robot among discs in
//! the plane (whose shortest paths are known in closed form, so the planners can be checked against them).

use crate::sim::{ArmEnv, JointVec, MAX_JOINTS};
use std::cell::RefCell;

/// Slots of `ArmSpace`'s clearance memo (a power of two).
const MEMO_SLOTS: usize = 1024;

/// A bounded configuration space with a collision checker. Configurations are `JointVec`s whose first
/// `dim()` entries are used; the planners measure distance with the Euclidean norm over those entries.
///
/// ```
/// use termwise::plan::{ConfigSpace, DiscPlane};
/// let plane = DiscPlane::new([0.0, 0.0], [1.0, 1.0], vec![([0.5, 0.5], 0.1)]);
/// assert_eq!(plane.dim(), 2);
/// assert!(!plane.config_free(&[0.5, 0.5, 0.0, 0.0, 0.0, 0.0]));
/// assert!(!plane.edge_free(&[0.1, 0.5, 0.0, 0.0, 0.0, 0.0], &[0.9, 0.5, 0.0, 0.0, 0.0, 0.0]));
/// ```
pub trait ConfigSpace {
    /// Number of coordinates in use (1..=MAX_JOINTS).
    fn dim(&self) -> usize;
    /// Lower and upper bound of coordinate `i` (finite, lower < upper or equal for a fixed coordinate).
    fn bounds(&self, i: usize) -> (f64, f64);
    /// Whether configuration `q` is valid (collision-free with the required margin).
    fn config_free(&self, q: &JointVec) -> bool;
    /// Whether the straight segment from `a` to `b` is valid everywhere. `a` is assumed valid already.
    fn edge_free(&self, a: &JointVec, b: &JointVec) -> bool;

    /// Lebesgue measure of the bounding box (an upper bound on the free space's measure), used by the
    /// RRT* connection radius.
    fn volume(&self) -> f64 {
        (0..self.dim())
            .map(|i| {
                let (lo, hi) = self.bounds(i);
                (hi - lo).max(0.0)
            })
            .product()
    }
}

/// Euclidean distance over the first `n` coordinates.
#[inline]
pub fn distance(a: &JointVec, b: &JointVec, n: usize) -> f64 {
    let mut s = 0.0;
    for i in 0..n {
        let d = a[i] - b[i];
        s += d * d;
    }
    s.sqrt()
}

/// `a + t (b - a)` over the first `n` coordinates (the rest zero).
#[inline]
pub fn lerp(a: &JointVec, b: &JointVec, t: f64, n: usize) -> JointVec {
    let mut q = [0.0; MAX_JOINTS];
    for i in 0..n {
        q[i] = a[i] + t * (b[i] - a[i]);
    }
    q
}

/// A point robot in an axis-aligned rectangle among discs. Edges are checked exactly (segment-disc
/// distance), so planner results can be compared with analytic shortest paths.
#[derive(Clone, Debug)]
pub struct DiscPlane {
    min: [f64; 2],
    max: [f64; 2],
    discs: Vec<([f64; 2], f64)>,
}

impl DiscPlane {
    /// The rectangle [min, max] with disc obstacles (centre, radius), m.
    pub fn new(min: [f64; 2], max: [f64; 2], discs: Vec<([f64; 2], f64)>) -> DiscPlane {
        DiscPlane { min, max, discs }
    }
}

impl ConfigSpace for DiscPlane {
    fn dim(&self) -> usize {
        2
    }
    fn bounds(&self, i: usize) -> (f64, f64) {
        (self.min[i], self.max[i])
    }
    fn config_free(&self, q: &JointVec) -> bool {
        let p = [q[0], q[1]];
        (0..2).all(|i| p[i] >= self.min[i] && p[i] <= self.max[i])
            && self
                .discs
                .iter()
                .all(|(c, r)| crate::sim::geometry::dist(p, *c) > *r)
    }
    fn edge_free(&self, a: &JointVec, b: &JointVec) -> bool {
        // The rectangle is convex, so valid endpoints keep the whole segment inside it.
        self.config_free(b)
            && self.discs.iter().all(|(c, r)| {
                crate::sim::geometry::point_segment_distance(*c, [a[0], a[1]], [b[0], b[1]]) > *r
            })
    }
}

/// The arm's joint space among the environment's current obstacles (and workspace boundary, and itself when
/// self-collision is on).
///
/// A configuration is valid when its signed clearance is at least `margin`. Edges are checked by
/// conservative advancement: along a joint-space segment no point of the arm moves farther than
/// `sum_i |dq_i| R_i`, where `R_i` is the summed length of the links beyond joint i (twice that for
/// self-collision, where two links move). So from a sample with clearance `c`, the next `c / W` of the segment
/// (W the bound for the whole segment) cannot collide, and the walk steps by exactly that much. The
/// resolution is tied to the link lengths through `R_i`; every step is at least `margin` of arm motion,
/// and the whole segment is certified collision-free, however thin an obstacle is.
pub struct ArmSpace<'a> {
    env: &'a ArmEnv,
    n: usize,
    lo: JointVec,
    hi: JointVec,
    /// Lever arms R_i (times 2 with self-collision), m/rad.
    lever: JointVec,
    margin: f64,
    /// Clearances computed already, by configuration (direct-mapped, made on first use). A search asks again
    /// and again for the same configurations: a tree node's when edges from it are checked, a new node's when
    /// its parent and rewired edges end there. The memo returns the very value computed before.
    memo: RefCell<Vec<(JointVec, f64)>>,
}

impl<'a> ArmSpace<'a> {
    /// The joint space of `env`'s arm with its current obstacles; configurations need clearance >= `margin` m.
    /// Joint bounds are the joint limits intersected with [-pi, pi] (the same box `ArmEnv::sample_config` uses;
    /// paths do not wrap around).
    pub fn new(env: &'a ArmEnv, margin: f64) -> ArmSpace<'a> {
        let arm = &env.scenario().arm;
        let n = arm.n();
        let mut lo = [0.0; MAX_JOINTS];
        let mut hi = [0.0; MAX_JOINTS];
        let lever = env.scenario().lever_arms();
        for (i, l) in arm.links.iter().enumerate() {
            lo[i] = l.q_min.max(-std::f64::consts::PI);
            hi[i] = l.q_max.min(std::f64::consts::PI);
        }
        ArmSpace {
            env,
            n,
            lo,
            hi,
            lever,
            margin,
            memo: RefCell::new(Vec::new()),
        }
    }

    /// Required clearance, m.
    pub fn margin(&self) -> f64 {
        self.margin
    }

    /// Signed clearance of configuration q, m.
    pub fn clearance(&self, q: &JointVec) -> f64 {
        let mut h: u64 = 0;
        for x in &q[..self.n] {
            h = (h ^ x.to_bits()).wrapping_mul(0x9E37_79B9_7F4A_7C15);
        }
        let slot = (h >> (64 - MEMO_SLOTS.trailing_zeros())) as usize;
        let mut memo = self.memo.borrow_mut();
        if memo.is_empty() {
            memo.resize(MEMO_SLOTS, ([0.0; MAX_JOINTS], f64::NAN));
        }
        let (key, c) = &mut memo[slot];
        let same = (0..self.n).all(|i| key[i].to_bits() == q[i].to_bits());
        if same && !c.is_nan() {
            return *c;
        }
        let value = self.env.clearances(&q[..self.n]).0;
        (*key, *c) = (*q, value);
        value
    }

    /// Upper bound on how far any point of the arm moves along the segment a -> b, m.
    pub fn motion_bound(&self, a: &JointVec, b: &JointVec) -> f64 {
        (0..self.n)
            .map(|i| (b[i] - a[i]).abs() * self.lever[i])
            .sum()
    }

    /// Whether q lies inside the joint bounds.
    pub fn within_bounds(&self, q: &JointVec) -> bool {
        (0..self.n).all(|i| q[i] >= self.lo[i] && q[i] <= self.hi[i])
    }
}

impl ConfigSpace for ArmSpace<'_> {
    fn dim(&self) -> usize {
        self.n
    }
    fn bounds(&self, i: usize) -> (f64, f64) {
        (self.lo[i], self.hi[i])
    }
    fn config_free(&self, q: &JointVec) -> bool {
        self.within_bounds(q) && self.clearance(q) >= self.margin
    }
    fn edge_free(&self, a: &JointVec, b: &JointVec) -> bool {
        if !self.within_bounds(b) {
            return false;
        }
        let w = self.motion_bound(a, b);
        if w <= 0.0 {
            return self.clearance(b) >= self.margin;
        }
        let mut t = 0.0;
        loop {
            let q = lerp(a, b, t, self.n);
            let c = self.clearance(&q);
            if c < self.margin {
                return false;
            }
            // Everything within c of arm motion from q is clear; the end needs the margin itself.
            if w * (1.0 - t) < c {
                return self.clearance(b) >= self.margin;
            }
            t += c / w;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::Scenario;
    use rand::SeedableRng;
    use std::sync::Arc;

    /// The shipped four-obstacle table scene.
    fn four_obstacle_env() -> ArmEnv {
        let sc = Scenario::load(std::path::Path::new(
            "experiments/scenarios/table-2link-4obs.toml",
        ))
        .unwrap();
        ArmEnv::new(Arc::new(sc))
    }

    /// The exact minimum clearance along a segment, approximated from below-resolution sampling: 20 000 samples.
    fn dense_min(space: &ArmSpace, a: &JointVec, b: &JointVec) -> f64 {
        (0..=20_000)
            .map(|k| space.clearance(&lerp(a, b, k as f64 / 20_000.0, space.dim())))
            .fold(f64::INFINITY, f64::min)
    }

    #[test]
    fn edge_check_agrees_with_dense_sampling() {
        // Conservative advancement: a point of a serial arm moves at most sum_i |dq_i| R_i when the joints move
        // by dq (R_i = reach beyond joint i), so stepping by the clearance never skips a collision (the bound
        // behind adaptive collision checking of Schwarzer, Saha & Latombe, IEEE T-RO 2005; from memory).
        // Two-sided check against dense sampling: edges that dip into collision are rejected, edges whose
        // whole clearance stays above the margin are accepted.
        let env = four_obstacle_env();
        let space = ArmSpace::new(&env, 0.005);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let (mut rejected, mut accepted) = (0, 0);
        let mut tried = 0;
        while tried < 400 {
            let a = env.sample_config(&mut rng);
            let b = env.sample_config(&mut rng);
            if !space.config_free(&a) || !space.config_free(&b) {
                continue;
            }
            tried += 1;
            let m = dense_min(&space, &a, &b);
            let free = space.edge_free(&a, &b);
            if m < 0.0 {
                assert!(!free, "edge through collision accepted (min clearance {m})");
                rejected += 1;
            }
            if m > 0.005 + 1e-9 {
                assert!(free, "edge with clearance {m} rejected");
                accepted += 1;
            }
        }
        // Both kinds occur in this scenario (the check is not vacuous).
        assert!(rejected > 50 && accepted > 50, "{rejected} {accepted}");
    }

    #[test]
    fn the_clearance_memo_returns_what_the_environment_computes() {
        // A definition check of a cache: every answer, first or repeated, equals the environment's own clearance
        // bit for bit, including for configurations that share a slot and evict each other.
        let env = four_obstacle_env();
        let space = ArmSpace::new(&env, 0.005);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        let qs: Vec<JointVec> = (0..3 * MEMO_SLOTS)
            .map(|_| env.sample_config(&mut rng))
            .collect();
        for round in 0..2 {
            for (k, q) in qs.iter().enumerate() {
                let direct = env.clearances(&q[..2]).0;
                assert_eq!(
                    space.clearance(q).to_bits(),
                    direct.to_bits(),
                    "round {round}, q {k}"
                );
                assert_eq!(
                    space.clearance(q).to_bits(),
                    direct.to_bits(),
                    "again: round {round}, q {k}"
                );
            }
        }
    }
}
