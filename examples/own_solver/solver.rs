//! A user-written linear solver for stepgauge's `LinearSolver` seam: a banded Cholesky
//! factorisation `P A P^T = L L^T` on the band left by a reverse Cuthill-McKee ordering `P`.
//!
//! No I/O here, so that `tests/example_own_solver.rs` can include this file with `#[path]`.
//!
//! - `analyze` (once per pattern): checks that the matrix is square and structurally
//!   symmetric, orders the unknowns by reverse Cuthill-McKee, measures the half-bandwidth `b`
//!   of the reordered matrix and allocates the band `L` (`n (b + 1)` values), the scatter map
//!   from CSR storage into the band and the work vector. Nothing is allocated after this.
//! - `factor`: checks the values (same pattern, finite, symmetric to `SYMMETRY_TOLERANCE`),
//!   scatters the lower triangle into the band and factors it row by row
//!   (`l_ij = (a_ij - sum_k l_ik l_jk) / l_jj`, `l_ii = sqrt(a_ii - sum_k l_ik^2)`, sums over the
//!   band only), about `n b^2 / 2` multiply-adds. A pivot `a_ii - sum_k l_ik^2` at or below
//!   `PIVOT_LOSS_FACTOR (n + 1) eps a_ii` is refused with `Error::NotPositiveDefinite` (the row
//!   in the caller's numbering and the pivot), the same threshold as the built-in sparse
//!   Cholesky (Higham 2002, *Accuracy and Stability of Numerical Algorithms*, 2nd ed., theorem
//!   10.3, number from memory: the computed factor is exact for `A + dA` with
//!   `|dA| <= (n + 1) eps |L| |L^T|`).
//! - `solve_in_place`: permutes the right-hand side, one forward and one backward substitution
//!   over the band (`4 n b` flops), permutes back.
//!
//! Reverse Cuthill-McKee: Cuthill & McKee (1969), "Reducing the bandwidth of sparse symmetric
//! matrices", Proc. 24th ACM National Conference, 157-172; the reversal and the start from a
//! pseudo-peripheral node as in George & Liu (1981), *Computer Solution of Large Sparse
//! Positive Definite Systems*, ch. 4.

use stepgauge::Error;
use stepgauge::linalg::{
    CsrMatrix, LinearSolver, PIVOT_LOSS_FACTOR, SYMMETRY_TOLERANCE, SolveInfo, check_rhs,
};

/// The solver's name in reports and errors.
pub const NAME: &str = "banded Cholesky (reverse Cuthill-McKee)";

/// Largest band the solver will allocate (values of `L`): 2^28 values, 2 GiB.
const MAX_BAND_VALUES: usize = 1 << 28;

/// What `analyze` found and allocated for one pattern.
#[derive(Debug, Clone)]
struct Analysis {
    /// The analysed pattern (values ignored), to refuse a different pattern in `factor`.
    pattern: CsrMatrix,
    /// `perm[new] = old`.
    perm: Vec<usize>,
    /// Half-bandwidth of the reordered matrix.
    band: usize,
    /// Half-bandwidth in the caller's numbering (for reports).
    band_natural: usize,
    /// For each stored entry of `A`: its position in the band storage of `L` when it lies on
    /// or below the diagonal after reordering, `usize::MAX` otherwise (its transposed partner
    /// carries the value).
    scatter: Vec<usize>,
    /// For each stored entry, the storage position of its transposed partner.
    mirror: Vec<usize>,
    /// Storage position of each row's diagonal entry, `usize::MAX` when none is stored.
    diag: Vec<usize>,
}

/// Banded Cholesky with a reverse Cuthill-McKee ordering (see the module documentation).
#[derive(Debug, Clone, Default)]
pub struct BandedCholesky {
    analysis: Option<Analysis>,
    /// `L` by rows, row `i` holding columns `i - b ..= i` at `i (b + 1) + (j + b - i)`.
    l: Vec<f64>,
    /// The permuted right-hand side.
    work: Vec<f64>,
    factored: bool,
}

impl BandedCholesky {
    /// A solver with nothing analysed yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// Half-bandwidth after reordering (`None` before `analyze`).
    pub fn bandwidth(&self) -> Option<usize> {
        self.analysis.as_ref().map(|a| a.band)
    }

    /// Half-bandwidth in the caller's numbering (`None` before `analyze`).
    pub fn natural_bandwidth(&self) -> Option<usize> {
        self.analysis.as_ref().map(|a| a.band_natural)
    }
}

