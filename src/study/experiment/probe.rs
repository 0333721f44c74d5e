//! `[[probe]]`: named probe conditions — changes to the scenario (goal jumps, moving or more obstacles, link
//! mass and damping, any scenario key), noise on the observation and a different start region — on which
//! every finished policy and the controller are evaluated after training. Each probe is applied to every
//! variant's scenario and validated there; errors name the probe's key and line.

use super::*;
use crate::results::ProbeRecord;

/// Most probe conditions in a study.
pub const MAX_PROBES: usize = 100;
/// Largest standard deviation of the observation noise (observation entries are scaled to about +-1).
pub const MAX_NOISE: f64 = 10.0;
/// Largest factor on a link's mass.
pub const MAX_MASS_FACTOR: f64 = 100.0;

/// A probe as written.
#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawProbe {
    /// Name (letters, digits, `-`, `_`, `.`, `=`), unique among the probes.
    name: String,
    /// Evaluation episodes. Default: `study.eval_episodes`.
    episodes: Option<i64>,
    /// Random goal jumps per second (replaces the scenario's `events.goal_jump_rate`).
    goal_jump_rate: Option<f64>,
    /// Times (s) of goal jumps (replaces the scenario's `events.goal_jump_times`).
    goal_jump_times: Option<Vec<f64>>,
    /// Merged into every obstacle that stands still (`motion`, `velocity`, `amplitude`, `period`, `phase`);
    /// sine motions without a `phase` get phases spread evenly over the obstacles.
    obstacle_motion: Option<Table>,
    /// Obstacles added to the scenario's (same keys as `[[obstacle]]`).
    extra_obstacles: Option<Vec<Table>>,
    /// Factor on each link's mass (and on an explicit inertia): one number for every link or one per link.
    link_mass_factor: Option<Value>,
    /// Viscous joint damping, N m s/rad: one number for every joint or one per joint.
    link_damping: Option<Value>,
    /// Standard deviation of Gaussian noise added to every entry of the policy's observation.
    observation_noise: Option<f64>,
    /// Start configurations drawn uniformly in this joint box (within the joint limits, collision-free).
    start_region: Option<RawStartRegion>,
    /// Any scenario keys, deep-merged last.
    scenario: Option<Table>,
}

#[derive(Deserialize, Debug, Clone)]
#[serde(deny_unknown_fields)]
pub(super) struct RawStartRegion {
    q_min: Vec<f64>,
    q_max: Vec<f64>,
}

/// A validated probe condition.
#[derive(Clone, Debug)]
pub struct ProbeSpec {
    pub name: String,
    /// Evaluation episodes.
    pub episodes: u64,
    /// Standard deviation of the observation noise (0: none).
    pub noise: f64,
    /// Start region (q_min, q_max), rad.
    pub start_region: Option<(Vec<f64>, Vec<f64>)>,
    /// What it changes, in words.
    pub changes: Vec<String>,
    /// Per variant, in the experiment's order: the probe's scenario and the hash of the probe's definition.
    pub per_variant: Vec<(Arc<Scenario>, String)>,
}

impl ProbeSpec {
    /// study.json's record of the probe.
    pub fn record(&self) -> ProbeRecord {
        ProbeRecord {
            name: self.name.clone(),
            changes: self.changes.clone(),
            episodes: self.episodes,
        }
    }
}

type Fail = (String, String);

/// Per-joint numbers from one number or a list of `n`.
fn per_joint(v: &Value, n: usize, key: &str) -> Result<Vec<f64>, Fail> {
    let num = |x: &Value| x.as_float().or_else(|| x.as_integer().map(|i| i as f64));
    let out = match v {
        Value::Array(a) => {
            if a.len() != n {
                return Err((
                    key.into(),
                    format!("has {} values for an arm with {n} joints", a.len()),
                ));
            }
            a.iter().map(num).collect::<Option<Vec<f64>>>()
        }
        x => num(x).map(|x| vec![x; n]),
    };
    out.ok_or_else(|| (key.into(), "must be a number or a list of numbers".into()))
}

