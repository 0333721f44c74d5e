//! The RRT* search tree shared by both planners: nodes with parent, cost-to-root and children, nearest
//! neighbours through a grid index (exact, and with the linear scan's tie-breaking), and the RRT* insertion step (best parent among the near nodes, then rewiring),
//! following Karaman & Frazzoli, "Sampling-based algorithms for optimal motion planning", IJRR 2011,
//! Algorithm 6 (RRT*) with the connection radius of Theorem 38.

use super::grid_index::GridIndex;
use super::space::{distance, lerp, ConfigSpace};
use crate::sim::JointVec;

const NONE: usize = usize::MAX;

/// Volume of the unit ball in d dimensions, pi^(d/2) / Gamma(d/2 + 1).
pub fn unit_ball_volume(d: usize) -> f64 {
    use std::f64::consts::PI;
    match d {
        1 => 2.0,
        2 => PI,
        3 => 4.0 / 3.0 * PI,
        4 => PI * PI / 2.0,
        5 => 8.0 / 15.0 * PI * PI,
        _ => PI * PI * PI / 6.0,
    }
}

/// A tree (or forest, when it has several roots) of configurations.
pub struct Tree {
    n: usize,
    pub nodes: Vec<JointVec>,
    pub parent: Vec<usize>,
    pub cost: Vec<f64>,
    children: Vec<Vec<usize>>,
    /// The nodes bucketed by grid cell, for the nearest and near queries.
    index: GridIndex,
    /// Scratch: candidate nodes of a near query.
    cand: Vec<usize>,
    /// Scratch: near candidates (node, cost through it, edge length).
    near: Vec<(usize, f64, f64)>,
    /// Scratch: the subtree walk of `reparent`.
    stack: Vec<usize>,
    /// gamma of the RRT* radius r(k) = min(gamma (ln k / k)^(1/d), step).
    gamma: f64,
    step: f64,
}

/// What an insertion attempt did.
pub enum Inserted {
    /// The configuration was added as this node.
    Added(usize),
    /// The configuration already is this node.
    Present(usize),
    /// No collision-free connection from any near node.
    Blocked,
}

impl Tree {
    /// A tree over `space` with the given roots (cost 0), steering step and rewiring radius factor
    /// (gamma = factor * gamma*, gamma* = 2 (1 + 1/d)^(1/d) (mu(X) / zeta_d)^(1/d), K&F 2011 Theorem 38).
    pub fn new(
        space: &dyn ConfigSpace,
        roots: &[JointVec],
        step: f64,
        rewire_factor: f64,
        capacity: usize,
    ) -> Tree {
        let d = space.dim();
        let df = d as f64;
        let gamma_star = 2.0
            * (1.0 + 1.0 / df).powf(1.0 / df)
            * (space.volume() / unit_ball_volume(d)).powf(1.0 / df);
        let mut t = Tree {
            n: d,
            nodes: Vec::with_capacity(capacity),
            parent: Vec::with_capacity(capacity),
            cost: Vec::with_capacity(capacity),
            children: Vec::with_capacity(capacity),
            index: GridIndex::new(&(0..d).map(|i| space.bounds(i)).collect::<Vec<_>>(), step),
            cand: Vec::new(),
            near: Vec::new(),
            stack: Vec::new(),
            gamma: rewire_factor * gamma_star,
            step,
        };
        for r in roots {
            t.push(*r, NONE, 0.0);
        }
        t
    }

    fn push(&mut self, q: JointVec, parent: usize, cost: f64) -> usize {
        let id = self.nodes.len();
        self.index.insert(id, &q);
        self.nodes.push(q);
        self.parent.push(parent);
        self.cost.push(cost);
        self.children.push(Vec::new());
        if parent != NONE {
            self.children[parent].push(id);
        }
        id
    }

    pub fn len(&self) -> usize {
        self.nodes.len()
    }

    pub fn is_empty(&self) -> bool {
        self.nodes.is_empty()
    }

    /// The RRT* connection radius for the current node count.
    pub fn radius(&self) -> f64 {
        let k = self.len().max(2) as f64;
        (self.gamma * (k.ln() / k).powf(1.0 / self.n as f64)).min(self.step)
    }

    /// The nearest node to `q` and its distance (ties: the lowest index).
    fn nearest(&self, q: &JointVec) -> (usize, f64) {
        let (i, d2) = self.index.nearest(&self.nodes, q);
        (i, d2.sqrt())
    }

    /// Steer from the nearest node toward `target` by at most `step` and insert the result (RRT* Extend).
    pub fn extend(&mut self, space: &dyn ConfigSpace, target: &JointVec) -> Inserted {
        let (nearest, d) = self.nearest(target);
        self.extend_from(space, target, nearest, d)
    }

