//! Fuzz-style property test of input validation: thousands of generated experiment and scenario files (valid
//! files with keys set to random types and values — NaN, infinities, huge and negative numbers, strings,
//! arrays, tables —, keys removed or invented, text truncated or garbled) go through the path `termwise check`
//! takes (`experiment::parse`, then the plan text without calibration) and the scenario reader. Every file
//! must be either accepted with every work-driving count within its documented bound, or rejected with one
//! line that names the file and a key path or a line. A panic fails the test.
//!
//! The runner is seeded (a fixed ChaCha seed), so every run checks the same files.

use proptest::prelude::*;
use proptest::test_runner::{Config, RngAlgorithm, TestCaseError, TestRng, TestRunner};
use std::cell::Cell;
use std::path::Path;
use termwise::config::ConfigError;
use termwise::sim::scenario as sc;
use termwise::sim::Scenario;
use termwise::study::experiment::{self as ex, Experiment};
use toml::{Table, Value};

/// Generated files per kind (experiments and scenarios: twice this in all).
const CASES: u32 = 6_000;

const SCENARIO: &str = r#"
name = "fuzz"
[arm]
control = "acceleration"
gravity = 0.0
[[arm.link]]
length = 0.42
mass = 1.6
q_min = -3.0
q_max = 3.0
v_max = 4.0
tau_max = 18.0
acc_max = 30.0
[[arm.link]]
length = 0.33
mass = 0.9
v_max = 4.0
tau_max = 8.0
acc_max = 30.0
[physics]
dt = 0.001
substeps = 10
horizon = 200
[workspace]
min = [-0.9, -0.9]
max = [0.9, 0.9]
[start]
q = [0.3, 0.8]
[goal]
position = [0.35, 0.45]
tolerance = 0.05
[[obstacle]]
shape = "disc"
center = [0.5, -0.2]
radius = 0.09
[[obstacle]]
shape = "box"
center = [-0.5, 0.4]
half = [0.05, 0.1]
motion = "sine"
amplitude = [0.1, 0.0]
period = 2.0
[events]
goal_jump_times = [0.5]
goal_jump_rate = 0.3
[random]
obstacle_count = [0, 2]
obstacle_radius = [0.03, 0.08]
"#;

const EXPERIMENT: &str = r#"
[study]
name = "fuzz"
seeds = 3
budget = 4096
eval_every = 1024
eval_episodes = 8
[plan]
waypoints = 4
iterations = 300
[reward.goal]
bonus = 5.0
[reward.time]
cost = 0.01
[reward.acceleration]
joint = 0.0001
[reward.waypoint_progress]
weight = 2.0
[reward.collision]
penalty = 0.05
terminate = false
[curriculum]
kind = "staged"
window = 20
[[curriculum.stages]]
obstacles = 0
goal_distance = 0.3
jump_rate = 0.0
[[curriculum.stages]]
obstacles = 2
goal_distance = 1.0
jump_rate = 0.2
[learner]
num_envs = 4
rollout_steps = 64
minibatch_size = 64
epochs = 2
hidden = [16, 16]
[observation]
waypoints = true
[baseline]
kp = 300.0
[generate]
leave_one_out = ["time"]
[generate.grid]
"reward.goal.weight" = [0.5, 1.0]
[[variant]]
name = "a"
[[variant]]
name = "b"
[variant.reward.waypoint_progress]
weight = 0.0
[[variant]]
name = "ctl"
kind = "baseline"
"#;

