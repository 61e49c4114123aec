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
