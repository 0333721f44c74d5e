//! The learned waypoint model at query time: a small network that imitates the planner, fast enough to ask at
//! every control step. `termwise waypoint-model` builds one (module `waypoint_model`: a data set of planner
//! solutions, supervised training, a quality report); episodes load it (`WaypointModel::load`), check it fits
//! their arm and obstacles (`check_fits`) and ask it for a reference path (`predict`). This part knows only the
//! arm, the planner's collision checks and the network's weights; building one needs the task and the learner,
//! which sit above `plan`.
//!
//! The model maps (q, goal, obstacles) to the offsets of waypoints 1..K-1 from q in joint space (input layout:
//! `layout::Layout`); waypoint 0 is q itself. Predicted joints are clamped into the planner's joint box.
//! Collisions of a path are judged by the planner's own checker (`plan::ArmSpace`) with the margin
//! [`COLLISION_MARGIN`].

pub mod layout;
pub mod network;

pub use layout::Layout;
pub use network::{Network, Scaling};

use super::ik::{damped_least_squares, DlsSettings};
use super::{ArmSpace, ConfigSpace, PlanSpec, ReferencePath};
use crate::sim::{ArmEnv, Scenario, MAX_JOINTS};
use network::MAX_WIDTH;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// Damped least squares that moves the model's last waypoint onto the goal (`WaypointModel::predict`): the
/// planner's settings with fewer updates (from a nearby configuration a few suffice; at most 30 bounds the
/// query time).
const GOAL_SNAP: DlsSettings = DlsSettings {
    damping: 0.05,
    tolerance: 1e-6,
    max_iterations: 30,
    max_step: 0.5,
};

/// Clearance a path must keep to count as collision-free in `path_collides`, m: the planner's smallest margin
/// `plan::MIN_MARGIN` (0.1 mm). Not 0: the checker steps by the clearance, which a zero margin lets shrink
/// towards zero at a touching configuration.
pub const COLLISION_MARGIN: f64 = crate::plan::MIN_MARGIN;

/// Format tag of model.json.
pub const MODEL_FORMAT: &str = "termwise-waypoint-model-1";
/// File names inside a model folder.
pub const MODEL_JSON: &str = "model.json";
pub const WEIGHTS: &str = "model.safetensors";

/// Why a model folder cannot be built, read or used.
#[derive(Debug, thiserror::Error)]
pub enum LearnedError {
    /// A file of the model folder is missing or unreadable, or does not describe a usable model.
    #[error("{}: {message}", path.display())]
    Model { path: PathBuf, message: String },
    /// The model does not fit the scenario or plan settings it is to be used with.
    #[error("{0}")]
    Mismatch(String),
    /// A command-line value is invalid.
    #[error("{0}")]
    Args(String),
    /// Writing an output failed.
    #[error("{}: {source}", path.display())]
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
    /// candle failed during training.
    #[error("training failed: {0}")]
    Training(String),
}

impl LearnedError {
    /// True when the user's input is at fault (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        matches!(
            self,
            LearnedError::Model { .. } | LearnedError::Mismatch(_) | LearnedError::Args(_)
        )
    }
}

/// model.json: what the weights are and what they were trained for.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModelFile {
    pub format: String,
    /// The arm, obstacle slots and K the model was trained for.
    pub layout: Layout,
    /// Input column names, in order.
    pub inputs: Vec<String>,
    /// Output column names (offsets of each waypoint's joint angle from q, rad), in order.
    pub outputs: Vec<String>,
    /// Hidden layer widths (tanh after each; linear output).
    pub hidden: Vec<usize>,
    pub activation: String,
    /// The weights file in the same folder.
    pub weights: String,
    pub scaling: Scaling,
    pub training: TrainSpec,
    pub summary: TrainSummary,
    /// FNV-1a hash of the data set file trained on, and its provenance (dataset.json's inputs).
    pub dataset_fnv1a: String,
    pub dataset: serde_json::Value,
    pub termwise_version: String,
}

/// A trained waypoint model: shareable across threads (`Send + Sync`, read-only).
#[derive(Clone, Debug)]
pub struct WaypointModel {
    pub file: ModelFile,
    net: Network,
    /// FNV-1a over the description and every weight's bits: what a run's configuration hash includes, so a
    /// rebuilt model makes the runs that used the old one stale.
    digest: String,
}

