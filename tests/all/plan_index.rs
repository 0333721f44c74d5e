//! The planner's grid index answers exactly what a linear scan over the nodes answers. The reference is the
//! definition itself (brute force over every node; nearest = smallest Euclidean distance, ties to the lowest
//! index, as the scan in insertion order gives), no outside source; the bucketing method is Bentley, Stanat &
//! Williams, "The complexity of finding fixed-radius near neighbors", Information Processing Letters 6(6), 1977.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use termwise::plan::grid_index::{sq_dist, GridIndex};
use termwise::sim::MAX_JOINTS;

type Q = [f64; MAX_JOINTS];

fn point(rng: &mut ChaCha8Rng, bounds: &[(f64, f64)], spill: f64) -> Q {
    let mut q = [0.0; MAX_JOINTS];
    for (i, &(lo, hi)) in bounds.iter().enumerate() {
        q[i] = rng.gen_range(lo - spill..hi + spill);
    }
    q
}

fn check(bounds: &[(f64, f64)], width: f64, count: usize, seed: u64) {
    let n = bounds.len();
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut idx = GridIndex::new(bounds, width);
    let mut nodes: Vec<Q> = Vec::new();
    let mut cand = Vec::new();
    for k in 0..count {
        // Some nodes and queries outside the box (kept in the index's own list), and some exact repeats
        // (equal distances: the lowest index must win).
        let q = if k > 3 && k % 17 == 0 {
            nodes[k / 2]
        } else {
            point(&mut rng, bounds, 0.3)
        };
        idx.insert(nodes.len(), &q);
        nodes.push(q);
        let query = if k % 5 == 0 {
            nodes[rng.gen_range(0..nodes.len())]
        } else {
            point(&mut rng, bounds, 0.2)
        };
        let brute = (0..nodes.len())
            .map(|i| (i, sq_dist(&nodes[i], &query, n)))
            .fold(
                (usize::MAX, f64::INFINITY),
                |b, c| if c.1 < b.1 { c } else { b },
            );
        assert_eq!(
            idx.nearest(&nodes, &query),
            brute,
            "nearest, {n}-d, node {k}"
        );
        let r = rng.gen_range(0.0..width);
        idx.candidates(&query, r, &mut cand);
        for (i, node) in nodes.iter().enumerate() {
            if sq_dist(node, &query, n).sqrt() <= r {
                assert!(cand.contains(&i), "node {i} within {r} missing, {n}-d");
            }
        }
    }
}

#[test]
fn nearest_and_near_queries_match_a_linear_scan_in_two_and_three_dimensions() {
    // Past 1024 nodes the index switches from scanning to searching rings of cells: both regimes are covered.
    check(&[(-3.0, 3.0), (-2.6, 2.6)], 0.5, 2500, 1);
    check(&[(-3.0, 3.0), (-2.7, 2.7), (-2.4, 2.4)], 0.5, 2500, 2);
}

#[test]
fn a_fixed_coordinate_and_a_six_dimensional_box_work_too() {
    check(&[(0.0, 1.0), (0.5, 0.5)], 0.1, 1200, 3);
    check(&[(-1.0, 1.0); 6], 0.4, 1200, 4);
}
