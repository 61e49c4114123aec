//! Sparse LU factorisation with partial pivoting, for unsymmetric or indefinite matrices.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::sparse::linalg::LuError;
use faer::sparse::linalg::lu::{LuRef, NumericLu, SymbolicLu, factorize_symbolic_lu};
use faer::sparse::{FaerError, SparseColMatRef, SymbolicSparseColMat};
use faer::{Conj, MatMut, Par};

use super::solver::{
    LinearSolver, SolveInfo, check_finite_matrix, check_pattern, check_rhs, check_square,
};
use super::{CsrMatrix, Parallelism, local_norm2};
use crate::error::{Error, Result, Singularity};

const NAME: &str = "sparse LU";

/// A solution with `||b - A x||_2 > LU_RESIDUAL_LIMIT ||b||_2` is refused as
/// [`Singularity::Residual`]: it does not satisfy the equations. LU with partial pivoting is
/// backward stable, so for a non-singular matrix the relative residual is in practice about
/// `eps kappa(A)` (eps = `f64::EPSILON` = 2.2e-16; the worst-case bound carries a further factor
/// of order `n`): only condition numbers beyond about 10^9 come near this limit, far above those
/// of the effective matrices of implicit dynamics. A singular system without solution (a load on
/// an unrestrained mode) ends here.
///
/// # Reference
/// N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM, 2002, theorem
/// 9.4 (backward stability of LU) and section 7.1 (residual and backward error).
pub const LU_RESIDUAL_LIMIT: f64 = 1e-6;

/// Sparse LU solver with partial (row) pivoting for any non-singular square matrix, such as the
/// unsymmetric tangent of a follower load or of a non-associative material (faer, COLAMD
/// fill-reducing column ordering, simplicial or supernodal as faer chooses, run sequentially).
///
/// The CSR arrays of `A` are the CSC arrays of `A^T`: the solver factorises `A^T` without
/// converting values and solves `A x = b` as `(A^T)^T x = b` with the transposed solve.
///
/// - [`analyze`](LinearSolver::analyze): ordering, symbolic factor, every buffer.
/// - [`factor`](LinearSolver::factor): copies the values (kept for the residual check) and
///   factorises. faer allocates here: its simplicial path sizes the factor's storage in the first
///   factorisation and reuses it (measured: 48 allocations, then none, for a chain of 2000
///   unknowns), its supernodal path allocates in every factorisation (919 allocations in the
///   second factorisation of a 15^3 grid).
/// - [`solve_in_place`](LinearSolver::solve_in_place): allocation-free. It checks the solution
///   (see below) and reports `||b - A x||_2 / ||b||_2` in [`SolveInfo::relative_residual`].
///
/// # Singularity
/// faer does not report a zero pivot: it divides by it. The solver therefore reports
/// [`Error::SingularMatrix`] when
/// - the factorisation finds no pivot at all in a column ([`Singularity::NoPivot`], structurally
///   singular, for example an empty row);
/// - the solution has a non-finite entry ([`Singularity::NonFiniteSolution`], an exact zero
///   pivot);
/// - the relative residual exceeds [`LU_RESIDUAL_LIMIT`] ([`Singularity::Residual`]); or
/// - the condition lower bound `k = ||A|| ||x|| / ||b||` (infinity norms; `k <= kappa(A)` since
///   `||x|| <= ||A^-1|| ||b||`) exceeds `1 / ((n + 1) eps)` for `n` unknowns
///   ([`Singularity::IllConditioned`]). Beyond it the a-priori bound, of order `n eps kappa(A)`,
///   on the relative error of the solution exceeds 1: no digit is guaranteed. This is how a
///   singular matrix with a pivot of rounding size (rather than an exact zero) is caught; a
///   matrix with `kappa(A) <= 1 / ((n + 1) eps)` is never refused by this test.
///
/// After such an error `rhs` holds the rejected solution.
///
/// # Reference
/// J. R. Gilbert, T. Peierls, "Sparse partial pivoting in time proportional to arithmetic
/// operations", SIAM J. Sci. Stat. Comput. 9 (1988) 862-874; T. A. Davis, *Direct Methods for
/// Sparse Linear Systems*, SIAM, 2006 (chapter 6); N. J. Higham, *Accuracy and Stability of
/// Numerical Algorithms*, 2nd ed., SIAM, 2002 (theorem 9.4, backward stability; section 7.1,
/// residual and forward error bound); the faer crate, version 0.24.
#[derive(Debug, Default)]
pub struct SparseLu {
    analysed: Option<Analysis>,
    numeric: NumericLu<usize, f64>,
    factored: bool,
}

struct Analysis {
    /// Copy of the matrix, values from the last `factor`.
    a: CsrMatrix,
    /// `||A||_inf` of the last factored values.
    norm_a: f64,
    /// The pattern as faer's CSC (of `A^T`), with `usize` indices.
    csc: SymbolicSparseColMat<usize>,
    symbolic: SymbolicLu<usize>,
    /// Workspace for the numeric factorisation and the solve.
    mem: MemBuffer,
    /// Copy of the right-hand side and residual, for the solution check.
    b: Vec<f64>,
    r: Vec<f64>,
}

impl std::fmt::Debug for Analysis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Analysis")
            .field("n", &self.a.nrows())
            .field("nnz", &self.a.nnz())
            .field("norm_a", &self.norm_a)
            .finish_non_exhaustive()
    }
}