/// Apply a probe to a variant's scenario table. Errors are (probe key, message).
fn apply(p: &RawProbe, base: &Table) -> Result<Table, Fail> {
    let mut t = base.clone();
    let links = t
        .get("arm")
        .and_then(|a| a.get("link"))
        .and_then(|l| l.as_array())
        .map_or(0, |a| a.len());
    let mut events = t
        .get("events")
        .and_then(|e| e.as_table())
        .cloned()
        .unwrap_or_default();
    if let Some(r) = p.goal_jump_rate {
        events.insert("goal_jump_rate".into(), Value::Float(r));
    }
    if let Some(times) = &p.goal_jump_times {
        let a = times.iter().map(|&x| Value::Float(x)).collect();
        events.insert("goal_jump_times".into(), Value::Array(a));
    }
    if p.goal_jump_rate.is_some() || p.goal_jump_times.is_some() {
        t.insert("events".into(), Value::Table(events));
    }
    let mut obstacles: Vec<Value> = t
        .get("obstacle")
        .and_then(|o| o.as_array())
        .cloned()
        .unwrap_or_default();
    if let Some(m) = &p.obstacle_motion {
        const KEYS: [&str; 5] = ["motion", "velocity", "amplitude", "period", "phase"];
        if let Some(k) = m.keys().find(|k| !KEYS.contains(&k.as_str())) {
            return Err((
                "obstacle_motion".into(),
                format!("`{k}` is not a motion key; use {}", KEYS.join(", ")),
            ));
        }
        let still: Vec<usize> = (0..obstacles.len())
            .filter(|&k| {
                obstacles[k]
                    .get("motion")
                    .and_then(|x| x.as_str())
                    .is_none_or(|s| s == "still")
            })
            .collect();
        if still.is_empty() {
            return Err((
                "obstacle_motion".into(),
                "the scenario has no still obstacle to set in motion".into(),
            ));
        }
        let sine = m.get("motion").and_then(|x| x.as_str()) == Some("sine");
        for (j, &k) in still.iter().enumerate() {
            if let Value::Table(o) = &mut obstacles[k] {
                deep_merge(o, m);
                if sine && !m.contains_key("phase") {
                    let phase = 2.0 * std::f64::consts::PI * j as f64 / still.len() as f64;
                    o.insert("phase".into(), Value::Float(phase));
                }
            }
        }
    }
    if let Some(extra) = &p.extra_obstacles {
        obstacles.extend(extra.iter().cloned().map(Value::Table));
    }
    if p.obstacle_motion.is_some() || p.extra_obstacles.is_some() {
        t.insert("obstacle".into(), Value::Array(obstacles));
    }
    let factors = match &p.link_mass_factor {
        Some(v) => Some(per_joint(v, links, "link_mass_factor")?),
        None => None,
    };
    let damping = match &p.link_damping {
        Some(v) => Some(per_joint(v, links, "link_damping")?),
        None => None,
    };
    if let Some(f) = &factors {
        if let Some(bad) = f.iter().find(|x| !(**x > 0.0 && **x <= MAX_MASS_FACTOR)) {
            return Err((
                "link_mass_factor".into(),
                format!("factors must be in (0, {MAX_MASS_FACTOR}], got {bad}"),
            ));
        }
    }
    if let Some(d) = &damping {
        if let Some(bad) = d.iter().find(|x| !(x.is_finite() && **x >= 0.0)) {
            return Err((
                "link_damping".into(),
                format!("damping must be finite and >= 0 N m s/rad, got {bad}"),
            ));
        }
    }
    if let Some(Value::Array(ls)) = t.get_mut("arm").and_then(|a| a.get_mut("link")) {
        for (i, l) in ls.iter_mut().enumerate() {
            let Value::Table(l) = l else { continue };
            if let Some(f) = &factors {
                for key in ["mass", "inertia"] {
                    let x = l
                        .get(key)
                        .and_then(|x| x.as_float().or(x.as_integer().map(|i| i as f64)));
                    if let Some(x) = x {
                        l.insert(key.into(), Value::Float(x * f[i]));
                    }
                }
            }
            if let Some(d) = &damping {
                l.insert("damping".into(), Value::Float(d[i]));
            }
        }
    }
    if let Some(s) = &p.scenario {
        deep_merge(&mut t, s);
    }
    Ok(t)
}

