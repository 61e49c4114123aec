//! Jacobi-preconditioned conjugate gradients for symmetric positive definite matrices.
//!
//! Written here rather than taken from a crate: no well-kept Rust crate offers a preconditioned
//! CG on stepgauge's CSR type (32-bit column indices) with work vectors allocated once, reductions
//! that are bit-identical for any thread count, and typed failure reports; faer's iterative
//! solvers work on its own matrix types and scratch conventions.

use rayon::prelude::*;

use super::solver::{
    LinearSolver, SolveInfo, SymmetryMap, check_finite_matrix, check_pattern, check_rhs,
    check_square,
};
use super::{CHUNK, CsrMatrix, Execution, chunk_count, for_chunks_read, for_chunks2, sum_partials};
use crate::error::{Error, Result};

const NAME: &str = "conjugate gradient";

/// Options of [`ConjugateGradient`].
///
/// Threads and the reducer of the global sums come from the run's
/// [`Execution`](super::Execution) ([`LinearSolver::set_execution`]); new fields may be added in
/// later versions (start from [`CgOptions::default`] and set fields).
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub struct CgOptions {
    /// Stop when `||b - A x||_2 <= relative_tolerance * ||b||_2`; in `(0, 1)`. Default `1e-10`.
    pub relative_tolerance: f64,
    /// Iteration limit; `None` (the default) means `max(10 n, 10_000)` for `n` unknowns.
    pub max_iterations: Option<usize>,
}

impl Default for CgOptions {
    fn default() -> Self {
        CgOptions {
            relative_tolerance: 1e-10,
            max_iterations: None,
        }
    }
}

/// Preconditioned conjugate gradients with the Jacobi (diagonal) preconditioner, for symmetric
/// positive definite matrices too large to factorise.
///
/// - [`analyze`](LinearSolver::analyze) checks the pattern (square, structurally symmetric) and
///   allocates every work vector.
/// - [`factor`](LinearSolver::factor) checks the values (finite, symmetric to
///   [`SYMMETRY_TOLERANCE`](super::SYMMETRY_TOLERANCE), positive diagonal), copies them into
///   the solver's own matrix and inverts the diagonal. It allocates nothing.
/// - [`solve_in_place`](LinearSolver::solve_in_place) takes the incoming `rhs` only as `b` and
///   starts from `x = 0` (no warm start), so the result depends on `A` and `b` alone. It
///   allocates nothing (from inside a rayon pool, or serially; a parallel loop started from a
///   thread outside the pool goes through rayon's injector queue, which allocates now and then).
///
/// Convergence is declared on the true residual: when the recursively updated residual meets
/// the tolerance, `b - A x` is computed afresh, and if drift has left it above the tolerance the
/// iteration restarts from there. [`SolveInfo`] reports the iterations (matrix products of the
/// recursion) and the true relative residual.
///
/// Every reduction goes through fixed chunks of [`CHUNK`] entries summed in chunk order, so the
/// solution is bit-identical for 1, 2 or any number of threads.
///
/// # Errors
/// [`Error::NotPositiveDefinite`] for a non-positive diagonal entry (at `factor`, with its row)
/// or a search direction with `p^T A p <= 0` (at `solve_in_place`, with the curvature);
/// [`Error::SolverNotConverged`] when the iteration limit is reached (`rhs` then holds the last
/// iterate).
///
/// # Reference
/// M. R. Hestenes, E. Stiefel, "Methods of conjugate gradients for solving linear systems",
/// J. Res. Nat. Bur. Standards 49 (1952) 409-436; Y. Saad, *Iterative Methods for Sparse Linear
/// Systems*, 2nd ed., SIAM, 2003, algorithm 9.1 (preconditioned CG).
#[derive(Debug)]
pub struct ConjugateGradient {
    opts: CgOptions,
    /// The analysed pattern with the values of the last `factor`.
    a: Option<CsrMatrix>,
    symmetry: SymmetryMap,
    factored: bool,
    inv_diag: Vec<f64>,
    b: Vec<f64>,
    r: Vec<f64>,
    p: Vec<f64>,
    q: Vec<f64>,
    partials: Vec<[f64; 2]>,
    execution: Execution,
}

