//! The reward composer's `step` must not allocate (the speed requirement): counted with a global
//! allocator wrapper around the system allocator over many steps with every term enabled. The count is per
//! thread, so the other tests of this crate, running beside it, do not disturb it.

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;
use std::sync::Arc;
use termwise::plan::ReferencePath;
use termwise::reward::{Composer, RewardSpec};
use termwise::sim::{ArmEnv, Scenario, MAX_JOINTS};

struct Counting;

thread_local! {
    /// Allocations made by this thread (a const initialiser: reading it never allocates).
    static ALLOCS: Cell<usize> = const { Cell::new(0) };
}

fn allocations_here() -> usize {
    ALLOCS.with(Cell::get)
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, l: Layout) -> *mut u8 {
        // try_with: a thread being torn down has no counter left; its allocations are not ours.
        let _ = ALLOCS.try_with(|c| c.set(c.get() + 1));
        // SAFETY: forwarded unchanged to the system allocator.
        unsafe { System.alloc(l) }
    }
    unsafe fn dealloc(&self, p: *mut u8, l: Layout) {
        // SAFETY: forwarded unchanged to the system allocator.
        unsafe { System.dealloc(p, l) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

#[test]
fn composer_step_does_not_allocate() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/experiments/scenarios/table-2link-4obs.toml"
    );
    let sc = Scenario::from_toml_str(&std::fs::read_to_string(path).unwrap(), path).unwrap();
    let mut env = ArmEnv::new(Arc::new(sc));
    let mut reports = vec![env.last_report()];
    for k in 0..300 {
        let s = (k as f64 * 0.03).sin();
        reports.push(env.step(&[3.0 * s, -2.0 * s]));
    }
    let spec = RewardSpec::from_toml_str(
        "[reward.goal]\ndense = 0.1\n[reward.time]\n[reward.acceleration]\n[reward.waypoint_distance]\n\
         [reward.waypoint_progress]\n[reward.collision]\nterminate = false\n[reward.potential]\n",
        "t",
    )
    .unwrap();
    // 40 waypoints: more than one projection chunk.
    let ref_path = ReferencePath {
        joints: vec![[0.0; MAX_JOINTS]; 40],
        points: (0..40)
            .map(|i| [0.5 - 0.01 * i as f64, 0.01 * i as f64])
            .collect(),
        fallback: false,
    };
    let mut c = Composer::new(&spec, 0.99);
    c.reset(&reports[0], Some(&ref_path));
    let before = allocations_here();
    let mut total = 0.0;
    for w in reports.windows(2) {
        total += c.step(&w[0], &w[1]);
        total += c.terms()[0] + c.episode_sums()[0];
        if c.ends_episode(&w[1]) {
            c.reset(&w[1], Some(&ref_path));
        }
    }
    let after = allocations_here();
    assert!(total.is_finite());
    assert_eq!(after - before, 0, "composer allocated during steps");
}
