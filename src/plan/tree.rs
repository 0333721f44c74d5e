//! The RRT* search tree shared by both planners: nodes with parent, cost-to-root and children, nearest
//! neighbours by linear scan, and the RRT* insertion step (best parent among the near nodes, then rewiring),
//! following Karaman & Frazzoli, "Sampling-based algorithms for optimal motion planning", IJRR 2011,
//! Algorithm 6 (RRT*) with the connection radius of Theorem 38.

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
    /// Scratch: squared distance of every node to the current query point.
    dist: Vec<f64>,
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
            dist: Vec::with_capacity(capacity),
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

    /// Fill the distance scratch for query `q`; return the nearest node and its distance.
    fn scan(&mut self, q: &JointVec) -> (usize, f64) {
        self.dist.clear();
        let n = self.n;
        let mut best = (0, f64::INFINITY);
        for (i, v) in self.nodes.iter().enumerate() {
            let mut d2 = 0.0;
            for k in 0..n {
                let t = v[k] - q[k];
                d2 += t * t;
            }
            self.dist.push(d2);
            if d2 < best.1 {
                best = (i, d2);
            }
        }
        (best.0, best.1.sqrt())
    }

    /// Steer from the nearest node toward `target` by at most `step` and insert the result (RRT* Extend).
    pub fn extend(
        &mut self,
        space: &dyn ConfigSpace,
        target: &JointVec,
        cached_scan: bool,
    ) -> Inserted {
        let (nearest, d) = if cached_scan {
            self.nearest_from_scratch()
        } else {
            self.scan(target)
        };
        if d < 1e-12 {
            return Inserted::Present(nearest);
        }
        let (q_new, moved) = if d <= self.step {
            (*target, d)
        } else {
            (
                lerp(&self.nodes[nearest], target, self.step / d, self.n),
                self.step,
            )
        };
        if !space.config_free(&q_new) {
            return Inserted::Blocked;
        }
        // Nodes within r of q_new are at distance (d - moved) +- r from `target` (triangle inequality), so
        // the scan's (squared) distances to `target` prune the candidates without a second full pass.
        let r = self.radius();
        let hi = d - moved + r + 1e-12;
        let lo = (d - moved - r - 1e-12).max(0.0);
        let (hi2, lo2) = (hi * hi, lo * lo);
        self.near.clear();
        for i in 0..self.nodes.len() {
            let d2 = self.dist[i];
            if (d2 <= hi2 && d2 >= lo2) || i == nearest {
                let e = distance(&self.nodes[i], &q_new, self.n);
                if e <= r || i == nearest {
                    self.near.push((i, self.cost[i] + e, e));
                }
            }
        }
        self.insert_with_near(space, q_new)
    }

    fn nearest_from_scratch(&self) -> (usize, f64) {
        let mut best = (0, f64::INFINITY);
        for (i, &d2) in self.dist.iter().enumerate() {
            if d2 < best.1 {
                best = (i, d2);
            }
        }
        (best.0, best.1.sqrt())
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
        let (nearest, d) = self.scan(q);
        if d < 1e-12 {
            return Inserted::Present(nearest);
        }
        if d > self.step {
            return Inserted::Blocked;
        }
        self.extend(space, q, true)
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
