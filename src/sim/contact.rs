//! Solid contact between the arm's link capsules and obstacles, the workspace boundary and (when enabled) the
//! arm itself: detection with closest points and normals, then frictionless, perfectly inelastic impulses in
//! joint space solved together, then a mass-weighted position correction that keeps
//! penetration within a small tolerance.
//!
//! Method: impulse-based contact (Mirtich, "Impulse-based dynamic simulation of rigid body systems", PhD thesis,
//! UC Berkeley 1996, ch. 2-3) written in generalised coordinates (Featherstone, "Rigid Body Dynamics Algorithms",
//! Springer 2008, ch. 11: the joint-space impulse M dq+ = M dq- + J^T lambda, with the contact Jacobian J mapping
//! joint speeds to the normal speeds at the contact points). Several simultaneous contacts are one linear
//! complementarity problem (0 <= lambda, J dq+ - b >= 0, complementary; Cottle, Pang & Stone, "The Linear
//! Complementarity Problem", 1992), solved exactly by an active-set (non-negative least-squares) method, with
//! projected Gauss-Seidel (same book, sec. 5.2) as the fallback. The position correction is the
//! same problem on positions: the smallest mass-weighted joint displacement that lifts every contact to the
//! tolerance (post-stabilisation, Cline & Pai, "Post-stabilization for rigid body simulation with contact and
//! constraints", ICRA 2003).
//!
//! Nothing here allocates; every buffer is a fixed-size array.

use super::arm::{cholesky_factor, cholesky_substitute, Arm, JointVec, Trig, MAX_JOINTS};
use super::geometry::{box_sdf, closest_param, Shape};
use serde::{Deserialize, Serialize};

/// How obstacles, the boundary and (optionally) the arm itself act on the arm.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ContactMode {
    /// Obstacles are solid: contacts are resolved by impulses and the arm cannot pass through (default).
    #[default]
    Solid,
    /// Contact is detected and reported but not resolved: the arm passes through (penalty-only obstacles).
    PassThrough,
}

/// Most simultaneous contacts kept per physics step (the deepest ones when there are more).
pub const MAX_CONTACTS: usize = 24;

/// Penetration the position correction leaves, m: the arm rests this far inside a surface so that a resting
/// contact stays detected (and keeps receiving impulses) from one physics step to the next. Common practice in
/// impulse-based simulators (a "slop"); 0.2 mm keeps the bound of 1 mm with room to spare.
pub const RESTING_DEPTH: f64 = 2e-4;

/// Largest penetration left after a position correction, m (the bound the tests check).
pub const MAX_PENETRATION: f64 = 1e-3;

/// Largest joint displacement of one position-correction round, rad.
const MAX_CORRECTION: f64 = 0.05;

/// Projected Gauss-Seidel sweeps at most, and the change in impulse below which it stops.
const PGS_SWEEPS: usize = 500;
const PGS_TOL: f64 = 1e-13;

/// One contact: a point on a link (on its axis) pressed against another body.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Contact {
    /// Link the contact point belongs to (0-based).
    pub link: usize,
    /// The point on that link's axis, m.
    pub point: [f64; 2],
    /// For contact of the arm with itself: the other link and its axis point.
    pub other: Option<(usize, [f64; 2])>,
    /// Unit normal along which the link must move to separate (from the other body towards the link).
    pub normal: [f64; 2],
    /// Signed distance between the surfaces, m (negative: penetration).
    pub depth: f64,
    /// Speed of the other body's surface along the normal, m/s (a moving obstacle; 0 otherwise).
    pub other_speed: f64,
}

impl Default for Contact {
    fn default() -> Self {
        Contact {
            link: 0,
            point: [0.0; 2],
            other: None,
            normal: [1.0, 0.0],
            depth: 0.0,
            other_speed: 0.0,
        }
    }
}

