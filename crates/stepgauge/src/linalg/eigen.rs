//! The smallest eigenvalue of `K x = lambda M x` on the free DOFs of a model: the lowest natural
//! frequency `omega_min = sqrt(lambda_min)`, with the mass matrix as given (lumped or consistent).
//!
//! Up to [`DENSE_LIMIT`] free DOFs a dense symmetric eigen-solve of `L^-1 K L^-T` with
//! `M = L L^T` (nalgebra); above it inverse iteration with a sparse Cholesky factor of `K`,
//! stopped when the Rayleigh quotient changes by at most `1e-13` relative. Inverse iteration
//! converges like `(lambda_1 / lambda_2)^k` and slowly for close lowest frequencies; a block
//! shift-invert method is the planned replacement at large sizes.
//!
//! A singular `K` on the free DOFs (rigid-body motion) or an indefinite one is not an error: the
//! result says so ([`LowestStatus`]) and reports `lambda = 0`.

use nalgebra::DMatrix;

use crate::error::{Error, Result};
use crate::linalg::{CsrMatrix, LinearSolver, Parallelism, SparseCholesky};
use crate::validate::check_len;

/// Largest number of free DOFs for the dense eigen-solve.
pub const DENSE_LIMIT: usize = 300;

/// How [`lowest_eigenvalue`] found its value.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LowestMethod {
    /// Dense symmetric eigen-solve of `L^-1 K L^-T`, `M = L L^T`.
    Dense,
    /// Inverse iteration with a sparse Cholesky factor of `K`.
    InverseIteration,
}

impl LowestMethod {
    /// A one-line description, for reports.
    pub fn description(self) -> &'static str {
        match self {
            LowestMethod::Dense => "dense symmetric eigensolver on L^-1 K L^-T, M = L L^T",
            LowestMethod::InverseIteration => {
                "inverse iteration with a sparse Cholesky factor of K"
            }
        }
    }
}

/// What [`lowest_eigenvalue`] found about `K` on the free DOFs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LowestStatus {
    /// `K` is positive definite; `lambda` is the smallest eigenvalue.
    Positive,
    /// `K` is singular (rigid-body motion, a free-free model): `lambda = 0`.
    Singular,
    /// `K` has a negative eigenvalue: the model is not stable statically; `lambda` is reported
    /// as 0.
    Negative {
        /// The most negative eigenvalue.
        lowest: f64,
    },
    /// The sparse Cholesky factorisation of `K` met a pivot that is not positive: `K` is singular
    /// or indefinite (the sparse path cannot tell which); `lambda` is reported as 0.
    SingularOrIndefinite,
    /// Inverse iteration stopped after its iteration limit: `lambda` is approximate (close
    /// lowest frequencies).
    NotConverged,
}

/// The smallest eigenvalue of `K x = lambda M x` on the free DOFs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LowestEigenvalue {
    /// The eigenvalue (`omega_min^2`, rad^2/s^2); 0 for a singular or indefinite `K`.
    pub lambda: f64,
    /// How it was found.
    pub method: LowestMethod,
    /// What was found about `K`.
    pub status: LowestStatus,
}

/// The smallest eigenvalue of `K x = lambda M x` restricted to the DOFs with `free[i]`.
///
/// # Errors
/// [`Error::DimensionMismatch`] when the sizes differ, [`Error::InvalidMatrix`] for a mass that is
/// not positive definite on the free DOFs (every free DOF needs mass) or when no DOF is free, and
/// the sparse solver's errors other than a non-positive-definite `K`.
pub fn lowest_eigenvalue(m: &CsrMatrix, k: &CsrMatrix, free: &[bool]) -> Result<LowestEigenvalue> {
    let n = m.nrows();
    check_len("stiffness rows", n, k.nrows())?;
    check_len("free-DOF mask", n, free.len())?;
    let mut index = vec![None; n];
    let mut nf = 0;
    for (slot, _) in index.iter_mut().zip(free).filter(|(_, f)| **f) {
        *slot = Some(nf);
        nf += 1;
    }
    if nf == 0 {
        return Err(Error::InvalidMatrix {
            what: "free-DOF mask",
            problem: "no DOF is free".into(),
        });
    }
    let (mf, kf) = (restrict(m, &index, nf)?, restrict(k, &index, nf)?);
    if nf <= DENSE_LIMIT {
        dense(&mf, &kf)
    } else {
        inverse_iteration(&mf, &kf)
    }
}

/// The submatrix of `a` on the rows and columns with `index[i] = Some(new)`.
fn restrict(a: &CsrMatrix, index: &[Option<usize>], nf: usize) -> Result<CsrMatrix> {
    let mut triplets = Vec::with_capacity(a.nnz());
    for (i, p) in index.iter().enumerate() {
        for (j, v) in a.row(i) {
            if let (Some(p), Some(q)) = (p, index.get(j).copied().flatten()) {
                triplets.push((*p, q, v));
            }
        }
    }
    CsrMatrix::from_triplets(nf, nf, &triplets)
}

/// The status from the extreme eigenvalues `lo` and `hi` (by magnitude).
fn judge(lo: f64, hi: f64, method: LowestMethod) -> LowestEigenvalue {
    let (lambda, status) = if lo < -1e-8 * hi {
        (0.0, LowestStatus::Negative { lowest: lo })
    } else if lo <= 1e-10 * hi {
        (0.0, LowestStatus::Singular)
    } else {
        (lo, LowestStatus::Positive)
    };
    LowestEigenvalue {
        lambda,
        method,
        status,
    }
}

