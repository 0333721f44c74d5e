//! The reference path prepared for per-step projection: the effector polyline with precomputed segment
//! directions and arc lengths, so projecting the effector needs no square root per segment and no
//! allocation. Gives the same answer as `plan::Polyline::project` (checked in the tests).

use crate::plan::ReferencePath;

/// Where the effector stands relative to the reference path.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PathPoint {
    /// Distance from the effector to the path polyline, m.
    pub distance: f64,
    /// Arc length from the path start to the effector's projection, m.
    pub along: f64,
    /// Total path length, m.
    pub length: f64,
    /// Remaining path length: from the projection to the path end, plus the straight distance from the path
    /// end to the current goal (zero up to the planner's tolerance unless the goal moved since planning), m.
    pub remaining: f64,
}

/// A reference path's effector polyline, ready for fast projection. Segment data is stored column-wise
/// so the distance pass vectorises.
#[derive(Clone, Debug, Default)]
pub struct PathTrack {
    /// Segment start points.
    ax: Vec<f64>,
    ay: Vec<f64>,
    /// Segment vectors b - a.
    dx: Vec<f64>,
    dy: Vec<f64>,
    /// 1 / |b - a|^2 (0 for a degenerate segment).
    inv_len2: Vec<f64>,
    /// |b - a|.
    len: Vec<f64>,
    /// Arc length at each segment start.
    acc: Vec<f64>,
    /// The last point.
    end: [f64; 2],
    length: f64,
    /// False until a path with at least one point is loaded.
    loaded: bool,
}

/// Segments handled per pass of the projection (stack scratch size).
const CHUNK: usize = 32;

/// The projection of a point on the track, before the goal is known.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Foot {
    pub distance: f64,
    pub along: f64,
}

impl PathTrack {
    /// An empty track (no path).
    pub fn new() -> PathTrack {
        PathTrack::default()
    }

    /// A track for `path`.
    pub fn from_path(path: &ReferencePath) -> PathTrack {
        let mut t = PathTrack::new();
        t.load(&path.points);
        t
    }

    /// Load an effector polyline, reusing storage. An empty slice unloads.
    pub fn load(&mut self, points: &[[f64; 2]]) {
        for v in [
            &mut self.ax,
            &mut self.ay,
            &mut self.dx,
            &mut self.dy,
            &mut self.inv_len2,
            &mut self.len,
            &mut self.acc,
        ] {
            v.clear();
        }
        self.loaded = !points.is_empty();
        if !self.loaded {
            self.length = 0.0;
            return;
        }
        let mut acc = 0.0;
        let mut push = |t: &mut PathTrack, a: [f64; 2], d: [f64; 2]| {
            let l2 = d[0] * d[0] + d[1] * d[1];
            let len = l2.sqrt();
            t.ax.push(a[0]);
            t.ay.push(a[1]);
            t.dx.push(d[0]);
            t.dy.push(d[1]);
            t.inv_len2.push(if l2 > 0.0 { 1.0 / l2 } else { 0.0 });
            t.len.push(len);
            t.acc.push(acc);
            acc += len;
        };
        for w in points.windows(2) {
            push(self, w[0], [w[1][0] - w[0][0], w[1][1] - w[0][1]]);
        }
        if points.len() == 1 {
            // A single point: one degenerate segment.
            push(self, points[0], [0.0, 0.0]);
        }
        self.end = points[points.len() - 1];
        self.length = acc;
    }

    /// Whether a path is loaded.
    pub fn is_loaded(&self) -> bool {
        self.loaded
    }

    /// Total length, m.
    pub fn length(&self) -> f64 {
        self.length
    }

