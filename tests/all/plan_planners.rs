//! Checks of the planners against analytic shortest paths for a point robot in the plane, and of their
//! asymptotic optimality (Karaman & Frazzoli, "Sampling-based algorithms for optimal motion planning",
//! IJRR 2011, Theorem 38: RRT* path cost converges to the optimum as samples grow).

use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use termwise::plan::{Budget, ConfigSpace, DiscPlane, Problem, PLANNERS};

fn q(x: f64, y: f64) -> [f64; 6] {
    [x, y, 0.0, 0.0, 0.0, 0.0]
}

fn budget(iterations: usize) -> Budget {
    Budget {
        iterations,
        deadline: None,
        step: 0.3,
        goal_bias: 0.05,
        rewire_factor: 1.1,
        keep_tree: false,
    }
}

/// Shortest path from (-1, 0) to (1, 0) around a disc of radius 0.5 at the origin (elementary geometry:
/// two tangent segments of length sqrt(d^2 - r^2) = sqrt(0.75) and the arc between the tangent points,
/// angle pi - 2 acos(r / d) = pi/3, length r pi/3): sqrt(3) + pi/6 = 2.255649...
fn around_disc() -> (DiscPlane, Problem, f64) {
    let plane = DiscPlane::new([-1.5, -1.5], [1.5, 1.5], vec![([0.0, 0.0], 0.5)]);
    let p = Problem {
        start: q(-1.0, 0.0),
        goals: vec![q(1.0, 0.0)],
    };
    (plane, p, 3f64.sqrt() + std::f64::consts::PI / 6.0)
}

fn assert_valid_path(space: &dyn ConfigSpace, path: &[[f64; 6]], p: &Problem) {
    assert_eq!(path[0], p.start);
    assert!(p.goals.contains(path.last().unwrap()));
    for w in path.windows(2) {
        assert!(space.edge_free(&w[0], &w[1]));
    }
}

#[test]
fn path_around_one_disc_is_within_3_percent_of_the_analytic_shortest() {
    let (plane, p, opt) = around_disc();
    assert!((opt - 2.255_649_1).abs() < 1e-6);
    for planner in PLANNERS {
        for seed in 0..4 {
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            let s = planner.search(&plane, &p, &budget(4000), &mut rng);
            let path = s.path.expect("path around the disc");
            assert_valid_path(&plane, &path, &p);
            let cost = termwise::plan::planner::path_cost(&path, 2);
            assert!((cost - s.cost).abs() < 1e-9);
            // Never shorter than the optimum (it is a lower bound), and within 3 % of it.
            assert!(
                cost >= opt - 1e-9,
                "{} seed {seed}: {cost} < {opt}",
                planner.name()
            );
            assert!(
                cost <= opt * 1.03,
                "{} seed {seed}: {cost} vs {opt}",
                planner.name()
            );
        }
    }
}

#[test]
fn path_in_free_space_is_within_half_a_percent_of_the_straight_line() {
    let plane = DiscPlane::new([0.0, 0.0], [1.0, 1.0], vec![]);
    let p = Problem {
        start: q(0.1, 0.1),
        goals: vec![q(0.9, 0.9)],
    };
    let straight = 0.8 * 2f64.sqrt();
    for planner in PLANNERS {
        for seed in 0..4 {
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            let s = planner.search(&plane, &p, &budget(2000), &mut rng);
            assert_valid_path(&plane, s.path.as_ref().unwrap(), &p);
            assert!(
                s.cost >= straight - 1e-12 && s.cost <= straight * 1.005,
                "{} {}",
                planner.name(),
                s.cost
            );
        }
    }
}

#[test]
fn mean_cost_falls_as_the_budget_grows() {
    // Asymptotic optimality (Karaman & Frazzoli 2011, Theorem 38), seen as a mean over seeds that decreases
    // with the iteration budget toward the analytic optimum.
    let (plane, p, opt) = around_disc();
    for planner in PLANNERS {
        let mut means = Vec::new();
        for iters in [250, 1000, 4000] {
            let m: f64 = (0..8)
                .map(|seed| {
                    let mut rng = ChaCha8Rng::seed_from_u64(100 + seed);
                    planner.search(&plane, &p, &budget(iters), &mut rng).cost
                })
                .sum::<f64>()
                / 8.0;
            means.push(m);
        }
        assert!(
            means[0] > means[1] && means[1] > means[2],
            "{}: {means:?}",
            planner.name()
        );
        assert!(
            means[2] > opt && means[2] < opt * 1.02,
            "{}: {means:?}",
            planner.name()
        );
    }
}

#[test]
fn search_is_deterministic_for_a_seed() {
    let (plane, p, _) = around_disc();
    for planner in PLANNERS {
        let a = planner.search(&plane, &p, &budget(800), &mut ChaCha8Rng::seed_from_u64(9));
        let b = planner.search(&plane, &p, &budget(800), &mut ChaCha8Rng::seed_from_u64(9));
        assert_eq!(a.path, b.path);
        assert_eq!(a.nodes, b.nodes);
    }
}

#[test]
fn blocked_goal_gives_no_path() {
    // A wall from bottom to top: the goal side cannot be reached.
    let plane = DiscPlane::new(
        [0.0, 0.0],
        [1.0, 1.0],
        (0..=10).map(|k| ([0.5, k as f64 * 0.1], 0.08)).collect(),
    );
    let p = Problem {
        start: q(0.1, 0.5),
        goals: vec![q(0.9, 0.5)],
    };
    for planner in PLANNERS {
        let s = planner.search(&plane, &p, &budget(500), &mut ChaCha8Rng::seed_from_u64(1));
        assert!(s.path.is_none() && s.cost.is_infinite() && s.iterations == 500);
    }
}
