//! The mass operator of [`AlphaIntegrator`](super::AlphaIntegrator): lumped or consistent.

use crate::linalg::{CsrMatrix, Parallelism};

/// The mass operator: lumped diagonal or consistent sparse matrix (with its diagonal kept as a
/// vector when only diagonal entries are stored, so that products are element-wise).
#[derive(Debug, Clone)]
pub(super) enum Mass {
    Lumped(Vec<f64>),
    Consistent {
        matrix: CsrMatrix,
        diagonal: Option<Vec<f64>>,
    },
}

impl Mass {
    pub(super) fn consistent(matrix: CsrMatrix) -> Mass {
        let diagonal = matrix.is_diagonal().then(|| matrix.diagonal());
        Mass::Consistent { matrix, diagonal }
    }

    /// The mass as a diagonal, when it is one.
    pub(super) fn diagonal(&self) -> Option<&[f64]> {
        match self {
            Mass::Lumped(m) => Some(m),
            Mass::Consistent { diagonal, .. } => diagonal.as_deref(),
        }
    }

    pub(super) fn mul(&self, x: &[f64], y: &mut [f64], par: Parallelism) {
        match self {
            Mass::Lumped(m)
            | Mass::Consistent {
                diagonal: Some(m), ..
            } => {
                for ((yi, mi), xi) in y.iter_mut().zip(m).zip(x) {
                    *yi = mi * xi;
                }
            }
            Mass::Consistent { matrix, .. } => matrix.mul_vec(x, y, par),
        }
    }

    /// Row `i` of `M x`.
    pub(super) fn row_dot(&self, i: usize, x: &[f64]) -> f64 {
        match self {
            Mass::Lumped(m)
            | Mass::Consistent {
                diagonal: Some(m), ..
            } => m[i] * x[i],
            Mass::Consistent { matrix, .. } => matrix.row(i).map(|(j, v)| v * x[j]).sum(),
        }
    }

    pub(super) fn matrix(&self) -> CsrMatrix {
        match self {
            Mass::Lumped(m) => CsrMatrix::from_diagonal(m),
            Mass::Consistent { matrix, .. } => matrix.clone(),
        }
    }

    /// The stored values, in the order of [`matrix`](Self::matrix)'s pattern.
    pub(super) fn values(&self) -> &[f64] {
        match self {
            Mass::Lumped(m) => m,
            Mass::Consistent { matrix, .. } => matrix.data(),
        }
    }
}
