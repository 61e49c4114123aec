//! Vectorised, parallel evaluation over many `Omega` values and many parameter sets.

use rayon::prelude::*;

use super::bounds::{CheckContext, Stability, check};
use super::metrics::Metrics;
use super::prepared::{BLOCK, Prepared};
use crate::error::Result;
use crate::params::AlphaParams;
use crate::params::Scheme;

/// Points per parallel work item of [`sweep`]: a point takes tens of nanoseconds, so smaller
/// items would cost more in hand-offs than they save.
const SWEEP_GRAIN: usize = 2048;

/// Metrics of every scheme at every `Omega` (`result[s][k]` for `schemes[s]`, `omegas[k]`), in
/// parallel over blocks of points; each point is computed on its own, so the result does not
/// depend on the thread count.
pub fn sweep(schemes: &[Scheme], omegas: &[f64], xi: f64) -> Vec<Vec<Metrics>> {
    schemes
        .par_iter()
        .map(|s| {
            // The scheme's constants once; each point then costs the closed-form cubic.
            let p = Prepared::new(s);
            // Fixed work items of SWEEP_GRAIN points, each in blocks of BLOCK points evaluated
            // stage by stage (`Prepared::metrics_block`); the blocks give each point's metrics
            // bit for bit as `metrics` does, so neither the grouping nor the thread count
            // changes a value. Written straight into the result (no second copy).
            let n = omegas.len();
            let mut out: Vec<Metrics> = Vec::with_capacity(n);
            let written: usize = out.spare_capacity_mut()[..n]
                .par_chunks_mut(SWEEP_GRAIN)
                .zip(omegas.par_chunks(SWEEP_GRAIN))
                .map(|(dst, item)| {
                    let mut k = 0;
                    for block in item.chunks(BLOCK) {
                        for m in p.metrics_block(block, xi) {
                            dst[k].write(m);
                            k += 1;
                        }
                    }
                    k
                })
                .sum();
            assert_eq!(written, n, "every point of the sweep is written");
            // SAFETY: the first `n` elements were initialised above: the chunks of
            // `spare[..n]` and of `omegas` pair up one to one with equal lengths, and each chunk
            // wrote one value per point of its block (counted, and the count checked).
            unsafe { out.set_len(n) };
            out
        })
        .collect()
}

/// `points` values from `lo` to `hi`, evenly spaced on a log axis.
pub fn log_space(lo: f64, hi: f64, points: usize) -> Vec<f64> {
    match points {
        0 => Vec::new(),
        1 => vec![lo],
        _ => {
            let (a, b) = (lo.ln(), hi.ln());
            let mut v: Vec<f64> = (0..points)
                .map(|i| (a + (b - a) * i as f64 / (points - 1) as f64).exp())
                .collect();
            // The end points exactly as given (exp(ln x) may differ from x in the last bit).
            v[0] = lo;
            v[points - 1] = hi;
            v
        }
    }
}

/// Stability of Newmark-beta over the `(beta, gamma)` plane: `result[i][j]` for `betas[i]`,
/// `gammas[j]`, in parallel.
///
/// # Errors
/// [`crate::Error::InvalidParameter`] for a negative or non-finite value or `xi`.
pub fn newmark_stability_map(
    betas: &[f64],
    gammas: &[f64],
    xi: f64,
) -> Result<Vec<Vec<Stability>>> {
    betas
        .par_iter()
        .map(|&b| {
            gammas
                .iter()
                .map(|&g| {
                    let p = AlphaParams::newmark(b, g)?;
                    Ok(check(&Scheme::Alpha(p), xi, &CheckContext::default())?.stability)
                })
                .collect()
        })
        .collect()
}