    /// `extend` with the nearest node already known (`d`: its distance to `target`).
    fn extend_from(
        &mut self,
        space: &dyn ConfigSpace,
        target: &JointVec,
        nearest: usize,
        d: f64,
    ) -> Inserted {
        if d < 1e-12 {
            return Inserted::Present(nearest);
        }
        let q_new = if d <= self.step {
            *target
        } else {
            lerp(&self.nodes[nearest], target, self.step / d, self.n)
        };
        if !space.config_free(&q_new) {
            return Inserted::Blocked;
        }
        // The near set: every node within r of q_new, and the nearest node, in index order.
        let r = self.radius();
        let mut cand = std::mem::take(&mut self.cand);
        self.index.candidates(&q_new, r, &mut cand);
        cand.sort_unstable();
        self.near.clear();
        let mut have_nearest = false;
        for &i in &cand {
            let e = distance(&self.nodes[i], &q_new, self.n);
            if e <= r || i == nearest {
                have_nearest |= i == nearest;
                self.near.push((i, self.cost[i] + e, e));
            }
        }
        self.cand = cand;
        if !have_nearest {
            let e = distance(&self.nodes[nearest], &q_new, self.n);
            let at = self.near.partition_point(|c| c.0 < nearest);
            self.near.insert(at, (nearest, self.cost[nearest] + e, e));
        }
        self.insert_with_near(space, q_new)
    }

    /// Choose the cheapest collision-free parent among `self.near` (candidates checked in order of cost, so
    /// only edges that could win are checked), add the node, then rewire the near nodes through it.
    fn insert_with_near(&mut self, space: &dyn ConfigSpace, q_new: JointVec) -> Inserted {
        let mut near = std::mem::take(&mut self.near);
        near.sort_by(|a, b| a.1.total_cmp(&b.1));
        let mut chosen = None;
        for (k, &(i, c, _)) in near.iter().enumerate() {
            // Edges are checked from the tree side (its end is known valid).
            if space.edge_free(&self.nodes[i], &q_new) {
                chosen = Some((k, i, c));
                break;
            }
        }
        let Some((k_parent, parent, c_new)) = chosen else {
            self.near = near;
            return Inserted::Blocked;
        };
        let id = self.push(q_new, parent, c_new);
        // Rewire: a near node is re-parented to the new node when that is cheaper and the edge is free.
        for (k, &(i, _, e)) in near.iter().enumerate() {
            if k == k_parent || self.parent[i] == NONE {
                continue;
            }
            let through = c_new + e;
            if through + 1e-12 < self.cost[i] && space.edge_free(&q_new, &self.nodes[i]) {
                self.reparent(i, id, through);
            }
        }
        self.near = near;
        Inserted::Added(id)
    }

    /// Move node `i` under `p` with new cost `c`, and lower the costs of its descendants by the same amount.
    fn reparent(&mut self, i: usize, p: usize, c: f64) {
        let old = self.parent[i];
        if let Some(pos) = self.children[old].iter().position(|&x| x == i) {
            self.children[old].swap_remove(pos);
        }
        self.parent[i] = p;
        self.children[p].push(i);
        let delta = self.cost[i] - c;
        let mut stack = std::mem::take(&mut self.stack);
        stack.clear();
        stack.push(i);
        while let Some(v) = stack.pop() {
            self.cost[v] -= delta;
            stack.extend_from_slice(&self.children[v]);
        }
        self.stack = stack;
    }

    /// Insert `q` exactly (no steering) when some node lies within the step of it; used to attach goals.
    pub fn insert_exact(&mut self, space: &dyn ConfigSpace, q: &JointVec) -> Inserted {
        let (nearest, d) = self.nearest(q);
        if d < 1e-12 {
            return Inserted::Present(nearest);
        }
        if d > self.step {
            return Inserted::Blocked;
        }
        self.extend_from(space, q, nearest, d)
    }

    /// The configurations from node `i`'s root to node `i`.
    pub fn branch(&self, mut i: usize) -> Vec<JointVec> {
        let mut out = vec![self.nodes[i]];
        while self.parent[i] != NONE {
            i = self.parent[i];
            out.push(self.nodes[i]);
        }
        out.reverse();
        out
    }

    /// Every (parent, child) edge, for drawing.
    pub fn edges(&self) -> Vec<(JointVec, JointVec)> {
        (0..self.len())
            .filter(|&i| self.parent[i] != NONE)
            .map(|i| (self.nodes[self.parent[i]], self.nodes[i]))
            .collect()
    }
}
