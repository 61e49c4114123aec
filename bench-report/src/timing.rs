//! Timing helpers: medians of repeats.

use std::time::Instant;

/// Runs `f` once to warm up, then `repeats` times, and returns the median wall time of one call
/// (seconds).
pub fn median_secs(repeats: usize, mut f: impl FnMut()) -> f64 {
    f();
    let mut times: Vec<f64> = (0..repeats.max(1))
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .collect();
    times.sort_by(f64::total_cmp);
    times[times.len() / 2]
}

/// Like [`median_secs`], with each sample running `f` `inner` times (for calls too short to
/// time alone); returns the median time of one call.
pub fn median_secs_inner(repeats: usize, inner: usize, mut f: impl FnMut()) -> f64 {
    let inner = inner.max(1);
    median_secs(repeats, || {
        for _ in 0..inner {
            f();
        }
    }) / inner as f64
}