/// The contacts of one configuration (fixed capacity, no allocation).
#[derive(Clone, Copy, Debug)]
pub struct Contacts {
    pub items: [Contact; MAX_CONTACTS],
    pub len: usize,
}

impl Default for Contacts {
    fn default() -> Self {
        Contacts {
            items: [Contact::default(); MAX_CONTACTS],
            len: 0,
        }
    }
}

impl Contacts {
    /// The contacts found.
    pub fn as_slice(&self) -> &[Contact] {
        &self.items[..self.len]
    }

    /// Deepest penetration among them, m (0 when none).
    pub fn max_penetration(&self) -> f64 {
        self.as_slice().iter().map(|c| -c.depth).fold(0.0, f64::max)
    }

    /// Add a contact; when full, it replaces the shallowest one if it is deeper.
    fn push(&mut self, c: Contact) {
        if self.len < MAX_CONTACTS {
            self.items[self.len] = c;
            self.len += 1;
            return;
        }
        let (k, shallowest) =
            self.items
                .iter()
                .enumerate()
                .fold((0, f64::NEG_INFINITY), |acc, (k, x)| {
                    if x.depth > acc.1 {
                        (k, x.depth)
                    } else {
                        acc
                    }
                });
        if c.depth < shallowest {
            self.items[k] = c;
        }
    }
}

/// What the arm can touch, at the current instant.
#[derive(Clone, Copy, Debug)]
pub struct Surroundings<'a> {
    /// Obstacles at their current positions.
    pub shapes: &'a [Shape],
    /// Their velocities, m/s (same order; may be shorter, missing ones are at rest).
    pub velocities: &'a [[f64; 2]],
    pub workspace_min: [f64; 2],
    pub workspace_max: [f64; 2],
    pub self_collision: bool,
}

#[inline]
fn sub(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    [a[0] - b[0], a[1] - b[1]]
}
#[inline]
fn dot(a: [f64; 2], b: [f64; 2]) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}
#[inline]
fn lerp(a: [f64; 2], b: [f64; 2], t: f64) -> [f64; 2] {
    [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])]
}
/// `v` normalised, or `fallback` when it is (numerically) zero.
#[inline]
fn unit_or(v: [f64; 2], fallback: [f64; 2]) -> [f64; 2] {
    let l = v[0].hypot(v[1]);
    if l > 1e-12 {
        [v[0] / l, v[1] / l]
    } else {
        fallback
    }
}
/// A unit vector perpendicular to segment a-b (any, when the segment is degenerate).
#[inline]
fn perpendicular(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    let d = sub(b, a);
    unit_or([-d[1], d[0]], [0.0, 1.0])
}

/// Closest point of segment a-b to an axis-aligned box (centre c, half extents h), as (parameter on the
/// segment, signed distance of that point to the box). Outside the box the minimum is at an endpoint or at the
/// projection of a box corner (Ericson, "Real-Time Collision Detection", 2005, sec. 5.1.3 and 5.1.9); when the
/// segment enters the box the signed distance is convex along it and a golden-section search finds its minimum.
fn segment_box_closest(a: [f64; 2], b: [f64; 2], c: [f64; 2], h: [f64; 2]) -> (f64, f64) {
    let f = |t: f64| box_sdf(lerp(a, b, t), c, h);
    let mut best = (0.0, f(0.0));
    let mut consider = |t: f64| {
        let d = f(t);
        if d < best.1 {
            best = (t, d);
        }
    };
    consider(1.0);
    for sx in [-1.0, 1.0] {
        for sy in [-1.0, 1.0] {
            consider(closest_param([c[0] + sx * h[0], c[1] + sy * h[1]], a, b));
        }
    }
    if best.1 > 0.0 {
        return best;
    }
    // Inside: minimise the (convex) signed distance along the segment.
    let r = 0.618_033_988_749_894_8;
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    let mut x1 = hi - r * (hi - lo);
    let mut x2 = lo + r * (hi - lo);
    let (mut f1, mut f2) = (f(x1), f(x2));
    for _ in 0..60 {
        if f1 < f2 {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - r * (hi - lo);
            f1 = f(x1);
        } else {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + r * (hi - lo);
            f2 = f(x2);
        }
    }
    let (t, d) = if f1 < f2 { (x1, f1) } else { (x2, f2) };
    if d < best.1 {
        (t, d)
    } else {
        best
    }
}

