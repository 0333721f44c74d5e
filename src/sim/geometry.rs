//! Exact distances between link capsules, obstacles (discs and axis-aligned boxes), each other and the
//! rectangular workspace boundary. Negative distance means penetration; collision is distance < 0.
//! Closest-point formulas follow Ericson, "Real-Time Collision Detection", 2005, sections 5.1.2 and 5.1.9.

/// A segment with a radius (one link).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Capsule {
    pub a: [f64; 2],
    pub b: [f64; 2],
    pub radius: f64,
}

/// An obstacle shape at its current position.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Shape {
    /// A disc: centre and radius, m.
    Disc { center: [f64; 2], radius: f64 },
    /// An axis-aligned box: centre and half extents, m.
    Box { center: [f64; 2], half: [f64; 2] },
}

impl Shape {
    /// The shape's reference point (centre), m.
    pub fn center(&self) -> [f64; 2] {
        match *self {
            Shape::Disc { center, .. } | Shape::Box { center, .. } => center,
        }
    }

    /// Radius of the smallest disc around the centre that contains the shape, m.
    pub fn bounding_radius(&self) -> f64 {
        match *self {
            Shape::Disc { radius, .. } => radius,
            Shape::Box { half, .. } => half[0].hypot(half[1]),
        }
    }

    /// Moved copy with a new centre.
    pub fn at(&self, c: [f64; 2]) -> Shape {
        match *self {
            Shape::Disc { radius, .. } => Shape::Disc { center: c, radius },
            Shape::Box { half, .. } => Shape::Box { center: c, half },
        }
    }

    /// Signed distance from a point to the shape's surface, m.
    pub fn point_distance(&self, p: [f64; 2]) -> f64 {
        match *self {
            Shape::Disc { center, radius } => dist(p, center) - radius,
            Shape::Box { center, half } => box_sdf(p, center, half),
        }
    }
}

#[inline]
fn sub(a: [f64; 2], b: [f64; 2]) -> [f64; 2] {
    [a[0] - b[0], a[1] - b[1]]
}
#[inline]
fn dot(a: [f64; 2], b: [f64; 2]) -> f64 {
    a[0] * b[0] + a[1] * b[1]
}
/// Length of (x, y) as sqrt(x^2 + y^2): within an ulp or two of `f64::hypot` and several times faster; the
/// overflow and underflow `hypot` guards against cannot happen at workspace scales (metres).
#[inline]
pub fn norm(x: f64, y: f64) -> f64 {
    (x * x + y * y).sqrt()
}

#[inline]
pub fn dist(a: [f64; 2], b: [f64; 2]) -> f64 {
    norm(a[0] - b[0], a[1] - b[1])
}

/// Closest point on segment [a, b] to p, as the parameter t in [0, 1].
#[inline]
pub fn closest_param(p: [f64; 2], a: [f64; 2], b: [f64; 2]) -> f64 {
    let ab = sub(b, a);
    let l2 = dot(ab, ab);
    if l2 <= 0.0 {
        return 0.0;
    }
    (dot(sub(p, a), ab) / l2).clamp(0.0, 1.0)
}

/// Distance from point p to segment [a, b].
#[inline]
pub fn point_segment_distance(p: [f64; 2], a: [f64; 2], b: [f64; 2]) -> f64 {
    let t = closest_param(p, a, b);
    dist(p, [a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])])
}

fn orient(a: [f64; 2], b: [f64; 2], c: [f64; 2]) -> f64 {
    (b[0] - a[0]) * (c[1] - a[1]) - (b[1] - a[1]) * (c[0] - a[0])
}

