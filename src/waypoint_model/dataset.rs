//! The waypoint model's data set: planner solutions over random episodes of a scenario. Each episode's start and
//! goal are drawn the way training episodes are (`task::Episode::begin_feasible` with the uniform curriculum's
//! draw: solvable draws only, starts clear of obstacles); its row is (q, goal, obstacles) -> the planner's
//! waypoints 1..K-1. Mid-path rows add a random configuration on the planned route with the plan from there,
//! because at run time the model is asked from every state of an episode. Seeded and written as CSV
//! byte-for-byte reproducibly.

use crate::curriculum::{Curriculum, Uniform};
use crate::plan::learned::Layout;
use crate::plan::{plan_path, PlanSpec, ReferencePath};
use crate::reward::RewardSpec;
use crate::sim::{ArmEnv, JointVec, Scenario, MAX_JOINTS};
use crate::task::{feasibility_spec, Episode, ObservationSpec, START_CLEARANCE_FACTOR};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};
use std::fmt::Write;
use std::sync::Arc;

/// Episodes drawn per obstacle layout when obstacles are shifted (the feasibility check builds a joint-space
/// grid per layout, so layouts are reused a few times).
pub const EPISODES_PER_LAYOUT: usize = 8;

/// Episodes begun per requested row before generation gives up (a scenario whose draws are almost never
/// solvable): it then returns fewer rows than asked for, and `build` refuses them.
pub const MAX_EPISODES_PER_ROW: usize = 20;

/// What to generate (command options of `termwise waypoint-model`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DataSpec {
    /// Rows to generate. Default 40000.
    pub samples: usize,
    /// Mid-path rows per episode (after its start row). Default 1.
    pub mid_path: usize,
    /// Each obstacle's centre moves by a uniform offset in [-s, s]^2 m per layout, so the model sees the
    /// obstacles in other places than the scenario's (moving obstacles, probes). 0 = the scenario's places.
    /// Default 0.1.
    pub obstacle_shift: f64,
    /// Seed of the ChaCha8 stream everything is drawn from. Default 0.
    pub seed: u64,
}

impl Default for DataSpec {
    fn default() -> Self {
        DataSpec {
            samples: 40_000,
            mid_path: 1,
            obstacle_shift: 0.1,
            seed: 0,
        }
    }
}

/// Where a row's configuration comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RowKind {
    /// The episode's drawn start.
    Start,
    /// A point on the route planned from the start.
    Mid,
}

/// One row: network input and the planner's waypoints 1..K-1 (joint angles, flattened), and the index of its
/// scene in `DataSet::scenes`.
#[derive(Clone, Debug, PartialEq)]
pub struct Row {
    pub kind: RowKind,
    pub input: Vec<f64>,
    pub target: Vec<f64>,
    pub scene: usize,
}

/// A generated data set.
#[derive(Clone, Debug)]
pub struct DataSet {
    pub layout: Layout,
    /// The scenarios (obstacle layouts) the rows were drawn in.
    pub scenes: Vec<Arc<Scenario>>,
    pub rows: Vec<Row>,
    /// Episodes begun, and draws rejected as unsolvable or too close to contact.
    pub episodes: usize,
    pub redraws: usize,
    /// Episodes still unsolved after `task::MAX_REDRAWS` (skipped), and mid-path points skipped (too close to
    /// contact, or no path from there).
    pub skipped: usize,
}

/// `base` with every obstacle moved by a uniform offset in [-shift, shift]^2.
fn shifted(base: &Scenario, shift: f64, rng: &mut ChaCha8Rng) -> Scenario {
    let mut sc = base.clone();
    for o in sc.obstacles.iter_mut() {
        let c = o.shape.center();
        let d: [f64; 2] = [rng.gen_range(-shift..=shift), rng.gen_range(-shift..=shift)];
        o.shape = o.shape.at([c[0] + d[0], c[1] + d[1]]);
    }
    sc
}