fn dense(m: &CsrMatrix, k: &CsrMatrix) -> Result<LowestEigenvalue> {
    let n = m.nrows();
    let to_dense = |a: &CsrMatrix| {
        let mut d = DMatrix::<f64>::zeros(n, n);
        for i in 0..n {
            for (j, v) in a.row(i) {
                d[(i, j)] += v;
            }
        }
        d
    };
    let (md, kd) = (to_dense(m), to_dense(k));
    let not_pd = || Error::InvalidMatrix {
        what: "mass",
        problem: "not positive definite on the free DOFs: every free DOF needs mass".into(),
    };
    let chol = md.cholesky().ok_or_else(not_pd)?;
    let linv = chol.l().try_inverse().ok_or_else(not_pd)?;
    let a = &linv * kd * linv.transpose();
    let a = (&a + a.transpose()) * 0.5;
    let eig = a.symmetric_eigenvalues();
    let (lo, hi) = eig.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), &x| {
        (lo.min(x), hi.max(x.abs()))
    });
    Ok(judge(lo, hi, LowestMethod::Dense))
}

fn inverse_iteration(m: &CsrMatrix, k: &CsrMatrix) -> Result<LowestEigenvalue> {
    let method = LowestMethod::InverseIteration;
    let n = m.nrows();
    let par = Parallelism::serial();
    let mut chol = SparseCholesky::new();
    chol.analyze(k)?;
    match chol.factor(k) {
        Ok(()) => {}
        // A pivot that is not positive: K is singular or indefinite on the free DOFs.
        Err(Error::NotPositiveDefinite { .. }) => {
            return Ok(LowestEigenvalue {
                lambda: 0.0,
                method,
                status: LowestStatus::SingularOrIndefinite,
            });
        }
        Err(e) => return Err(e),
    }
    let mut x: Vec<f64> = (0..n).map(|i| 1.0 + 0.3 * (i as f64 * 0.7).sin()).collect();
    let (mut mx, mut y, mut my) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let mut prev = f64::INFINITY;
    for it in 0..10_000 {
        m.mul_vec(&x, &mut mx, par);
        y.copy_from_slice(&mx);
        chol.solve_in_place(&mut y)?;
        m.mul_vec(&y, &mut my, par);
        // Rayleigh quotient y^T K y / y^T M y with K y = M x.
        let ymx: f64 = y.iter().zip(&mx).map(|(a, b)| a * b).sum();
        let ymy: f64 = y.iter().zip(&my).map(|(a, b)| a * b).sum();
        let rq = ymx / ymy;
        let norm = ymy.sqrt();
        for (xi, yi) in x.iter_mut().zip(&y) {
            *xi = yi / norm;
        }
        if it > 2 && (rq - prev).abs() <= 1e-13 * rq {
            return Ok(judge(rq, rq, method));
        }
        prev = rq;
    }
    Ok(LowestEigenvalue {
        lambda: prev,
        method,
        status: LowestStatus::NotConverged,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `tridiag(-1, 2, -1)` of size `n` with unit mass: eigenvalues `4 sin^2(j pi / (2 (n + 1)))`
    /// (the discrete Laplacian with both ends fixed; common knowledge).
    fn chain(n: usize) -> (CsrMatrix, CsrMatrix) {
        let mut t = sprs::TriMat::new((n, n));
        for i in 0..n {
            t.add_triplet(i, i, 2.0);
            if i + 1 < n {
                t.add_triplet(i, i + 1, -1.0);
                t.add_triplet(i + 1, i, -1.0);
            }
        }
        let k = CsrMatrix::from_sprs("k", &t.to_csr()).unwrap();
        (CsrMatrix::from_diagonal(&vec![1.0; n]), k)
    }

    /// Both paths against the closed form; the dense path to its rounding (1e-12 relative), the
    /// inverse iteration to its stopping test (1e-13 relative change of the quotient; with
    /// `(lambda_1/lambda_2)^2 = 1/16` per step the error is below 1e-12).
    #[test]
    fn both_paths_match_the_discrete_laplacian() {
        for n in [50, 400] {
            let (m, k) = chain(n);
            let exact = 4.0
                * (std::f64::consts::PI / (2.0 * (n + 1) as f64))
                    .sin()
                    .powi(2);
            let low = lowest_eigenvalue(&m, &k, &vec![true; n]).unwrap();
            assert_eq!(low.status, LowestStatus::Positive);
            let expected = if n <= DENSE_LIMIT {
                LowestMethod::Dense
            } else {
                LowestMethod::InverseIteration
            };
            assert_eq!(low.method, expected);
            assert!(
                (low.lambda - exact).abs() <= 1e-12 * exact.max(1e-3),
                "{n}: {} {exact}",
                low.lambda
            );
        }
    }

    /// A free-free chain is singular; a negative spring is indefinite; no free DOF is an error.
    #[test]
    fn singular_indefinite_and_empty() {
        let (m, k) = chain(4);
        let mut free = vec![true; 4];
        let mut kk = k.clone();
        // Free-free: the end diagonals 1 instead of 2.
        let (a, b) = (kk.position(0, 0).unwrap(), kk.position(3, 3).unwrap());
        kk.data_mut()[a] = 1.0;
        kk.data_mut()[b] = 1.0;
        assert_eq!(
            lowest_eigenvalue(&m, &kk, &free).unwrap().status,
            LowestStatus::Singular
        );
        kk.data_mut()[a] = -5.0;
        assert!(matches!(
            lowest_eigenvalue(&m, &kk, &free).unwrap().status,
            LowestStatus::Negative { lowest } if lowest < 0.0
        ));
        free.fill(false);
        assert!(lowest_eigenvalue(&m, &k, &free).is_err());
        assert!(lowest_eigenvalue(&m, &k, &[true]).is_err());
    }
}