/// Outward unit normal of an axis-aligned box at point p (the gradient of its signed distance).
fn box_normal(p: [f64; 2], c: [f64; 2], h: [f64; 2]) -> [f64; 2] {
    let rel = sub(p, c);
    let q = [rel[0].clamp(-h[0], h[0]), rel[1].clamp(-h[1], h[1])];
    let out = sub(rel, q);
    if out[0] != 0.0 || out[1] != 0.0 {
        return unit_or(out, [1.0, 0.0]);
    }
    // Inside: leave through the nearest face.
    let dx = rel[0].abs() - h[0];
    let dy = rel[1].abs() - h[1];
    if dx > dy {
        [if rel[0] >= 0.0 { 1.0 } else { -1.0 }, 0.0]
    } else {
        [0.0, if rel[1] >= 0.0 { 1.0 } else { -1.0 }]
    }
}

/// Closest points of segments p1-q1 and p2-q2 as parameters (s, t) (Ericson 2005, sec. 5.1.9).
fn segment_segment_params(p1: [f64; 2], q1: [f64; 2], p2: [f64; 2], q2: [f64; 2]) -> (f64, f64) {
    let d1 = sub(q1, p1);
    let d2 = sub(q2, p2);
    let r = sub(p1, p2);
    let a = dot(d1, d1);
    let e = dot(d2, d2);
    let f = dot(d2, r);
    let eps = 1e-300;
    if a <= eps && e <= eps {
        return (0.0, 0.0);
    }
    let (mut s, mut t);
    if a <= eps {
        s = 0.0;
        t = (f / e).clamp(0.0, 1.0);
    } else {
        let c = dot(d1, r);
        if e <= eps {
            t = 0.0;
            s = (-c / a).clamp(0.0, 1.0);
        } else {
            let b = dot(d1, d2);
            let denom = a * e - b * b;
            s = if denom > eps {
                ((b * f - c * e) / denom).clamp(0.0, 1.0)
            } else {
                0.0
            };
            t = (b * s + f) / e;
            if t < 0.0 {
                t = 0.0;
                s = (-c / a).clamp(0.0, 1.0);
            } else if t > 1.0 {
                t = 1.0;
                s = ((b - c) / a).clamp(0.0, 1.0);
            }
        }
    }
    (s, t)
}

