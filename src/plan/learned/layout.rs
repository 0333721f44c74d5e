//! What a waypoint model was trained for and how its input is laid out: the arm (link lengths, the planner's
//! joint box), the obstacle slots with their kinds, K, and the one encoding of (q, goal, obstacles) into the
//! network's input that the data set, training and `WaypointModel::predict` all use.

use super::{ArmSpace, ConfigSpace, PlanSpec};
use crate::plan::ik::wrap_angle;
use crate::sim::{ArmEnv, JointVec, Scenario, Shape, MAX_JOINTS};
use serde::{Deserialize, Serialize};

/// Input values per obstacle slot: kind one-hot (disc, box), centre x and y, size (a disc's radius and 0, or a
/// box's half extents). A slot with no obstacle (fewer active obstacles than slots) is all zeros.
pub const SLOT_VALUES: usize = 6;

/// The arm, obstacle slots and waypoint count a model was trained for (`model.json`, `dataset.json`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Layout {
    /// Scenario the data came from (for messages only; not checked).
    pub scenario: String,
    /// Number of joints n.
    pub joints: usize,
    /// Link lengths, m.
    pub link_lengths: Vec<f64>,
    /// The planner's box per joint, rad: the joint limits within [-pi, pi] (`plan::ArmSpace::bounds`), as
    /// [lower, upper].
    pub joint_bounds: Vec<[f64; 2]>,
    /// Kind of each obstacle slot, "disc" or "box" (the scenario's obstacles, in file order).
    pub obstacle_slots: Vec<String>,
    /// Waypoints K of a reference path (waypoint 0 is the configuration the path starts from).
    pub waypoints: usize,
}

fn kind(s: &Shape) -> &'static str {
    match s {
        Shape::Disc { .. } => "disc",
        Shape::Box { .. } => "box",
    }
}

fn list(v: &[f64]) -> String {
    let s: Vec<String> = v.iter().map(|x| format!("{x}")).collect();
    format!("[{}]", s.join(", "))
}

impl Layout {
    /// The layout of `scenario`'s arm and obstacles with `plan.waypoints` waypoints.
    pub fn of(scenario: &Scenario, plan: &PlanSpec) -> Layout {
        let env = ArmEnv::new(std::sync::Arc::new(scenario.clone()));
        let space = ArmSpace::new(&env, crate::plan::MIN_MARGIN);
        Layout {
            scenario: scenario.name.clone(),
            joints: scenario.n(),
            link_lengths: scenario.arm.links.iter().map(|l| l.length).collect(),
            joint_bounds: (0..scenario.n())
                .map(|i| {
                    let (lo, hi) = space.bounds(i);
                    [lo, hi]
                })
                .collect(),
            obstacle_slots: scenario
                .obstacles
                .iter()
                .map(|o| kind(&o.shape).to_string())
                .collect(),
            waypoints: plan.waypoints,
        }
    }

    /// Network input width: n joint angles, the goal, `SLOT_VALUES` per obstacle slot.
    pub fn input_dim(&self) -> usize {
        self.joints + 2 + SLOT_VALUES * self.obstacle_slots.len()
    }

    /// Network output width: the joint angles of waypoints 1..K-1.
    pub fn output_dim(&self) -> usize {
        self.joints * (self.waypoints - 1)
    }

    /// Column names of the input, in order (the data set's header).
    pub fn input_names(&self) -> Vec<String> {
        let mut v: Vec<String> = (1..=self.joints).map(|i| format!("q{i}")).collect();
        v.extend(["goal_x".to_string(), "goal_y".to_string()]);
        for k in 1..=self.obstacle_slots.len() {
            for s in ["disc", "box", "x", "y", "size1", "size2"] {
                v.push(format!("o{k}_{s}"));
            }
        }
        v
    }

    /// Column names of the output, in order: `w<k>_q<i>` for waypoint k = 1..K-1 and joint i.
    pub fn output_names(&self) -> Vec<String> {
        let mut v = Vec::new();
        for k in 1..self.waypoints {
            for i in 1..=self.joints {
                v.push(format!("w{k}_q{i}"));
            }
        }
        v
    }

