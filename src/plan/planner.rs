//! The planner plug point: a `Planner` trait (a name and one search method over any `ConfigSpace`), the
//! search problem and budget it receives, what it returns, and the helpers planners share. The registry
//! keyed by the TOML name (`plan.planner`) is `PLANNERS` in `plan/mod.rs`: a new planner is one file plus one
//! line there.

use super::space::{distance, ConfigSpace};
use super::tree::Tree;
use crate::sim::JointVec;
use rand::Rng;
use rand_chacha::ChaCha8Rng;
use std::time::Instant;

/// Start and goal configurations (the search succeeds by reaching any goal).
#[derive(Clone, Debug)]
pub struct Problem {
    pub start: JointVec,
    /// Goal configurations, each valid in the space (at least one).
    pub goals: Vec<JointVec>,
}

/// Search settings taken from `PlanSpec` (see its field docs for meaning and defaults).
#[derive(Clone, Copy, Debug)]
pub struct Budget {
    /// Samples to draw.
    pub iterations: usize,
    /// Stop drawing samples after this moment (the only non-deterministic input).
    pub deadline: Option<Instant>,
    /// Largest edge added in one extension, configuration-space units.
    pub step: f64,
    /// Probability of sampling a goal configuration instead of a uniform one (unidirectional planner).
    pub goal_bias: f64,
    /// Multiplier on the RRT* radius constant gamma*.
    pub rewire_factor: f64,
    /// Keep the tree edges in the result (for drawing).
    pub keep_tree: bool,
}

/// The outcome of one search.
#[derive(Clone, Debug, Default)]
pub struct Search {
    /// The lowest-cost path found, start first, a goal last (None when no goal was reached).
    pub path: Option<Vec<JointVec>>,
    /// Its length (Euclidean, configuration-space units); infinite without a path.
    pub cost: f64,
    /// Samples drawn.
    pub iterations: usize,
    /// True when the deadline stopped the search before the iteration budget was used.
    pub timed_out: bool,
    /// Tree nodes at the end (both trees for the bidirectional planner).
    pub nodes: usize,
    /// Tree edges when `Budget::keep_tree` is set.
    pub edges: Vec<(JointVec, JointVec)>,
}

/// A sampling-based path planner over a configuration space.
///
/// ```
/// use rand::SeedableRng;
/// use termwise::plan::{planner_by_name, Budget, DiscPlane, Problem};
/// let plane = DiscPlane::new([0.0, 0.0], [1.0, 1.0], vec![([0.5, 0.5], 0.2)]);
/// let mut q0 = [0.0; 6];
/// let mut q1 = [0.0; 6];
/// (q0[0], q0[1], q1[0], q1[1]) = (0.1, 0.5, 0.9, 0.5);
/// let problem = Problem { start: q0, goals: vec![q1] };
/// let budget = Budget { iterations: 500, deadline: None, step: 0.2, goal_bias: 0.05,
///                       rewire_factor: 1.1, keep_tree: false };
/// let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(1);
/// let found = planner_by_name("rrt-star").unwrap().search(&plane, &problem, &budget, &mut rng);
/// assert!(found.path.is_some() && found.cost > 0.8);
/// ```
pub trait Planner: Sync {
    /// The name used in TOML (`plan.planner`).
    fn name(&self) -> &'static str;
    /// One line for listings and help text.
    fn summary(&self) -> &'static str;
    /// Search for a path from `problem.start` to any of `problem.goals`.
    fn search(
        &self,
        space: &dyn ConfigSpace,
        problem: &Problem,
        budget: &Budget,
        rng: &mut ChaCha8Rng,
    ) -> Search;
}

/// A uniform sample in the space's bounding box.
pub fn sample_uniform(space: &dyn ConfigSpace, rng: &mut ChaCha8Rng) -> JointVec {
    let mut q = [0.0; crate::sim::MAX_JOINTS];
    for (i, v) in q.iter_mut().enumerate().take(space.dim()) {
        let (lo, hi) = space.bounds(i);
        *v = lo + (hi - lo) * rng.gen::<f64>();
    }
    q
}

/// Whether the deadline has passed (checked every 16 iterations to keep the clock off the hot path).
pub fn past_deadline(budget: &Budget, iteration: usize) -> bool {
    iteration % 16 == 0 && budget.deadline.is_some_and(|d| Instant::now() >= d)
}

/// The path's length over the first `n` coordinates.
pub fn path_cost(path: &[JointVec], n: usize) -> f64 {
    path.windows(2).map(|w| distance(&w[0], &w[1], n)).sum()
}

/// Initial tree capacity for a budget (avoids regrowth on the hot path).
pub fn capacity(budget: &Budget) -> usize {
    (budget.iterations + 16).min(1 << 20)
}

/// Edges of one or two trees when the budget asks for them.
pub fn tree_edges(budget: &Budget, trees: &[&Tree]) -> Vec<(JointVec, JointVec)> {
    if budget.keep_tree {
        trees.iter().flat_map(|t| t.edges()).collect()
    } else {
        Vec::new()
    }
}