/// Find every contact (signed distance < 0) of the arm whose joint points (base first) are `pts`.
pub fn detect(
    arm: &Arm,
    pts: &[[f64; 2]; MAX_JOINTS + 1],
    world: &Surroundings<'_>,
    out: &mut Contacts,
) {
    out.len = 0;
    let n = arm.n();
    for (i, link) in arm.links.iter().enumerate() {
        let (a, b, r) = (pts[i], pts[i + 1], link.radius);
        // Broad phase: the capsule's bounding disc against each shape's (squared distances, no root).
        let mid = lerp(a, b, 0.5);
        let reach = 0.5 * dot(sub(b, a), sub(b, a)).sqrt() + r;
        for (k, shape) in world.shapes.iter().enumerate() {
            let centre = shape.center();
            let gap = sub(mid, centre);
            let limit = reach + shape.bounding_radius();
            if dot(gap, gap) >= limit * limit {
                continue;
            }
            // The shape's bounding disc against the capsule itself.
            let t0 = closest_param(centre, a, b);
            let p0 = lerp(a, b, t0);
            let d0 = sub(p0, centre);
            if d0[0].hypot(d0[1]) - r - shape.bounding_radius() >= 0.0 {
                continue;
            }
            let (point, normal, depth) = match *shape {
                Shape::Disc { center, radius } => {
                    let v = sub(p0, center);
                    let l = v[0].hypot(v[1]);
                    (p0, unit_or(v, perpendicular(a, b)), l - r - radius)
                }
                Shape::Box { center, half } => {
                    let (t, d) = segment_box_closest(a, b, center, half);
                    let p = lerp(a, b, t);
                    (p, box_normal(p, center, half), d - r)
                }
            };
            if depth < 0.0 {
                let vel = world.velocities.get(k).copied().unwrap_or([0.0; 2]);
                out.push(Contact {
                    link: i,
                    point,
                    other: None,
                    normal,
                    depth,
                    other_speed: dot(vel, normal),
                });
            }
        }
        // The boundary: a capsule's deepest point against a wall is one of its ends. The base end of link 0 is
        // fixed, so only the outer end of each link is checked (the inner one is the previous link's outer end).
        let p = b;
        let walls = [
            (p[0] - world.workspace_min[0], [1.0, 0.0]),
            (world.workspace_max[0] - p[0], [-1.0, 0.0]),
            (p[1] - world.workspace_min[1], [0.0, 1.0]),
            (world.workspace_max[1] - p[1], [0.0, -1.0]),
        ];
        for (gap, normal) in walls {
            let depth = gap - r;
            if depth < 0.0 {
                out.push(Contact {
                    link: i,
                    point: p,
                    other: None,
                    normal,
                    depth,
                    other_speed: 0.0,
                });
            }
        }
        if world.self_collision {
            for j in i + 2..n {
                let (c, d, r2) = (pts[j], pts[j + 1], arm.links[j].radius);
                let (s, t) = segment_segment_params(a, b, c, d);
                let (pi, pj) = (lerp(a, b, s), lerp(c, d, t));
                let v = sub(pi, pj);
                let depth = v[0].hypot(v[1]) - r - r2;
                if depth < 0.0 {
                    out.push(Contact {
                        link: i,
                        point: pi,
                        other: Some((j, pj)),
                        normal: unit_or(v, perpendicular(c, d)),
                        depth,
                        other_speed: 0.0,
                    });
                }
            }
        }
    }
}

/// Add n . (d point / d q) for a point on `link` to `row` with sign `sign`: column j (j <= link) of the planar
/// point Jacobian is z x (p - p_j) = (-(p_y - p_jy), p_x - p_jx) (e.g. Siciliano et al., "Robotics: Modelling,
/// Planning and Control", 2009, eq. 3.30).
fn add_point_row(
    pts: &[[f64; 2]; MAX_JOINTS + 1],
    link: usize,
    p: [f64; 2],
    normal: [f64; 2],
    sign: f64,
    row: &mut JointVec,
) {
    for j in 0..=link {
        let col = [-(p[1] - pts[j][1]), p[0] - pts[j][0]];
        row[j] += sign * dot(normal, col);
    }
}

/// The contact's Jacobian row: its normal separation speed is row . dq (minus the other body's normal speed).
pub fn jacobian_row(pts: &[[f64; 2]; MAX_JOINTS + 1], c: &Contact) -> JointVec {
    let mut row = [0.0; MAX_JOINTS];
    add_point_row(pts, c.link, c.point, c.normal, 1.0, &mut row);
    if let Some((j, pj)) = c.other {
        add_point_row(pts, j, pj, c.normal, -1.0, &mut row);
    }
    row
}

/// The contact problem at one configuration: rows J, M^-1 J^T and the Delassus matrix A = J M^-1 J^T.
struct Problem {
    m: usize,
    rows: [JointVec; MAX_CONTACTS],
    minv_jt: [JointVec; MAX_CONTACTS],
    a: [[f64; MAX_CONTACTS]; MAX_CONTACTS],
}

