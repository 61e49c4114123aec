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

/// Deterministic local dot product `x . y` (chunked, so identical for any thread count); NaN
/// when `x` and `y` differ in length (there is no dot product then).
pub fn dot(x: &[f64], y: &[f64], par: Parallelism) -> f64 {
    if x.len() != y.len() {
        return f64::NAN;
    }
    let chunk_dot = |(a, b): (&[f64], &[f64])| {
        // Four interleaved partial sums (a fixed order, so the result is the same on any
        // thread count) instead of one: the additions no longer wait on each other.
        let mut acc = [0.0; 4];
        let (a4, b4) = (a.chunks_exact(4), b.chunks_exact(4));
        let (ra, rb) = (a4.remainder(), b4.remainder());
        for (p, q) in a4.zip(b4) {
            for l in 0..4 {
                acc[l] += p[l] * q[l];
            }
        }
        let tail: f64 = ra.iter().zip(rb).map(|(p, q)| p * q).sum();
        (acc[0] + acc[1]) + (acc[2] + acc[3]) + tail
    };
    if par.parallel_for(x.len()) {
        // Collecting into a Vec allocates; this path is for set-up code (eigenvalue estimates),
        // not for the per-step loops, which keep their own partial-sum buffers.
        let partials: Vec<f64> = x
            .par_chunks(CHUNK)
            .zip(y.par_chunks(CHUNK))
            .map(chunk_dot)
            .collect();
        partials.iter().sum()
    } else {
        let mut s = 0.0;
        debug_assert!(chunk_count(x.len()) == x.chunks(CHUNK).count());
        for c in x.chunks(CHUNK).zip(y.chunks(CHUNK)) {
            s += chunk_dot(c);
        }
        s
    }
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