/// The probe key a scenario error at `path` (relative to the scenario) comes from.
fn blame(p: &RawProbe, path: &str, obstacles_before: usize) -> &'static str {
    let path = path.trim_start_matches("scenario.");
    if path.starts_with("events") && (p.goal_jump_rate.is_some() || p.goal_jump_times.is_some()) {
        return if path.contains("goal_jump_times") && p.goal_jump_times.is_some() {
            "goal_jump_times"
        } else {
            "goal_jump_rate"
        };
    }
    if let Some(rest) = path.strip_prefix("obstacle[") {
        let k: usize = rest
            .split(']')
            .next()
            .and_then(|s| s.parse().ok())
            .unwrap_or(0);
        if k >= obstacles_before && p.extra_obstacles.is_some() {
            return "extra_obstacles";
        }
        if p.obstacle_motion.is_some() {
            return "obstacle_motion";
        }
    }
    if path.starts_with("arm.link") {
        if p.link_mass_factor.is_some() && (path.ends_with("mass") || path.ends_with("inertia")) {
            return "link_mass_factor";
        }
        if p.link_damping.is_some() && path.ends_with("damping") {
            return "link_damping";
        }
    }
    if p.scenario.is_some() {
        "scenario"
    } else {
        "name"
    }
}

/// Words for what a probe changes.
fn describe(p: &RawProbe, episodes: u64) -> Vec<String> {
    let mut c = Vec::new();
    if let Some(r) = p.goal_jump_rate {
        c.push(format!("random goal jumps: {r} per second"));
    }
    if let Some(t) = &p.goal_jump_times {
        c.push(format!("goal jumps at {t:?} s"));
    }
    if let Some(m) = &p.obstacle_motion {
        c.push(format!(
            "still obstacles move: {}",
            Value::Table(m.clone()).to_string().trim()
        ));
    }
    if let Some(e) = &p.extra_obstacles {
        c.push(format!("{} more obstacle(s)", e.len()));
    }
    if let Some(f) = &p.link_mass_factor {
        c.push(format!("link masses x {f}"));
    }
    if let Some(d) = &p.link_damping {
        c.push(format!("joint damping {d} N m s/rad"));
    }
    if p.link_mass_factor.is_some() || p.link_damping.is_some() {
        c.push(
            "the acceleration controller's inverse dynamics keeps the trained arm (model error)"
                .into(),
        );
    }
    if let Some(n) = p.observation_noise.filter(|n| *n > 0.0) {
        c.push(format!(
            "Gaussian noise, sd {n}, on every observation entry (policies; the controller reads the state)"
        ));
    }
    if let Some(s) = &p.start_region {
        c.push(format!(
            "starts drawn in q from {:?} to {:?} rad",
            s.q_min, s.q_max
        ));
    }
    if let Some(s) = &p.scenario {
        let mut flat = BTreeMap::new();
        flatten(s, "scenario", &mut flat);
        c.extend(flat.into_iter().map(|(k, v)| format!("{k} = {v}")));
    }
    if c.is_empty() {
        c.push("nothing (the training condition)".into());
    }
    c.push(format!("{episodes} evaluation episodes"));
    c
}

