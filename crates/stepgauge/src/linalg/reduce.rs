//! Global reductions through one seam.
//!
//! Every global sum of the schemes (energies, dot products, norms) is finished by a
//! [`GlobalReduce`]. The default, [`Serial`], is the identity: the model lives in one process. A
//! distributed backend (for example over MPI) implements the trait by summing the local values of
//! all ranks, and the schemes need no change.

use super::{CHUNK, Parallelism, chunk_count};
use rayon::prelude::*;

/// Completes reductions of process-local values into global ones.
pub trait GlobalReduce: Send + Sync {
    /// Replaces each entry of `values` by its sum over all processes.
    fn sum_in_place(&self, values: &mut [f64]);
    /// The maximum of `value` over all processes.
    fn max(&self, value: f64) -> f64;
    /// The minimum of `value` over all processes.
    fn min(&self, value: f64) -> f64 {
        -self.max(-value)
    }
    /// The sum of `value` over all processes.
    fn sum(&self, value: f64) -> f64 {
        let mut v = [value];
        self.sum_in_place(&mut v);
        v[0]
    }
}

/// One process: every reduction is the identity.
#[derive(Debug, Clone, Copy, Default)]
pub struct Serial;

impl GlobalReduce for Serial {
    fn sum_in_place(&self, _values: &mut [f64]) {}
    fn max(&self, value: f64) -> f64 {
        value
    }
}

/// The sum over `0..n` in the fixed order that every chunked sum of the crate uses, so that it
/// is the same on any thread count and two sums of the same terms agree bit for bit: the indices
/// in chunks of [`CHUNK`], `chunk(lo, hi)` summing the terms of `lo..hi` with [`chunk_sum`], the
/// chunk sums added in order. In parallel (over rayon's pool) when `par` says so for `n`.
///
/// [`dot`] and `CsrMatrix::quadratic_form` are both this sum (of `x_i y_i` and of
/// `x_i (A x)_i`), which is why `x^T A x` equals `dot(x, A x)` exactly. `chunk` takes the range
/// rather than one index so that it can slice its inputs once and index them without bounds
/// checks.
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
        partials.iter().sum()
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

/// Deterministic local dot product `x . y`; NaN when `x` and `y` differ in length (there is no dot
/// product then).
///
/// The terms are summed in chunks of [`CHUNK`] entries, four interleaved partial sums in each
/// chunk and the chunk sums in order, so the result is the same on any thread count.
pub fn dot(x: &[f64], y: &[f64], par: Parallelism) -> f64 {
    if x.len() != y.len() {
        return f64::NAN;
    }
    ordered_sum(x.len(), par, |lo, hi| {
        let (a, b) = (&x[lo..hi], &y[lo..hi]);
        chunk_sum(a.len(), |j| a[j] * b[j])
    })
}

/// Deterministic local Euclidean norm.
pub fn norm2(x: &[f64], par: Parallelism) -> f64 {
    dot(x, x, par).sqrt()
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
        let s = dot(&x, &y, Parallelism::serial());
        let p = dot(&x, &y, Parallelism { threshold: 1 });
        assert_eq!(s.to_bits(), p.to_bits());
    }
}