/// Reverse Cuthill-McKee ordering of the graph of a structurally symmetric pattern:
/// `perm[new] = old`. Each connected component starts from a pseudo-peripheral node (repeated
/// breadth-first searches from a node of least degree in the last level, while the depth grows).
pub fn reverse_cuthill_mckee(a: &CsrMatrix) -> Vec<usize> {
    let n = a.nrows();
    let (indptr, indices) = (a.indptr(), a.indices());
    let neighbours = |i: usize| {
        indices[indptr[i]..indptr[i + 1]]
            .iter()
            .map(|&j| j as usize)
            .filter(move |&j| j != i)
    };
    let degree: Vec<usize> = (0..n).map(|i| neighbours(i).count()).collect();
    let mut order = Vec::with_capacity(n);
    let mut placed = vec![false; n];
    // Scratch for the breadth-first searches that look for a peripheral start.
    let mut level = vec![usize::MAX; n];
    let mut queue = Vec::with_capacity(n);
    let mut scratch = Vec::new();
    // Components in the order of their node of least degree (ties: lowest index).
    let mut by_degree: Vec<usize> = (0..n).collect();
    by_degree.sort_by_key(|&i| (degree[i], i));
    for &seed in &by_degree {
        if placed[seed] {
            continue;
        }
        // Pseudo-peripheral start: BFS from the current start; move to a node of least degree in
        // the deepest level while the depth grows (at most a few rounds).
        let mut start = seed;
        let mut depth = 0;
        for _ in 0..8 {
            queue.clear();
            queue.push(start);
            level[start] = 0;
            let mut head = 0;
            while head < queue.len() {
                let i = queue[head];
                head += 1;
                for j in neighbours(i) {
                    if level[j] == usize::MAX {
                        level[j] = level[i] + 1;
                        queue.push(j);
                    }
                }
            }
            let last = level[*queue.last().unwrap_or(&start)];
            let candidate = queue
                .iter()
                .copied()
                .filter(|&i| level[i] == last)
                .min_by_key(|&i| (degree[i], i))
                .unwrap_or(start);
            for &i in &queue {
                level[i] = usize::MAX;
            }
            if last <= depth && depth > 0 {
                break;
            }
            depth = last;
            start = candidate;
        }
        // Cuthill-McKee from the start: neighbours in increasing degree.
        let first = order.len();
        order.push(start);
        placed[start] = true;
        let mut head = first;
        while head < order.len() {
            let i = order[head];
            head += 1;
            scratch.clear();
            scratch.extend(neighbours(i).filter(|&j| !placed[j]));
            scratch.sort_by_key(|&j| (degree[j], j));
            for &j in &scratch {
                placed[j] = true;
                order.push(j);
            }
        }
    }
    order.reverse();
    order
}

/// Half-bandwidth of `a` under the ordering with `iperm[old] = new`.
fn bandwidth(a: &CsrMatrix, iperm: impl Fn(usize) -> usize) -> usize {
    let mut b = 0;
    for i in 0..a.nrows() {
        for (j, _) in a.row(i) {
            b = b.max(iperm(i).abs_diff(iperm(j)));
        }
    }
    b
}

