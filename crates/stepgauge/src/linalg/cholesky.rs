//! Sparse Cholesky factorisation `P A P^T = L L^T` for symmetric positive definite matrices,
//! through faer's allocation-free low-level interface.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::llt::factor::{LltError, LltRegularization};
use faer::sparse::linalg::SupernodalThreshold;
use faer::sparse::linalg::cholesky::{
    CholeskySymbolicParams, LltRef, SymbolicCholesky, SymbolicCholeskyRaw, SymmetricOrdering,
    factorize_symbolic_cholesky, supernodal::SupernodalLltRef,
};
use faer::sparse::{FaerError, SparseColMatRef, SymbolicSparseColMat};
use faer::{Conj, MatMut, Par, Side};

use super::CsrMatrix;
#[cfg(test)]
use super::Parallelism;
use super::solver::{
    LinearSolver, SolveInfo, SymmetryMap, check_finite_matrix, check_pattern, check_rhs,
    check_square,
};
use crate::error::{Error, Result};

const NAME: &str = "sparse Cholesky";

/// A pivot `d_j = l_jj^2` at or below `PIVOT_LOSS_FACTOR * (n + 1) * eps * a_jj` (eps =
/// `f64::EPSILON` = 2.2e-16, `n` unknowns) is refused as lost to rounding. The computed Cholesky
/// factor is exact for some `A + dA` with `|dA| <= (n + 1) eps |L| |L^T|` to first order
/// (Higham, theorem 10.3), so such a pivot cannot be told apart from zero. This is how a
/// singular positive semi-definite matrix (an unrestrained stiffness) whose last pivot comes out
/// slightly positive instead of zero is caught, instead of solving to a huge, meaningless `x`.
/// Measured on singular Neumann Laplacians up to `n = 10^4`, the lost pivots stayed below
/// `0.7 (n + 1) eps a_jj`; the factor 4 is the margin. A refused matrix has a condition number
/// of at least `1 / (4 (n + 1) eps)`.
///
/// # Reference
/// N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., SIAM, 2002, theorem
/// 10.3.
pub const PIVOT_LOSS_FACTOR: f64 = 4.0;

/// Sparse Cholesky solver for symmetric positive definite matrices (faer, supernodal or
/// simplicial as faer chooses, fill-reducing AMD ordering).
///
/// - [`analyze`](LinearSolver::analyze) checks the pattern is square and structurally symmetric,
///   computes the ordering and the symbolic factor, and allocates every buffer.
/// - [`factor`](LinearSolver::factor) checks the pattern is the analysed one, the values are
///   finite and symmetric (to [`SYMMETRY_TOLERANCE`](super::SYMMETRY_TOLERANCE)), and factorises
///   in place. It allocates nothing, with one exception outside stepgauge: the first supernodal
///   factorisation in a process runs the one-time set-up of faer's dense matrix-product backend
///   (about 490 small allocations, and a 64 MiB packing buffer per thread that uses it).
/// - [`solve_in_place`](LinearSolver::solve_in_place) allocates nothing. It does not compute the
///   residual ([`SolveInfo::relative_residual`] is NaN).
///
/// The CSR arrays of a symmetric `A` are the CSC arrays of `A^T = A`, so the matrix goes to faer
/// without conversion of its values; only the column indices are widened once, in `analyze`.
/// faer runs sequentially here ([`Par::Seq`]): the factor is then deterministic and needs no
/// thread pool.
///
/// # Errors
/// A matrix that is not positive definite gives [`Error::NotPositiveDefinite`] with the row (in
/// the caller's numbering) of the failing pivot, also when a pivot is positive but at rounding
/// level (see [`PIVOT_LOSS_FACTOR`]).
///
/// # Reference
/// T. A. Davis, *Direct Methods for Sparse Linear Systems*, SIAM, 2006 (chapter 4, Cholesky);
/// P. R. Amestoy, T. A. Davis, I. S. Duff, "An approximate minimum degree ordering algorithm",
/// SIAM J. Matrix Anal. Appl. 17 (1996) 886-905; the faer crate (S. El Kazdadi), version 0.24.
#[derive(Debug, Default)]
pub struct SparseCholesky {
    analysed: Option<Analysis>,
    /// Values of the factor, `symbolic.len_val()` long.
    values: Vec<f64>,
    factored: bool,
    /// Forces faer's simplicial or supernodal variant (tests); `None` lets faer choose.
    variant: Option<SupernodalThreshold>,
}

