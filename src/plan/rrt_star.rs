//! RRT* (Karaman & Frazzoli, "Sampling-based algorithms for optimal motion planning", IJRR 2011,
//! Algorithm 6): one tree from the start, goal-biased uniform sampling, best-parent insertion and rewiring;
//! goal configurations are attached as ordinary nodes (so rewiring keeps improving them) and the cheapest
//! one reached when the budget ends gives the path.

use super::planner::{
    capacity, past_deadline, sample_uniform, tree_edges, Budget, Planner, Problem, Search,
};
use super::space::{distance, ConfigSpace};
use super::tree::{Inserted, Tree};
use rand::Rng;
use rand_chacha::ChaCha8Rng;

/// Unidirectional RRT*.
pub struct RrtStar;

impl Planner for RrtStar {
    fn name(&self) -> &'static str {
        "rrt-star"
    }
    fn summary(&self) -> &'static str {
        "RRT* from the start with goal-biased sampling (Karaman & Frazzoli, IJRR 2011)"
    }
    fn search(
        &self,
        space: &dyn ConfigSpace,
        problem: &Problem,
        budget: &Budget,
        rng: &mut ChaCha8Rng,
    ) -> Search {
        let n = space.dim();
        let goals = &problem.goals;
        let mut tree = Tree::new(
            space,
            &[problem.start],
            budget.step,
            budget.rewire_factor,
            capacity(budget),
        );
        let mut goal_node: Vec<Option<usize>> = vec![None; goals.len()];
        let mut out = Search::default();
        for it in 0..budget.iterations {
            if past_deadline(budget, it) {
                out.timed_out = true;
                break;
            }
            out.iterations = it + 1;
            let target = if !goals.is_empty() && rng.gen::<f64>() < budget.goal_bias {
                goals[rng.gen_range(0..goals.len())]
            } else {
                sample_uniform(space, rng)
            };
            let Inserted::Added(id) = tree.extend(space, &target) else {
                continue;
            };
            for (k, g) in goals.iter().enumerate() {
                if goal_node[k].is_some() {
                    continue;
                }
                let d = distance(&tree.nodes[id], g, n);
                if d < 1e-12 {
                    goal_node[k] = Some(id);
                } else if d <= budget.step {
                    if let Inserted::Added(j) | Inserted::Present(j) = tree.insert_exact(space, g) {
                        goal_node[k] = Some(j);
                    }
                }
            }
        }
        let best = goal_node
            .iter()
            .flatten()
            .copied()
            .min_by(|&a, &b| tree.cost[a].total_cmp(&tree.cost[b]));
        out.cost = f64::INFINITY;
        if let Some(b) = best {
            out.cost = tree.cost[b];
            out.path = Some(tree.branch(b));
        }
        out.nodes = tree.len();
        out.edges = tree_edges(budget, &[&tree]);
        out
    }
}
