//! Linear-algebra kernels shared by the schemes: deterministic parallel loops, reductions through
//! one seam, and the sparse matrix-vector product.
//!
//! # Determinism
//! Vectors are cut into fixed chunks of [`CHUNK`] entries whatever the thread count. Each chunk
//! sums its own entries in order and the chunk sums are added in chunk order, so every dot
//! product, norm and energy is bit-identical for 1, 2 or any number of threads, and for the serial
//! and the parallel path alike.

mod assembly;
mod cg;
mod cholesky;
mod csr;
pub mod eigen;
mod execution;
pub mod lanczos;
mod lu;
mod reduce;
mod solver;

pub use assembly::{ElementScatter, TangentCheck, check_tangent};
pub use cg::{CgOptions, ConjugateGradient};
pub(crate) use cholesky::SimplicialFactor;
pub use cholesky::{PIVOT_LOSS_FACTOR, SparseCholesky};
pub use csr::{CsrMatrix, spmv};
pub use execution::Execution;
pub use lu::{LU_RESIDUAL_LIMIT, SparseLu};
pub use reduce::{GlobalReduce, Serial, add_in_chunk_order, dot, norm2};
pub(crate) use reduce::{dot_with, local_norm2};
pub use solver::{LinearSolver, SYMMETRY_TOLERANCE, SolveInfo, check_rhs};

use rayon::prelude::*;

/// Number of vector entries per work chunk (the unit of parallel work and of partial sums).
pub const CHUNK: usize = 4096;

/// When to run vector loops in parallel.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Parallelism {
    /// Vectors shorter than this run on the calling thread; longer ones are split over rayon's
    /// thread pool. Results do not depend on this choice (see the module documentation).
    pub threshold: usize,
}

impl Default for Parallelism {
    /// Parallel from 32,768 entries: below that the loop takes tens of microseconds and the
    /// hand-off to the pool costs more than it saves (measured on 2 cores when the threshold was
    /// set; the bench report, `docs/performance.md`, does not measure it again).
    fn default() -> Self {
        Parallelism { threshold: 32_768 }
    }
}

impl Parallelism {
    /// Always serial.
    pub fn serial() -> Self {
        Parallelism {
            threshold: usize::MAX,
        }
    }

    /// True when a loop over `n` entries should run in parallel.
    pub fn parallel_for(&self, n: usize) -> bool {
        n >= self.threshold && rayon::current_num_threads() > 1
    }
}

/// Number of chunks for `n` entries.
pub fn chunk_count(n: usize) -> usize {
    n.div_ceil(CHUNK)
}

/// Runs `f(start, out1_chunk, out2_chunk, partial)` over the chunks of two equally long output
/// vectors, in parallel when `parallel`, with one partial-result slot per chunk.
///
/// # Panics
/// When the outputs differ in length or `partials.len() != chunk_count(out1.len())` (a programmer
/// error inside the crate).
pub(crate) fn for_chunks2<P, F>(
    parallel: bool,
    out1: &mut [f64],
    out2: &mut [f64],
    partials: &mut [P],
    f: F,
) where
    P: Send,
    F: Fn(usize, &mut [f64], &mut [f64], &mut P) + Sync + Send,
{
    assert_eq!(out1.len(), out2.len());
    assert_eq!(partials.len(), chunk_count(out1.len()));
    if parallel {
        out1.par_chunks_mut(CHUNK)
            .zip(out2.par_chunks_mut(CHUNK))
            .zip(partials.par_iter_mut())
            .enumerate()
            .for_each(|(c, ((o1, o2), p))| f(c * CHUNK, o1, o2, p));
    } else {
        out1.chunks_mut(CHUNK)
            .zip(out2.chunks_mut(CHUNK))
            .zip(partials.iter_mut())
            .enumerate()
            .for_each(|(c, ((o1, o2), p))| f(c * CHUNK, o1, o2, p));
    }
}

/// Runs `f(start, out_chunk, partial)` over the chunks of one output vector, in parallel when
/// `parallel`, with one partial-result slot per chunk.
///
/// # Panics
/// When `partials.len() != chunk_count(out.len())` (a programmer error inside the crate).
pub(crate) fn for_chunks1<P, F>(parallel: bool, out: &mut [f64], partials: &mut [P], f: F)
where
    P: Send,
    F: Fn(usize, &mut [f64], &mut P) + Sync + Send,
{
    assert_eq!(partials.len(), chunk_count(out.len()));
    if parallel {
        out.par_chunks_mut(CHUNK)
            .zip(partials.par_iter_mut())
            .enumerate()
            .for_each(|(c, (o, p))| f(c * CHUNK, o, p));
    } else {
        out.chunks_mut(CHUNK)
            .zip(partials.iter_mut())
            .enumerate()
            .for_each(|(c, (o, p))| f(c * CHUNK, o, p));
    }
}