impl WaypointModel {
    /// A model from its parts (checked like a loaded one).
    pub fn new(file: ModelFile, net: Network) -> Result<WaypointModel, String> {
        let l = &file.layout;
        let s = &file.scaling;
        if l.joints == 0 || l.joints > MAX_JOINTS || l.waypoints < 2 {
            return Err(format!(
                "layout with {} joints and K = {} is not usable",
                l.joints, l.waypoints
            ));
        }
        if l.link_lengths.len() != l.joints || l.joint_bounds.len() != l.joints {
            return Err("layout lists link lengths or joint bounds for another joint count".into());
        }
        let (d_in, d_out) = (l.input_dim(), l.output_dim());
        if d_in > MAX_WIDTH || net.input_dim() != d_in || net.output_dim() != d_out {
            return Err(format!(
                "network maps {} inputs to {} outputs, the layout needs {d_in} to {d_out}",
                net.input_dim(),
                net.output_dim()
            ));
        }
        let finite = |v: &[f64]| v.iter().all(|x| x.is_finite());
        if s.input_mean.len() != d_in
            || s.input_scale.len() != d_in
            || s.output_mean.len() != d_out
            || !finite(&s.input_mean)
            || !finite(&s.output_mean)
            || s.input_scale.iter().any(|x| !(x.is_finite() && *x > 0.0))
            || !(s.output_scale.is_finite() && s.output_scale > 0.0)
        {
            return Err(
                "scaling does not match the layout or holds a non-finite or non-positive scale"
                    .into(),
            );
        }
        let text = serde_json::to_vec(&file).map_err(|e| e.to_string())?;
        let mut weights = Vec::new();
        for l in &net.layers {
            for x in l.w.iter().chain(&l.b) {
                weights.extend_from_slice(&x.to_bits().to_le_bytes());
            }
        }
        let digest = crate::fsio::fnv1a_hex(&[&text, &weights]);
        Ok(WaypointModel { file, net, digest })
    }

    /// Load a model folder written by `termwise waypoint-model` (model.json and model.safetensors).
    pub fn load(dir: &Path) -> Result<WaypointModel, LearnedError> {
        let jp = dir.join(MODEL_JSON);
        let bad = |path: &Path, message: String| LearnedError::Model {
            path: path.to_path_buf(),
            message,
        };
        let text = std::fs::read_to_string(&jp)
            .map_err(|e| bad(&jp, format!("cannot read the model description: {e}")))?;
        let file: ModelFile = serde_json::from_str(&text)
            .map_err(|e| bad(&jp, format!("not a waypoint model description: {e}")))?;
        if file.format != MODEL_FORMAT {
            return Err(bad(
                &jp,
                format!(
                    "format `{}`, this termwise reads `{MODEL_FORMAT}`",
                    file.format
                ),
            ));
        }
        let mut sizes = vec![file.layout.input_dim()];
        sizes.extend(&file.hidden);
        sizes.push(file.layout.output_dim());
        let wp = dir.join(&file.weights);
        let net = Network::load(&wp, &sizes).map_err(|m| bad(&wp, m))?;
        WaypointModel::new(file, net).map_err(|m| bad(&jp, m))
    }

    /// Digest of the model (its description and weights), 16 hex digits.
    pub fn digest(&self) -> &str {
        &self.digest
    }

    /// The arm, obstacle slots and K the model was trained for.
    pub fn layout(&self) -> &Layout {
        &self.file.layout
    }

    /// The network.
    pub fn network(&self) -> &Network {
        &self.net
    }

    /// Err(message) naming what differs when `scenario`'s arm (link count, lengths, joint limits), its obstacle
    /// slots (count and kinds) or `plan.waypoints` differ from what the model was trained on.
    pub fn check_fits(&self, scenario: &Scenario, plan: &PlanSpec) -> Result<(), String> {
        self.file.layout.check(&Layout::of(scenario, plan))
    }

