//! Contact detection: closest points and normals between link capsules and discs, boxes, the workspace
//! boundary and other links, and each contact's row of the contact Jacobian.

use super::*;
use crate::sim::geometry::norm;

#[inline]
pub(super) fn sub(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    [a[0] - b[0], a[1] - b[1]]
}
#[inline]
pub(super) fn dot(a: [f64; 2], b: [f64; 2]) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}
#[inline]
pub(super) fn lerp(a: [f64; 2], b: [f64; 2], t: f64) -> [f64; 2] {
    [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])]
}
/// `v` normalised, or `fallback` when it is (numerically) zero.
#[inline]
pub(super) fn unit_or(v: [f64; 2], fallback: [f64; 2]) -> [f64; 2] {
    let l = norm(v[0], v[1]);
    if l > 1e-12 {
        [v[0] / l, v[1] / l]
    } else {
        fallback
    }
}
/// A unit vector perpendicular to segment a-b (any, when the segment is degenerate).
#[inline]
pub(super) fn perpendicular(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    let d = sub(b, a);
    unit_or([-d[1], d[0]], [0.0, 1.0])
}

/// Closest point of segment a-b to an axis-aligned box (centre c, half extents h), as (parameter on the
/// segment, signed distance of that point to the box). Outside the box the minimum is at an endpoint or at the
/// projection of a box corner (Ericson, "Real-Time Collision Detection", 2005, sec. 5.1.3 and 5.1.9); when the
/// segment enters the box the signed distance is convex along it and a golden-section search finds its minimum.
pub(super) fn segment_box_closest(
    a: [f64; 2],
    b: [f64; 2],
    c: [f64; 2],
    h: [f64; 2],
) -> (f64, f64) {
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
    let ((x1, f1), (x2, f2)) = crate::sim::geometry::golden_section(f, 60);
    let (t, d) = if f1 < f2 { (x1, f1) } else { (x2, f2) };
    if d < best.1 {
        (t, d)
    } else {
        best
    }
}

/// Outward unit normal of an axis-aligned box at point p (the gradient of its signed distance).
pub(super) fn box_normal(p: [f64; 2], c: [f64; 2], h: [f64; 2]) -> [f64; 2] {
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
pub(super) fn segment_segment_params(
    p1: [f64; 2],
    q1: [f64; 2],
    p2: [f64; 2],
    q2: [f64; 2],
) -> (f64, f64) {
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
            if norm(d0[0], d0[1]) - r - shape.bounding_radius() >= 0.0 {
                continue;
            }
            let (point, normal, depth) = match *shape {
                Shape::Disc { center, radius } => {
                    let v = sub(p0, center);
                    let l = norm(v[0], v[1]);
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
                let depth = norm(v[0], v[1]) - r - r2;
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
pub(super) fn add_point_row(
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
