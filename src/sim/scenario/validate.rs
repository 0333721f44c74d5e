//! Validation: the raw scenario file checked key by key (bounds, reachability, the start pose free of
//! contact) and turned into a `Scenario`; every broken rule is one error naming its key path. `from_raw`
//! checks the sections in file order, one helper per larger section (arm, obstacles, events, random).

use super::*;

impl Scenario {
    pub(super) fn from_raw(
        raw: RawScenario,
        src: &str,
        origin: &str,
    ) -> Result<Scenario, ConfigError> {
        let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
        let arm = arm(&raw.arm, origin, src)?;
        let n = arm.n();
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
        let obstacles = obstacles(&raw.obstacle, origin, src)?;
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
        let events = events(&raw.events, origin, src)?;
        let random = random(raw.random, reach, origin, src)?;
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
            events,
            random,
            control_model: None,
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
}

/// `[arm]`: 1 to MAX_JOINTS links with checked lengths, masses, limits; a finite `acc_max` on every link under
/// acceleration control.
fn arm(raw: &RawArm, origin: &str, src: &str) -> Result<Arm, ConfigError> {
    let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
    let n = raw.link.len();
    if !(1..=MAX_JOINTS).contains(&n) {
        return Err(err(
            "arm.link",
            format!("the arm needs 1 to {MAX_JOINTS} [[arm.link]] entries, found {n}"),
        ));
    }
    let gravity = finite(origin, src, "arm.gravity", raw.gravity)?;
    let mut links = Vec::with_capacity(n);
    for (i, l) in raw.link.iter().enumerate() {
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
    if raw.control == ControlMode::Acceleration {
        if let Some(i) = arm.links.iter().position(|l| !l.acc_max.is_finite()) {
            return Err(err(
                &format!("arm.link[{i}].acc_max"),
                "acceleration control needs a finite acc_max on every link (it scales the action)"
                    .into(),
            ));
        }
    }
    Ok(arm)
}

/// `[[obstacle]]`: at most MAX_OBSTACLES discs or boxes, each still or moving.
fn obstacles(raw: &[RawObstacle], origin: &str, src: &str) -> Result<Vec<Obstacle>, ConfigError> {
    let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
    if raw.len() > MAX_OBSTACLES {
        return Err(err(
            "obstacle",
            format!(
                "{} [[obstacle]] tables; at most {MAX_OBSTACLES} are allowed",
                raw.len()
            ),
        ));
    }
    let mut obstacles = Vec::new();
    for (i, o) in raw.iter().enumerate() {
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
                let per = o
                    .period
                    .ok_or_else(|| err(&p("period"), "sine motion needs `period` in s".into()))?;
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
    Ok(obstacles)
}

/// `[events]`: fixed goal-jump times, a random goal-jump rate and the replanning margin.
fn events(raw: &RawEvents, origin: &str, src: &str) -> Result<Events, ConfigError> {
    let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
    if raw.goal_jump_times.len() > MAX_GOAL_JUMP_TIMES {
        return Err(err(
            "events.goal_jump_times",
            format!(
                "{} times; at most {MAX_GOAL_JUMP_TIMES} are allowed",
                raw.goal_jump_times.len()
            ),
        ));
    }
    for t in &raw.goal_jump_times {
        if !(t.is_finite() && *t > 0.0) {
            return Err(err(
                "events.goal_jump_times",
                format!("times must be finite and > 0 s, got {t}"),
            ));
        }
    }
    let rate = finite(origin, src, "events.goal_jump_rate", raw.goal_jump_rate)?;
    if !(0.0..=MAX_GOAL_JUMP_RATE).contains(&rate) {
        return Err(err(
            "events.goal_jump_rate",
            format!(
                "must be in [0, {MAX_GOAL_JUMP_RATE}] jumps per second, got {}",
                crate::config::num(rate)
            ),
        ));
    }
    let replan_margin = positive(origin, src, "events.replan_margin", raw.replan_margin)?;
    Ok(Events {
        goal_jump_times: raw.goal_jump_times.clone(),
        goal_jump_rate: rate,
        replan_margin,
    })
}

/// `[random]`: obstacle count and radius ranges and the region random obstacles are drawn in (default: the
/// square of the arm's reach).
fn random(
    raw: Option<RawRandom>,
    reach: f64,
    origin: &str,
    src: &str,
) -> Result<Option<RandomSpec>, ConfigError> {
    let err = |path: &str, msg: String| ConfigError::at(origin, src, path, msg);
    let random = match raw {
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
    Ok(random)
}