impl LinearSolver for BandedCholesky {
    fn analyze(&mut self, a: &CsrMatrix) -> stepgauge::Result<()> {
        self.analysis = None;
        self.factored = false;
        let n = a.nrows();
        if a.ncols() != n {
            return Err(Error::DimensionMismatch {
                what: "matrix columns (a solver needs a square matrix)",
                expected: n,
                found: a.ncols(),
            });
        }
        // Transposed partners and diagonal positions; a missing partner is a pattern the
        // symmetric band cannot hold.
        let mut mirror = Vec::with_capacity(a.nnz());
        let mut diag = vec![usize::MAX; n];
        for (i, d) in diag.iter_mut().enumerate() {
            for k in a.indptr()[i]..a.indptr()[i + 1] {
                let j = a.indices()[k] as usize;
                if j == i {
                    *d = k;
                }
                match a.position(j, i) {
                    Some(m) => mirror.push(m),
                    None => {
                        return Err(Error::InvalidMatrix {
                            what: "matrix given to analyze",
                            problem: format!(
                                "the {NAME} solver needs a structurally symmetric pattern, but \
                                 entry ({i}, {j}) is stored and ({j}, {i}) is not"
                            ),
                        });
                    }
                }
            }
        }
        let perm = reverse_cuthill_mckee(a);
        let mut iperm = vec![0; n];
        for (new, &old) in perm.iter().enumerate() {
            iperm[old] = new;
        }
        let band = bandwidth(a, |i| iperm[i]);
        let band_natural = bandwidth(a, |i| i);
        let w = band + 1;
        let values = n.checked_mul(w).filter(|&v| v <= MAX_BAND_VALUES).ok_or(
            Error::SolverOutOfResources {
                solver: NAME,
                reason: "out of memory (the band exceeds 2^28 values)",
            },
        )?;
        let mut scatter = Vec::with_capacity(a.nnz());
        for i in 0..n {
            for k in a.indptr()[i]..a.indptr()[i + 1] {
                let (ni, nj) = (iperm[i], iperm[a.indices()[k] as usize]);
                scatter.push(if nj <= ni {
                    ni * w + (nj + band - ni)
                } else {
                    usize::MAX
                });
            }
        }
        let oom = |_| Error::SolverOutOfResources {
            solver: NAME,
            reason: "out of memory",
        };
        self.l.clear();
        self.l.try_reserve_exact(values).map_err(oom)?;
        self.l.resize(values, 0.0);
        self.work.clear();
        self.work.try_reserve_exact(n).map_err(oom)?;
        self.work.resize(n, 0.0);
        self.analysis = Some(Analysis {
            pattern: a.clone(),
            perm,
            band,
            band_natural,
            scatter,
            mirror,
            diag,
        });
        Ok(())
    }

    fn factor(&mut self, a: &CsrMatrix) -> stepgauge::Result<()> {
        self.factored = false;
        let an = self.analysis.as_ref().ok_or(Error::SolverNotReady {
            solver: NAME,
            missing: "analyze",
        })?;
        if !an.pattern.same_pattern(a) {
            return Err(Error::InvalidMatrix {
                what: "matrix given to factor",
                problem: "its sparsity pattern differs from the analysed one; call analyze again \
                          after a change of pattern"
                    .into(),
            });
        }
        let data = a.data();
        let n = a.nrows();
        // Values: finite and symmetric (the band holds only the lower triangle).
        let row_of = |k: usize| a.indptr().partition_point(|&p| p <= k) - 1;
        if let Some(k) = data.iter().position(|v| !v.is_finite()) {
            return Err(Error::NonFiniteInput {
                what: "matrix row",
                index: row_of(k),
                value: data[k],
            });
        }
        let dabs = |i: usize| {
            an.diag
                .get(i)
                .filter(|&&k| k != usize::MAX)
                .map_or(0.0, |&k| data[k].abs())
        };
        for (k, &m) in an.mirror.iter().enumerate() {
            if m <= k {
                continue;
            }
            let (v, w) = (data[k], data[m]);
            let (i, j) = (row_of(k), row_of(m));
            let scale = v.abs().max(w.abs()) + (dabs(i) * dabs(j)).sqrt();
            if (v - w).abs() > SYMMETRY_TOLERANCE * scale {
                return Err(Error::NotSymmetric {
                    solver: NAME,
                    row: i,
                    col: j,
                    value: v,
                    transposed: w,
                });
            }
        }
        // Scatter the lower triangle into the band.
        let (b, w) = (an.band, an.band + 1);
        let l = &mut self.l;
        l.fill(0.0);
        for (k, &pos) in an.scatter.iter().enumerate() {
            if pos != usize::MAX {
                l[pos] = data[k];
            }
        }
        // Row-by-row Cholesky on the band.
        let loss = PIVOT_LOSS_FACTOR * (n as f64 + 1.0) * f64::EPSILON;
        for i in 0..n {
            let lo = i.saturating_sub(b);
            let ri = i * w;
            for j in lo..=i {
                let rj = j * w;
                // Columns lo..j of rows i and j (row j's band starts at j - b <= lo).
                let s: f64 = l[ri + (lo + b - i)..ri + (j + b - i)]
                    .iter()
                    .zip(&l[rj + (lo + b - j)..rj + b])
                    .map(|(x, y)| x * y)
                    .sum();
                let a_ij = l[ri + (j + b - i)];
                if j < i {
                    l[ri + (j + b - i)] = (a_ij - s) / l[rj + b];
                } else {
                    let pivot = a_ij - s;
                    if pivot.is_nan() || pivot <= loss * a_ij.abs() {
                        return Err(Error::NotPositiveDefinite {
                            solver: NAME,
                            row: Some(an.perm[i]),
                            value: Some(pivot),
                        });
                    }
                    l[ri + b] = pivot.sqrt();
                }
            }
        }
        self.factored = true;
        Ok(())
    }

