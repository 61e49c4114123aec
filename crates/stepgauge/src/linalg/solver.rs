//! The linear-solver seam: one trait for the direct and iterative solvers of `A x = b`, and the
//! checks they share.
//!
//! An implicit scheme solves with a matrix whose sparsity pattern is fixed for the whole run
//! while its values change (the effective stiffness `K + c1 C + c0 M`, or a tangent). The trait
//! splits the work accordingly:
//!
//! 1. [`analyze`](LinearSolver::analyze) once per pattern: orderings, symbolic factorisation,
//!    every buffer;
//! 2. [`factor`](LinearSolver::factor) for each new set of values;
//! 3. [`solve_in_place`](LinearSolver::solve_in_place) for each right-hand side.
//!
//! Implementations: [`SparseCholesky`](super::SparseCholesky) (symmetric positive definite),
//! [`SparseLu`](super::SparseLu) (any non-singular matrix) and
//! [`ConjugateGradient`](super::ConjugateGradient) (symmetric positive definite, matrix-free
//! memory).

use super::CsrMatrix;
use crate::error::{Error, Result};

/// Solves A x = b for a sparse square matrix whose pattern is fixed for many factorisations.
pub trait LinearSolver: Send {
    /// Analyses the sparsity pattern of `a` (symbolic factorisation, orderings); called once per pattern.
    fn analyze(&mut self, a: &CsrMatrix) -> Result<()>;
    /// Numerical factorisation (or preconditioner set-up) for `a`, whose pattern is the analysed one.
    fn factor(&mut self, a: &CsrMatrix) -> Result<()>;
    /// Overwrites `rhs` with the solution of A x = rhs for the last factored A.
    fn solve_in_place(&mut self, rhs: &mut [f64]) -> Result<SolveInfo>;
    /// A short name for reports ("sparse Cholesky", ...).
    fn name(&self) -> &'static str;
    /// This solver as a [`SparseCholesky`](super::SparseCholesky), if it is one (the implicit
    /// integrator then runs the sweeps of a simplicial factor itself, with its own work inside
    /// them); `None` by default.
    fn as_sparse_cholesky(&self) -> Option<&super::SparseCholesky> {
        None
    }
    /// Adopts the run's execution setting (threads and the reducer of global sums); the implicit
    /// integrator calls it with its own [`ImplicitOptions::execution`](crate::implicit::ImplicitOptions::execution)
    /// before the first `analyze`. A solver with global sums (an iterative one) must finish them
    /// through `execution.reduce`; the default ignores the setting (the direct solvers work on
    /// the whole matrix in one process).
    fn set_execution(&mut self, execution: &super::Execution) {
        let _ = execution;
    }
}

/// What a solve did.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SolveInfo {
    /// Iterations of an iterative solver; 0 for direct solvers.
    pub iterations: usize,
    /// `||b - A x||_2 / ||b||_2` of the returned solution (0 when `b = 0`), or NaN when the
    /// solver does not compute it.
    pub relative_residual: f64,
}

/// Relative tolerance of the symmetry check of the symmetric solvers: entries `a_ij` and `a_ji`
/// may differ by `SYMMETRY_TOLERANCE * (max(|a_ij|, |a_ji|) + sqrt(|a_ii a_jj|))`.
///
/// Assembled symmetric matrices are symmetric to rounding (a few ulps); anything larger is an
/// unsymmetric matrix, for which the symmetric solvers would silently solve with one triangle.
pub const SYMMETRY_TOLERANCE: f64 = 1e-10;

/// `Error::DimensionMismatch` unless `a` is square.
pub(crate) fn check_square(a: &CsrMatrix) -> Result<()> {
    if a.nrows() != a.ncols() {
        return Err(Error::DimensionMismatch {
            what: "matrix columns (a solver needs a square matrix)",
            expected: a.nrows(),
            found: a.ncols(),
        });
    }
    Ok(())
}

/// `Error::InvalidMatrix` unless `a` has the analysed pattern `pattern`.
pub(crate) fn check_pattern(pattern: &CsrMatrix, a: &CsrMatrix) -> Result<()> {
    if !pattern.same_pattern(a) {
        return Err(Error::InvalidMatrix {
            what: "matrix given to factor",
            problem: "its sparsity pattern differs from the analysed one; call analyze again \
                      after a change of pattern"
                .into(),
        });
    }
    Ok(())
}

