//! Global reductions through one seam.
//!
//! Every global sum of the crate (energies, dot products and norms of the integrators, the linear
//! solvers and the eigenvalue estimates) and every global maximum (Gershgorin's bound, the largest
//! displacement of a finite-difference probe) is finished by a [`GlobalReduce`], reached through
//! the run's [`Execution`](super::Execution). The sums have one shape: each process forms one
//! partial sum per chunk of [`CHUNK`] entries (chunks fixed in global index space, so chunk `c`
//! is entries `c * CHUNK .. (c + 1) * CHUNK` of the global vector), and the reducer adds the
//! partials of all chunks in global chunk order. The default, [`Serial`], adds the partials of the
//! one process in order; a distributed backend gathers every process's partials and adds them in
//! the same order, so that it reproduces the serial sum bit for bit for any number of processes,
//! provided each process owns whole chunks.

use super::{CHUNK, Parallelism, chunk_count};
use rayon::prelude::*;

/// Completes reductions of process-local values into global ones.
///
/// The crate calls [`sum_chunks`](GlobalReduce::sum_chunks) for every global sum and
/// [`max`](GlobalReduce::max) for every global maximum; it never adds process totals itself.
pub trait GlobalReduce: Send + Sync {
    /// Global sums from per-chunk partial sums.
    ///
    /// `partials` holds `out.len()` values for each chunk this process owns, chunk after chunk
    /// (`partials[c * width + k]` is sum `k` over the process's `c`-th chunk, `width =
    /// out.len()`); the first of them is global chunk `first_chunk`. Writes into `out[k]` the sum
    /// of value `k` over every chunk of every process, added in global chunk order starting from
    /// `0.0` (`((0 + p_0) + p_1) + ...`), which is what [`Serial`] does for one process.
    ///
    /// The crate's vectors are whole today (one process holds every DOF), so it passes
    /// `first_chunk = 0`; a distributed model will pass its own offset.
    fn sum_chunks(&self, first_chunk: usize, partials: &[f64], out: &mut [f64]);
    /// The maximum of `value` over all processes.
    fn max(&self, value: f64) -> f64;
    /// The minimum of `value` over all processes. Default: `-max(-value)`.
    fn min(&self, value: f64) -> f64 {
        -self.max(-value)
    }
    /// A short name for reports and `Debug` output. Default: `"custom"`.
    fn name(&self) -> &'static str {
        "custom"
    }
}

/// One process: the chunk partials are added in order, maxima are the identity.
#[derive(Debug, Clone, Copy, Default)]
pub struct Serial;

impl GlobalReduce for Serial {
    fn sum_chunks(&self, _first_chunk: usize, partials: &[f64], out: &mut [f64]) {
        add_in_chunk_order(partials, out);
    }
    fn max(&self, value: f64) -> f64 {
        value
    }
    fn name(&self) -> &'static str {
        "serial"
    }
}

/// `out[k] = ((0 + partials[k]) + partials[width + k]) + ...` with `width = out.len()`: the chunk
/// partials added in chunk order, the sum every [`GlobalReduce`] must reproduce. A distributed
/// backend calls it on the gathered partials of all processes.
///
/// # Panics
/// When `partials.len()` is not a multiple of `out.len()`, or `out` is empty while `partials` is
/// not.
pub fn add_in_chunk_order(partials: &[f64], out: &mut [f64]) {
    let width = out.len();
    if width == 0 {
        assert!(partials.is_empty(), "partials for an empty output");
        return;
    }
    assert_eq!(
        partials.len() % width,
        0,
        "partials not a whole number of chunks"
    );
    // The widths the crate uses, with the width known to the compiler (the per-step sums of the
    // explicit scheme run here every step); the same additions in the same order as the
    // general loop.
    match width {
        1 => add_fixed::<1>(partials, out),
        2 => add_fixed::<2>(partials, out),
        3 => add_fixed::<3>(partials, out),
        4 => add_fixed::<4>(partials, out),
        5 => add_fixed::<5>(partials, out),
        10 => add_fixed::<10>(partials, out),
        _ => {
            out.fill(0.0);
            for chunk in partials.chunks_exact(width) {
                for (o, p) in out.iter_mut().zip(chunk) {
                    *o += p;
                }
            }
        }
    }
}

/// [`add_in_chunk_order`] for a width `K` known at compile time.
#[inline(always)]
fn add_fixed<const K: usize>(partials: &[f64], out: &mut [f64]) {
    let mut s = [0.0; K];
    for p in partials.as_chunks::<K>().0 {
        for k in 0..K {
            s[k] += p[k];
        }
    }
    out.copy_from_slice(&s);
}

/// The process-local sum over `0..n` in the fixed order of every chunked sum of the crate, for
/// sums that are the model's own business rather than a global sum of a scheme
/// (`CsrMatrix::quadratic_form`, the stored energy of a [`LinearModel`](crate::model::LinearModel)):
/// the indices in chunks of [`CHUNK`], `chunk(lo, hi)` summing the terms of `lo..hi` with
/// [`chunk_sum`], the chunk sums added in order from `0.0`, in parallel (over rayon's pool) when
/// `par` says so for `n`. It equals the global [`dot`] through [`Serial`] bit for bit, which is
/// why `x^T A x` equals `dot(x, A x)` exactly. `chunk` takes the range rather than one index so
/// that it can slice its inputs once and index them without bounds checks.
pub(crate) fn ordered_sum(
    n: usize,
    par: Parallelism,
    chunk: impl Fn(usize, usize) -> f64 + Sync,
) -> f64 {
    let chunk = |c: usize| chunk(c * CHUNK, ((c + 1) * CHUNK).min(n));
    let chunks = chunk_count(n);
    if par.parallel_for(n) {
        // Collecting into a Vec allocates; this path is for set-up code (eigenvalue estimates),
        // not for the per-step loops, which keep their own partial-sum buffers.
        let partials: Vec<f64> = (0..chunks).into_par_iter().map(chunk).collect();
        partials.iter().fold(0.0, |s, p| s + p)
    } else {
        let mut s = 0.0;
        for c in 0..chunks {
            s += chunk(c);
        }
        s
    }
}

