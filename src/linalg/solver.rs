//! The linear-solver seam (placeholder until the solvers land).

use super::CsrMatrix;
use crate::error::Result;

/// Solves A x = b for a sparse square matrix whose pattern is fixed for many factorisations.
pub trait LinearSolver: Send {
    /// Analyses the sparsity pattern of `a`; called once per pattern.
    ///
    /// # Errors
    /// Solver-specific.
    fn analyze(&mut self, a: &CsrMatrix) -> Result<()>;
    /// Numerical factorisation for `a`, whose pattern is the analysed one.
    ///
    /// # Errors
    /// Solver-specific.
    fn factor(&mut self, a: &CsrMatrix) -> Result<()>;
    /// Overwrites `rhs` with the solution of A x = rhs for the last factored A.
    ///
    /// # Errors
    /// Solver-specific.
    fn solve_in_place(&mut self, rhs: &mut [f64]) -> Result<SolveInfo>;
    /// A short name for reports.
    fn name(&self) -> &'static str;
}

/// What a solve did.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SolveInfo {
    /// Iterations (0 for direct solvers).
    pub iterations: usize,
    /// Relative residual (NaN when not computed).
    pub relative_residual: f64,
}
