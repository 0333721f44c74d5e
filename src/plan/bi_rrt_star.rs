//! Bidirectional RRT*: one tree from the start and one from the goal configurations (a forest with one root
//! per goal), grown alternately; after each extension the other tree is pulled toward the new node with the
//! greedy Connect step of RRT-Connect (Kuffner & LaValle, "RRT-Connect: An efficient approach to
//! single-query path planning", ICRA 2000), while every insertion in either tree uses RRT* best-parent
//! insertion and rewiring (Karaman & Frazzoli, IJRR 2011, Algorithm 6). This combination is what Klemm et
//! al. call RRT*-Connect (ROBIO 2015; cited from memory). Every meeting of the trees is kept; the cheapest
//! (with the trees' final, rewired costs) gives the path.

use super::planner::{
    capacity, past_deadline, sample_uniform, tree_edges, Budget, Planner, Problem, Search,
};
use super::space::{distance, ConfigSpace};
use super::tree::{Inserted, Tree};
use crate::sim::JointVec;
use rand_chacha::ChaCha8Rng;

/// Bidirectional RRT* with Connect-style joining.
pub struct BiRrtStar;

/// Pull `tree` toward `q` step by step; the node equal to `q` when reached.
fn connect(tree: &mut Tree, space: &dyn ConfigSpace, q: &JointVec) -> Option<usize> {
    let n = space.dim();
    loop {
        match tree.extend(space, q) {
            Inserted::Added(j) => {
                if distance(&tree.nodes[j], q, n) < 1e-12 {
                    return Some(j);
                }
            }
            Inserted::Present(j) => return Some(j),
            Inserted::Blocked => return None,
        }
    }
}

impl Planner for BiRrtStar {
    fn name(&self) -> &'static str {
        "bi-rrt-star"
    }
    fn summary(&self) -> &'static str {
        "two RRT* trees (start, goals) joined by RRT-Connect's greedy Connect step"
    }
    fn search(
        &self,
        space: &dyn ConfigSpace,
        problem: &Problem,
        budget: &Budget,
        rng: &mut ChaCha8Rng,
    ) -> Search {
        let cap = capacity(budget);
        let mut ts = Tree::new(
            space,
            &[problem.start],
            budget.step,
            budget.rewire_factor,
            cap,
        );
        let mut tg = Tree::new(
            space,
            &problem.goals,
            budget.step,
            budget.rewire_factor,
            cap,
        );
        // Meetings (start-tree node, goal-tree node) at the same configuration.
        let mut meetings: Vec<(usize, usize)> = Vec::new();
        let mut out = Search::default();
        for it in 0..budget.iterations {
            if past_deadline(budget, it) {
                out.timed_out = true;
                break;
            }
            out.iterations = it + 1;
            let from_start = it % 2 == 0;
            let (grow, other) = if from_start {
                (&mut ts, &mut tg)
            } else {
                (&mut tg, &mut ts)
            };
            let target = sample_uniform(space, rng);
            let Inserted::Added(i) = grow.extend(space, &target) else {
                continue;
            };
            let q = grow.nodes[i];
            if let Some(j) = connect(other, space, &q) {
                meetings.push(if from_start { (i, j) } else { (j, i) });
            }
        }
        let best = meetings
            .iter()
            .copied()
            .min_by(|a, b| (ts.cost[a.0] + tg.cost[a.1]).total_cmp(&(ts.cost[b.0] + tg.cost[b.1])));
        out.cost = f64::INFINITY;
        if let Some((s, g)) = best {
            out.cost = ts.cost[s] + tg.cost[g];
            let mut path = ts.branch(s);
            let back = tg.branch(g);
            path.extend(back.iter().rev().skip(1));
            out.path = Some(path);
        }
        out.nodes = ts.len() + tg.len();
        out.edges = tree_edges(budget, &[&ts, &tg]);
        out
    }
}