struct Analysis {
    /// The analysed pattern (values unused).
    pattern: CsrMatrix,
    /// The pattern as faer's CSC (of `A^T = A`), with `usize` indices.
    csc: SymbolicSparseColMat<usize>,
    symbolic: SymbolicCholesky<usize>,
    symmetry: SymmetryMap,
    /// Workspace for the numeric factorisation and the solve.
    mem: MemBuffer,
}

impl std::fmt::Debug for Analysis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Analysis")
            .field("n", &self.pattern.nrows())
            .field("nnz", &self.pattern.nnz())
            .field("factor_len", &self.symbolic.len_val())
            .finish_non_exhaustive()
    }
}

impl SparseCholesky {
    /// A solver with nothing analysed.
    pub fn new() -> Self {
        Self::default()
    }

    /// Number of stored values of the factor `L` (its fill, diagonal included) once a pattern is
    /// analysed; `None` before.
    pub fn factor_len(&self) -> Option<usize> {
        self.analysed.as_ref().map(|an| an.symbolic.len_val())
    }

    /// True when faer chose its supernodal variant for the analysed pattern (`None` before
    /// [`analyze`](LinearSolver::analyze)).
    pub fn is_supernodal(&self) -> Option<bool> {
        self.analysed
            .as_ref()
            .map(|an| matches!(an.symbolic.raw(), SymbolicCholeskyRaw::Supernodal(_)))
    }

    /// The factor's arrays when faer chose its simplicial variant and a factor is ready
    /// (`None` otherwise).
    pub(crate) fn simplicial_factor(&self) -> Option<SimplicialFactor<'_>> {
        let an = self.analysed.as_ref().filter(|_| self.factored)?;
        match an.symbolic.raw() {
            SymbolicCholeskyRaw::Simplicial(sym) => Some(SimplicialFactor {
                col_ptr: sym.col_ptr(),
                row_idx: sym.row_idx(),
                values: &self.values,
                perm: an.symbolic.perm().map(|p| p.arrays().0),
            }),
            SymbolicCholeskyRaw::Supernodal(_) => None,
        }
    }

    /// Forces faer's simplicial or supernodal variant, to test both.
    #[cfg(test)]
    fn with_variant(variant: SupernodalThreshold) -> Self {
        SparseCholesky {
            variant: Some(variant),
            ..Self::default()
        }
    }

    /// The first pivot `d_j = l_jj^2` (in elimination order) that is not above the rounding
    /// level of [`PIVOT_LOSS_FACTOR`], as `(row of A, d_j)`.
    fn lost_pivot(an: &Analysis, values: &[f64], a: &CsrMatrix) -> Option<(usize, f64)> {
        let perm = an.symbolic.perm();
        let limit = PIVOT_LOSS_FACTOR * (a.nrows() + 1) as f64 * f64::EPSILON;
        let row_of = |j: usize| perm.map_or(j, |p| p.arrays().0[j]);
        let check = |j: usize, l_jj: f64| {
            let row = row_of(j);
            let a_jj = an.symmetry.diag_position(row).map_or(0.0, |k| a.data()[k]);
            let d = l_jj * l_jj;
            (d.is_nan() || d <= limit * a_jj).then_some((row, d))
        };
        match an.symbolic.raw() {
            SymbolicCholeskyRaw::Simplicial(sym) => {
                // Each column of L starts with its diagonal entry.
                let col_ptr = sym.col_ptr();
                (0..sym.ncols()).find_map(|j| check(j, values[col_ptr[j]]))
            }
            SymbolicCholeskyRaw::Supernodal(sym) => {
                let l = SupernodalLltRef::new(sym, values);
                (0..sym.n_supernodes()).find_map(|s| {
                    let node = l.supernode(s);
                    let block = node.val();
                    (0..block.ncols()).find_map(|c| check(node.start() + c, block[(c, c)]))
                })
            }
        }
    }
}

