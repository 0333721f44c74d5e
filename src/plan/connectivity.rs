//! A quick, resolution-limited answer to "is there any collision-free path from this start to this goal?" for
//! two-link arms: the joint-space box the planner searches (joint limits within [-pi, pi], no wrapping) is
//! divided into a grid, each cell marked free when its centre keeps the planner's clearance margin, and the free
//! cells are labelled by 4-connected components (flood fill). A start and a goal whose configurations lie in
//! different components have no path at this resolution, so the episode can be drawn again without spending a
//! generous planner budget on it. Used only to reject: a start and goal in one component still go to the planner.
//! A start closer to contact than twice the margin is never rejected: the planner then lowers its margin to half
//! the start's clearance (`plan::plan_detailed`), so a grid at the full margin would reject draws it can solve
//! (4 of 64 rejected quickstart draws with a 2 cm margin, before this rule).

use crate::plan::ik;
use crate::sim::{ArmEnv, JointVec, Shape, MAX_JOINTS};
use std::sync::{Arc, Mutex};

/// Grids kept by `ConnectivityGrid::shared` (the oldest is dropped beyond this many).
const SHARED_GRIDS: usize = 16;

/// Every input a grid depends on, as exact bit patterns: the links' lengths, radii and limits, the workspace
/// box, self-collision, the current obstacles and the margin.
fn grid_key(env: &ArmEnv, margin: f64) -> Vec<u64> {
    let sc = env.scenario();
    let mut k = vec![sc.n() as u64, sc.self_collision as u64, margin.to_bits()];
    for l in &sc.arm.links {
        k.extend([l.length, l.radius, l.q_min, l.q_max].map(f64::to_bits));
    }
    k.extend(
        [sc.workspace_min, sc.workspace_max]
            .iter()
            .flatten()
            .map(|x| x.to_bits()),
    );
    for s in env.obstacles() {
        match *s {
            Shape::Disc { center, radius } => {
                k.extend([0.0, center[0], center[1], radius].map(f64::to_bits))
            }
            Shape::Box { center, half } => {
                k.extend([1.0, center[0], center[1], half[0], half[1]].map(f64::to_bits))
            }
        }
    }
    k
}

type SharedGrids = Vec<(Vec<u64>, Arc<Option<ConnectivityGrid>>)>;
static SHARED: Mutex<SharedGrids> = Mutex::new(Vec::new());

/// Cells per joint. 256 cells over 2 pi rad is 0.025 rad, about 2 cm of effector motion for the shipped arms.
pub const CELLS: usize = 256;

/// Connected components of the free cells of a two-link arm's joint space.
#[derive(Clone, Debug, PartialEq)]
pub struct ConnectivityGrid {
    lo: [f64; 2],
    step: [f64; 2],
    /// Component label per cell (row-major, joint 0 fastest); 0 = blocked.
    label: Vec<u32>,
    /// The clearance margin the free cells keep, m.
    margin: f64,
}

impl ConnectivityGrid {
    /// The grid of `env`'s arm among its current obstacles, cells free when their centre has clearance
    /// >= `margin`. None for arms with other than two joints.
    pub fn build(env: &ArmEnv, margin: f64) -> Option<ConnectivityGrid> {
        let arm = &env.scenario().arm;
        if arm.n() != 2 {
            return None;
        }
        let mut lo = [0.0; 2];
        let mut step = [0.0; 2];
        for (i, l) in arm.links.iter().enumerate() {
            let a = l.q_min.max(-std::f64::consts::PI);
            let b = l.q_max.min(std::f64::consts::PI);
            lo[i] = a;
            step[i] = (b - a).max(0.0) / CELLS as f64;
        }
        let mut free = vec![false; CELLS * CELLS];
        for j in 0..CELLS {
            for i in 0..CELLS {
                let q = [
                    lo[0] + (i as f64 + 0.5) * step[0],
                    lo[1] + (j as f64 + 0.5) * step[1],
                ];
                free[j * CELLS + i] = env.clearances(&q).0 >= margin;
            }
        }
        let mut label = vec![0u32; CELLS * CELLS];
        let mut next = 0u32;
        let mut stack = Vec::new();
        for start in 0..CELLS * CELLS {
            if !free[start] || label[start] != 0 {
                continue;
            }
            next += 1;
            label[start] = next;
            stack.push(start);
            while let Some(c) = stack.pop() {
                let (i, j) = (c % CELLS, c / CELLS);
                let mut visit = |k: usize| {
                    if free[k] && label[k] == 0 {
                        label[k] = next;
                        stack.push(k);
                    }
                };
                if i > 0 {
                    visit(c - 1);
                }
                if i + 1 < CELLS {
                    visit(c + 1);
                }
                if j > 0 {
                    visit(c - CELLS);
                }
                if j + 1 < CELLS {
                    visit(c + CELLS);
                }
            }
        }
        Some(ConnectivityGrid {
            lo,
            step,
            label,
            margin,
        })
    }