/// Keys of the scenario the mutations aim at (dotted; numbers index arrays of tables).
const SCENARIO_KEYS: &[&str] = &[
    "name",
    "arm",
    "arm.control",
    "arm.gravity",
    "arm.link",
    "arm.link.0.length",
    "arm.link.0.mass",
    "arm.link.1.com",
    "arm.link.1.inertia",
    "arm.link.0.damping",
    "arm.link.1.radius",
    "arm.link.0.q_min",
    "arm.link.0.q_max",
    "arm.link.1.v_max",
    "arm.link.0.tau_max",
    "arm.link.1.acc_max",
    "physics",
    "physics.integrator",
    "physics.dt",
    "physics.substeps",
    "physics.horizon",
    "physics.self_collision",
    "workspace.min",
    "workspace.max",
    "start.q",
    "start.dq",
    "goal",
    "goal.position",
    "goal.tolerance",
    "obstacle",
    "obstacle.0.shape",
    "obstacle.0.center",
    "obstacle.0.radius",
    "obstacle.1.half",
    "obstacle.1.motion",
    "obstacle.1.velocity",
    "obstacle.1.amplitude",
    "obstacle.1.period",
    "obstacle.1.phase",
    "events.goal_jump_times",
    "events.goal_jump_rate",
    "events.replan_margin",
    "random.obstacle_count",
    "random.obstacle_radius",
    "random.region_min",
    "random.region_max",
];

/// Keys of the experiment outside its inline scenario.
const EXPERIMENT_KEYS: &[&str] = &[
    "study",
    "study.name",
    "study.seeds",
    "study.budget",
    "study.eval_every",
    "study.eval_episodes",
    "study.eval_seed",
    "study.success_threshold",
    "study.reference",
    "study.final_window",
    "plan.planner",
    "plan.iterations",
    "plan.time_budget_ms",
    "plan.waypoints",
    "plan.step",
    "plan.goal_bias",
    "plan.rewire_factor",
    "plan.shortcut_passes",
    "plan.clearance_margin",
    "plan.ik_seeds",
    "plan.ik_tolerance",
    "reward",
    "reward.goal.bonus",
    "reward.goal.dense",
    "reward.goal.weight",
    "reward.time.cost",
    "reward.time.weight",
    "reward.acceleration.joint",
    "reward.acceleration.action_change",
    "reward.waypoint_progress.weight",
    "reward.waypoint_progress.scale",
    "reward.collision.penalty",
    "reward.collision.terminate",
    "reward.potential.phi",
    "curriculum.kind",
    "curriculum.window",
    "curriculum.success_threshold",
    "curriculum.start_radius",
    "curriculum.stages",
    "curriculum.stages.0.obstacles",
    "curriculum.stages.1.goal_distance",
    "curriculum.stages.1.jump_rate",
    "learner.num_envs",
    "learner.rollout_steps",
    "learner.minibatch_size",
    "learner.epochs",
    "learner.hidden",
    "learner.learning_rate",
    "learner.gamma",
    "learner.clip_epsilon",
    "learner.init_log_std",
    "observation.waypoints",
    "baseline.kp",
    "baseline.kd",
    "baseline.speed_fraction",
    "generate.leave_one_out",
    "generate.one_only",
    "generate.grid",
    "variant",
    "variant.0.name",
    "variant.1.reward.waypoint_progress.weight",
    "variant.1.learner.num_envs",
    "variant.1.scenario.physics.horizon",
    "variant.2.kind",
    "variant.2.baseline.kp",
];

/// One change to a file.
#[derive(Clone, Debug)]
enum Op {
    /// Set the key (index into the key list) to a value.
    Set(usize, Value),
    /// Add an unknown key beside the key's table.
    Invent(usize, String, Value),
    /// Remove the key.
    Remove(usize),
    /// Cut the text at this fraction of its length.
    Truncate(f64),
    /// Insert a line of text at this fraction of the text.
    Insert(f64, String),
}

fn float() -> impl Strategy<Value = f64> {
    prop_oneof![
        Just(f64::NAN),
        Just(f64::INFINITY),
        Just(f64::NEG_INFINITY),
        Just(f64::MAX),
        Just(-f64::MAX),
        Just(1e300),
        Just(1e12),
        Just(f64::MIN_POSITIVE),
        Just(0.0),
        Just(-0.0),
        Just(-1.0),
        -10.0..10.0f64,
        any::<f64>(),
    ]
}

