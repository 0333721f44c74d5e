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

mod detect;
pub use detect::*;

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