    /// The model's reference path from configuration `q` (first n entries) to `goal` among `env`'s current
    /// obstacles: K waypoints, joints[0] = q, points = forward kinematics, fallback = false. Deterministic.
    pub fn predict(&self, env: &ArmEnv, q: &[f64], goal: [f64; 2]) -> ReferencePath {
        let l = &self.file.layout;
        let n = l.joints;
        let (frame, offset) = l.frame(q);
        let mut x = [0.0; MAX_WIDTH];
        l.encode(&frame, goal, env.obstacles(), &mut x);
        let mut y = [0.0; MAX_WIDTH];
        self.net.predict(&self.file.scaling, &x, &mut y);
        let arm = &env.scenario().arm;
        let mut first = [0.0; MAX_JOINTS];
        first[..n].copy_from_slice(&q[..n]);
        let mut joints = Vec::with_capacity(l.waypoints);
        let mut points = Vec::with_capacity(l.waypoints);
        joints.push(first);
        points.push(arm.effector(&first[..n]));
        for w in y[..l.output_dim()].chunks_exact(n) {
            let mut j = [0.0; MAX_JOINTS];
            for i in 0..n {
                let [lo, hi] = l.joint_bounds[i];
                j[i] = (frame[i] + w[i]).clamp(lo, hi) + offset[i];
            }
            joints.push(j);
            points.push(arm.effector(&j[..n]));
        }
        // The goal is known exactly: the last waypoint is moved onto it by damped least squares from the
        // network's goal configuration (which keeps its elbow side), within the joint bounds. Without this the
        // network's last waypoint missed the goal by 7.8 cm on average on the moving-goal scene (more than the
        // 5 cm goal tolerance), and the waypoint terms would pull the arm beside the goal.
        if let Some(last) = joints.last_mut() {
            let (mut lo, mut hi) = ([0.0; MAX_JOINTS], [0.0; MAX_JOINTS]);
            for i in 0..n {
                let [a, b] = l.joint_bounds[i];
                lo[i] = a + offset[i];
                hi[i] = b + offset[i];
            }
            let (snapped, _) = damped_least_squares(arm, goal, last, &lo, &hi, &GOAL_SNAP);
            *last = snapped;
            if let Some(p) = points.last_mut() {
                *p = arm.effector(&snapped[..n]);
            }
        }
        ReferencePath {
            joints,
            points,
            fallback: false,
        }
    }
}

/// Whether the joint-space polyline through `path.joints` comes closer than [`COLLISION_MARGIN`] to contact
/// with `env`'s current obstacles, the workspace boundary or (with self-collision) itself: the first point's
/// clearance, then every segment by the planner's conservative-advancement edge check
/// (`plan::ArmSpace::edge_free`; a waypoint outside the planner's joint box also counts). Joints wound past
/// +-pi are taken back into the box by whole turns from the first point, as the planner does.
pub fn path_collides(env: &ArmEnv, path: &ReferencePath) -> bool {
    let n = env.n();
    let Some(first) = path.joints.first() else {
        return false;
    };
    let space = ArmSpace::new(env, COLLISION_MARGIN);
    let mut turn = [0.0; MAX_JOINTS];
    for (i, t) in turn.iter_mut().enumerate().take(n) {
        let (lo, hi) = space.bounds(i);
        if first[i] < lo || first[i] > hi {
            *t = first[i] - crate::plan::ik::wrap_angle(first[i]);
        }
    }
    let back = |q: &crate::sim::JointVec| {
        let mut b = *q;
        for i in 0..n {
            b[i] -= turn[i];
        }
        b
    };
    if space.clearance(&back(first)) < COLLISION_MARGIN {
        return true;
    }
    path.joints
        .windows(2)
        .any(|w| !space.edge_free(&back(&w[0]), &back(&w[1])))
}

/// Training settings (command options of `termwise waypoint-model`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TrainSpec {
    /// Hidden layer widths (tanh). Default [64, 64]; empty = a linear model.
    pub hidden: Vec<usize>,
    /// Most passes over the training rows. Default 300.
    pub max_epochs: usize,
    /// Epochs without a new best validation error before training stops. Default 20.
    pub patience: usize,
    /// Rows per Adam step. Default 128.
    pub batch: usize,
    /// Adam step size. Default 1e-3.
    pub learning_rate: f64,
    /// Share of the rows held out for validation (early stopping). Default 0.1.
    pub validation_fraction: f64,
    /// Seed of the split, the initial weights and the shuffling. Default 0.
    pub seed: u64,
}

impl Default for TrainSpec {
    fn default() -> Self {
        TrainSpec {
            hidden: vec![64, 64],
            max_epochs: 300,
            patience: 20,
            batch: 128,
            learning_rate: 1e-3,
            validation_fraction: 0.1,
            seed: 0,
        }
    }
}

/// How training went (recorded in model.json).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TrainSummary {
    /// Epochs run.
    pub epochs: usize,
    /// Epoch (1-based) whose weights were kept.
    pub best_epoch: usize,
    /// Validation mean squared error of the kept weights, rad^2 per output value.
    pub best_validation_mse: f64,
    /// Training mean squared error of the kept weights, rad^2 per output value.
    pub train_mse: f64,
    pub train_rows: usize,
    pub validation_rows: usize,
    /// "patience" (early stop) or "max-epochs".
    pub stopped_by: String,
}