fn integer() -> impl Strategy<Value = i64> {
    prop_oneof![
        Just(i64::MAX),
        Just(i64::MIN),
        Just(i64::MAX - 1000),
        Just(1_000_000_000_000i64),
        Just(1_000_000i64),
        Just(100_000i64),
        Just(0i64),
        Just(-1i64),
        0..5000i64,
        any::<i64>(),
    ]
}

fn leaf() -> impl Strategy<Value = Value> {
    prop_oneof![
        3 => float().prop_map(Value::Float),
        3 => integer().prop_map(Value::Integer),
        1 => "[a-z_ .-]{0,10}".prop_map(Value::String),
        1 => any::<bool>().prop_map(Value::Boolean),
    ]
}

fn value() -> impl Strategy<Value = Value> {
    prop_oneof![
        10 => leaf(),
        // Pairs and lists of numbers, as `goal.position`, `start.q` or `hidden` take.
        2 => prop::collection::vec(float().prop_map(Value::Float), 2).prop_map(Value::Array),
        1 => prop::collection::vec(integer().prop_map(Value::Integer), 0..4).prop_map(Value::Array),
        1 => prop::collection::vec(leaf(), 0..4).prop_map(Value::Array),
        1 => prop::collection::btree_map("[a-z_]{1,8}", leaf(), 0..3)
            .prop_map(|m| Value::Table(m.into_iter().collect())),
    ]
}

fn op(keys: usize) -> impl Strategy<Value = Op> {
    prop_oneof![
        6 => (0..keys, value()).prop_map(|(k, v)| Op::Set(k, v)),
        1 => (0..keys, "[a-z_]{1,10}", value()).prop_map(|(k, n, v)| Op::Invent(k, n, v)),
        2 => (0..keys).prop_map(Op::Remove),
        1 => (0.0..1.0f64).prop_map(Op::Truncate),
        1 => (0.0..1.0f64, "[\\[\\]a-z0-9=\". ,{}#-]{0,20}").prop_map(|(at, s)| Op::Insert(at, s)),
    ]
}

/// One change (most often) or a few.
fn ops(keys: usize) -> impl Strategy<Value = Vec<Op>> {
    prop_oneof![
        3 => prop::collection::vec(op(keys), 1..2),
        1 => prop::collection::vec(op(keys), 2..5),
    ]
}

/// The table holding `path`'s last segment, walking tables and (by number) arrays of tables; created
/// tables on the way when `create`.
fn parent<'a>(t: &'a mut Table, path: &[&str]) -> Option<&'a mut Table> {
    let mut cur = t;
    let mut i = 0;
    while i < path.len() {
        let seg = path[i];
        let next = cur
            .entry(seg.to_string())
            .or_insert_with(|| Value::Table(Table::new()));
        match next {
            Value::Table(sub) => cur = sub,
            Value::Array(items) => {
                let idx: usize = path.get(i + 1)?.parse().ok()?;
                i += 1;
                match items.get_mut(idx)? {
                    Value::Table(sub) => cur = sub,
                    _ => return None,
                }
            }
            _ => return None,
        }
        i += 1;
    }
    Some(cur)
}