impl DataSet {
    /// Generate `spec.samples` rows in `scenario` with the planner settings `plan`.
    pub fn generate(scenario: &Arc<Scenario>, plan: &PlanSpec, spec: &DataSpec) -> DataSet {
        let layout = Layout::of(scenario, plan);
        let mut rng = ChaCha8Rng::seed_from_u64(spec.seed);
        let mut ds = DataSet {
            layout,
            scenes: Vec::new(),
            rows: Vec::with_capacity(spec.samples),
            episodes: 0,
            redraws: 0,
            skipped: 0,
        };
        let mut draw = |sim: &ArmEnv, rng: &mut ChaCha8Rng| {
            let mut probe = sim.clone();
            let sc = probe.scenario().clone();
            probe.set_difficulty(sc.obstacles.len(), sc.events.goal_jump_rate);
            Uniform.draw(&probe, 0, rng)
        };
        let obs = ObservationSpec::default();
        let reward = RewardSpec::default();
        let mut ep: Option<Episode> = None;
        while ds.rows.len() < spec.samples && ds.episodes < MAX_EPISODES_PER_ROW * spec.samples {
            if ep.is_none() || spec.obstacle_shift > 0.0 {
                let sc = if spec.obstacle_shift > 0.0 {
                    Arc::new(shifted(scenario, spec.obstacle_shift, &mut rng))
                } else {
                    scenario.clone()
                };
                ds.scenes.push(sc.clone());
                ep = Some(Episode::new(
                    sc,
                    &reward,
                    plan,
                    0.99,
                    &obs,
                    &Default::default(),
                ));
            }
            let ep = ep.as_mut().expect("episode built above");
            let scene = ds.scenes.len() - 1;
            for _ in 0..EPISODES_PER_LAYOUT {
                if ds.rows.len() >= spec.samples {
                    break;
                }
                let r = ep.begin_feasible(&mut draw, &mut rng);
                ds.episodes += 1;
                ds.redraws += r.redraws;
                if r.unsolved {
                    ds.skipped += 1;
                    continue;
                }
                let n = ep.sim.n();
                let q = ep.sim.state().q;
                let goal = ep.sim.goal();
                let row = ds.row(RowKind::Start, &ep.sim, &q[..n], goal, &ep.path, scene);
                ds.rows.push(row);
                for _ in 0..spec.mid_path {
                    if ds.rows.len() >= spec.samples {
                        break;
                    }
                    match mid_path(ep, plan, &mut rng) {
                        Some((qm, path)) => {
                            let row = ds.row(RowKind::Mid, &ep.sim, &qm[..n], goal, &path, scene);
                            ds.rows.push(row);
                        }
                        None => ds.skipped += 1,
                    }
                }
            }
        }
        ds
    }

    fn row(
        &self,
        kind: RowKind,
        env: &ArmEnv,
        q: &[f64],
        goal: [f64; 2],
        path: &ReferencePath,
        scene: usize,
    ) -> Row {
        let l = &self.layout;
        let mut input = vec![0.0; l.input_dim()];
        l.encode(q, goal, env.obstacles(), &mut input);
        let target = path.joints[1..]
            .iter()
            .flat_map(|w| w[..l.joints].iter().copied())
            .collect();
        Row {
            kind,
            input,
            target,
            scene,
        }
    }

    /// The data set as CSV: header `kind,<inputs>,<outputs>` (`Layout::input_names`, `output_names`), one row
    /// per sample, numbers in Rust's shortest round-trip form (so reading gives the same f64 bits).
    pub fn to_csv(&self) -> String {
        let l = &self.layout;
        let mut s = String::from("kind");
        for name in l.input_names().iter().chain(&l.output_names()) {
            s.push(',');
            s.push_str(name);
        }
        s.push('\n');
        for r in &self.rows {
            s.push_str(match r.kind {
                RowKind::Start => "start",
                RowKind::Mid => "mid",
            });
            for v in r.input.iter().chain(&r.target) {
                let _ = write!(s, ",{v}");
            }
            s.push('\n');
        }
        s
    }