impl Problem {
    fn new(arm: &Arm, q: &JointVec, pts: &[[f64; 2]; MAX_JOINTS + 1], cs: &Contacts) -> Problem {
        let n = arm.n();
        let mut mm = [[0.0; MAX_JOINTS]; MAX_JOINTS];
        arm.mass_matrix_trig(&Trig::new(q, n), &mut mm);
        cholesky_factor(&mut mm, n);
        let mut p = Problem {
            m: cs.len,
            rows: [[0.0; MAX_JOINTS]; MAX_CONTACTS],
            minv_jt: [[0.0; MAX_JOINTS]; MAX_CONTACTS],
            a: [[0.0; MAX_CONTACTS]; MAX_CONTACTS],
        };
        for (k, c) in cs.as_slice().iter().enumerate() {
            p.rows[k] = jacobian_row(pts, c);
            p.minv_jt[k] = p.rows[k];
            cholesky_substitute(&mm, n, &mut p.minv_jt[k]);
        }
        for k in 0..p.m {
            for l in 0..p.m {
                p.a[k][l] = (0..n).map(|i| p.rows[k][i] * p.minv_jt[l][i]).sum();
            }
        }
        p
    }

    /// Solve 0 <= x, A x + c >= 0, x (A x + c) = 0: the active-set method, else projected Gauss-Seidel.
    fn solve_lcp(&self, c: &[f64; MAX_CONTACTS]) -> [f64; MAX_CONTACTS] {
        if let Some(x) = self.active_set(c) {
            return x;
        }
        self.pgs(c)
    }

    /// Active-set solution of the same problem seen as the quadratic program min_{x >= 0} x.A x / 2 + c.x (its
    /// optimality conditions are the complementarity conditions above). With A = G G^T, G = J L^-T, and c = G y
    /// (still obstacles) this is exactly the non-negative least-squares problem min_{x >= 0} |G^T x + y|^2 / 2, and
    /// the loop is the Lawson-Hanson NNLS algorithm (Lawson & Hanson, "Solving Least Squares Problems", 1974,
    /// ch. 23) written on the normal equations: a passive set P of contacts with positive impulse grows by the
    /// most violated contact, each step solves A_PP x_P = -c_P, and steps back along the segment when an impulse
    /// would turn negative. Finite, exact to rounding, and robust on jammed, redundant contact sets (A singular),
    /// on which Gauss-Seidel crawls. None when it does not settle within its step limit.
    fn active_set(&self, c: &[f64; MAX_CONTACTS]) -> Option<[f64; MAX_CONTACTS]> {
        let m = self.m;
        let mut x = [0.0; MAX_CONTACTS];
        let mut passive = [false; MAX_CONTACTS];
        let scale = (0..m).map(|k| c[k].abs()).fold(0.0, f64::max);
        let tol = 1e-12 * scale.max(1e-300);
        for _ in 0..(3 * m + 10) {
            // Most violated contact outside P (largest -w).
            let mut j = None;
            let mut worst = tol;
            for k in 0..m {
                if !passive[k] && self.a[k][k] > 1e-12 {
                    let w: f64 = c[k] + (0..m).map(|l| self.a[k][l] * x[l]).sum::<f64>();
                    if -w > worst {
                        worst = -w;
                        j = Some(k);
                    }
                }
            }
            let Some(j) = j else {
                return Some(x);
            };
            passive[j] = true;
            let mut inner = 0;
            loop {
                inner += 1;
                if inner > 3 * m + 10 {
                    return None;
                }
                let s = self.solve_subset(c, &passive)?;
                if (0..m).all(|k| !passive[k] || s[k] > 0.0) {
                    x = s;
                    break;
                }
                let mut alpha = 1.0f64;
                for k in 0..m {
                    if passive[k] && s[k] <= 0.0 {
                        let d = x[k] - s[k];
                        if d > 0.0 {
                            alpha = alpha.min(x[k] / d);
                        } else {
                            alpha = 0.0;
                        }
                    }
                }
                for k in 0..m {
                    if passive[k] {
                        x[k] += alpha * (s[k] - x[k]);
                        if x[k] <= 1e-15 * (1.0 + s[k].abs()) || (s[k] <= 0.0 && alpha == 0.0) {
                            x[k] = 0.0;
                            passive[k] = false;
                        }
                    }
                }
                if !passive.iter().take(m).any(|&p| p) {
                    break;
                }
            }
        }
        None
    }