/// Apply the structural operations to `base` (a TOML document), then the text operations.
fn mutate(base: &str, prefix: &str, keys: &[&str], ops: &[Op]) -> String {
    let mut doc: Table = base.parse().expect("base document parses");
    let split = |k: usize| -> Vec<String> {
        let full = if prefix.is_empty() {
            keys[k].to_string()
        } else {
            format!("{prefix}.{}", keys[k])
        };
        full.split('.').map(str::to_string).collect()
    };
    for o in ops {
        match o {
            Op::Set(k, v) | Op::Invent(k, _, v) => {
                let segs = split(*k);
                let refs: Vec<&str> = segs.iter().map(String::as_str).collect();
                let (last, up) = refs.split_last().expect("non-empty key");
                let name = match o {
                    Op::Invent(_, n, _) => n.as_str(),
                    _ => last,
                };
                if let Some(t) = parent(&mut doc, up) {
                    t.insert(name.to_string(), v.clone());
                }
            }
            Op::Remove(k) => {
                let segs = split(*k);
                let refs: Vec<&str> = segs.iter().map(String::as_str).collect();
                let (last, up) = refs.split_last().expect("non-empty key");
                if let Some(t) = parent(&mut doc, up) {
                    t.remove(*last);
                }
            }
            Op::Truncate(_) | Op::Insert(..) => {}
        }
    }
    let mut text = toml::to_string(&doc).unwrap_or_else(|_| base.to_string());
    for o in ops {
        let at = |f: f64, text: &str| {
            let mut i = ((text.len() as f64) * f) as usize;
            while !text.is_char_boundary(i) {
                i -= 1;
            }
            i
        };
        match o {
            Op::Truncate(f) => {
                let i = at(*f, &text);
                text.truncate(i);
            }
            Op::Insert(f, s) => {
                let i = at(*f, &text);
                text.insert_str(i, &format!("\n{s}\n"));
            }
            _ => {}
        }
    }
    text
}

/// A rejection must be one line naming the file and a key path or a line.
fn check_error(e: &ConfigError, origin: &str, src: &str) -> Result<(), TestCaseError> {
    let shown = e.to_string();
    prop_assert!(!shown.contains('\n'), "multi-line error: {shown}\n{src}");
    prop_assert!(shown.starts_with(origin), "error without the file: {shown}");
    prop_assert!(
        e.line.is_some() || !e.path.is_empty(),
        "error names neither a key nor a line: {shown}\n--- file:\n{src}"
    );
    Ok(())
}

/// An accepted scenario keeps every work-driving count within its bound.
fn check_scenario_bounds(s: &Scenario) -> Result<(), TestCaseError> {
    prop_assert!(s.horizon >= 1 && s.horizon as i64 <= sc::MAX_HORIZON);
    prop_assert!(s.substeps >= 1 && s.substeps as i64 <= sc::MAX_SUBSTEPS);
    prop_assert!((s.horizon * s.substeps) as i64 <= sc::MAX_EPISODE_PHYSICS_STEPS);
    prop_assert!(s.dt > 0.0 && s.dt <= sc::MAX_DT);
    prop_assert!(s.obstacles.len() <= sc::MAX_OBSTACLES);
    prop_assert!(s.events.goal_jump_times.len() <= sc::MAX_GOAL_JUMP_TIMES);
    prop_assert!((0.0..=sc::MAX_GOAL_JUMP_RATE).contains(&s.events.goal_jump_rate));
    prop_assert!(s.arm.reach().is_finite());
    prop_assert!(
        sc::check_goal(
            &s.arm,
            s.goal,
            s.goal_tolerance,
            s.workspace_min,
            s.workspace_max
        )
        .is_ok(),
        "accepted an unreachable goal {:?}",
        s.goal
    );
    if let Some(r) = &s.random {
        prop_assert!(r.obstacle_count[1] <= sc::MAX_OBSTACLES);
    }
    Ok(())
}

