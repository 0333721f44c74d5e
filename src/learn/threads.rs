//! Keeps candle's CPU kernels on the calling thread: a run is single-threaded and runs go in
//! parallel across cores in the study runner, so kernel-level thread pools would oversubscribe.

use std::sync::Once;

static PIN: Once = Once::new();

/// Make candle's CPU kernels single-threaded for this process, once.
///
/// candle 0.11 sizes its matrix-multiply parallelism from `RAYON_NUM_THREADS` (read on every
/// matmul) and its element-wise worker pool from `CANDLE_NUM_THREADS` (read when the pool is first
/// built); both default to the number of physical cores. This sets both to 1 unless the user set
/// them already. Call it at program start, before other threads run (setting environment
/// variables is not synchronised with concurrent reads); `Trainer::new` also calls it, so
/// library users who forget still get one thread per run.
pub fn pin_kernel_threads() {
    PIN.call_once(|| {
        for key in ["RAYON_NUM_THREADS", "CANDLE_NUM_THREADS"] {
            if std::env::var_os(key).is_none() {
                std::env::set_var(key, "1");
            }
        }
    });
}