/// The arrays of a simplicial factor `P A P^T = L L^T` of a [`SparseCholesky`], for a solve
/// whose sweeps do other work on the way ([`SimplicialFactor::solve_fused`]).
#[derive(Debug, Clone, Copy)]
pub(crate) struct SimplicialFactor<'a> {
    /// Start of each column of `L` in `row_idx` and `values` (`n + 1` entries); each column
    /// starts with its diagonal entry.
    col_ptr: &'a [usize],
    /// Row of each stored entry of `L`.
    row_idx: &'a [usize],
    /// Value of each stored entry of `L`.
    values: &'a [f64],
    /// `perm[j]` is the row of `A` eliminated at step `j`; `None` for the identity.
    pub(crate) perm: Option<&'a [usize]>,
}

impl SimplicialFactor<'_> {
    /// Number of unknowns.
    pub(crate) fn n(&self) -> usize {
        self.col_ptr.len() - 1
    }

    /// Number of stored entries of `L`.
    pub(crate) fn len(&self) -> usize {
        self.col_ptr[self.n()]
    }

    /// True when the elimination order is the identity.
    #[cfg(test)]
    pub(crate) fn is_identity(&self) -> bool {
        self.perm
            .is_none_or(|p| p.iter().enumerate().all(|(j, &r)| r == j))
    }

    /// Solves `A x = b` with faer's arithmetic for one right-hand side (the same operations in
    /// the same order: `x_j = y_j * (1 / l_jj)`, `y_i -= l_ij x_j` forward; `acc += l_ij x_i` over
    /// a column's entries from its last, `x_j = (z_j - acc) * (1 / l_jj)` backward, so the
    /// solution is bit for bit that of [`LinearSolver::solve_in_place`]), without its two
    /// permutation copies and with the right-hand side and the use of the solution inside the
    /// sweeps:
    ///
    /// - `rhs(i)` gives `b_i` (row `i` of `A`); it is asked once per row, in elimination order,
    ///   before the first update of that row by the forward sweep;
    /// - `out(i, x_i)` receives the solution of row `i`, once per row, in reverse elimination
    ///   order, as soon as the backward sweep has it.
    ///
    /// `work` (`n` entries) holds the permuted intermediate vectors; on return it holds the
    /// solution in elimination order.
    ///
    /// # Panics
    /// If `work` does not have `n` entries.
    #[inline(always)]
    pub(crate) fn solve_fused(
        &self,
        work: &mut [f64],
        mut rhs: impl FnMut(usize) -> f64,
        mut out: impl FnMut(usize, f64),
    ) {
        let n = self.n();
        assert_eq!(work.len(), n);
        let (col_ptr, row_idx, values) = (self.col_ptr, self.row_idx, self.values);
        let row_of = |j: usize| self.perm.map_or(j, |p| p[j]);
        // Forward: L y = P b, with P b formed just ahead of its first use.
        let mut filled = 0;
        for j in 0..n {
            let (s, e) = (col_ptr[j], col_ptr[j + 1]);
            while filled <= j {
                work[filled] = rhs(row_of(filled));
                filled += 1;
            }
            let xj = work[j] * values[s].recip();
            work[j] = xj;
            for (&i, &l) in row_idx[s + 1..e].iter().zip(&values[s + 1..e]) {
                while filled <= i {
                    work[filled] = rhs(row_of(filled));
                    filled += 1;
                }
                work[i] -= l * xj;
            }
        }
        // Backward: L^T z = y, and x = P^T z.
        for j in (0..n).rev() {
            let (s, e) = (col_ptr[j], col_ptr[j + 1]);
            let mut acc = 0.0;
            for (&i, &l) in row_idx[s + 1..e].iter().zip(&values[s + 1..e]).rev() {
                acc += l * work[i];
            }
            let xj = (work[j] - acc) * values[s].recip();
            work[j] = xj;
            out(row_of(j), xj);
        }
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

impl LinearSolver for SparseCholesky {
    fn analyze(&mut self, a: &CsrMatrix) -> Result<()> {
        self.analysed = None;
        self.factored = false;
        check_square(a)?;
        let symmetry = SymmetryMap::new(NAME, a)?;
        let n = a.nrows();
        let col_ptr = a.indptr().to_vec();
        let row_idx = a.indices().iter().map(|&c| c as usize).collect();
        let csc = SymbolicSparseColMat::new_checked(n, n, col_ptr, None, row_idx);
        let params = CholeskySymbolicParams {
            supernodal_flop_ratio_threshold: self.variant.unwrap_or_default(),
            ..Default::default()
        };
        let symbolic =
            factorize_symbolic_cholesky(csc.as_ref(), Side::Lower, SymmetricOrdering::Amd, params)
                .map_err(out_of_resources)?;
        let req = StackReq::any_of(&[
            symbolic.factorize_numeric_llt_scratch::<f64>(Par::Seq, Default::default()),
            symbolic.solve_in_place_scratch::<f64>(1, Par::Seq),
        ]);
        let mem = MemBuffer::try_new(req).map_err(|_| out_of_resources(FaerError::OutOfMemory))?;
        self.values.clear();
        self.values.resize(symbolic.len_val(), 0.0);
        let mut pattern = a.clone();
        pattern.data_mut().fill(0.0);
        self.analysed = Some(Analysis {
            pattern,
            csc,
            symbolic,
            symmetry,
            mem,
        });
        Ok(())
    }

    fn factor(&mut self, a: &CsrMatrix) -> Result<()> {
        self.factored = false;
        let an = self.analysed.as_mut().ok_or(Error::SolverNotReady {
            solver: NAME,
            missing: "analyze",
        })?;
        check_pattern(&an.pattern, a)?;
        check_finite_matrix(a)?;
        an.symmetry.check_values(NAME, a)?;
        let mat = SparseColMatRef::new(an.csc.as_ref(), a.data());
        let stack = MemStack::new(&mut an.mem);
        let result = an.symbolic.factorize_numeric_llt(
            &mut self.values,
            mat,
            Side::Lower,
            LltRegularization::default(),
            Par::Seq,
            stack,
            Default::default(),
        );
        if let Err(LltError::NonPositivePivot { index }) = result {
            // faer's simplicial path reports the 1-based step, its supernodal path the
            // 0-based one.
            let j = match an.symbolic.raw() {
                SymbolicCholeskyRaw::Simplicial(_) => index.saturating_sub(1),
                SymbolicCholeskyRaw::Supernodal(_) => index,
            };
            let row = (j < a.nrows()).then(|| an.symbolic.perm().map_or(j, |p| p.arrays().0[j]));
            return Err(Error::NotPositiveDefinite {
                solver: NAME,
                row,
                value: None,
            });
        }
        if let Some((row, pivot)) = Self::lost_pivot(an, &self.values, a) {
            return Err(Error::NotPositiveDefinite {
                solver: NAME,
                row: Some(row),
                value: Some(pivot),
            });
        }
        self.factored = true;
        Ok(())
    }

    fn solve_in_place(&mut self, rhs: &mut [f64]) -> Result<SolveInfo> {
        let an = super::solver::ready(NAME, self.analysed.as_mut(), self.factored)?;
        let n = an.pattern.nrows();
        check_rhs(rhs, n)?;
        let llt = LltRef::new(&an.symbolic, &self.values);
        let stack = MemStack::new(&mut an.mem);
        llt.solve_in_place_with_conj(
            Conj::No,
            MatMut::from_column_major_slice_mut(rhs, n, 1),
            Par::Seq,
            stack,
        );
        Ok(SolveInfo {
            iterations: 0,
            relative_residual: f64::NAN,
        })
    }

    fn name(&self) -> &'static str {
        NAME
    }

    fn as_sparse_cholesky(&self) -> Option<&SparseCholesky> {
        Some(self)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use sprs::TriMat;

    /// 5-point Laplacian on an `m x m` grid: Dirichlet (`neumann = false`, SPD) or pure Neumann
    /// (row sums zero, singular with the constant vector as null space), times `scale`.
    fn laplace(m: usize, neumann: bool, scale: f64) -> CsrMatrix {
        let mut t = TriMat::new((m * m, m * m));
        let id = |i: usize, j: usize| i * m + j;
        for i in 0..m {
            for j in 0..m {
                if !neumann {
                    t.add_triplet(id(i, j), id(i, j), 4.0 * scale);
                }
                let mut link = |p: usize, q: usize| {
                    t.add_triplet(p, q, -scale);
                    t.add_triplet(q, p, -scale);
                    if neumann {
                        t.add_triplet(p, p, scale);
                        t.add_triplet(q, q, scale);
                    }
                };
                if i + 1 < m {
                    link(id(i, j), id(i + 1, j));
                }
                if j + 1 < m {
                    link(id(i, j), id(i, j + 1));
                }
            }
        }
        CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
    }

    fn variants() -> [(SupernodalThreshold, bool); 2] {
        [
            (SupernodalThreshold::FORCE_SIMPLICIAL, false),
            (SupernodalThreshold::FORCE_SUPERNODAL, true),
        ]
    }

    fn is_supernodal(s: &SparseCholesky) -> bool {
        let an = s.analysed.as_ref().unwrap();
        matches!(an.symbolic.raw(), SymbolicCholeskyRaw::Supernodal(_))
    }

    /// 7-point Laplacian on an `m x m x m` grid (Dirichlet).
    fn laplace_3d(m: usize) -> CsrMatrix {
        let n = m * m * m;
        let id = |i: usize, j: usize, k: usize| (i * m + j) * m + k;
        let mut t = TriMat::new((n, n));
        for i in 0..m {
            for j in 0..m {
                for k in 0..m {
                    let p = id(i, j, k);
                    t.add_triplet(p, p, 6.0);
                    for (c, q) in [(i, (i + 1, j, k)), (j, (i, j + 1, k)), (k, (i, j, k + 1))] {
                        if c + 1 < m {
                            let q = id(q.0, q.1, q.2);
                            t.add_triplet(p, q, -1.0);
                            t.add_triplet(q, p, -1.0);
                        }
                    }
                }
            }
        }
        CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
    }

    /// Deterministic pseudo-random numbers in `[0, 1)` (splitmix64).
    fn uniform(state: &mut u64) -> f64 {
        *state = state.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = *state;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        (z ^ (z >> 31)) as f64 / 2f64.powi(64)
    }

    /// A random symmetric matrix, strictly diagonally dominant with a positive diagonal (so
    /// SPD): entries `(i, j)` with `|i - j| <= band` kept with probability `fill`.
    fn random_spd(n: usize, band: usize, fill: f64, seed: u64) -> CsrMatrix {
        let mut st = seed;
        let mut t = TriMat::new((n, n));
        let mut row_sum = vec![0.0; n];
        for i in 0..n {
            for j in i + 1..(i + band + 1).min(n) {
                if uniform(&mut st) < fill {
                    let v = uniform(&mut st) - 0.5;
                    t.add_triplet(i, j, v);
                    t.add_triplet(j, i, v);
                    row_sum[i] += v.abs();
                    row_sum[j] += v.abs();
                }
            }
        }
        for (i, r) in row_sum.iter().enumerate() {
            t.add_triplet(i, i, r + 0.1 + uniform(&mut st));
        }
        CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
    }

    /// The fused sweeps of a simplicial factor give faer's solution bit for bit (same
    /// arithmetic), ask for each row of the right-hand side once, before it is used, and hand
    /// each row of the solution once: a chain (reversal ordering), random banded and general
    /// sparse SPD matrices, and a 2D Laplacian, whose AMD orderings are not trivial.
    #[test]
    fn fused_sweeps_equal_faers_solve() {
        let mut chain = TriMat::new((500, 500));
        for i in 0..500 {
            chain.add_triplet(i, i, 2.5);
            if i + 1 < 500 {
                chain.add_triplet(i, i + 1, -1.0);
                chain.add_triplet(i + 1, i, -1.0);
            }
        }
        let cases = [
            CsrMatrix::from_sprs("A", &chain.to_csr()).unwrap(),
            random_spd(300, 3, 1.0, 1),
            random_spd(300, 6, 0.5, 2),
            random_spd(400, 400, 0.01, 3),
            laplace(15, false, 1.0),
        ];
        let mut some_perm = false;
        for (c, a) in cases.iter().enumerate() {
            let n = a.nrows();
            let mut s = SparseCholesky::with_variant(SupernodalThreshold::FORCE_SIMPLICIAL);
            assert!(s.simplicial_factor().is_none());
            s.analyze(a).unwrap();
            assert!(s.simplicial_factor().is_none(), "not factored yet");
            s.factor(a).unwrap();
            let f = s.simplicial_factor().unwrap();
            assert_eq!(f.n(), n);
            some_perm |= f
                .perm
                .is_some_and(|p| p.iter().enumerate().any(|(j, &r)| r != j));
            let mut st = 7 + c as u64;
            let b: Vec<f64> = (0..n).map(|_| uniform(&mut st) - 0.5).collect();
            let mut work = vec![0.0; n];
            let mut x = vec![f64::NAN; n];
            let mut asked = vec![0u32; n];
            let mut handed = vec![0u32; n];
            f.solve_fused(
                &mut work,
                |i| {
                    asked[i] += 1;
                    b[i]
                },
                |i, v| {
                    handed[i] += 1;
                    x[i] = v;
                },
            );
            assert!(asked.iter().chain(&handed).all(|&k| k == 1), "case {c}");
            let mut y = b.clone();
            s.solve_in_place(&mut y).unwrap();
            for (i, (u, v)) in x.iter().zip(&y).enumerate() {
                assert_eq!(u.to_bits(), v.to_bits(), "case {c}, row {i}: {u} vs {v}");
            }
            // And it solves: A x = b to rounding (diagonally dominant, well conditioned).
            let mut ax = vec![0.0; n];
            a.mul_vec(&x, &mut ax, Parallelism::serial());
            for (p, q) in ax.iter().zip(&b) {
                assert!((p - q).abs() < 1e-12, "case {c}: {p} vs {q}");
            }
        }
        assert!(some_perm);
        // A supernodal factor is not offered.
        let mut s = SparseCholesky::with_variant(SupernodalThreshold::FORCE_SUPERNODAL);
        s.analyze(&laplace(12, false, 1.0)).unwrap();
        s.factor(&laplace(12, false, 1.0)).unwrap();
        assert!(s.simplicial_factor().is_none());
    }

    #[test]
    fn faer_picks_simplicial_for_a_chain_and_supernodal_for_a_3d_grid() {
        // tests/solver_alloc.rs relies on this to cover both of faer's paths.
        let mut s = SparseCholesky::new();
        let mut t = TriMat::new((2000, 2000));
        for i in 0..2000 {
            t.add_triplet(i, i, 2.0);
            if i + 1 < 2000 {
                t.add_triplet(i, i + 1, -1.0);
                t.add_triplet(i + 1, i, -1.0);
            }
        }
        s.analyze(&CsrMatrix::from_sprs("A", &t.to_csr()).unwrap())
            .unwrap();
        assert!(!is_supernodal(&s));
        s.analyze(&laplace_3d(15)).unwrap();
        assert!(is_supernodal(&s));
    }

    #[test]
    fn both_faer_variants_solve_and_refactor() {
        for (variant, supernodal) in variants() {
            let mut s = SparseCholesky::with_variant(variant);
            for scale in [1.0, 3.0] {
                let a = laplace(12, false, scale);
                if scale == 1.0 {
                    s.analyze(&a).unwrap();
                    assert_eq!(is_supernodal(&s), supernodal);
                }
                let n = a.nrows();
                let x_true: Vec<f64> = (0..n).map(|i| (0.1 * i as f64).cos()).collect();
                let mut x = vec![0.0; n];
                a.mul_vec(&x_true, &mut x, Parallelism::serial()); // constructed: b = A x_true
                s.factor(&a).unwrap();
                s.solve_in_place(&mut x).unwrap();
                for (u, v) in x.iter().zip(&x_true) {
                    // kappa < 70 for the 12 x 12 grid: rounding-level error.
                    assert!((u - v).abs() < 1e-13, "{variant:?}: {u} vs {v}");
                }
            }
        }
    }

    #[test]
    fn both_faer_variants_name_the_row_of_a_negative_pivot() {
        for (variant, _) in variants() {
            // A very negative diagonal at row 37: no pivot eliminated before it involves it, and
            // its own pivot is at most a_37,37 < 0 (constructed).
            let mut a = laplace(12, false, 1.0);
            let k = a.position(37, 37).unwrap();
            a.data_mut()[k] = -1e6;
            let mut s = SparseCholesky::with_variant(variant);
            s.analyze(&a).unwrap();
            let e = s.factor(&a).unwrap_err();
            assert!(
                matches!(e, Error::NotPositiveDefinite { row: Some(37), .. }),
                "{variant:?}: {e}"
            );
        }
    }

    #[test]
    fn both_faer_variants_refuse_a_singular_semidefinite_matrix() {
        for (variant, _) in variants() {
            // Pure Neumann Laplacian times 0.1: singular (exact), the last pivot is rounding
            // noise of either sign.
            let a = laplace(12, true, 0.1);
            let mut s = SparseCholesky::with_variant(variant);
            s.analyze(&a).unwrap();
            let e = s.factor(&a).unwrap_err();
            assert!(
                matches!(e, Error::NotPositiveDefinite { row: Some(_), .. }),
                "{variant:?}: {e}"
            );
            assert!(!s.factored);
        }
    }
}