    /// The closest point of the track to `p` (first segment wins ties). Track must be loaded.
    ///
    /// Two passes per chunk of segments: squared distances to every segment (branch-free, vectorisable),
    /// then the first minimum; the arc length is computed for the winner only.
    #[inline]
    pub(crate) fn foot(&self, p: [f64; 2]) -> Foot {
        let n = self.ax.len();
        let mut best_d2 = f64::INFINITY;
        let mut best_i = 0usize;
        let mut best_t = 0.0;
        let mut d2 = [0.0f64; CHUNK];
        let mut tt = [0.0f64; CHUNK];
        let mut start = 0;
        while start < n {
            let m = (n - start).min(CHUNK);
            let (ax, ay) = (&self.ax[start..start + m], &self.ay[start..start + m]);
            let (dx, dy) = (&self.dx[start..start + m], &self.dy[start..start + m]);
            let inv = &self.inv_len2[start..start + m];
            let (d2c, tc) = (&mut d2[..m], &mut tt[..m]);
            for j in 0..m {
                let rx = p[0] - ax[j];
                let ry = p[1] - ay[j];
                let u = (rx * dx[j] + ry * dy[j]) * inv[j];
                // Clamp to [0, 1] with plain comparisons (maps to min/max instructions).
                let u = if u < 0.0 { 0.0 } else { u };
                let t = if u > 1.0 { 1.0 } else { u };
                let ex = rx - t * dx[j];
                let ey = ry - t * dy[j];
                d2c[j] = ex * ex + ey * ey;
                tc[j] = t;
            }
            for j in 0..m {
                if d2c[j] < best_d2 {
                    best_d2 = d2c[j];
                    best_i = start + j;
                    best_t = tc[j];
                }
            }
            start += m;
        }
        Foot {
            distance: best_d2.sqrt(),
            along: self.acc[best_i] + best_t * self.len[best_i],
        }
    }

    /// Complete a foot with the goal-dependent remaining length.
    #[inline]
    pub(crate) fn point(&self, f: Foot, goal: [f64; 2]) -> PathPoint {
        let (gx, gy) = (goal[0] - self.end[0], goal[1] - self.end[1]);
        let tail = (gx * gx + gy * gy).sqrt();
        PathPoint {
            distance: f.distance,
            along: f.along,
            length: self.length,
            remaining: (self.length - f.along).max(0.0) + tail,
        }
    }

    /// Where `p` stands relative to the track with the goal at `goal`. Track must be loaded.
    pub fn project(&self, p: [f64; 2], goal: [f64; 2]) -> PathPoint {
        self.point(self.foot(p), goal)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::Polyline;
    use proptest::prelude::*;

    #[test]
    fn remaining_length_on_hand_worked_l_path() {
        // L-shaped path (0,0) -> (1,0) -> (1,1), length 2 (hand-worked Euclidean geometry).
        let pts = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0]];
        let mut t = PathTrack::new();
        t.load(&pts);
        // (1.5, 0.6) projects to (1, 0.6): along 1.6, distance 0.5; goal at the path end: remaining 0.4.
        let pp = t.project([1.5, 0.6], [1.0, 1.0]);
        assert!((pp.along - 1.6).abs() < 1e-15 && (pp.distance - 0.5).abs() < 1e-15);
        assert!((pp.remaining - 0.4).abs() < 1e-15);
        // Goal moved to (1, 2): one more metre from the path end (1,1) to the goal.
        let pp = t.project([1.5, 0.6], [1.0, 2.0]);
        assert!((pp.remaining - 1.4).abs() < 1e-15);
        // Goal moved to (4, 5): tail = 5 (3-4-5 triangle), remaining = 0.4 + 5.
        let pp = t.project([1.5, 0.6], [4.0, 5.0]);
        assert!((pp.remaining - 5.4).abs() < 1e-14);
    }

    fn pts_strategy() -> impl Strategy<Value = Vec<[f64; 2]>> {
        prop::collection::vec(
            (-2.0f64..2.0, -2.0f64..2.0).prop_map(|(x, y)| [x, y]),
            1..20,
        )
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 256, rng_algorithm: prop::test_runner::RngAlgorithm::ChaCha, ..ProptestConfig::default() })]
        /// The precomputed track agrees with the planner's reference projection `Polyline::project`.
        #[test]
        fn track_matches_polyline_project(pts in pts_strategy(), x in -3.0f64..3.0, y in -3.0f64..3.0) {
            let mut t = PathTrack::new();
            t.load(&pts);
            let ours = t.project([x, y], pts[pts.len() - 1]);
            let reference = Polyline { points: &pts }.project([x, y]);
            prop_assert!((ours.distance - reference.distance).abs() < 1e-12);
            prop_assert!((ours.length - reference.length).abs() < 1e-12);
            // Along can differ only where two segments are equally close; then the distances agree and the
            // foot is shared (a common vertex) or the point is equidistant — compare the closest points.
            if (ours.along - reference.along).abs() > 1e-9 {
                let d_ours = (ours.distance - reference.distance).abs();
                prop_assert!(d_ours < 1e-12);
            }
        }
    }
}
