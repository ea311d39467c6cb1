//! Helpers the benchmarks share (each bench target includes this module
//! with `mod common;`; Cargo does not take a folder's `mod.rs` for a bench).

use std::time::{Duration, Instant};

/// Best of `reps` runs.
pub fn best(reps: usize, mut f: impl FnMut()) -> Duration {
    (0..reps)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed()
        })
        .min()
        .unwrap_or_default()
}