    fn solve_in_place(&mut self, rhs: &mut [f64]) -> stepgauge::Result<SolveInfo> {
        let an = self.analysis.as_ref().ok_or(Error::SolverNotReady {
            solver: NAME,
            missing: "analyze",
        })?;
        if !self.factored {
            return Err(Error::SolverNotReady {
                solver: NAME,
                missing: "factor",
            });
        }
        let n = an.perm.len();
        check_rhs(rhs, n)?;
        let (b, w) = (an.band, an.band + 1);
        let (l, y) = (&self.l, &mut self.work);
        for (yi, &old) in y.iter_mut().zip(&an.perm) {
            *yi = rhs[old];
        }
        // L y = P rhs.
        for i in 0..n {
            let lo = i.saturating_sub(b);
            let ri = i * w;
            let s: f64 = l[ri + (lo + b - i)..ri + b]
                .iter()
                .zip(&y[lo..i])
                .map(|(x, v)| x * v)
                .sum();
            y[i] = (y[i] - s) / l[ri + b];
        }
        // L^T x = y, column by column of L^T (row by row of L), from the last row.
        for i in (0..n).rev() {
            let lo = i.saturating_sub(b);
            let ri = i * w;
            let xi = y[i] / l[ri + b];
            y[i] = xi;
            for (yk, lik) in y[lo..i].iter_mut().zip(&l[ri + (lo + b - i)..ri + b]) {
                *yk -= lik * xi;
            }
        }
        for (yi, &old) in y.iter().zip(&an.perm) {
            rhs[old] = *yi;
        }
        Ok(SolveInfo {
            iterations: 0,
            relative_residual: f64::NAN,
        })
    }

    fn name(&self) -> &'static str {
        NAME
    }
}

/// Name of the example's iterative solver.
pub const CG_NAME: &str = "Jacobi-preconditioned CG (example's own)";

/// A second user-written solver: conjugate gradients with the Jacobi (diagonal) preconditioner,
/// started from `x = 0`, stopped when the recursively updated residual satisfies
/// `||r||_2 <= tol ||b||_2` (Hestenes & Stiefel 1952, "Methods of conjugate gradients for solving
/// linear systems", J. Res. Nat. Bur. Standards 49, 409-436; Saad 2003, *Iterative Methods for
/// Sparse Linear Systems*, 2nd ed., algorithm 9.1). `factor` copies the values and inverts the
/// diagonal (a non-positive diagonal entry is `Error::NotPositiveDefinite` with its row); a
/// direction with `p^T A p <= 0` is `Error::NotPositiveDefinite` with the curvature; the
/// iteration limit gives `Error::SolverNotConverged`. Everything is allocated in `analyze`.
///
/// The total number of iterations over all solves is kept in a shared counter, so that a caller
/// who handed the solver to an integrator can still read it.
#[derive(Debug, Clone)]
pub struct JacobiCg {
    tolerance: f64,
    max_iterations: usize,
    matrix: Option<CsrMatrix>,
    inv_diag: Vec<f64>,
    r: Vec<f64>,
    z: Vec<f64>,
    p: Vec<f64>,
    q: Vec<f64>,
    x: Vec<f64>,
    factored: bool,
    /// Iterations over all solves.
    pub iterations: std::sync::Arc<std::sync::atomic::AtomicUsize>,
    /// Number of solves.
    pub solves: std::sync::Arc<std::sync::atomic::AtomicUsize>,
}