/// `Error::NonFiniteInput` (index = row) for the first non-finite value of `a`.
pub(crate) fn check_finite_matrix(a: &CsrMatrix) -> Result<()> {
    if let Some(k) = a.data().iter().position(|v| !v.is_finite()) {
        // The row holding storage position k: the last row pointer <= k.
        let row = a.indptr().partition_point(|&p| p <= k) - 1;
        return Err(Error::NonFiniteInput {
            what: "matrix row",
            index: row,
            value: a.data()[k],
        });
    }
    Ok(())
}

/// Checks a right-hand side handed to [`LinearSolver::solve_in_place`]: `Ok` when it has `n`
/// entries, all finite. The built-in solvers call it first; a solver of your own can too.
///
/// # Errors
/// [`Error::DimensionMismatch`] for a length other than `n`; [`Error::NonFiniteInput`] (index =
/// the first non-finite entry) for a NaN or infinite entry.
pub fn check_rhs(rhs: &[f64], n: usize) -> Result<()> {
    if rhs.len() != n {
        return Err(Error::DimensionMismatch {
            what: "right-hand side",
            expected: n,
            found: rhs.len(),
        });
    }
    if let Some(i) = rhs.iter().position(|v| !v.is_finite()) {
        return Err(Error::NonFiniteInput {
            what: "right-hand side",
            index: i,
            value: rhs[i],
        });
    }
    Ok(())
}

/// Where the transposed partner and the diagonal of each entry live, for the symmetry check of
/// the symmetric solvers. Built once per pattern; the check itself allocates nothing.
#[derive(Debug, Clone, Default)]
pub(crate) struct SymmetryMap {
    /// Row of each stored entry.
    row: Vec<usize>,
    /// Storage position of the transposed entry `(j, i)` of each entry `(i, j)`.
    mirror: Vec<usize>,
    /// Storage position of each diagonal entry, `usize::MAX` where none is stored.
    diag: Vec<usize>,
}

impl SymmetryMap {
    /// The map for the pattern of `a` (square).
    ///
    /// # Errors
    /// [`Error::InvalidMatrix`] when the pattern is not structurally symmetric.
    pub(crate) fn new(solver: &'static str, a: &CsrMatrix) -> Result<Self> {
        let n = a.nrows();
        let (indptr, indices) = (a.indptr(), a.indices());
        let mut row = Vec::with_capacity(a.nnz());
        let mut diag = vec![usize::MAX; n];
        for (i, d) in diag.iter_mut().enumerate() {
            let (lo, hi) = (indptr[i], indptr[i + 1]);
            row.extend(std::iter::repeat_n(i, hi - lo));
            if let Ok(p) = indices[lo..hi].binary_search(&(i as u32)) {
                *d = lo + p;
            }
        }
        // Walk the entries row by row. The partner of (i, j) is (j, i) in row j; the rows i
        // that hold column j come in increasing order, so a cursor in row j only moves forward
        // and the search is linear overall.
        let mut mirror = vec![usize::MAX; a.nnz()];
        let mut cursor: Vec<usize> = indptr[..n].to_vec();
        for i in 0..n {
            for k in indptr[i]..indptr[i + 1] {
                let j = indices[k] as usize;
                let end = indptr[j + 1];
                while cursor[j] < end && (indices[cursor[j]] as usize) < i {
                    cursor[j] += 1;
                }
                if cursor[j] < end && indices[cursor[j]] as usize == i {
                    mirror[k] = cursor[j];
                } else {
                    return Err(Error::InvalidMatrix {
                        what: "matrix given to analyze",
                        problem: format!(
                            "the {solver} solver needs a structurally symmetric pattern, but entry \
                             ({i}, {j}) is stored and ({j}, {i}) is not; store explicit zeros or \
                             use the sparse LU solver"
                        ),
                    });
                }
            }
        }
        Ok(SymmetryMap { row, mirror, diag })
    }

    /// Storage position of the diagonal entry of row `i`, if stored.
    pub(crate) fn diag_position(&self, i: usize) -> Option<usize> {
        let k = self.diag[i];
        (k != usize::MAX).then_some(k)
    }

