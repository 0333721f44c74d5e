//! Post-processing of a planned path: shortcutting (a greedy pass over the vertices, then random
//! shortcuts between points anywhere on the path, in the manner of Geraerts & Overmars, "Creating
//! high-quality paths for motion planning", IJRR 2007 — cited from memory) and resampling into K waypoints
//! evenly spaced along the path's length.

use super::space::{distance, lerp, ConfigSpace};
use crate::sim::JointVec;
use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// Greedy vertex shortcut: from each kept vertex jump to the farthest later vertex with a free straight edge.
pub fn shortcut_vertices(space: &dyn ConfigSpace, path: &[JointVec]) -> Vec<JointVec> {
    let mut out = vec![path[0]];
    let mut i = 0;
    while i + 1 < path.len() {
        let mut j = path.len() - 1;
        while j > i + 1 && !space.edge_free(&path[i], &path[j]) {
            j -= 1;
        }
        out.push(path[j]);
        i = j;
    }
    out
}

/// The point at arc length `s` along `path` and the index of the segment holding it.
fn point_at(path: &[JointVec], cum: &[f64], s: f64, n: usize) -> (usize, JointVec) {
    let k = cum.partition_point(|&c| c <= s).clamp(1, path.len() - 1) - 1;
    let len = cum[k + 1] - cum[k];
    let t = if len > 0.0 {
        ((s - cum[k]) / len).clamp(0.0, 1.0)
    } else {
        0.0
    };
    (k, lerp(&path[k], &path[k + 1], t, n))
}

/// Cumulative arc length at each vertex.
pub fn cumulative(path: &[JointVec], n: usize) -> Vec<f64> {
    let mut cum = Vec::with_capacity(path.len());
    let mut acc = 0.0;
    cum.push(0.0);
    for w in path.windows(2) {
        acc += distance(&w[0], &w[1], n);
        cum.push(acc);
    }
    cum
}

/// `passes` random shortcuts: two points drawn uniformly along the path are joined directly when the
/// straight edge between them is free (which never lengthens the path, by the triangle inequality).
pub fn shortcut_random(
    space: &dyn ConfigSpace,
    path: Vec<JointVec>,
    passes: usize,
    rng: &mut ChaCha8Rng,
) -> Vec<JointVec> {
    let n = space.dim();
    let mut path = path;
    for _ in 0..passes {
        if path.len() < 3 {
            break;
        }
        let cum = cumulative(&path, n);
        let total = cum[cum.len() - 1];
        let (mut s1, mut s2) = (rng.gen::<f64>() * total, rng.gen::<f64>() * total);
        if s1 > s2 {
            std::mem::swap(&mut s1, &mut s2);
        }
        let (i, p1) = point_at(&path, &cum, s1, n);
        let (j, p2) = point_at(&path, &cum, s2, n);
        if j <= i || !space.edge_free(&p1, &p2) {
            continue;
        }
        let mut next = Vec::with_capacity(path.len());
        next.extend_from_slice(&path[..=i]);
        if distance(&p1, &path[i], n) > 1e-12 {
            next.push(p1);
        }
        if distance(&p2, &path[j + 1], n) > 1e-12 {
            next.push(p2);
        }
        next.extend_from_slice(&path[j + 1..]);
        path = next;
    }
    path
}

/// `k` points evenly spaced along the path's length (first = start, last = end).
pub fn resample(path: &[JointVec], k: usize, n: usize) -> Vec<JointVec> {
    if path.len() == 1 {
        return vec![path[0]; k];
    }
    let cum = cumulative(path, n);
    let total = cum[cum.len() - 1];
    (0..k)
        .map(|m| {
            if m + 1 == k {
                path[path.len() - 1]
            } else {
                point_at(path, &cum, total * m as f64 / (k - 1) as f64, n).1
            }
        })
        .collect()
}