    /// Solve A_PP s_P = -c_P over the passive set (zero elsewhere) by Cholesky with a ridge of 1e-12 of the
    /// diagonal's size (A_PP may be singular when contacts are redundant). None if the factorisation fails.
    fn solve_subset(
        &self,
        c: &[f64; MAX_CONTACTS],
        passive: &[bool; MAX_CONTACTS],
    ) -> Option<[f64; MAX_CONTACTS]> {
        let mut idx = [0usize; MAX_CONTACTS];
        let mut s = 0;
        for (k, &p) in passive.iter().enumerate().take(self.m) {
            if p {
                idx[s] = k;
                s += 1;
            }
        }
        let diag = (0..s).map(|a| self.a[idx[a]][idx[a]]).fold(0.0, f64::max);
        let ridge = 1e-12 * diag.max(1e-300);
        let mut l = [[0.0; MAX_CONTACTS]; MAX_CONTACTS];
        for a in 0..s {
            for b in 0..s {
                l[a][b] = self.a[idx[a]][idx[b]];
            }
            l[a][a] += ridge;
        }
        for j in 0..s {
            let mut d = l[j][j];
            for k in 0..j {
                d -= l[j][k] * l[j][k];
            }
            if d <= 0.0 || !d.is_finite() {
                return None;
            }
            let d = d.sqrt();
            l[j][j] = d;
            for i in j + 1..s {
                let mut v = l[i][j];
                for k in 0..j {
                    v -= l[i][k] * l[j][k];
                }
                l[i][j] = v / d;
            }
        }
        let mut y = [0.0; MAX_CONTACTS];
        for i in 0..s {
            let mut v = -c[idx[i]];
            for k in 0..i {
                v -= l[i][k] * y[k];
            }
            y[i] = v / l[i][i];
        }
        for i in (0..s).rev() {
            let mut v = y[i];
            for k in i + 1..s {
                v -= l[k][i] * y[k];
            }
            y[i] = v / l[i][i];
        }
        let mut out = [0.0; MAX_CONTACTS];
        for a in 0..s {
            out[idx[a]] = y[a];
        }
        Some(out)
    }

    /// Projected Gauss-Seidel for the same problem (the fallback when pivoting fails).
    fn pgs(&self, c: &[f64; MAX_CONTACTS]) -> [f64; MAX_CONTACTS] {
        let mut x = [0.0; MAX_CONTACTS];
        for _ in 0..PGS_SWEEPS {
            let mut change = 0.0f64;
            for k in 0..self.m {
                let akk = self.a[k][k];
                // A contact no joint can move (e.g. at the fixed base) gets no impulse.
                if akk <= 1e-12 {
                    continue;
                }
                let w: f64 = c[k] + (0..self.m).map(|l| self.a[k][l] * x[l]).sum::<f64>();
                let new = (x[k] - w / akk).max(0.0);
                change = change.max((new - x[k]).abs());
                x[k] = new;
            }
            if change <= PGS_TOL {
                break;
            }
        }
        x
    }

    /// Joint-space displacement M^-1 J^T x.
    fn response(&self, x: &[f64; MAX_CONTACTS]) -> JointVec {
        let mut d = [0.0; MAX_JOINTS];
        for k in 0..self.m {
            for (di, wi) in d.iter_mut().zip(&self.minv_jt[k]) {
                *di += wi * x[k];
            }
        }
        d
    }
}