impl ConjugateGradient {
    /// A solver with the given options and nothing analysed.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for a tolerance outside `(0, 1)`.
    pub fn new(opts: CgOptions) -> Result<Self> {
        let tol = opts.relative_tolerance;
        if !(tol > 0.0 && tol < 1.0) {
            return Err(Error::InvalidParameter {
                name: "relative_tolerance",
                value: tol,
                expected: "a number in (0, 1), for example 1e-10",
            });
        }
        Ok(ConjugateGradient {
            opts,
            a: None,
            symmetry: SymmetryMap::default(),
            factored: false,
            inv_diag: Vec::new(),
            b: Vec::new(),
            r: Vec::new(),
            p: Vec::new(),
            q: Vec::new(),
            partials: Vec::new(),
            execution: Execution::default(),
        })
    }

    /// The options.
    pub fn options(&self) -> &CgOptions {
        &self.opts
    }
}

/// `out[i] = f(start + i, &mut out[i])` over chunks, in parallel when `parallel`.
fn for_each_chunk(parallel: bool, out: &mut [f64], f: impl Fn(usize, &mut [f64]) + Sync + Send) {
    if parallel {
        out.par_chunks_mut(CHUNK)
            .enumerate()
            .for_each(|(c, o)| f(c * CHUNK, o));
    } else {
        out.chunks_mut(CHUNK)
            .enumerate()
            .for_each(|(c, o)| f(c * CHUNK, o));
    }
}

/// `r = b - ax` and `p = D^-1 r` (the first search direction); returns `[r^T D^-1 r, r^T r]`.
#[allow(clippy::too_many_arguments)]
fn restart(
    execution: &Execution,
    parallel: bool,
    r: &mut [f64],
    p: &mut [f64],
    partials: &mut [[f64; 2]],
    inv_d: &[f64],
    b: &[f64],
    ax: &[f64],
) -> [f64; 2] {
    for_chunks2(parallel, r, p, partials, |s, rc, pc, part| {
        let (mut rz, mut rr) = (0.0, 0.0);
        for (k, (ri, pi)) in rc.iter_mut().zip(pc.iter_mut()).enumerate() {
            *ri = b[s + k] - ax[s + k];
            *pi = inv_d[s + k] * *ri;
            rz += *ri * *pi;
            rr += *ri * *ri;
        }
        *part = [rz, rr];
    });
    sum_partials(execution, partials)
}

impl LinearSolver for ConjugateGradient {
    fn analyze(&mut self, a: &CsrMatrix) -> Result<()> {
        self.a = None;
        self.factored = false;
        check_square(a)?;
        self.symmetry = SymmetryMap::new(NAME, a)?;
        let n = a.nrows();
        let mut copy = a.clone();
        copy.data_mut().fill(0.0);
        self.a = Some(copy);
        for v in [
            &mut self.inv_diag,
            &mut self.b,
            &mut self.r,
            &mut self.p,
            &mut self.q,
        ] {
            v.clear();
            v.resize(n, 0.0);
        }
        self.partials.clear();
        self.partials.resize(chunk_count(n), [0.0; 2]);
        Ok(())
    }

    fn factor(&mut self, a: &CsrMatrix) -> Result<()> {
        self.factored = false;
        let own = self.a.as_mut().ok_or(Error::SolverNotReady {
            solver: NAME,
            missing: "analyze",
        })?;
        check_pattern(own, a)?;
        check_finite_matrix(a)?;
        self.symmetry.check_values(NAME, a)?;
        for (i, d) in self.inv_diag.iter_mut().enumerate() {
            let a_ii = self.symmetry.diag_position(i).map_or(0.0, |k| a.data()[k]);
            if a_ii <= 0.0 {
                return Err(Error::NotPositiveDefinite {
                    solver: NAME,
                    row: Some(i),
                    value: Some(a_ii),
                });
            }
            *d = 1.0 / a_ii;
        }
        own.data_mut().copy_from_slice(a.data());
        self.factored = true;
        Ok(())
    }