/// The sum of `term(j)` for `j` in `0..len` in a fixed order: four interleaved partial sums over
/// the indices in groups of four (the additions do not wait on each other), the remainder summed on
/// its own, then `(acc0 + acc1) + (acc2 + acc3) + tail`.
#[inline(always)]
pub(crate) fn chunk_sum(len: usize, term: impl Fn(usize) -> f64) -> f64 {
    let full = len / 4 * 4;
    let mut acc = [0.0; 4];
    let mut j = 0;
    while j < full {
        for (l, a) in acc.iter_mut().enumerate() {
            *a += term(j + l);
        }
        j += 4;
    }
    let tail: f64 = (full..len).map(&term).sum();
    (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
}

/// The chunk partials of a sum over `0..n` into `partials` (one per chunk of [`CHUNK`] entries,
/// `chunk(lo, hi)` summing the terms of `lo..hi`), in parallel when `par` says so for `n`. Every
/// global sum of the crate is made of such partials, finished by a [`GlobalReduce`].
///
/// # Panics
/// When `partials.len() != chunk_count(n)` (a programmer error inside the crate).
pub(crate) fn chunk_partials(
    n: usize,
    par: Parallelism,
    partials: &mut [f64],
    chunk: impl Fn(usize, usize) -> f64 + Sync,
) {
    assert_eq!(partials.len(), chunk_count(n));
    let body = |(c, p): (usize, &mut f64)| *p = chunk(c * CHUNK, ((c + 1) * CHUNK).min(n));
    if par.parallel_for(n) {
        partials.par_iter_mut().enumerate().for_each(body);
    } else {
        partials.iter_mut().enumerate().for_each(body);
    }
}

/// Global dot product `x . y` through `execution`'s reducer; NaN when `x` and `y` differ in
/// length (there is no dot product then).
///
/// The terms are summed in chunks of [`CHUNK`] entries (four interleaved partial sums in each
/// chunk), and the chunk partials are added in global chunk order by the reducer, so the result
/// is the same on any thread count. Allocates one value per chunk; the integrators and solvers
/// keep their own buffers for their per-step sums.
pub fn dot(x: &[f64], y: &[f64], execution: &super::Execution) -> f64 {
    if x.len() != y.len() {
        return f64::NAN;
    }
    let mut partials = vec![0.0; chunk_count(x.len())];
    dot_with(x, y, execution, &mut partials)
}

/// [`dot`] with a caller's buffer for the chunk partials (`chunk_count(x.len())` entries).
pub(crate) fn dot_with(
    x: &[f64],
    y: &[f64],
    execution: &super::Execution,
    partials: &mut [f64],
) -> f64 {
    chunk_partials(x.len(), execution.parallelism, partials, |lo, hi| {
        let (a, b) = (&x[lo..hi], &y[lo..hi]);
        chunk_sum(a.len(), |j| a[j] * b[j])
    });
    let mut s = [0.0];
    execution.reduce.sum_chunks(0, partials, &mut s);
    s[0]
}

/// The process-local Euclidean norm, in the chunked order of [`ordered_sum`] on the calling
/// thread (no allocation): for solvers that hold the whole matrix in one process (the direct
/// solvers' residual checks).
pub(crate) fn local_norm2(x: &[f64]) -> f64 {
    ordered_sum(x.len(), Parallelism::serial(), |lo, hi| {
        chunk_sum(hi - lo, |j| x[lo + j] * x[lo + j])
    })
    .sqrt()
}

/// Global Euclidean norm through `execution`'s reducer (see [`dot`]).
pub fn norm2(x: &[f64], execution: &super::Execution) -> f64 {
    dot(x, x, execution).sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dot_is_the_same_serial_and_parallel() {
        let n = 100_003;
        let x: Vec<f64> = (0..n)
            .map(|i| ((i * 7919usize) % 1000) as f64 * 1e-3 - 0.4)
            .collect();
        let y: Vec<f64> = (0..n)
            .map(|i| ((i * 104_729usize) % 997) as f64 * 1e-2)
            .collect();
        let serial = super::super::Execution::serial();
        let par = serial
            .clone()
            .with_parallelism(Parallelism { threshold: 1 });
        let s = dot(&x, &y, &serial);
        let p = dot(&x, &y, &par);
        assert_eq!(s.to_bits(), p.to_bits());
        // The same as the local ordered sum of the matrix module.
        let l = ordered_sum(n, Parallelism::serial(), |lo, hi| {
            chunk_sum(hi - lo, |j| x[lo + j] * y[lo + j])
        });
        assert_eq!(s.to_bits(), l.to_bits());
    }

    /// Chunk partials added in order, whatever their width.
    #[test]
    fn partials_are_added_in_chunk_order() {
        let mut out = [0.0; 2];
        add_in_chunk_order(&[1.0, 10.0, 1e16, 20.0, -1e16, 30.0], &mut out);
        // ((0 + 1) + 1e16) - 1e16 = 0 in binary64: the order is the one stated.
        assert_eq!(out, [0.0, 60.0]);
        let mut none: [f64; 0] = [];
        add_in_chunk_order(&[], &mut none);
    }
}