impl SparseLu {
    /// A solver with nothing analysed.
    pub fn new() -> Self {
        Self::default()
    }
}

fn out_of_resources(e: FaerError) -> Error {
    Error::SolverOutOfResources {
        solver: NAME,
        reason: match e {
            FaerError::IndexOverflow => "index overflow",
            FaerError::OutOfMemory => "out of memory",
            _ => "unspecified resource failure reported by faer",
        },
    }
}

fn norm_inf(x: &[f64]) -> f64 {
    x.iter().fold(0.0, |m: f64, v| m.max(v.abs()))
}

impl LinearSolver for SparseLu {
    fn analyze(&mut self, a: &CsrMatrix) -> Result<()> {
        self.analysed = None;
        self.factored = false;
        check_square(a)?;
        let n = a.nrows();
        let col_ptr = a.indptr().to_vec();
        let row_idx = a.indices().iter().map(|&c| c as usize).collect();
        let csc = SymbolicSparseColMat::new_checked(n, n, col_ptr, None, row_idx);
        let symbolic =
            factorize_symbolic_lu(csc.as_ref(), Default::default()).map_err(out_of_resources)?;
        let req = StackReq::any_of(&[
            symbolic.factorize_numeric_lu_scratch::<f64>(Par::Seq, Default::default()),
            symbolic.solve_transpose_in_place_scratch::<f64>(1, Par::Seq),
        ]);
        let mem = MemBuffer::try_new(req).map_err(|_| out_of_resources(FaerError::OutOfMemory))?;
        let mut copy = a.clone();
        copy.data_mut().fill(0.0);
        self.analysed = Some(Analysis {
            a: copy,
            norm_a: 0.0,
            csc,
            symbolic,
            mem,
            b: vec![0.0; n],
            r: vec![0.0; n],
        });
        Ok(())
    }

    fn factor(&mut self, a: &CsrMatrix) -> Result<()> {
        self.factored = false;
        let an = self.analysed.as_mut().ok_or(Error::SolverNotReady {
            solver: NAME,
            missing: "analyze",
        })?;
        check_pattern(&an.a, a)?;
        check_finite_matrix(a)?;
        an.a.data_mut().copy_from_slice(a.data());
        an.norm_a = (0..a.nrows())
            .map(|i| a.row(i).map(|(_, v)| v.abs()).sum::<f64>())
            .fold(0.0, f64::max);
        let mat = SparseColMatRef::new(an.csc.as_ref(), an.a.data());
        let stack = MemStack::new(&mut an.mem);
        let result = an.symbolic.factorize_numeric_lu(
            &mut self.numeric,
            mat,
            Par::Seq,
            stack,
            Default::default(),
        );
        match result {
            Ok(_) => {}
            Err(LuError::SymbolicSingular { index }) => {
                // Column `index` of the column-permuted A^T, that is a row of A.
                let row = an.symbolic.col_perm().arrays().0[index];
                return Err(Error::SingularMatrix {
                    solver: NAME,
                    evidence: Singularity::NoPivot { row },
                });
            }
            Err(LuError::Generic(e)) => return Err(out_of_resources(e)),
        }
        self.factored = true;
        Ok(())
    }

    fn solve_in_place(&mut self, rhs: &mut [f64]) -> Result<SolveInfo> {
        let an = super::solver::ready(NAME, self.analysed.as_mut(), self.factored)?;
        let n = an.a.nrows();
        check_rhs(rhs, n)?;
        an.b.copy_from_slice(rhs);
        let lu = LuRef::new_unchecked(&an.symbolic, &self.numeric);
        let stack = MemStack::new(&mut an.mem);
        // The factor is of A^T: A x = b is (A^T)^T x = b.
        lu.solve_transpose_in_place_with_conj(
            Conj::No,
            MatMut::from_column_major_slice_mut(rhs, n, 1),
            Par::Seq,
            stack,
        );
        let singular = |evidence| {
            Err(Error::SingularMatrix {
                solver: NAME,
                evidence,
            })
        };
        if let Some(index) = rhs.iter().position(|v| !v.is_finite()) {
            return singular(Singularity::NonFiniteSolution { index });
        }
        let serial = Parallelism::serial();
        an.a.mul_vec(rhs, &mut an.r, serial);
        for (r, b) in an.r.iter_mut().zip(&an.b) {
            *r = b - *r;
        }
        let (norm_x, norm_b) = (norm_inf(rhs), norm_inf(&an.b));
        if norm_b == 0.0 {
            // x = 0 exactly (the triangular solves of a zero vector).
            return Ok(SolveInfo {
                iterations: 0,
                relative_residual: 0.0,
            });
        }
        let relative_residual = local_norm2(&an.r) / local_norm2(&an.b);
        if relative_residual.is_nan() || relative_residual > LU_RESIDUAL_LIMIT {
            return singular(Singularity::Residual {
                relative_residual,
                limit: LU_RESIDUAL_LIMIT,
            });
        }
        let lower_bound = an.norm_a * norm_x / norm_b;
        let limit = 1.0 / ((n + 1) as f64 * f64::EPSILON);
        if lower_bound > limit {
            return singular(Singularity::IllConditioned { lower_bound, limit });
        }
        Ok(SolveInfo {
            iterations: 0,
            relative_residual,
        })
    }

    fn name(&self) -> &'static str {
        NAME
    }
}