    fn solve_in_place(&mut self, rhs: &mut [f64]) -> Result<SolveInfo> {
        let a = super::solver::ready(NAME, self.a.as_ref(), self.factored)?;
        let n = a.nrows();
        check_rhs(rhs, n)?;
        let ex = &self.execution;
        let par = ex.parallelism;
        let parallel = par.parallel_for(n);
        let tol = self.opts.relative_tolerance;
        let max_iterations = self.opts.max_iterations.unwrap_or((10 * n).max(10_000));
        let (inv_d, b, r, p, q) = (
            &self.inv_diag[..],
            &mut self.b[..],
            &mut self.r[..],
            &mut self.p[..],
            &mut self.q[..],
        );
        let partials = &mut self.partials[..];
        let x = rhs;

        b.copy_from_slice(x);
        x.fill(0.0);
        q.fill(0.0); // A x for x = 0
        let [mut rz, rr] = restart(ex, parallel, r, p, partials, inv_d, b, q);
        let norm_b = rr.sqrt();
        if norm_b == 0.0 {
            return Ok(SolveInfo {
                iterations: 0,
                relative_residual: 0.0,
            });
        }
        let target = tol * norm_b;
        let mut iterations = 0;
        loop {
            if iterations >= max_iterations {
                a.mul_vec(x, q, par);
                let [_, rr] = restart(ex, parallel, r, p, partials, inv_d, b, q);
                return Err(Error::SolverNotConverged {
                    iterations,
                    relative_residual: rr.sqrt() / norm_b,
                });
            }
            a.mul_vec(p, q, par);
            for_chunks_read(parallel, n, partials, |range, part| {
                let s: f64 = p[range.clone()]
                    .iter()
                    .zip(&q[range])
                    .map(|(u, v)| u * v)
                    .sum();
                *part = [s, 0.0];
            });
            let pq = sum_partials(ex, partials)[0];
            if pq.is_nan() || pq <= 0.0 {
                return Err(Error::NotPositiveDefinite {
                    solver: NAME,
                    row: None,
                    value: Some(pq),
                });
            }
            let alpha = rz / pq;
            let (p_ro, q_ro) = (&*p, &*q);
            for_chunks2(parallel, x, r, partials, |s, xc, rc, part| {
                let (mut rz, mut rr) = (0.0, 0.0);
                for (k, (xi, ri)) in xc.iter_mut().zip(rc.iter_mut()).enumerate() {
                    *xi += alpha * p_ro[s + k];
                    *ri -= alpha * q_ro[s + k];
                    rz += *ri * *ri * inv_d[s + k];
                    rr += *ri * *ri;
                }
                *part = [rz, rr];
            });
            let [rz_new, rr] = sum_partials(ex, partials);
            iterations += 1;
            if rr.sqrt() <= target {
                // Confirm on the true residual; restart from it if the recursion has drifted.
                a.mul_vec(x, q, par);
                let [rz_true, rr_true] = restart(ex, parallel, r, p, partials, inv_d, b, q);
                if rr_true.sqrt() <= target {
                    return Ok(SolveInfo {
                        iterations,
                        relative_residual: rr_true.sqrt() / norm_b,
                    });
                }
                rz = rz_true;
                continue;
            }
            let beta = rz_new / rz;
            rz = rz_new;
            let r_ro = &*r;
            for_each_chunk(parallel, p, |s, pc| {
                for (k, pi) in pc.iter_mut().enumerate() {
                    *pi = inv_d[s + k] * r_ro[s + k] + beta * *pi;
                }
            });
        }
    }

    fn name(&self) -> &'static str {
        NAME
    }

    /// Threads and the reducer of the dot products and norms.
    fn set_execution(&mut self, execution: &Execution) {
        self.execution = execution.clone();
    }
}
