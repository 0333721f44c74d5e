//! The reference path handed to an episode: K waypoints in joint space and in effector space, plus the
//! effector polyline through them with point projection (used by the path-following reward terms).

use crate::sim::JointVec;

/// A collision-free (unless `fallback`) reference path from the start configuration to a goal configuration.
#[derive(Clone, Debug, PartialEq)]
pub struct ReferencePath {
    /// K waypoints in joint space, evenly spaced along the planned path (first = start, last = goal).
    pub joints: Vec<JointVec>,
    /// The effector position at each waypoint, m.
    pub points: Vec<[f64; 2]>,
    /// True when no path was found within budget and the straight joint-space line was returned instead.
    pub fallback: bool,
}

impl ReferencePath {
    /// The effector polyline through the waypoints.
    pub fn polyline(&self) -> Polyline<'_> {
        Polyline {
            points: &self.points,
        }
    }
}

/// Where a point projects onto a polyline.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Projection {
    /// Distance from the point to the polyline, m.
    pub distance: f64,
    /// Arc length from the polyline's start to the projected point, m.
    pub along: f64,
    /// Total polyline length, m.
    pub length: f64,
    /// Index of the segment holding the projection.
    pub segment: usize,
}

/// A borrowed polyline (at least one point).
#[derive(Clone, Copy, Debug)]
pub struct Polyline<'a> {
    pub points: &'a [[f64; 2]],
}

impl Polyline<'_> {
    /// Total length, m.
    pub fn length(&self) -> f64 {
        self.points
            .windows(2)
            .map(|w| (w[1][0] - w[0][0]).hypot(w[1][1] - w[0][1]))
            .sum()
    }

    /// Closest point on the polyline to `p` (first segment wins ties).
    pub fn project(&self, p: [f64; 2]) -> Projection {
        let pts = self.points;
        if pts.len() == 1 {
            return Projection {
                distance: (p[0] - pts[0][0]).hypot(p[1] - pts[0][1]),
                along: 0.0,
                length: 0.0,
                segment: 0,
            };
        }
        let mut best = Projection {
            distance: f64::INFINITY,
            along: 0.0,
            length: 0.0,
            segment: 0,
        };
        let mut acc = 0.0;
        for (i, w) in pts.windows(2).enumerate() {
            let (a, b) = (w[0], w[1]);
            let d = [b[0] - a[0], b[1] - a[1]];
            let l2 = d[0] * d[0] + d[1] * d[1];
            let seg_len = l2.sqrt();
            let t = if l2 > 0.0 {
                (((p[0] - a[0]) * d[0] + (p[1] - a[1]) * d[1]) / l2).clamp(0.0, 1.0)
            } else {
                0.0
            };
            let c = [a[0] + t * d[0], a[1] + t * d[1]];
            let dist = (p[0] - c[0]).hypot(p[1] - c[1]);
            if dist < best.distance {
                best = Projection {
                    distance: dist,
                    along: acc + t * seg_len,
                    length: 0.0,
                    segment: i,
                };
            }
            acc += seg_len;
        }
        best.length = acc;
        best
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn projection_on_hand_worked_polyline() {
        // L-shaped path (0,0) -> (1,0) -> (1,1); hand-worked projections.
        let pts = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0]];
        let pl = Polyline { points: &pts };
        assert!((pl.length() - 2.0).abs() < 1e-15);
        // (0.4, 0.3) projects to (0.4, 0): distance 0.3, along 0.4.
        let pr = pl.project([0.4, 0.3]);
        assert!(
            (pr.distance - 0.3).abs() < 1e-15 && (pr.along - 0.4).abs() < 1e-15 && pr.segment == 0
        );
        // (1.5, 0.6) projects to (1, 0.6): distance 0.5, along 1.6.
        let pr = pl.project([1.5, 0.6]);
        assert!(
            (pr.distance - 0.5).abs() < 1e-15 && (pr.along - 1.6).abs() < 1e-15 && pr.segment == 1
        );
        // Beyond the start: (-0.3, -0.4) projects to the start, distance 0.5.
        let pr = pl.project([-0.3, -0.4]);
        assert!((pr.distance - 0.5).abs() < 1e-15 && pr.along == 0.0);
    }
}