/// Validate every `[[probe]]` against every variant.
pub(super) fn validate_probes(
    raw: &[RawProbe],
    variants: &[VariantSpec],
    st: &StudySettings,
    o: &str,
    src: &str,
) -> Result<Vec<ProbeSpec>, ConfigError> {
    if raw.len() > MAX_PROBES {
        return Err(ConfigError::at(
            o,
            src,
            "probe",
            format!("{} probes; at most {MAX_PROBES} are allowed", raw.len()),
        ));
    }
    let mut out: Vec<ProbeSpec> = Vec::new();
    for (i, p) in raw.iter().enumerate() {
        let at = |key: &str, m: String| {
            let path = format!("probe[{i}].{key}");
            let mut e = ConfigError::at(o, src, &path, m);
            if e.line.is_none() {
                e.line = crate::config::locate_line(src, &format!("probe[{i}].name"));
            }
            e
        };
        if !safe_name(&p.name) {
            return Err(at(
                "name",
                format!(
                    "`{}` is not safe as a name; use letters, digits, -, _, . or =",
                    p.name
                ),
            ));
        }
        if out.iter().any(|q| q.name == p.name) {
            return Err(at("name", format!("duplicate probe name `{}`", p.name)));
        }
        let episodes = p.episodes.unwrap_or(st.eval_episodes);
        if !(1..=MAX_EVAL_EPISODES).contains(&episodes) {
            return Err(at(
                "episodes",
                format!("must be in 1..={MAX_EVAL_EPISODES}, got {episodes}"),
            ));
        }
        let noise = p.observation_noise.unwrap_or(0.0);
        if !(0.0..=MAX_NOISE).contains(&noise) {
            return Err(at(
                "observation_noise",
                format!("must be a standard deviation in [0, {MAX_NOISE}], got {noise}"),
            ));
        }
        let region = p
            .start_region
            .as_ref()
            .map(|r| (r.q_min.clone(), r.q_max.clone()));
        if let Some((lo, hi)) = &region {
            if lo.len() != hi.len() {
                return Err(at(
                    "start_region",
                    format!("q_min has {} values, q_max {}", lo.len(), hi.len()),
                ));
            }
            if let Some(k) =
                (0..lo.len()).find(|&k| !(lo[k].is_finite() && hi[k].is_finite() && lo[k] < hi[k]))
            {
                return Err(at(
                    "start_region",
                    format!(
                        "joint {}: q_min {} must be below q_max {}",
                        k + 1,
                        lo[k],
                        hi[k]
                    ),
                ));
            }
        }
        let mut per_variant = Vec::with_capacity(variants.len());
        for v in variants {
            let merged: Table = toml::from_str(&v.merged).map_err(|e| at("name", e.to_string()))?;
            let base = merged
                .get("scenario")
                .and_then(|s| s.as_table())
                .cloned()
                .unwrap_or_default();
            let before = base
                .get("obstacle")
                .and_then(|x| x.as_array())
                .map_or(0, |a| a.len());
            let t = apply(p, &base).map_err(|(k, m)| at(&k, m))?;
            let mut sc =
                Scenario::from_toml_value(Value::Table(t.clone()), "", o).map_err(|e| {
                    at(
                        blame(p, &e.path, before),
                        format!(
                            "makes an invalid scenario for variant `{}`: {}: {}",
                            v.name, e.path, e.message
                        ),
                    )
                })?;
            if sc.n() != v.scenario.n() || sc.control != v.scenario.control {
                return Err(at(
                    blame(p, "arm", before),
                    format!("must keep the arm's joints and control mode (variant `{}`: its policies observe and drive {} joints)", v.name, v.scenario.n()),
                ));
            }
            if p.link_mass_factor.is_some() || p.link_damping.is_some() {
                // Model error: the acceleration controller's inverse dynamics keeps the arm it was trained
                // on; with exact inverse dynamics of the changed arm, heavier or more damped links would only
                // show through the torque limits.
                sc.control_model = Some(v.scenario.arm.clone());
            }
            if let Some((lo, _)) = &region {
                if lo.len() != sc.n() {
                    return Err(at(
                        "start_region",
                        format!(
                            "has {} joints; variant `{}` drives {}",
                            lo.len(),
                            v.name,
                            sc.n()
                        ),
                    ));
                }
            }
            let text = toml::to_string(&t).map_err(|e| at("name", e.to_string()))?;
            let region_text = format!("{region:?}|model error: {}", sc.control_model.is_some());
            let hash = fnv1a_hex(&[
                b"probe",
                p.name.as_bytes(),
                text.as_bytes(),
                &noise.to_bits().to_le_bytes(),
                region_text.as_bytes(),
                &(episodes as u64).to_le_bytes(),
                &st.eval_seed.to_le_bytes(),
            ]);
            per_variant.push((Arc::new(sc), hash));
        }
        out.push(ProbeSpec {
            name: p.name.clone(),
            episodes: episodes as u64,
            noise,
            start_region: region,
            changes: describe(p, episodes as u64),
            per_variant,
        });
    }
    Ok(out)
}