    /// `Err(what differs)` when `other` (the layout of a scenario and plan to be used) is not this one: link
    /// count, link lengths, joint bounds, obstacle slots (count and kinds) or K.
    pub fn check(&self, other: &Layout) -> Result<(), String> {
        let (me, it) = (&self.scenario, &other.scenario);
        let head = format!("the waypoint model was trained on scenario `{me}`");
        if self.joints != other.joints {
            return Err(format!(
                "{head} with a {}-joint arm; scenario `{it}` has {} joints",
                self.joints, other.joints
            ));
        }
        let differs = |a: f64, b: f64| (a - b).abs() > 1e-9 * (1.0 + a.abs());
        if let Some(i) =
            (0..self.joints).find(|&i| differs(self.link_lengths[i], other.link_lengths[i]))
        {
            return Err(format!(
                "{head} with link lengths {} m; scenario `{it}` has {} m (link {} differs)",
                list(&self.link_lengths),
                list(&other.link_lengths),
                i + 1
            ));
        }
        if let Some(i) = (0..self.joints)
            .find(|&i| (0..2).any(|k| differs(self.joint_bounds[i][k], other.joint_bounds[i][k])))
        {
            let (a, b) = (self.joint_bounds[i], other.joint_bounds[i]);
            return Err(format!(
                "{head} with joint {} limited to [{}, {}] rad; scenario `{it}` limits it to [{}, {}] rad",
                i + 1,
                a[0],
                a[1],
                b[0],
                b[1]
            ));
        }
        if self.obstacle_slots != other.obstacle_slots {
            return Err(format!(
                "{head} with {} obstacle slot(s) [{}]; scenario `{it}` has {} obstacle(s) [{}]",
                self.obstacle_slots.len(),
                self.obstacle_slots.join(", "),
                other.obstacle_slots.len(),
                other.obstacle_slots.join(", ")
            ));
        }
        if self.waypoints != other.waypoints {
            return Err(format!(
                "{head} with K = {} waypoints; the plan settings ask for plan.waypoints = {}",
                self.waypoints, other.waypoints
            ));
        }
        Ok(())
    }

    /// The configuration in the planner's frame: a joint outside its box whose wrapped angle lies inside is
    /// wrapped (as `plan::plan_detailed` does). Returns (frame configuration, offset added back afterwards).
    pub fn frame(&self, q: &[f64]) -> (JointVec, JointVec) {
        let mut f = [0.0; MAX_JOINTS];
        let mut off = [0.0; MAX_JOINTS];
        for i in 0..self.joints {
            let [lo, hi] = self.joint_bounds[i];
            f[i] = q[i];
            if q[i] < lo || q[i] > hi {
                let w = wrap_angle(q[i]);
                if w >= lo && w <= hi {
                    f[i] = w;
                    off[i] = q[i] - w;
                }
            }
        }
        (f, off)
    }

    /// Write the network input for configuration `q` (planner frame, first n entries), `goal` and the
    /// `obstacles` into `out[..input_dim()]`. Obstacles beyond the slots are ignored; missing ones leave their
    /// slot zero.
    pub fn encode(&self, q: &[f64], goal: [f64; 2], obstacles: &[Shape], out: &mut [f64]) {
        let n = self.joints;
        out[..n].copy_from_slice(&q[..n]);
        out[n] = goal[0];
        out[n + 1] = goal[1];
        let slots = &mut out[n + 2..self.input_dim()];
        slots.fill(0.0);
        for (s, o) in slots.chunks_exact_mut(SLOT_VALUES).zip(obstacles) {
            match *o {
                Shape::Disc { center, radius } => {
                    s.copy_from_slice(&[1.0, 0.0, center[0], center[1], radius, 0.0])
                }
                Shape::Box { center, half } => {
                    s.copy_from_slice(&[0.0, 1.0, center[0], center[1], half[0], half[1]])
                }
            }
        }
    }
}
