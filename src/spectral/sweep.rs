//! Vectorised, parallel evaluation over many `Omega` values and many parameter sets.

use rayon::prelude::*;

use super::bounds::{CheckContext, Stability, check};
use super::metrics::{Metrics, metrics};
use super::scheme::Scheme;
use crate::error::Result;
use crate::params::AlphaParams;

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
            omegas
                .par_iter()
                .with_min_len(SWEEP_GRAIN)
                .map(|&o| metrics(s, o, xi))
                .collect()
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