    /// `build`, computed once per process for each distinct arm, workspace, obstacle layout and margin (a
    /// run's training environments and its evaluations share one grid). The grid is a pure function of those
    /// inputs, so sharing changes no result.
    pub fn shared(env: &ArmEnv, margin: f64) -> Arc<Option<ConnectivityGrid>> {
        let key = grid_key(env, margin);
        let find = |grids: &SharedGrids| {
            grids
                .iter()
                .find(|(k, _)| *k == key)
                .map(|(_, g)| g.clone())
        };
        if let Some(g) = find(&SHARED.lock().unwrap_or_else(|e| e.into_inner())) {
            return g;
        }
        // Built outside the lock (another thread may build the same grid meanwhile: both are equal).
        let g = Arc::new(ConnectivityGrid::build(env, margin));
        let mut grids = SHARED.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(found) = find(&grids) {
            return found;
        }
        if grids.len() >= SHARED_GRIDS {
            grids.remove(0);
        }
        grids.push((key, g.clone()));
        g
    }

    /// The component of configuration q: its cell's, or when that cell is blocked (q close to an obstacle) the
    /// component of a free neighbouring cell (None if all are blocked or q lies outside the box).
    pub fn component(&self, q: &[f64]) -> Option<u32> {
        let mut cell = [0i64; 2];
        for k in 0..2 {
            if self.step[k] <= 0.0 {
                return None;
            }
            let x = ((q[k] - self.lo[k]) / self.step[k]).floor();
            if !(x > -1.5 && x < CELLS as f64 + 0.5) {
                return None;
            }
            cell[k] = x as i64;
        }
        let at = |i: i64, j: i64| -> Option<u32> {
            if i < 0 || j < 0 || i >= CELLS as i64 || j >= CELLS as i64 {
                return None;
            }
            let l = self.label[j as usize * CELLS + i as usize];
            (l != 0).then_some(l)
        };
        at(cell[0], cell[1]).or_else(|| {
            [
                (-1, 0),
                (1, 0),
                (0, -1),
                (0, 1),
                (-1, -1),
                (1, 1),
                (-1, 1),
                (1, -1),
            ]
            .iter()
            .find_map(|(di, dj)| at(cell[0] + di, cell[1] + dj))
        })
    }

    /// Whether some inverse-kinematics solution for the effector goal keeps the margin and lies in the start's
    /// component. Free joints that wound past +-pi are wrapped first (as the planner does).
    pub fn may_connect(&self, env: &ArmEnv, start: &JointVec, goal: [f64; 2]) -> bool {
        let arm = &env.scenario().arm;
        if env.clearances(&start[..2]).0 < 2.0 * self.margin {
            return true; // the planner will work with a smaller margin than the grid's
        }
        let mut s = [0.0; MAX_JOINTS];
        for i in 0..2 {
            s[i] = start[i];
            if s[i] < self.lo[i] || s[i] > self.hi(i) {
                s[i] = ik::wrap_angle(s[i]);
            }
        }
        let Some(c) = self.component(&s[..2]) else {
            return true; // cannot tell: leave it to the planner
        };
        // Only goal configurations the planner may aim at count: it drops those outside the joint box or closer
        // to contact than its margin (`plan::goal_configurations`, `plan::plan_detailed`). Such a configuration
        // would otherwise borrow a free neighbouring cell's label, and the planner would spend its generous budget
        // on a goal it cannot aim at (80 of 118 quickstart draws that failed it, in one 500k-step run).
        let margin = self.margin.max(crate::plan::MIN_MARGIN);
        let inside = |g: &[f64]| (0..2).all(|i| g[i] >= self.lo[i] && g[i] <= self.hi(i));
        ik::two_link(arm.links[0].length, arm.links[1].length, goal)
            .iter()
            .any(|g| {
                inside(g) && self.component(g) == Some(c) && env.clearances(&g[..2]).0 >= margin
            })
    }

    /// Upper bound of the box on joint i.
    fn hi(&self, i: usize) -> f64 {
        self.lo[i] + self.step[i] * CELLS as f64
    }
}