    /// Read rows written by [`DataSet::to_csv`] for `layout` (no scenes: for training only).
    pub fn from_csv(text: &str, layout: Layout) -> Result<DataSet, String> {
        let mut lines = text.lines();
        let mut header = vec!["kind".to_string()];
        header.extend(layout.input_names());
        header.extend(layout.output_names());
        if lines.next() != Some(header.join(",").as_str()) {
            return Err("the header does not match the model's layout".into());
        }
        let (d_in, d_out) = (layout.input_dim(), layout.output_dim());
        let mut rows = Vec::new();
        for (i, line) in lines.enumerate() {
            let mut cells = line.split(',');
            let kind = match cells.next() {
                Some("start") => RowKind::Start,
                Some("mid") => RowKind::Mid,
                other => return Err(format!("line {}: unknown row kind {other:?}", i + 2)),
            };
            let v: Vec<f64> = cells
                .map(|c| c.parse::<f64>())
                .collect::<Result<_, _>>()
                .map_err(|e| format!("line {}: {e}", i + 2))?;
            if v.len() != d_in + d_out {
                return Err(format!(
                    "line {}: {} numbers, expected {}",
                    i + 2,
                    v.len(),
                    d_in + d_out
                ));
            }
            rows.push(Row {
                kind,
                input: v[..d_in].to_vec(),
                target: v[d_in..].to_vec(),
                scene: 0,
            });
        }
        Ok(DataSet {
            layout,
            scenes: Vec::new(),
            rows,
            episodes: 0,
            redraws: 0,
            skipped: 0,
        })
    }

    /// Rows as flat input and target matrices (rows x input_dim, rows x output_dim); targets as offsets from
    /// the row's configuration (waypoint k minus q), which is what the network predicts.
    pub fn matrices(&self) -> (Vec<f64>, Vec<f64>) {
        let n = self.layout.joints;
        let mut x = Vec::with_capacity(self.rows.len() * self.layout.input_dim());
        let mut y = Vec::with_capacity(self.rows.len() * self.layout.output_dim());
        for r in &self.rows {
            x.extend_from_slice(&r.input);
            y.extend(r.target.iter().enumerate().map(|(j, w)| w - r.input[j % n]));
        }
        (x, y)
    }
}

/// A random point on the joint-space polyline through the episode's waypoints (at least
/// `START_CLEARANCE_FACTOR` times the clearance margin from contact, as episode starts are) and the planner's
/// path from there to the goal; None when the point is too close to contact or no path is found.
fn mid_path(
    ep: &Episode,
    plan: &PlanSpec,
    rng: &mut ChaCha8Rng,
) -> Option<(JointVec, ReferencePath)> {
    let n = ep.sim.n();
    let w = &ep.path.joints;
    let seg_len: Vec<f64> = w
        .windows(2)
        .map(|p| crate::plan::space::distance(&p[0], &p[1], n))
        .collect();
    let total: f64 = seg_len.iter().sum();
    let mut at = rng.gen::<f64>() * total;
    let mut plan_rng = ChaCha8Rng::seed_from_u64(rng.gen());
    if total <= 0.0 {
        return None;
    }
    let mut q = [0.0; MAX_JOINTS];
    for (k, l) in seg_len.iter().enumerate() {
        if at <= *l || k + 1 == seg_len.len() {
            let t = if *l > 0.0 { (at / l).min(1.0) } else { 0.0 };
            q = crate::plan::space::lerp(&w[k], &w[k + 1], t, n);
            break;
        }
        at -= l;
    }
    if ep.sim.clearances(&q[..n]).0 < START_CLEARANCE_FACTOR * plan.clearance_margin {
        return None;
    }
    let goal = ep.sim.goal();
    let mut path = plan_path(&ep.sim, &q[..n], goal, plan, &mut plan_rng);
    if path.fallback {
        path = plan_path(
            &ep.sim,
            &q[..n],
            goal,
            &feasibility_spec(plan),
            &mut plan_rng,
        );
    }
    (!path.fallback).then_some((q, path))
}