/// Four equally long output vectors, cut into chunks together by [`for_chunks4`].
pub(crate) type Chunks4<'a> = [&'a mut [f64]; 4];

/// Runs `f(start, [out1, out2, out3, out4] chunks, partial)` over the chunks of four equally long
/// output vectors, in parallel when `parallel`, with one partial-result slot per chunk.
///
/// # Panics
/// When the outputs differ in length or `partials.len() != chunk_count(out[0].len())` (a
/// programmer error inside the crate).
pub(crate) fn for_chunks4<P, F>(parallel: bool, out: Chunks4<'_>, partials: &mut [P], f: F)
where
    P: Send,
    F: Fn(usize, Chunks4<'_>, &mut P) + Sync + Send,
{
    let [o1, o2, o3, o4] = out;
    let n = o1.len();
    assert!(o2.len() == n && o3.len() == n && o4.len() == n);
    assert_eq!(partials.len(), chunk_count(n));
    if parallel {
        o1.par_chunks_mut(CHUNK)
            .zip(o2.par_chunks_mut(CHUNK))
            .zip(o3.par_chunks_mut(CHUNK))
            .zip(o4.par_chunks_mut(CHUNK))
            .zip(partials.par_iter_mut())
            .enumerate()
            .for_each(|(c, ((((a, b), d), e), p))| f(c * CHUNK, [a, b, d, e], p));
    } else {
        o1.chunks_mut(CHUNK)
            .zip(o2.chunks_mut(CHUNK))
            .zip(o3.chunks_mut(CHUNK))
            .zip(o4.chunks_mut(CHUNK))
            .zip(partials.iter_mut())
            .enumerate()
            .for_each(|(c, ((((a, b), d), e), p))| f(c * CHUNK, [a, b, d, e], p));
    }
}

/// Runs `f(start, partial)` over the chunks of a vector of length `n`, read-only, with one
/// partial-result slot per chunk.
pub(crate) fn for_chunks_read<P, F>(parallel: bool, n: usize, partials: &mut [P], f: F)
where
    P: Send,
    F: Fn(std::ops::Range<usize>, &mut P) + Sync + Send,
{
    assert_eq!(partials.len(), chunk_count(n));
    let range = |c: usize| c * CHUNK..((c + 1) * CHUNK).min(n);
    if parallel {
        partials
            .par_iter_mut()
            .enumerate()
            .for_each(|(c, p)| f(range(c), p));
    } else {
        partials
            .iter_mut()
            .enumerate()
            .for_each(|(c, p)| f(range(c), p));
    }
}

/// Global sums from fixed-size chunk partials (one `[f64; K]` per chunk, in chunk order),
/// finished by `execution`'s reducer (see [`GlobalReduce::sum_chunks`]).
pub(crate) fn sum_partials<const K: usize>(
    execution: &Execution,
    partials: &[[f64; K]],
) -> [f64; K] {
    let mut s = [0.0; K];
    execution
        .reduce
        .sum_chunks(0, partials.as_flattened(), &mut s);
    s
}

/// Global sums of `K` values per index over `0..n`: `term(i, acc)` adds the terms of index `i`
/// to `acc`; each chunk of [`CHUNK`] indices sums its own terms in index order from zero, and
/// the chunk partials are finished by `execution`'s reducer in chunk order. `scratch` holds the
/// partials (at least `K * chunk_count(n)` entries), so that the sum allocates nothing.
///
/// # Panics
/// When `scratch` is too short (a programmer error inside the crate).
pub(crate) fn global_sums<const K: usize>(
    execution: &Execution,
    n: usize,
    scratch: &mut [f64],
    term: impl Fn(usize, &mut [f64; K]) + Sync + Send,
) -> [f64; K] {
    let (partials, _) = scratch[..K * chunk_count(n)].as_chunks_mut::<K>();
    for_chunks_read(
        execution.parallelism.parallel_for(n),
        n,
        partials,
        |range, p| {
            let mut acc = [0.0; K];
            for i in range {
                term(i, &mut acc);
            }
            *p = acc;
        },
    );
    sum_partials(execution, partials)
}

/// The largest width of [`global_sums`] in the integrators: their scratch holds this many values
/// per chunk.
pub(crate) const SUM_WIDTH: usize = 5;
