//! Scenario files: the arm, physics settings, workspace, obstacles (still or moving), the goal, the start state
//! and seeded in-episode events, read from TOML in two stages (raw serde structs, then a validated
//! `Scenario` the rest of the code trusts). Every key is documented here and in README.md.

use super::arm::{Arm, Link, MAX_JOINTS};
pub use super::contact::ContactMode;
use super::geometry::{capsule_shape_distance, shape_shape_distance, Capsule, Shape};
use crate::config::{finite, positive, ConfigError};
use rand::Rng;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// How actions drive the arm.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum ControlMode {
    /// Actions are joint torques, N m (clipped to `tau_max`).
    Torque,
    /// Actions are desired joint accelerations, rad/s^2 (clipped to `acc_max`); the torque that produces them
    /// is computed by inverse dynamics and clipped to `tau_max`, so torque limits still bite.
    Acceleration,
}

/// Time integration scheme for one physics step.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Integrator {
    /// Semi-implicit (symplectic) Euler: dq += dt ddq, then q += dt dq.
    SemiImplicitEuler,
    /// Classical fourth-order Runge-Kutta.
    Rk4,
}

// ---------- raw file structs ----------

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawScenario {
    #[serde(default)]
    name: Option<String>,
    arm: RawArm,
    #[serde(default)]
    physics: RawPhysics,
    #[serde(default)]
    workspace: RawWorkspace,
    start: RawStart,
    goal: RawGoal,
    #[serde(default)]
    obstacle: Vec<RawObstacle>,
    #[serde(default)]
    events: RawEvents,
    #[serde(default)]
    random: Option<RawRandom>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawArm {
    control: ControlMode,
    #[serde(default)]
    gravity: f64,
    link: Vec<RawLink>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawLink {
    length: f64,
    mass: f64,
    com: Option<f64>,
    inertia: Option<f64>,
    #[serde(default)]
    damping: f64,
    #[serde(default = "default_radius")]
    radius: f64,
    q_min: Option<f64>,
    q_max: Option<f64>,
    v_max: Option<f64>,
    tau_max: Option<f64>,
    acc_max: Option<f64>,
}

fn default_radius() -> f64 {
    0.03
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawPhysics {
    #[serde(default = "default_integrator")]
    integrator: Integrator,
    #[serde(default = "default_dt")]
    dt: f64,
    #[serde(default = "default_substeps")]
    substeps: i64,
    #[serde(default = "default_horizon")]
    horizon: i64,
    #[serde(default)]
    self_collision: bool,
    #[serde(default)]
    contact: ContactMode,
}
fn default_integrator() -> Integrator {
    Integrator::Rk4
}
fn default_dt() -> f64 {
    0.001
}
fn default_substeps() -> i64 {
    10
}
fn default_horizon() -> i64 {
    200
}
impl Default for RawPhysics {
    fn default() -> Self {
        RawPhysics {
            integrator: default_integrator(),
            dt: default_dt(),
            substeps: default_substeps(),
            horizon: default_horizon(),
            self_collision: false,
            contact: ContactMode::default(),
        }
    }
}

#[derive(Deserialize, Debug, Clone, Default)]
#[serde(deny_unknown_fields)]
struct RawWorkspace {
    min: Option<[f64; 2]>,
    max: Option<[f64; 2]>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawStart {
    q: Vec<f64>,
    dq: Option<Vec<f64>>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawGoal {
    position: [f64; 2],
    #[serde(default = "default_tolerance")]
    tolerance: f64,
}
fn default_tolerance() -> f64 {
    0.05
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawObstacle {
    shape: String,
    center: [f64; 2],
    radius: Option<f64>,
    half: Option<[f64; 2]>,
    #[serde(default = "default_motion")]
    motion: String,
    velocity: Option<[f64; 2]>,
    amplitude: Option<[f64; 2]>,
    period: Option<f64>,
    #[serde(default)]
    phase: f64,
}
fn default_motion() -> String {
    "still".into()
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawEvents {
    #[serde(default)]
    goal_jump_times: Vec<f64>,
    #[serde(default)]
    goal_jump_rate: f64,
    #[serde(default = "default_replan_margin")]
    replan_margin: f64,
}
fn default_replan_margin() -> f64 {
    0.05
}
impl Default for RawEvents {
    fn default() -> Self {
        RawEvents {
            goal_jump_times: Vec::new(),
            goal_jump_rate: 0.0,
            replan_margin: default_replan_margin(),
        }
    }
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
struct RawRandom {
    obstacle_count: [i64; 2],
    obstacle_radius: [f64; 2],
    region_min: Option<[f64; 2]>,
    region_max: Option<[f64; 2]>,
}

// ---------- bounds ----------

/// Largest physics step `physics.dt`, s.
pub const MAX_DT: f64 = 0.1;
/// Longest link (`arm.link[i].length`), m.
pub const MAX_LINK_LENGTH: f64 = 100.0;
/// Most physics steps per control step (`physics.substeps`).
pub const MAX_SUBSTEPS: i64 = 1_000;
/// Most control steps per episode (`physics.horizon`).
pub const MAX_HORIZON: i64 = 1_000_000;
/// Most physics steps per episode (`physics.horizon * physics.substeps`).
pub const MAX_EPISODE_PHYSICS_STEPS: i64 = 10_000_000;
/// Most obstacles (`[[obstacle]]` tables, and `random.obstacle_count` max).
pub const MAX_OBSTACLES: usize = 100;
/// Most entries of `events.goal_jump_times`.
pub const MAX_GOAL_JUMP_TIMES: usize = 1_000;
/// Largest `events.goal_jump_rate`, jumps per second (every jump replans the reference path).
pub const MAX_GOAL_JUMP_RATE: f64 = 10.0;

/// Why `goal` (with a goal region of radius `tolerance`) cannot be a goal of `arm` in the workspace
/// [wmin, wmax], if it cannot: outside the workspace, or a goal region that misses the annulus the effector
/// reaches (outer radius the sum of the link lengths, inner radius the longest link minus the others; joint
/// limits and obstacles are the planner's business).
pub fn check_goal(
    arm: &Arm,
    goal: [f64; 2],
    tolerance: f64,
    wmin: [f64; 2],
    wmax: [f64; 2],
) -> Result<(), String> {
    if (0..2).any(|k| goal[k] < wmin[k] || goal[k] > wmax[k]) {
        return Err(format!(
            "{goal:?} lies outside the workspace {wmin:?}..{wmax:?}"
        ));
    }
    let r = super::geometry::dist(goal, [0.0, 0.0]);
    let reach = arm.reach();
    let longest = arm.links.iter().map(|l| l.length).fold(0.0, f64::max);
    let inner = (2.0 * longest - reach).max(0.0);
    if r > reach + tolerance {
        return Err(format!(
            "{goal:?} is out of reach: {r:.4} m from the base, the arm reaches {reach:.4} m (goal tolerance {tolerance} m)"
        ));
    }
    if r < inner - tolerance {
        return Err(format!(
            "{goal:?} is out of reach: {r:.4} m from the base, the arm cannot fold closer than {inner:.4} m (goal tolerance {tolerance} m)"
        ));
    }
    Ok(())
}

// ---------- validated types ----------

/// Obstacle motion during an episode.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Motion {
    Still,
    /// Constant velocity (m/s), bouncing off the workspace boundary.
    Linear {
        velocity: [f64; 2],
    },
    /// centre(t) = centre0 + amplitude * sin(2 pi t / period + phase).
    Sine {
        amplitude: [f64; 2],
        period: f64,
        phase: f64,
    },
}

/// One obstacle: its shape at t = 0 and its motion.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Obstacle {
    pub shape: Shape,
    pub motion: Motion,
}

/// Seeded in-episode events.
#[derive(Clone, Debug, PartialEq)]
pub struct Events {
    /// Times (s) at which the goal jumps to a new random reachable point.
    pub goal_jump_times: Vec<f64>,
    /// Additional random goal jumps, per second (Poisson process; 0 = none).
    pub goal_jump_rate: f64,
    /// An obstacle that moved more than this (m) since the last plan counts as "moved" (replanning cue).
    pub replan_margin: f64,
}

/// Ranges for random scenario generation (`Scenario::randomized`).
#[derive(Clone, Debug, PartialEq)]
pub struct RandomSpec {
    pub obstacle_count: [usize; 2],
    pub obstacle_radius: [f64; 2],
    pub region_min: [f64; 2],
    pub region_max: [f64; 2],
}

/// A validated scenario.
#[derive(Clone, Debug, PartialEq)]
pub struct Scenario {
    pub name: String,
    pub arm: Arm,
    pub control: ControlMode,
    pub integrator: Integrator,
    /// Physics step, s.
    pub dt: f64,
    /// Physics steps per control step.
    pub substeps: usize,
    /// Control steps per episode.
    pub horizon: usize,
    pub self_collision: bool,
    /// Whether obstacles, the boundary and (with `self_collision`) the arm itself are solid (`physics.contact`,
    /// "solid" by default) or only detected ("pass-through").
    pub contact: ContactMode,
    pub workspace_min: [f64; 2],
    pub workspace_max: [f64; 2],
    pub start_q: Vec<f64>,
    pub start_dq: Vec<f64>,
    pub goal: [f64; 2],
    pub goal_tolerance: f64,
    pub obstacles: Vec<Obstacle>,
    pub events: Events,
    pub random: Option<RandomSpec>,
}

impl Scenario {
    /// Read and validate a scenario file.
    pub fn load(path: &Path) -> Result<Scenario, ConfigError> {
        let src = crate::config::read_file(path)?;
        Scenario::from_toml_str(&src, &path.display().to_string())
    }

    /// Parse and validate scenario TOML text; `origin` names it in errors.
    pub fn from_toml_str(src: &str, origin: &str) -> Result<Scenario, ConfigError> {
        let raw: RawScenario = crate::config::parse_toml(src, origin)?;
        Scenario::from_raw(raw, src, origin)
    }

    /// Parse from an already-parsed TOML value (used when a scenario is embedded in an experiment file).
    pub fn from_toml_value(
        v: toml::Value,
        src: &str,
        origin: &str,
    ) -> Result<Scenario, ConfigError> {
        let text = toml::to_string(&v).map_err(|e| ConfigError {
            origin: origin.into(),
            line: None,
            path: "scenario".into(),
            message: e.to_string(),
        })?;
        let raw: RawScenario = crate::config::parse_toml(&text, origin).map_err(|mut e| {
            e.path = format!("scenario.{}", e.path);
            e.line = crate::config::locate_line(src, &e.path);
            e
        })?;
        Scenario::from_raw(raw, src, origin).map_err(|mut e| {
            e.path = format!("scenario.{}", e.path);
            e.line = crate::config::locate_line(src, &e.path);
            e
        })
    }

    fn from_raw(raw: RawScenario, src: &str, origin: &str) -> Result<Scenario, ConfigError> {
        let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
        let n = raw.arm.link.len();
        if !(1..=MAX_JOINTS).contains(&n) {
            return Err(err(
                "arm.link",
                format!("the arm needs 1 to {MAX_JOINTS} [[arm.link]] entries, found {n}"),
            ));
        }
        let gravity = finite(origin, src, "arm.gravity", raw.arm.gravity)?;
        let mut links = Vec::with_capacity(n);
        for (i, l) in raw.arm.link.iter().enumerate() {
            let p = |k: &str| format!("arm.link[{i}].{k}");
            let length = positive(origin, src, &p("length"), l.length)?;
            if length > MAX_LINK_LENGTH {
                return Err(err(
                    &p("length"),
                    format!(
                        "must be at most {MAX_LINK_LENGTH} m, got {}",
                        crate::config::num(length)
                    ),
                ));
            }
            let mass = positive(origin, src, &p("mass"), l.mass)?;
            let com = match l.com {
                Some(c) => {
                    let c = finite(origin, src, &p("com"), c)?;
                    if !(0.0..=length).contains(&c) {
                        return Err(err(
                            &p("com"),
                            format!("must lie on the link, in [0, {length}], got {c}"),
                        ));
                    }
                    c
                }
                None => length / 2.0,
            };
            let inertia = match l.inertia {
                Some(v) => {
                    let v = finite(origin, src, &p("inertia"), v)?;
                    if v < 0.0 {
                        return Err(err(&p("inertia"), format!("must be >= 0, got {v}")));
                    }
                    v
                }
                None => mass * length * length / 12.0,
            };
            let damping = finite(origin, src, &p("damping"), l.damping)?;
            if damping < 0.0 {
                return Err(err(&p("damping"), format!("must be >= 0, got {damping}")));
            }
            let radius = finite(origin, src, &p("radius"), l.radius)?;
            if radius < 0.0 {
                return Err(err(&p("radius"), format!("must be >= 0, got {radius}")));
            }
            let lim = |k: &str, v: Option<f64>, default: f64| -> Result<f64, ConfigError> {
                match v {
                    None => Ok(default),
                    Some(x) if x.is_nan() => Err(err(&p(k), "must be a number, got NaN".into())),
                    Some(x) => Ok(x),
                }
            };
            let q_min = lim("q_min", l.q_min, f64::NEG_INFINITY)?;
            let q_max = lim("q_max", l.q_max, f64::INFINITY)?;
            if q_min > q_max {
                return Err(err(
                    &p("q_min"),
                    format!("q_min ({q_min}) must be <= q_max ({q_max})"),
                ));
            }
            let v_max = lim("v_max", l.v_max, f64::INFINITY)?;
            let tau_max = lim("tau_max", l.tau_max, f64::INFINITY)?;
            let acc_max = lim("acc_max", l.acc_max, f64::INFINITY)?;
            for (k, v) in [("v_max", v_max), ("tau_max", tau_max), ("acc_max", acc_max)] {
                if v <= 0.0 {
                    return Err(err(
                        &p(k),
                        format!("must be > 0 (a symmetric limit +-{k}), got {v}"),
                    ));
                }
            }
            links.push(Link {
                length,
                mass,
                com,
                inertia,
                damping,
                radius,
                q_min,
                q_max,
                v_max,
                tau_max,
                acc_max,
            });
        }
        let arm = Arm { links, gravity };
        if raw.arm.control == ControlMode::Acceleration {
            if let Some(i) = arm.links.iter().position(|l| !l.acc_max.is_finite()) {
                return Err(err(
                    &format!("arm.link[{i}].acc_max"),
                    "acceleration control needs a finite acc_max on every link (it scales the action)".into(),
                ));
            }
        }
        let dt = positive(origin, src, "physics.dt", raw.physics.dt)?;
        if dt > MAX_DT {
            return Err(err(
                "physics.dt",
                format!("must be at most {MAX_DT} s, got {}", crate::config::num(dt)),
            ));
        }
        if !(1..=MAX_SUBSTEPS).contains(&raw.physics.substeps) {
            return Err(err(
                "physics.substeps",
                format!(
                    "must be an integer in 1..={MAX_SUBSTEPS}, got {}",
                    raw.physics.substeps
                ),
            ));
        }
        if !(1..=MAX_HORIZON).contains(&raw.physics.horizon) {
            return Err(err(
                "physics.horizon",
                format!(
                    "must be an integer in 1..={MAX_HORIZON} control steps, got {}",
                    raw.physics.horizon
                ),
            ));
        }
        let physics_steps = raw.physics.horizon * raw.physics.substeps;
        if physics_steps > MAX_EPISODE_PHYSICS_STEPS {
            return Err(err(
                "physics.horizon",
                format!(
                    "horizon x substeps = {physics_steps} physics steps per episode; at most \
                     {MAX_EPISODE_PHYSICS_STEPS} are allowed"
                ),
            ));
        }
        let reach = arm.reach();
        let margin = reach + 0.2;
        let wmin = raw.workspace.min.unwrap_or([-margin, -margin]);
        let wmax = raw.workspace.max.unwrap_or([margin, margin]);
        for k in 0..2 {
            finite(origin, src, "workspace.min", wmin[k])?;
            finite(origin, src, "workspace.max", wmax[k])?;
            if wmin[k] >= wmax[k] {
                return Err(err("workspace.min", format!("workspace.min ({wmin:?}) must be < workspace.max ({wmax:?}) in both x and y")));
            }
        }
        let vec_n = |path: &str, v: &[f64]| -> Result<Vec<f64>, ConfigError> {
            if v.len() != n {
                return Err(err(
                    path,
                    format!("needs {n} values (one per link), got {}", v.len()),
                ));
            }
            for x in v {
                finite(origin, src, path, *x)?;
            }
            Ok(v.to_vec())
        };
        let start_q = vec_n("start.q", &raw.start.q)?;
        let start_dq = match &raw.start.dq {
            Some(d) => vec_n("start.dq", d)?,
            None => vec![0.0; n],
        };
        for (i, l) in arm.links.iter().enumerate() {
            if start_q[i] < l.q_min || start_q[i] > l.q_max {
                return Err(err(
                    "start.q",
                    format!(
                        "joint {} starts at {} outside its limits [{}, {}]",
                        i + 1,
                        start_q[i],
                        l.q_min,
                        l.q_max
                    ),
                ));
            }
        }
        for k in 0..2 {
            finite(origin, src, "goal.position", raw.goal.position[k])?;
        }
        let goal_tolerance = positive(origin, src, "goal.tolerance", raw.goal.tolerance)?;
        check_goal(&arm, raw.goal.position, goal_tolerance, wmin, wmax)
            .map_err(|m| err("goal.position", m))?;
        if raw.obstacle.len() > MAX_OBSTACLES {
            return Err(err(
                "obstacle",
                format!(
                    "{} [[obstacle]] tables; at most {MAX_OBSTACLES} are allowed",
                    raw.obstacle.len()
                ),
            ));
        }
        let mut obstacles = Vec::new();
        for (i, o) in raw.obstacle.iter().enumerate() {
            let p = |k: &str| format!("obstacle[{i}].{k}");
            for c in o.center {
                finite(origin, src, &p("center"), c)?;
            }
            let shape = match o.shape.as_str() {
                "disc" => {
                    let r = o
                        .radius
                        .ok_or_else(|| err(&p("radius"), "a disc needs `radius`".into()))?;
                    Shape::Disc {
                        center: o.center,
                        radius: positive(origin, src, &p("radius"), r)?,
                    }
                }
                "box" => {
                    let h = o.half.ok_or_else(|| {
                        err(
                            &p("half"),
                            "a box needs `half` = [half width, half height]".into(),
                        )
                    })?;
                    positive(origin, src, &p("half"), h[0])?;
                    positive(origin, src, &p("half"), h[1])?;
                    Shape::Box {
                        center: o.center,
                        half: h,
                    }
                }
                other => {
                    return Err(err(
                        &p("shape"),
                        format!("unknown shape `{other}`; allowed: disc, box"),
                    ))
                }
            };
            let motion = match o.motion.as_str() {
                "still" => Motion::Still,
                "linear" => {
                    let v = o.velocity.ok_or_else(|| {
                        err(
                            &p("velocity"),
                            "linear motion needs `velocity` = [vx, vy] in m/s".into(),
                        )
                    })?;
                    finite(origin, src, &p("velocity"), v[0])?;
                    finite(origin, src, &p("velocity"), v[1])?;
                    Motion::Linear { velocity: v }
                }
                "sine" => {
                    let a = o.amplitude.ok_or_else(|| {
                        err(
                            &p("amplitude"),
                            "sine motion needs `amplitude` = [ax, ay] in m".into(),
                        )
                    })?;
                    finite(origin, src, &p("amplitude"), a[0])?;
                    finite(origin, src, &p("amplitude"), a[1])?;
                    let per = o.period.ok_or_else(|| {
                        err(&p("period"), "sine motion needs `period` in s".into())
                    })?;
                    Motion::Sine {
                        amplitude: a,
                        period: positive(origin, src, &p("period"), per)?,
                        phase: finite(origin, src, &p("phase"), o.phase)?,
                    }
                }
                other => {
                    return Err(err(
                        &p("motion"),
                        format!("unknown motion `{other}`; allowed: still, linear, sine"),
                    ))
                }
            };
            obstacles.push(Obstacle { shape, motion });
        }
        if let Some(i) = obstacles
            .iter()
            .position(|o| o.shape.point_distance(raw.goal.position) < 0.0)
        {
            return Err(err(
                "goal.position",
                format!(
                    "{:?} lies inside obstacle[{i}] at t = 0; move the goal or the obstacle",
                    raw.goal.position
                ),
            ));
        }
        if raw.events.goal_jump_times.len() > MAX_GOAL_JUMP_TIMES {
            return Err(err(
                "events.goal_jump_times",
                format!(
                    "{} times; at most {MAX_GOAL_JUMP_TIMES} are allowed",
                    raw.events.goal_jump_times.len()
                ),
            ));
        }
        for t in &raw.events.goal_jump_times {
            if !(t.is_finite() && *t > 0.0) {
                return Err(err(
                    "events.goal_jump_times",
                    format!("times must be finite and > 0 s, got {t}"),
                ));
            }
        }
        let rate = finite(
            origin,
            src,
            "events.goal_jump_rate",
            raw.events.goal_jump_rate,
        )?;
        if !(0.0..=MAX_GOAL_JUMP_RATE).contains(&rate) {
            return Err(err(
                "events.goal_jump_rate",
                format!(
                    "must be in [0, {MAX_GOAL_JUMP_RATE}] jumps per second, got {}",
                    crate::config::num(rate)
                ),
            ));
        }
        let replan_margin = positive(
            origin,
            src,
            "events.replan_margin",
            raw.events.replan_margin,
        )?;
        let random = match raw.random {
            None => None,
            Some(r) => {
                if r.obstacle_count[0] < 0
                    || r.obstacle_count[0] > r.obstacle_count[1]
                    || r.obstacle_count[1] > MAX_OBSTACLES as i64
                {
                    return Err(err(
                        "random.obstacle_count",
                        format!(
                            "needs [min, max] with 0 <= min <= max <= {MAX_OBSTACLES}, got {:?}",
                            r.obstacle_count
                        ),
                    ));
                }
                if !(r.obstacle_radius[0] > 0.0
                    && r.obstacle_radius[0] <= r.obstacle_radius[1]
                    && r.obstacle_radius[1].is_finite())
                {
                    return Err(err(
                        "random.obstacle_radius",
                        format!(
                            "needs [min, max] with 0 < min <= max, got {:?}",
                            r.obstacle_radius
                        ),
                    ));
                }
                Some(RandomSpec {
                    obstacle_count: [r.obstacle_count[0] as usize, r.obstacle_count[1] as usize],
                    obstacle_radius: r.obstacle_radius,
                    region_min: r.region_min.unwrap_or([-reach, -reach]),
                    region_max: r.region_max.unwrap_or([reach, reach]),
                })
            }
        };
        let sc = Scenario {
            name: raw.name.unwrap_or_else(|| "scenario".into()),
            arm,
            control: raw.arm.control,
            integrator: raw.physics.integrator,
            dt,
            substeps: raw.physics.substeps as usize,
            horizon: raw.physics.horizon as usize,
            self_collision: raw.physics.self_collision,
            contact: raw.physics.contact,
            workspace_min: wmin,
            workspace_max: wmax,
            start_q,
            start_dq,
            goal: raw.goal.position,
            goal_tolerance,
            obstacles,
            events: Events {
                goal_jump_times: raw.events.goal_jump_times,
                goal_jump_rate: rate,
                replan_margin,
            },
            random,
        };
        if let Some((i, d)) = sc.start_overlap() {
            return Err(err(
                &format!("obstacle[{i}]"),
                format!(
                    "overlaps the arm's start pose (clearance {d:.4} m); move it or change start.q"
                ),
            ));
        }
        Ok(sc)
    }

    /// Number of joints.
    pub fn n(&self) -> usize {
        self.arm.n()
    }

    /// Control step, s.
    pub fn control_dt(&self) -> f64 {
        self.dt * self.substeps as f64
    }

    /// Link capsules for configuration q; returns how many were written.
    pub fn capsules(&self, q: &[f64], out: &mut [Capsule; MAX_JOINTS]) -> usize {
        let mut pts = [[0.0; 2]; MAX_JOINTS + 1];
        let n = self.arm.joint_points(q, &mut pts) - 1;
        for i in 0..n {
            out[i] = Capsule {
                a: pts[i],
                b: pts[i + 1],
                radius: self.arm.links[i].radius,
            };
        }
        n
    }

    /// The first obstacle (index, clearance) that touches the start pose, if any.
    fn start_overlap(&self) -> Option<(usize, f64)> {
        let mut caps = [Capsule {
            a: [0.0; 2],
            b: [0.0; 2],
            radius: 0.0,
        }; MAX_JOINTS];
        let n = self.capsules(&self.start_q, &mut caps);
        for (i, o) in self.obstacles.iter().enumerate() {
            let d = caps[..n]
                .iter()
                .map(|c| capsule_shape_distance(c, &o.shape))
                .fold(f64::INFINITY, f64::min);
            if d < 0.0 {
                return Some((i, d));
            }
        }
        None
    }

    /// A new scenario with random still disc obstacles drawn from `[random]` (none overlapping the start pose,
    /// the goal region or each other) and a random reachable, collision-free goal. Seeded by `rng`.
    /// Without a `[random]` table only the goal is redrawn.
    pub fn randomized<R: Rng>(&self, rng: &mut R) -> Scenario {
        let mut sc = self.clone();
        if let Some(r) = &self.random {
            sc.obstacles.clear();
            let count = rng.gen_range(r.obstacle_count[0]..=r.obstacle_count[1]);
            let mut caps = [Capsule {
                a: [0.0; 2],
                b: [0.0; 2],
                radius: 0.0,
            }; MAX_JOINTS];
            let nc = self.capsules(&self.start_q, &mut caps);
            let mut tries = 0;
            while sc.obstacles.len() < count && tries < 10_000 {
                tries += 1;
                let c = [
                    rng.gen_range(r.region_min[0]..=r.region_max[0]),
                    rng.gen_range(r.region_min[1]..=r.region_max[1]),
                ];
                let rad = rng.gen_range(r.obstacle_radius[0]..=r.obstacle_radius[1]);
                let s = Shape::Disc {
                    center: c,
                    radius: rad,
                };
                let clear_start = caps[..nc]
                    .iter()
                    .all(|cap| capsule_shape_distance(cap, &s) > 0.02);
                let clear_others = sc
                    .obstacles
                    .iter()
                    .all(|o| shape_shape_distance(&o.shape, &s) > 0.0);
                let clear_base = super::geometry::dist(c, [0.0, 0.0]) > rad + 0.1;
                if clear_start && clear_others && clear_base {
                    sc.obstacles.push(Obstacle {
                        shape: s,
                        motion: Motion::Still,
                    });
                }
            }
        }
        let env = super::env::ArmEnv::new(std::sync::Arc::new(sc.clone()));
        sc.goal = env.sample_goal(rng);
        sc
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const BASE: &str = r#"
[arm]
control = "torque"
gravity = 9.81
[[arm.link]]
length = 0.5
mass = 1.0
[[arm.link]]
length = 0.4
mass = 0.8
[start]
q = [0.0, 0.0]
[goal]
position = [0.3, 0.3]
"#;

    #[test]
    fn defaults_are_uniform_rods() {
        let s = Scenario::from_toml_str(BASE, "t").unwrap();
        assert_eq!(s.n(), 2);
        assert!((s.arm.links[0].inertia - 1.0 * 0.25 / 12.0).abs() < 1e-15);
        assert!((s.arm.links[1].com - 0.2).abs() < 1e-15);
        assert_eq!(s.integrator, Integrator::Rk4);
    }

    fn bad(src: &str) -> String {
        Scenario::from_toml_str(src, "bad.toml")
            .unwrap_err()
            .to_string()
    }

    #[test]
    fn bad_inputs_name_the_key() {
        let e = bad(&BASE.replace("mass = 0.8", "mass = -0.8"));
        assert!(e.contains("arm.link[1].mass") && e.contains("> 0"), "{e}");
        let e = bad(&BASE.replace("mass = 0.8", "mass = 0.8\nlenght = 3"));
        assert!(
            e.contains("unknown field") && e.contains("bad.toml:"),
            "{e}"
        );
        let e = bad(&BASE.replace("length = 0.4\n", ""));
        assert!(e.contains("missing field `length`"), "{e}");
        let e = bad(&BASE.replace("mass = 0.8", "mass = nan"));
        assert!(e.contains("arm.link[1].mass"), "{e}");
        let e = bad(&BASE.replace("mass = 0.8", "mass = 0.8\nq_min = 1.0\nq_max = -1.0"));
        assert!(e.contains("q_min") && e.contains("q_max"), "{e}");
        let e = bad(&format!(
            "{BASE}\n[[obstacle]]\nshape = \"disc\"\ncenter = [0.3, 0.0]\nradius = 0.1\n"
        ));
        assert!(e.contains("obstacle[0]") && e.contains("overlaps"), "{e}");
        let seven = "[[arm.link]]\nlength = 0.1\nmass = 0.1\n".repeat(7);
        let e = bad(&format!(
            "[arm]\ncontrol = \"torque\"\n{seven}[start]\nq = [0,0,0,0,0,0,0]\n[goal]\nposition = [0.1, 0.1]\n"
        ));
        assert!(e.contains("1 to 6"), "{e}");
    }
}
