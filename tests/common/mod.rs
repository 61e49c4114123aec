//! Helpers shared by the integration tests: small models built from sprs triplets.
#![allow(dead_code)]

use sprs::{CsMat, TriMat};
use tempora::model::LinearModel;

/// A diagonal sparse matrix.
pub fn diag(v: &[f64]) -> CsMat<f64> {
    let mut t = TriMat::new((v.len(), v.len()));
    for (i, x) in v.iter().enumerate() {
        t.add_triplet(i, i, *x);
    }
    t.to_csr()
}

/// A dense matrix given by rows, stored sparse.
pub fn dense(rows: &[&[f64]]) -> CsMat<f64> {
    let n = rows.len();
    let mut t = TriMat::new((n, rows[0].len()));
    for (i, r) in rows.iter().enumerate() {
        for (j, x) in r.iter().enumerate() {
            if *x != 0.0 {
                t.add_triplet(i, j, *x);
            }
        }
    }
    t.to_csr()
}

/// Single DOF oscillator `m a + k u = 0`.
pub fn sdof(m: f64, k: f64) -> LinearModel {
    LinearModel::new(&diag(&[m]), &diag(&[k])).unwrap()
}

/// Stiffness of a chain of `n` equal masses joined by `n - 1` springs `k`, plus a spring to a
/// wall at the left end when `wall_left` and at the right end when `wall_right`.
pub fn chain_stiffness(n: usize, k: f64, wall_left: bool, wall_right: bool) -> CsMat<f64> {
    let mut t = TriMat::new((n, n));
    for i in 0..n {
        let mut d = 0.0;
        if i > 0 || wall_left {
            d += k;
        }
        if i + 1 < n || wall_right {
            d += k;
        }
        t.add_triplet(i, i, d);
        if i + 1 < n {
            t.add_triplet(i, i + 1, -k);
            t.add_triplet(i + 1, i, -k);
        }
    }
    t.to_csr()
}
