//! Models shared by the benchmarks: linear models with unit lumped masses, built directly in
//! CSR form (fast enough for 1e7 DOFs).
#![allow(dead_code)]

use sprs::CsMat;
use stepgauge::model::LinearModel;

/// A linear model with unit lumped masses from the rows of `K` (column indices ascending).
fn model_from_rows(n: usize, row: impl Fn(usize, &mut Vec<(usize, f64)>)) -> LinearModel {
    let mut indptr = Vec::with_capacity(n + 1);
    let mut indices = Vec::new();
    let mut data = Vec::new();
    let mut entries = Vec::new();
    indptr.push(0);
    for i in 0..n {
        entries.clear();
        row(i, &mut entries);
        for &(j, v) in &entries {
            indices.push(j);
            data.push(v);
        }
        indptr.push(indices.len());
    }
    let k = CsMat::new((n, n), indptr, indices, data);
    let m = CsMat::new((n, n), (0..=n).collect(), (0..n).collect(), vec![1.0; n]);
    LinearModel::new(&m, &k).expect("a valid bench model")
}

/// The 1D chain of `n` unit masses and springs, held at both ends.
pub fn chain(n: usize) -> LinearModel {
    model_from_rows(n, |i, e| {
        if i > 0 {
            e.push((i - 1, -1.0));
        }
        e.push((i, 2.0));
        if i + 1 < n {
            e.push((i + 1, -1.0));
        }
    })
}

/// The 3D seven-point stencil on a cube of `m^3` unit masses, held at the faces.
pub fn cube(m: usize) -> LinearModel {
    model_from_rows(m * m * m, |i, e| {
        let (x, y, z) = (i % m, (i / m) % m, i / (m * m));
        if z > 0 {
            e.push((i - m * m, -1.0));
        }
        if y > 0 {
            e.push((i - m, -1.0));
        }
        if x > 0 {
            e.push((i - 1, -1.0));
        }
        e.push((i, 6.0));
        if x + 1 < m {
            e.push((i + 1, -1.0));
        }
        if y + 1 < m {
            e.push((i + m, -1.0));
        }
        if z + 1 < m {
            e.push((i + m * m, -1.0));
        }
    })
}