    /// `Error::NotSymmetric` for the first entry (in storage order) that differs from its
    /// transposed partner by more than [`SYMMETRY_TOLERANCE`]. `data` has the analysed pattern.
    pub(crate) fn check_values(&self, solver: &'static str, a: &CsrMatrix) -> Result<()> {
        let data = a.data();
        let d = |i: usize| self.diag_position(i).map_or(0.0, |k| data[k].abs());
        for (k, &m) in self.mirror.iter().enumerate() {
            if m <= k {
                continue; // each pair once (and the diagonal, its own partner, never)
            }
            let (v, w) = (data[k], data[m]);
            let (i, j) = (self.row[k], self.row[m]);
            let scale = v.abs().max(w.abs()) + (d(i) * d(j)).sqrt();
            if (v - w).abs() > SYMMETRY_TOLERANCE * scale {
                return Err(Error::NotSymmetric {
                    solver,
                    row: i,
                    col: j,
                    value: v,
                    transposed: w,
                });
            }
        }
        Ok(())
    }
}

/// The analysed data of a solver that is ready to solve: `analysed` when it is there and the
/// values have been factored.
///
/// # Errors
/// [`Error::SolverNotReady`] naming the call that is missing (`analyze`, then `factor`).
pub(crate) fn ready<T>(solver: &'static str, analysed: Option<T>, factored: bool) -> Result<T> {
    let missing = |missing| Error::SolverNotReady { solver, missing };
    let a = analysed.ok_or(missing("analyze"))?;
    if !factored {
        return Err(missing("factor"));
    }
    Ok(a)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn csr(n: usize, entries: &[(usize, usize, f64)]) -> CsrMatrix {
        let mut e = entries.to_vec();
        e.sort_by_key(|&(i, j, _)| (i, j));
        let mut indptr = vec![0; n + 1];
        for &(i, _, _) in &e {
            indptr[i + 1] += 1;
        }
        for i in 0..n {
            indptr[i + 1] += indptr[i];
        }
        let indices = e.iter().map(|&(_, j, _)| j as u32).collect();
        let data = e.iter().map(|&(_, _, v)| v).collect();
        CsrMatrix::try_from_csr("test", n, n, indptr, indices, data).unwrap()
    }

    #[test]
    fn symmetry_map_finds_partners_and_asymmetry() {
        // Constructed: a symmetric 3x3 pattern with one unsymmetric value pair.
        let mut a = csr(
            3,
            &[
                (0, 0, 4.0),
                (0, 2, 1.0),
                (1, 1, 4.0),
                (2, 0, 1.0),
                (2, 2, 4.0),
            ],
        );
        let map = SymmetryMap::new("test", &a).unwrap();
        assert_eq!(map.mirror, vec![0, 3, 2, 1, 4]);
        assert_eq!(map.diag_position(1), Some(2));
        map.check_values("test", &a).unwrap();
        a.data_mut()[3] = 1.0 + 1e-14; // rounding-level difference: accepted
        map.check_values("test", &a).unwrap();
        a.data_mut()[3] = 1.5;
        let e = map.check_values("test", &a).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NotSymmetric {
                    row: 0,
                    col: 2,
                    value: 1.0,
                    transposed: 1.5,
                    ..
                }
            ),
            "{e}"
        );
    }

    #[test]
    fn unsymmetric_pattern_is_refused() {
        let a = csr(2, &[(0, 0, 1.0), (0, 1, 1.0), (1, 1, 1.0)]);
        let e = SymmetryMap::new("test", &a).unwrap_err();
        assert!(e.to_string().contains("(0, 1) is stored"), "{e}");
    }

    #[test]
    fn non_finite_matrix_value_names_its_row() {
        let mut a = csr(3, &[(0, 0, 1.0), (1, 1, 1.0), (2, 0, 2.0), (2, 2, 3.0)]);
        a.data_mut()[3] = f64::NAN; // entry (2, 2)
        let e = check_finite_matrix(&a).unwrap_err();
        assert!(
            matches!(e, Error::NonFiniteInput { index: 2, value, .. } if value.is_nan()),
            "{e}"
        );
    }
}