/// Apply the contact impulses of a perfectly inelastic, frictionless collision to joint speeds `dq`: afterwards
/// no contact approaches (row . dq >= other_speed for each) and the impulses are complementary to the separating
/// speeds. Returns the generalised impulse J^T lambda (N m s per joint).
pub fn resolve_velocities(
    arm: &Arm,
    q: &JointVec,
    dq: &mut JointVec,
    pts: &[[f64; 2]; MAX_JOINTS + 1],
    cs: &Contacts,
) -> JointVec {
    let mut gen = [0.0; MAX_JOINTS];
    if cs.len == 0 {
        return gen;
    }
    let p = Problem::new(arm, q, pts, cs);
    let mut c = [0.0; MAX_CONTACTS];
    for (k, ct) in cs.as_slice().iter().enumerate() {
        c[k] = dot_n(&p.rows[k], dq, arm.n()) - ct.other_speed;
    }
    let lambda = p.solve_lcp(&c);
    let d = p.response(&lambda);
    for i in 0..arm.n() {
        dq[i] += d[i];
        for k in 0..p.m {
            gen[i] += p.rows[k][i] * lambda[k];
        }
    }
    gen
}

#[inline]
fn dot_n(a: &JointVec, b: &JointVec, n: usize) -> f64 {
    (0..n).map(|i| a[i] * b[i]).sum()
}

/// Move `q` by the smallest mass-weighted displacement (to first order) that lifts every contact to at most
/// `RESTING_DEPTH` of penetration. One linearised step; the caller re-detects and repeats.
pub fn correct_positions(
    arm: &Arm,
    q: &mut JointVec,
    pts: &[[f64; 2]; MAX_JOINTS + 1],
    cs: &Contacts,
) {
    if cs.len == 0 {
        return;
    }
    let p = Problem::new(arm, q, pts, cs);
    let mut c = [0.0; MAX_CONTACTS];
    for (k, ct) in cs.as_slice().iter().enumerate() {
        // Wanted: depth + row . dx >= -RESTING_DEPTH.
        c[k] = ct.depth + RESTING_DEPTH;
    }
    let mu = p.solve_lcp(&c);
    let mut d = p.response(&mu);
    // Near a singular configuration (a contact normal the joints can barely move along) the linearised step
    // can be huge; take at most MAX_CORRECTION rad per round, the next round re-linearises.
    let n = arm.n();
    let largest = d[..n].iter().fold(0.0f64, |m, x| m.max(x.abs()));
    if largest > MAX_CORRECTION {
        for x in d[..n].iter_mut() {
            *x *= MAX_CORRECTION / largest;
        }
    }
    for i in 0..n {
        q[i] += d[i];
    }
}

/// Resolve the contacts of state (q, dq) in place: velocity impulses, then up to four rounds of position
/// correction (re-detecting after each). Returns the generalised impulse of the velocity step and whether any
/// contact was found. Without contact the state is untouched. `cs` is scratch space (kept by the caller so the
/// step does not clear a fresh buffer every time).
pub fn resolve(
    arm: &Arm,
    world: &Surroundings<'_>,
    q: &mut JointVec,
    dq: &mut JointVec,
    cs: &mut Contacts,
) -> (JointVec, bool) {
    let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
    arm.joint_points(q, &mut pts);
    detect(arm, &pts, world, cs);
    if cs.len == 0 {
        return ([0.0; MAX_JOINTS], false);
    }
    let gen = resolve_velocities(arm, q, dq, &pts, cs);
    for _ in 0..4 {
        if cs.max_penetration() <= RESTING_DEPTH * 1.5 {
            break;
        }
        correct_positions(arm, q, &pts, cs);
        arm.joint_points(q, &mut pts);
        detect(arm, &pts, world, cs);
    }
    (gen, true)
}
