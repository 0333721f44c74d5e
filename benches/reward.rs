//! Cost of composing the reward for one step with every built-in term enabled (path terms projecting the
//! effector on a 16- and a 32-waypoint reference path), on reports recorded from the simulator; and the
//! path projection alone (the composer's precomputed track vs the planner's `Polyline::project`).
//!
//! Each benchmark runs twice: in wall time (criterion's default) and in the thread's own CPU time
//! (`CLOCK_THREAD_CPUTIME_ID`, Linux), which does not count time the thread spends descheduled, so the
//! figure stays meaningful on a machine shared with other jobs.

use criterion::measurement::Measurement;
use criterion::{criterion_group, Criterion};
use std::hint::black_box;
use std::sync::Arc;
use termwise::plan::{Polyline, ReferencePath};
use termwise::reward::{Composer, PathTrack, RewardSpec};
use termwise::sim::{ArmEnv, Scenario, StepReport, MAX_JOINTS};

const ALL_TERMS: &str = "
[reward.goal]
bonus = 10.0
dense = 0.1
[reward.time]
cost = 0.01
[reward.acceleration]
joint = 1e-4
action_change = 1e-4
[reward.waypoint_distance]
scale = 1.0
[reward.waypoint_progress]
scale = 1.0
[reward.collision]
penalty = 1.0
terminate = false
[reward.potential]
phi = \"remaining-path\"
";

/// 400 consecutive reports from the benchmark scenario under a gentle oscillating command.
fn recorded() -> Vec<StepReport> {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/table-2link-4obs.toml"
    );
    let src = std::fs::read_to_string(path).expect("scenario file");
    let mut env = ArmEnv::new(Arc::new(
        Scenario::from_toml_str(&src, path).expect("scenario"),
    ));
    let mut out = vec![env.last_report()];
    for k in 0..399 {
        let s = (k as f64 * 0.0314).sin();
        out.push(env.step(&[2.0 * s, -1.5 * s]));
    }
    out
}

/// A reference path of `k` waypoints on an arc from the first effector position to the goal.
fn arc_path(from: [f64; 2], to: [f64; 2], k: usize) -> ReferencePath {
    let points = (0..k)
        .map(|i| {
            let u = i as f64 / (k - 1) as f64;
            let bulge = 0.15 * (std::f64::consts::PI * u).sin();
            [
                from[0] + u * (to[0] - from[0]) - bulge * (to[1] - from[1]),
                from[1] + u * (to[1] - from[1]) + bulge * (to[0] - from[0]),
            ]
        })
        .collect();
    ReferencePath {
        joints: vec![[0.0; MAX_JOINTS]; k],
        points,
        fallback: false,
    }
}

/// Thread CPU time (Linux `clock_gettime(CLOCK_THREAD_CPUTIME_ID)`), reported like wall time.
#[cfg(target_os = "linux")]
mod cpu_time {
    use criterion::measurement::{Measurement, ValueFormatter, WallTime};

    #[repr(C)]
    struct Timespec {
        tv_sec: i64,
        tv_nsec: i64,
    }
    extern "C" {
        fn clock_gettime(clock: i32, tp: *mut Timespec) -> i32;
    }
    /// Linux's clock id for the calling thread's CPU time.
    const CLOCK_THREAD_CPUTIME_ID: i32 = 3;

    fn now_ns() -> u64 {
        let mut ts = Timespec {
            tv_sec: 0,
            tv_nsec: 0,
        };
        // SAFETY: `ts` is a valid, writable timespec (two 64-bit fields on 64-bit Linux).
        let rc = unsafe { clock_gettime(CLOCK_THREAD_CPUTIME_ID, &mut ts) };
        assert_eq!(rc, 0, "clock_gettime failed");
        ts.tv_sec as u64 * 1_000_000_000 + ts.tv_nsec as u64
    }

    static WALL: WallTime = WallTime;

    /// Criterion measurement in thread CPU nanoseconds.
    pub struct ThreadCpu;

    impl Measurement for ThreadCpu {
        type Intermediate = u64;
        type Value = u64;
        fn start(&self) -> u64 {
            now_ns()
        }
        fn end(&self, i: u64) -> u64 {
            now_ns() - i
        }
        fn add(&self, a: &u64, b: &u64) -> u64 {
            a + b
        }
        fn zero(&self) -> u64 {
            0
        }
        fn to_f64(&self, v: &u64) -> f64 {
            *v as f64
        }
        fn formatter(&self) -> &dyn ValueFormatter {
            WALL.formatter()
        }
    }
}

fn bench_compose<M: Measurement + 'static>(c: &mut Criterion<M>, clock: &str) {
    let reports = recorded();
    let spec = RewardSpec::from_toml_str(ALL_TERMS, "bench").expect("reward table");
    assert_eq!(spec.term_names().len(), 7);
    for k in [16, 32] {
        let path = arc_path(reports[0].ee, reports[0].goal, k);
        let mut comp = Composer::new(&spec, 0.99);
        comp.reset(&reports[0], Some(&path));
        let mut i = 0usize;
        c.bench_function(
            &format!("reward_step_all_terms_{k}_waypoints_{clock}"),
            |b| {
                b.iter(|| {
                    i += 1;
                    if i == reports.len() {
                        i = 1;
                        comp.reset(&reports[0], Some(&path));
                    }
                    black_box(comp.step(black_box(&reports[i - 1]), black_box(&reports[i])))
                })
            },
        );
    }
    let path = arc_path(reports[0].ee, reports[0].goal, 16);
    let track = PathTrack::from_path(&path);
    let mut i = 0usize;
    c.bench_function(&format!("path_projection_track_16_{clock}"), |b| {
        b.iter(|| {
            i = (i + 1) % reports.len();
            black_box(track.project(black_box(reports[i].ee), reports[i].goal))
        })
    });
    let polyline = Polyline {
        points: &path.points,
    };
    c.bench_function(&format!("path_projection_polyline_16_{clock}"), |b| {
        b.iter(|| {
            i = (i + 1) % reports.len();
            black_box(polyline.project(black_box(reports[i].ee)))
        })
    });
}

fn wall(c: &mut Criterion) {
    bench_compose(c, "wall");
}

#[cfg(target_os = "linux")]
fn cpu() {
    let mut c = Criterion::default()
        .with_measurement(cpu_time::ThreadCpu)
        .configure_from_args();
    bench_compose(&mut c, "cpu");
}
#[cfg(not(target_os = "linux"))]
fn cpu() {}

// No criterion plots: plotters is built with the pure-Rust text path and no system fonts, on which
// criterion's own charts cannot find a font (our charts register an embedded one).
criterion_group! {
    name = benches;
    config = Criterion::default().without_plots();
    targets = wall
}

fn main() {
    benches();
    cpu();
    Criterion::default().configure_from_args().final_summary();
}