impl JacobiCg {
    /// A solver with relative tolerance `tolerance` and at most `max_iterations` per solve.
    pub fn new(tolerance: f64, max_iterations: usize) -> Self {
        JacobiCg {
            tolerance,
            max_iterations,
            matrix: None,
            inv_diag: Vec::new(),
            r: Vec::new(),
            z: Vec::new(),
            p: Vec::new(),
            q: Vec::new(),
            x: Vec::new(),
            factored: false,
            iterations: Default::default(),
            solves: Default::default(),
        }
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

impl LinearSolver for JacobiCg {
    fn analyze(&mut self, a: &CsrMatrix) -> stepgauge::Result<()> {
        self.factored = false;
        self.matrix = None;
        if a.ncols() != a.nrows() {
            return Err(Error::DimensionMismatch {
                what: "matrix columns (a solver needs a square matrix)",
                expected: a.nrows(),
                found: a.ncols(),
            });
        }
        let n = a.nrows();
        for v in [
            &mut self.inv_diag,
            &mut self.r,
            &mut self.z,
            &mut self.p,
            &mut self.q,
            &mut self.x,
        ] {
            v.clear();
            v.resize(n, 0.0);
        }
        self.matrix = Some(a.clone());
        Ok(())
    }

    fn factor(&mut self, a: &CsrMatrix) -> stepgauge::Result<()> {
        self.factored = false;
        let m = self.matrix.as_mut().ok_or(Error::SolverNotReady {
            solver: CG_NAME,
            missing: "analyze",
        })?;
        if !m.same_pattern(a) {
            return Err(Error::InvalidMatrix {
                what: "matrix given to factor",
                problem: "its sparsity pattern differs from the analysed one".into(),
            });
        }
        m.data_mut().copy_from_slice(a.data());
        for (i, d) in self.inv_diag.iter_mut().enumerate() {
            let aii = a.position(i, i).map_or(0.0, |k| a.data()[k]);
            if !(aii > 0.0 && aii.is_finite()) {
                return Err(Error::NotPositiveDefinite {
                    solver: CG_NAME,
                    row: Some(i),
                    value: Some(aii),
                });
            }
            *d = 1.0 / aii;
        }
        self.factored = true;
        Ok(())
    }

    fn solve_in_place(&mut self, rhs: &mut [f64]) -> stepgauge::Result<SolveInfo> {
        let a = match (&self.matrix, self.factored) {
            (Some(a), true) => a,
            (None, _) => {
                return Err(Error::SolverNotReady {
                    solver: CG_NAME,
                    missing: "analyze",
                });
            }
            _ => {
                return Err(Error::SolverNotReady {
                    solver: CG_NAME,
                    missing: "factor",
                });
            }
        };
        let n = a.nrows();
        check_rhs(rhs, n)?;
        let par = stepgauge::linalg::Parallelism::serial();
        let b_norm = dot(rhs, rhs).sqrt();
        self.x.fill(0.0);
        if b_norm == 0.0 {
            rhs.fill(0.0);
            return Ok(SolveInfo {
                iterations: 0,
                relative_residual: 0.0,
            });
        }
        self.r.copy_from_slice(rhs);
        for ((z, r), d) in self.z.iter_mut().zip(&self.r).zip(&self.inv_diag) {
            *z = r * d;
        }
        self.p.copy_from_slice(&self.z);
        let mut rz = dot(&self.r, &self.z);
        let mut k = 0;
        let mut res = 1.0;
        while k < self.max_iterations {
            a.mul_vec(&self.p, &mut self.q, par);
            let curvature = dot(&self.p, &self.q);
            if curvature.is_nan() || curvature <= 0.0 {
                return Err(Error::NotPositiveDefinite {
                    solver: CG_NAME,
                    row: None,
                    value: Some(curvature),
                });
            }
            let alpha = rz / curvature;
            for (x, p) in self.x.iter_mut().zip(&self.p) {
                *x += alpha * p;
            }
            for (r, q) in self.r.iter_mut().zip(&self.q) {
                *r -= alpha * q;
            }
            k += 1;
            res = dot(&self.r, &self.r).sqrt() / b_norm;
            if res <= self.tolerance {
                break;
            }
            for ((z, r), d) in self.z.iter_mut().zip(&self.r).zip(&self.inv_diag) {
                *z = r * d;
            }
            let rz_new = dot(&self.r, &self.z);
            let beta = rz_new / rz;
            rz = rz_new;
            for (p, z) in self.p.iter_mut().zip(&self.z) {
                *p = z + beta * *p;
            }
        }
        self.iterations
            .fetch_add(k, std::sync::atomic::Ordering::Relaxed);
        self.solves
            .fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        if res > self.tolerance {
            return Err(Error::SolverNotConverged {
                iterations: k,
                relative_residual: res,
            });
        }
        rhs.copy_from_slice(&self.x);
        // The recursively updated residual: equal to b - A x up to rounding at this tolerance.
        Ok(SolveInfo {
            iterations: k,
            relative_residual: res,
        })
    }

    fn name(&self) -> &'static str {
        CG_NAME
    }
}