/// An accepted experiment keeps every work-driving count within its bound, and `check` prints its plan.
fn check_experiment_bounds(e: &Experiment) -> Result<(), TestCaseError> {
    let st = &e.study;
    prop_assert!((1..=ex::MAX_SEEDS).contains(&st.seeds));
    prop_assert!((1..=ex::MAX_BUDGET).contains(&st.budget));
    prop_assert!((1..=ex::MAX_EVAL_EPISODES).contains(&st.eval_episodes));
    prop_assert!(st.budget as u64 / e.eval_every() < ex::MAX_EVALUATIONS as u64);
    prop_assert!(e.variants.len() <= ex::MAX_VARIANTS);
    prop_assert!(termwise::study::plan_runs(e, Path::new("unused")).len() as i64 <= ex::MAX_RUNS);
    for v in &e.variants {
        check_scenario_bounds(&v.scenario)?;
        prop_assert!(v.plan.iterations <= termwise::plan::spec::MAX_ITERATIONS);
        prop_assert!(v.learner.batch_size() <= 1_000_000);
        prop_assert!(v.learner.epochs <= 1_000);
        for t in &v.reward.present {
            prop_assert!(t.weight.abs() <= termwise::reward::MAX_MAGNITUDE);
        }
    }
    let text = termwise::study::check_text(e, 2, false)
        .map_err(|err| TestCaseError::fail(format!("check failed on an accepted file: {err}")))?;
    prop_assert!(text.contains("plan ("), "{text}");
    Ok(())
}

fn runner() -> TestRunner {
    let config = Config {
        cases: CASES,
        failure_persistence: None,
        ..Config::default()
    };
    // A fixed seed: the same files on every run.
    TestRunner::new_with_rng(config, TestRng::from_seed(RngAlgorithm::ChaCha, &[7u8; 32]))
}

#[test]
fn generated_scenario_files_are_accepted_within_bounds_or_rejected_with_a_key() {
    let origin = "fuzz-scenario.toml";
    let accepted = Cell::new(0u32);
    let rejected = Cell::new(0u32);
    let strategy = ops(SCENARIO_KEYS.len());
    runner()
        .run(&strategy, |ops| {
            let src = mutate(SCENARIO, "", SCENARIO_KEYS, &ops);
            match Scenario::from_toml_str(&src, origin) {
                Ok(s) => {
                    accepted.set(accepted.get() + 1);
                    check_scenario_bounds(&s)
                }
                Err(e) => {
                    rejected.set(rejected.get() + 1);
                    check_error(&e, origin, &src)
                }
            }
        })
        .unwrap();
    let (accepted, rejected) = (accepted.get(), rejected.get());
    eprintln!("scenario files: {accepted} accepted, {rejected} rejected");
    assert_eq!(accepted + rejected, CASES);
    // Both outcomes occur, so both kinds of check ran.
    assert!(accepted > 100 && rejected > 100, "{accepted} / {rejected}");
}

#[test]
fn generated_experiment_files_pass_check_within_bounds_or_are_rejected_with_a_key() {
    let origin = "fuzz-experiment.toml";
    // The base: the experiment with the scenario inline (no file to read).
    let mut base: Table = EXPERIMENT.parse().unwrap();
    base.insert(
        "scenario".into(),
        Value::Table(SCENARIO.parse::<Table>().unwrap()),
    );
    let base = toml::to_string(&base).unwrap();
    let keys: Vec<String> = EXPERIMENT_KEYS
        .iter()
        .map(|k| k.to_string())
        .chain(SCENARIO_KEYS.iter().map(|k| format!("scenario.{k}")))
        .collect();
    let keys: Vec<&str> = keys.iter().map(String::as_str).collect();
    ex::parse(&base, Path::new(origin)).expect("the base experiment is valid");
    let accepted = Cell::new(0u32);
    let rejected = Cell::new(0u32);
    let strategy = ops(keys.len());
    runner()
        .run(&strategy, |ops| {
            let src = mutate(&base, "", &keys, &ops);
            match ex::parse(&src, Path::new(origin)) {
                Ok(e) => {
                    accepted.set(accepted.get() + 1);
                    check_experiment_bounds(&e)
                }
                Err(e) => {
                    rejected.set(rejected.get() + 1);
                    check_error(&e, origin, &src)
                }
            }
        })
        .unwrap();
    let (accepted, rejected) = (accepted.get(), rejected.get());
    eprintln!("experiment files: {accepted} accepted, {rejected} rejected");
    assert_eq!(accepted + rejected, CASES);
    assert!(accepted > 100 && rejected > 100, "{accepted} / {rejected}");
}