/// Whether two segments intersect (including touching).
pub fn segments_intersect(p1: [f64; 2], q1: [f64; 2], p2: [f64; 2], q2: [f64; 2]) -> bool {
    let d1 = orient(p2, q2, p1);
    let d2 = orient(p2, q2, q1);
    let d3 = orient(p1, q1, p2);
    let d4 = orient(p1, q1, q2);
    if ((d1 > 0.0 && d2 < 0.0) || (d1 < 0.0 && d2 > 0.0))
        && ((d3 > 0.0 && d4 < 0.0) || (d3 < 0.0 && d4 > 0.0))
    {
        return true;
    }
    let on = |a: [f64; 2], b: [f64; 2], p: [f64; 2], o: f64| {
        o == 0.0
            && p[0] >= a[0].min(b[0])
            && p[0] <= a[0].max(b[0])
            && p[1] >= a[1].min(b[1])
            && p[1] <= a[1].max(b[1])
    };
    on(p2, q2, p1, d1) || on(p2, q2, q1, d2) || on(p1, q1, p2, d3) || on(p1, q1, q2, d4)
}

/// Distance between segments [p1, q1] and [p2, q2] (0 when they cross).
pub fn segment_segment_distance(p1: [f64; 2], q1: [f64; 2], p2: [f64; 2], q2: [f64; 2]) -> f64 {
    if segments_intersect(p1, q1, p2, q2) {
        return 0.0;
    }
    // In the plane, non-crossing segments are closest at an endpoint of one of them.
    point_segment_distance(p1, p2, q2)
        .min(point_segment_distance(q1, p2, q2))
        .min(point_segment_distance(p2, p1, q1))
        .min(point_segment_distance(q2, p1, q1))
}

/// Signed distance from p to an axis-aligned box (centre c, half extents h).
pub fn box_sdf(p: [f64; 2], c: [f64; 2], h: [f64; 2]) -> f64 {
    let dx = (p[0] - c[0]).abs() - h[0];
    let dy = (p[1] - c[1]).abs() - h[1];
    let ox = dx.max(0.0);
    let oy = dy.max(0.0);
    norm(ox, oy) + dx.max(dy).min(0.0)
}

/// Whether segment [a, b] meets the box (slab test; Ericson 2005, section 5.3.3).
fn segment_hits_box(a: [f64; 2], b: [f64; 2], c: [f64; 2], h: [f64; 2]) -> bool {
    let (mut t0, mut t1) = (0.0f64, 1.0f64);
    for k in 0..2 {
        let d = b[k] - a[k];
        let (lo, hi) = (c[k] - h[k], c[k] + h[k]);
        if d.abs() < 1e-300 {
            if a[k] < lo || a[k] > hi {
                return false;
            }
        } else {
            let (mut e0, mut e1) = ((lo - a[k]) / d, (hi - a[k]) / d);
            if e0 > e1 {
                std::mem::swap(&mut e0, &mut e1);
            }
            t0 = t0.max(e0);
            t1 = t1.min(e1);
            if t0 > t1 {
                return false;
            }
        }
    }
    true
}

/// Signed distance from a segment to a box: the minimum of the box's signed distance field along the segment.
/// When they do not meet, the closest pair of a segment and a convex polygon involves a vertex of one of them
/// (an endpoint of the segment or a corner of the box). When they meet, the deepest point is found by
/// golden-section search (the field is convex along a line, so the search converges to 1e-12 m).
fn segment_box_distance(a: [f64; 2], b: [f64; 2], c: [f64; 2], h: [f64; 2]) -> f64 {
    if !segment_hits_box(a, b, c, h) {
        let mut d = box_sdf(a, c, h).min(box_sdf(b, c, h));
        for sx in [-1.0, 1.0] {
            for sy in [-1.0, 1.0] {
                d = d.min(point_segment_distance(
                    [c[0] + sx * h[0], c[1] + sy * h[1]],
                    a,
                    b,
                ));
            }
        }
        return d;
    }
    let f = |t: f64| box_sdf([a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1])], c, h);
    let ((_, f1), (_, f2)) = golden_section(f, 80);
    f1.min(f2).min(f(0.0)).min(f(1.0)).min(0.0)
}

/// Golden-section search for the minimum of a unimodal function on [0, 1] (Kiefer 1953; Press et al.,
/// Numerical Recipes, 3rd ed. 2007, sec. 10.2): `iters` steps, each shrinking the bracket by 0.618. Returns the
/// last two interior points with their values, (x1, f(x1)) and (x2, f(x2)).
pub fn golden_section(f: impl Fn(f64) -> f64, iters: usize) -> ((f64, f64), (f64, f64)) {
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    let r = 0.618_033_988_749_894_8;
    let mut x1 = hi - r * (hi - lo);
    let mut x2 = lo + r * (hi - lo);
    let (mut f1, mut f2) = (f(x1), f(x2));
    for _ in 0..iters {
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
    ((x1, f1), (x2, f2))
}

/// Signed distance between a capsule and an obstacle shape, m.
pub fn capsule_shape_distance(cap: &Capsule, s: &Shape) -> f64 {
    match *s {
        Shape::Disc { center, radius } => {
            point_segment_distance(center, cap.a, cap.b) - cap.radius - radius
        }
        Shape::Box { center, half } => {
            segment_box_distance(cap.a, cap.b, center, half) - cap.radius
        }
    }
}

/// Signed distance between two capsules, m.
pub fn capsule_capsule_distance(c1: &Capsule, c2: &Capsule) -> f64 {
    segment_segment_distance(c1.a, c1.b, c2.a, c2.b) - c1.radius - c2.radius
}

/// Signed clearance of a capsule inside the rectangle [min, max] (negative when it pokes out), m.
pub fn capsule_boundary_clearance(cap: &Capsule, min: [f64; 2], max: [f64; 2]) -> f64 {
    // A linear function on a segment is extreme at an endpoint.
    let mut d = f64::INFINITY;
    for p in [cap.a, cap.b] {
        d = d
            .min(p[0] - min[0])
            .min(max[0] - p[0])
            .min(p[1] - min[1])
            .min(max[1] - p[1]);
    }
    d - cap.radius
}

/// Signed distance between two shapes (used to keep generated obstacles apart), m.
pub fn shape_shape_distance(a: &Shape, b: &Shape) -> f64 {
    match (*a, *b) {
        (
            Shape::Disc {
                center: c1,
                radius: r1,
            },
            Shape::Disc {
                center: c2,
                radius: r2,
            },
        ) => dist(c1, c2) - r1 - r2,
        (Shape::Disc { center, radius }, Shape::Box { center: bc, half })
        | (Shape::Box { center: bc, half }, Shape::Disc { center, radius }) => {
            box_sdf(center, bc, half) - radius
        }
        (
            Shape::Box {
                center: c1,
                half: h1,
            },
            Shape::Box {
                center: c2,
                half: h2,
            },
        ) => {
            let dx = (c1[0] - c2[0]).abs() - h1[0] - h2[0];
            let dy = (c1[1] - c2[1]).abs() - h1[1] - h2[1];
            norm(dx.max(0.0), dy.max(0.0)) + dx.max(dy).min(0.0)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Golden-section search shrinks the bracket by r = 0.618 per step (Press et al., Numerical Recipes, 3rd ed.
    /// 2007, sec. 10.2); the same section notes that a minimum's position is only defined to about the square
    /// root of the machine precision (1.5e-8 in f64), as the function is flat there: after 60 steps both points
    /// lie within that of a parabola's minimum.
    #[test]
    fn golden_section_finds_a_parabolas_minimum() {
        let ((x1, f1), (x2, f2)) = golden_section(|t| (t - 0.3) * (t - 0.3) + 2.0, 60);
        assert!(
            (x1 - 0.3).abs() < 1e-7 && (x2 - 0.3).abs() < 1e-7,
            "{x1} {x2}"
        );
        assert!((f1 - 2.0).abs() < 1e-15 && (f2 - 2.0).abs() < 1e-15);
    }
    use proptest::prelude::*;

    /// Brute force: distance sampled at many points along the segment (the reference for the property tests).
    fn brute(cap: &Capsule, s: &Shape) -> f64 {
        let k = 20_000;
        (0..=k)
            .map(|i| {
                let t = i as f64 / k as f64;
                let p = [
                    cap.a[0] + t * (cap.b[0] - cap.a[0]),
                    cap.a[1] + t * (cap.b[1] - cap.a[1]),
                ];
                s.point_distance(p)
            })
            .fold(f64::INFINITY, f64::min)
            - cap.radius
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 300, rng_algorithm: proptest::test_runner::RngAlgorithm::ChaCha, ..ProptestConfig::default() })]
        #[test]
        fn capsule_disc_matches_brute_force(ax in -1.0..1.0f64, ay in -1.0..1.0f64, bx in -1.0..1.0f64, by in -1.0..1.0f64,
                                            cx in -1.0..1.0f64, cy in -1.0..1.0f64, r in 0.01..0.5f64, cr in 0.0..0.1f64) {
            let cap = Capsule { a: [ax, ay], b: [bx, by], radius: cr };
            let s = Shape::Disc { center: [cx, cy], radius: r };
            let exact = capsule_shape_distance(&cap, &s);
            let b = brute(&cap, &s);
            // Sampling overestimates the minimum by at most (segment length / k)^2-order; 1e-4 m is ample.
            prop_assert!(exact <= b + 1e-12);
            prop_assert!((exact - b).abs() < 1e-4, "exact {exact} brute {b}");
        }

        #[test]
        fn capsule_box_matches_brute_force(ax in -1.0..1.0f64, ay in -1.0..1.0f64, bx in -1.0..1.0f64, by in -1.0..1.0f64,
                                           cx in -1.0..1.0f64, cy in -1.0..1.0f64, hx in 0.01..0.5f64, hy in 0.01..0.5f64) {
            let cap = Capsule { a: [ax, ay], b: [bx, by], radius: 0.03 };
            let s = Shape::Box { center: [cx, cy], half: [hx, hy] };
            let exact = capsule_shape_distance(&cap, &s);
            let b = brute(&cap, &s);
            prop_assert!((exact - b).abs() < 1e-4, "exact {exact} brute {b}");
        }

        #[test]
        fn segment_segment_matches_brute_force(p in proptest::array::uniform4(-1.0..1.0f64), q in proptest::array::uniform4(-1.0..1.0f64)) {
            let d = segment_segment_distance([p[0], p[1]], [p[2], p[3]], [q[0], q[1]], [q[2], q[3]]);
            let k = 2000;
            let mut best = f64::INFINITY;
            for i in 0..=k {
                let t = i as f64 / k as f64;
                let x = [p[0] + t * (p[2] - p[0]), p[1] + t * (p[3] - p[1])];
                best = best.min(point_segment_distance(x, [q[0], q[1]], [q[2], q[3]]));
            }
            prop_assert!((d - best).abs() < 2e-3, "exact {d} brute {best}");
            prop_assert!(d <= best + 1e-12);
        }
    }

    #[test]
    fn hand_worked_distances() {
        // Segment along x from (0,0) to (1,0), radius 0.1; disc at (0.5, 0.5) radius 0.2: 0.5 - 0.1 - 0.2 = 0.2.
        let cap = Capsule {
            a: [0.0, 0.0],
            b: [1.0, 0.0],
            radius: 0.1,
        };
        let d = capsule_shape_distance(
            &cap,
            &Shape::Disc {
                center: [0.5, 0.5],
                radius: 0.2,
            },
        );
        assert!((d - 0.2).abs() < 1e-12);
        // Beyond the end: disc at (2, 0) r 0.5: 1 - 0.1 - 0.5 = 0.4.
        let d = capsule_shape_distance(
            &cap,
            &Shape::Disc {
                center: [2.0, 0.0],
                radius: 0.5,
            },
        );
        assert!((d - 0.4).abs() < 1e-12);
        // Box centred on the segment's midpoint, half 0.1 x 0.3: deepest point is 0.1 inside; minus radius.
        let d = capsule_shape_distance(
            &cap,
            &Shape::Box {
                center: [0.5, 0.0],
                half: [0.1, 0.3],
            },
        );
        assert!((d - (-0.1 - 0.1)).abs() < 1e-9, "{d}");
        // Boundary clearance: the capsule's tip at x = 1 in a box to x = 1.5: 0.5 - 0.1.
        let c = capsule_boundary_clearance(&cap, [-2.0, -2.0], [1.5, 2.0]);
        assert!((c - 0.4).abs() < 1e-12);
    }
}
