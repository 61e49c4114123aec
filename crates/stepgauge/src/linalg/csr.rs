//! Compressed sparse row matrix with a parallel, allocation-free product.
//!
//! Users hand stepgauge `sprs` matrices; stepgauge copies them once into this compact form (32-bit
//! column indices, which cut the memory traffic of the product by about a tenth) and multiplies in
//! its own row loop, which runs over rayon above a size threshold. sprs's own product runs on one
//! thread and allocates its result, which a time step must not do.

use rayon::prelude::*;
use sprs::CsMat;

use super::Parallelism;
use crate::error::{Error, Result};

/// Rows per parallel work item of the product.
const ROW_CHUNK: usize = 2048;

/// A square or rectangular CSR matrix of `f64` with 32-bit column indices.
///
/// Every constructor establishes, and no method breaks, the structure the unchecked row products
/// rely on: `indptr` has `nrows + 1` entries, starts at 0, never decreases and ends at
/// `indices.len() == data.len()`, every column index is below `ncols`, and the columns of each
/// row are strictly increasing (so [`position`](Self::position) is a binary search). (Only the values
/// can be changed after construction, through [`data_mut`](Self::data_mut).)
#[derive(Debug, Clone, PartialEq)]
pub struct CsrMatrix {
    nrows: usize,
    ncols: usize,
    indptr: Vec<usize>,
    indices: Vec<u32>,
    data: Vec<f64>,
}

impl CsrMatrix {
    /// Copies a sprs matrix (CSR or CSC) into CSR form, checking every value is finite.
    ///
    /// # Errors
    /// [`Error::InvalidMatrix`] for a non-finite entry or more than `u32::MAX` columns.
    pub fn from_sprs(what: &'static str, m: &CsMat<f64>) -> Result<Self> {
        // A view of a CSR input (no copy of a large matrix); a CSC input is converted.
        let converted;
        let csr = if m.is_csr() {
            m.view()
        } else {
            converted = m.to_csr();
            converted.view()
        };
        if csr.cols() > u32::MAX as usize {
            return Err(Error::InvalidMatrix {
                what,
                problem: format!("{} columns exceed the supported 2^32 - 1", csr.cols()),
            });
        }
        let mut indptr = Vec::with_capacity(csr.rows() + 1);
        let mut indices = Vec::with_capacity(csr.nnz());
        let mut data = Vec::with_capacity(csr.nnz());
        indptr.push(0);
        for (row, vec) in csr.outer_iterator().enumerate() {
            for (col, &val) in vec.iter() {
                // sprs keeps its indices in range; checked here all the same, because the
                // unchecked row products rely on it (see the type's documentation).
                if col >= csr.cols() {
                    return Err(Error::InvalidMatrix {
                        what,
                        problem: format!("column {col} out of range in row {row}"),
                    });
                }
                if !val.is_finite() {
                    return Err(Error::InvalidMatrix {
                        what,
                        problem: format!("entry ({row}, {col}) is {val}"),
                    });
                }
                // sprs keeps each row's indices sorted and unique; checked for the same reason.
                if indices.len() > indptr[row] && indices[indices.len() - 1] >= col as u32 {
                    return Err(Error::InvalidMatrix {
                        what,
                        problem: format!("columns not strictly increasing in row {row}"),
                    });
                }
                indices.push(col as u32);
                data.push(val);
            }
            indptr.push(indices.len());
        }
        Ok(CsrMatrix {
            nrows: csr.rows(),
            ncols: csr.cols(),
            indptr,
            indices,
            data,
        })
    }

    /// Number of rows.
    pub fn nrows(&self) -> usize {
        self.nrows
    }

    /// Number of columns.
    pub fn ncols(&self) -> usize {
        self.ncols
    }

    /// Number of stored entries.
    pub fn nnz(&self) -> usize {
        self.data.len()
    }

    /// Row pointers: the entries of row `i` are at positions `indptr[i]..indptr[i + 1]`.
    pub fn indptr(&self) -> &[usize] {
        &self.indptr
    }

    /// Column index of each stored entry.
    pub fn indices(&self) -> &[u32] {
        &self.indices
    }

    /// Value of each stored entry.
    pub fn data(&self) -> &[f64] {
        &self.data
    }

    /// Mutable values of the stored entries (the pattern stays fixed).
    pub fn data_mut(&mut self) -> &mut [f64] {
        &mut self.data
    }

    /// True when `other` has exactly the same pattern.
    pub fn same_pattern(&self, other: &CsrMatrix) -> bool {
        self.nrows == other.nrows
            && self.ncols == other.ncols
            && self.indptr == other.indptr
            && self.indices == other.indices
    }

    /// Position of entry `(i, j)` in [`data`](Self::data), if it is stored (`None` also for a row
    /// outside the matrix).
    pub fn position(&self, i: usize, j: usize) -> Option<usize> {
        if i >= self.nrows {
            return None;
        }
        let (lo, hi) = (self.indptr[i], self.indptr[i + 1]);
        let j = u32::try_from(j).ok()?;
        // Columns are strictly increasing within a row (the type's invariant).
        self.indices[lo..hi].binary_search(&j).ok().map(|k| lo + k)
    }

    /// A matrix with the union of the patterns of `mats` (all of the same shape), rows sorted by
    /// column, every value zero.
    ///
    /// # Errors
    /// [`Error::InvalidMatrix`] when `mats` is empty; [`Error::DimensionMismatch`] when the shapes
    /// differ.
    pub fn pattern_union(mats: &[&CsrMatrix]) -> Result<CsrMatrix> {
        let Some(first) = mats.first() else {
            return Err(Error::InvalidMatrix {
                what: "pattern union",
                problem: "no matrix given".into(),
            });
        };
        let (nrows, ncols) = (first.nrows, first.ncols);
        for m in mats {
            crate::validate::check_len("pattern union: matrix rows", nrows, m.nrows)?;
            crate::validate::check_len("pattern union: matrix columns", ncols, m.ncols)?;
        }
        let mut indptr = Vec::with_capacity(nrows + 1);
        let mut indices = Vec::new();
        indptr.push(0);
        let mut row: Vec<u32> = Vec::new();
        for i in 0..nrows {
            row.clear();
            for m in mats {
                row.extend_from_slice(&m.indices[m.indptr[i]..m.indptr[i + 1]]);
            }
            row.sort_unstable();
            row.dedup();
            indices.extend_from_slice(&row);
            indptr.push(indices.len());
        }
        let nnz = indices.len();
        Ok(CsrMatrix {
            nrows,
            ncols,
            indptr,
            indices,
            data: vec![0.0; nnz],
        })
    }

    /// For each stored entry of `self`, its position in `target` (whose pattern must contain
    /// this one's). Used to add `self` into `target` repeatedly without searching.
    ///
    /// # Errors
    /// [`Error::InvalidMatrix`] naming the first entry of `self` that is not in `target`'s
    /// pattern.
    pub fn positions_in(&self, target: &CsrMatrix) -> Result<Vec<usize>> {
        let mut map = Vec::with_capacity(self.nnz());
        for i in 0..self.nrows {
            for k in self.indptr[i]..self.indptr[i + 1] {
                let j = self.indices[k] as usize;
                match target.position(i, j) {
                    Some(p) => map.push(p),
                    None => {
                        return Err(Error::InvalidMatrix {
                            what: "target pattern",
                            problem: format!("entry ({i}, {j}) is not stored in it"),
                        });
                    }
                }
            }
        }
        Ok(map)
    }

    /// A diagonal matrix with the given entries.
    pub fn from_diagonal(d: &[f64]) -> CsrMatrix {
        let n = d.len();
        CsrMatrix {
            nrows: n,
            ncols: n,
            indptr: (0..=n).collect(),
            indices: (0..n as u32).collect(),
            data: d.to_vec(),
        }
    }

    /// A matrix from raw CSR arrays, checked: row pointers non-decreasing from 0 to
    /// `indices.len()`, column indices in range and strictly increasing within each row, values
    /// finite.
    ///
    /// # Errors
    /// [`Error::InvalidMatrix`] naming the first problem.
    pub fn try_from_csr(
        what: &'static str,
        nrows: usize,
        ncols: usize,
        indptr: Vec<usize>,
        indices: Vec<u32>,
        data: Vec<f64>,
    ) -> Result<Self> {
        let bad = |problem: String| Err(Error::InvalidMatrix { what, problem });
        if nrows.checked_add(1) != Some(indptr.len())
            || indptr[0] != 0
            || indptr[nrows] != indices.len()
        {
            return bad("row pointers do not match the number of rows and entries".into());
        }
        if ncols > u32::MAX as usize {
            return bad(format!("{ncols} columns exceed the supported 2^32 - 1"));
        }
        if data.len() != indices.len() {
            return bad("values and column indices differ in number".into());
        }
        for i in 0..nrows {
            if indptr[i + 1] < indptr[i] {
                return bad(format!("row pointers decrease at row {i}"));
            }
            if indptr[i + 1] > indices.len() {
                return bad(format!(
                    "row pointer {} of row {i} is past the entries",
                    indptr[i + 1]
                ));
            }
            let cols = &indices[indptr[i]..indptr[i + 1]];
            for (k, &c) in cols.iter().enumerate() {
                if c as usize >= ncols {
                    return bad(format!("column {c} out of range in row {i}"));
                }
                if k > 0 && c <= cols[k - 1] {
                    return bad(format!("columns not strictly increasing in row {i}"));
                }
            }
        }
        if let Some(k) = data.iter().position(|v| !v.is_finite()) {
            return bad(format!("entry {k} is {}", data[k]));
        }
        Ok(CsrMatrix {
            nrows,
            ncols,
            indptr,
            indices,
            data,
        })
    }

    /// The entries of row `i` as `(column, value)` pairs (none for a row outside the matrix).
    pub fn row(&self, i: usize) -> impl Iterator<Item = (usize, f64)> + '_ {
        let r = if i < self.nrows {
            self.indptr[i]..self.indptr[i + 1]
        } else {
            0..0
        };
        self.indices[r.clone()]
            .iter()
            .zip(&self.data[r])
            .map(|(&c, &v)| (c as usize, v))
    }

    /// Row sums (the row-sum lumped mass when this is a consistent mass matrix).
    pub fn row_sums(&self) -> Vec<f64> {
        (0..self.nrows)
            .map(|i| self.row(i).map(|(_, v)| v).sum())
            .collect()
    }

    /// The diagonal entries (zero where none is stored).
    pub fn diagonal(&self) -> Vec<f64> {
        (0..self.nrows)
            .map(|i| self.row(i).filter(|&(c, _)| c == i).map(|(_, v)| v).sum())
            .collect()
    }

    /// True when only diagonal entries are stored.
    pub fn is_diagonal(&self) -> bool {
        (0..self.nrows).all(|i| self.row(i).all(|(c, _)| c == i))
    }

    /// Row `i` of `A` times `x`, summed in stored order: entry `i` of [`spmv`]'s product.
    ///
    /// # Panics
    /// When `i >= nrows` or `x` is shorter than `ncols` (callers inside the crate check lengths
    /// first).
    #[inline(always)]
    pub(crate) fn row_dot(&self, i: usize, x: &[f64]) -> f64 {
        row_dot(&self.indptr, &self.indices, &self.data, i, x)
    }

    /// Row `i` of `A` times `x` like [`row_dot`](Self::row_dot), without bounds checks: the
    /// inner loop of the explicit scheme's fused update.
    ///
    /// # Safety
    /// `i < nrows` and `x.len() >= ncols`.
    #[inline(always)]
    pub(crate) unsafe fn row_dot_unchecked(&self, i: usize, x: &[f64]) -> f64 {
        // SAFETY: `i < nrows` is the caller's promise, which `row_dot_by` needs; it calls the
        // closure with column indices below `ncols <= x.len()` (the type's invariant and the
        // caller's promise), so `get_unchecked(c)` stays inside `x`.
        unsafe { self.row_dot_by(i, |c| *x.get_unchecked(c)) }
    }

    /// Row `i` of `A` times the vector whose entry `c` is `x(c)`, summed in stored order from
    /// `0.0` like [`row_dot_unchecked`](Self::row_dot_unchecked) (bit for bit the same as that
    /// product with the vector formed first): lets a caller compute the vector's entries on the
    /// fly instead of storing them in a pass of their own. `x` is called with column indices
    /// below `ncols` only.
    ///
    /// # Safety
    /// `i < nrows`.
    #[inline(always)]
    pub(crate) unsafe fn row_dot_by(&self, i: usize, x: impl Fn(usize) -> f64) -> f64 {
        // SAFETY: as in `row_dot_unchecked`: `i < nrows` (the caller's promise) and the type's
        // invariants put `i`, `i + 1` inside `indptr` and `lo..hi` inside `indices` and `data`.
        unsafe {
            let lo = *self.indptr.get_unchecked(i);
            let hi = *self.indptr.get_unchecked(i + 1);
            let mut s = 0.0;
            for k in lo..hi {
                let c = *self.indices.get_unchecked(k) as usize;
                s += self.data.get_unchecked(k) * x(c);
            }
            s
        }
    }

    /// `x^T A x`, with the row products summed in chunks of [`CHUNK`](super::CHUNK) rows and the
    /// chunk sums in order: bit for bit `dot(x, A x)` (see [`dot`](super::dot)), without a vector
    /// for `A x`. NaN when `A` is not square of the size of `x`.
    pub(crate) fn quadratic_form(&self, x: &[f64], par: Parallelism) -> f64 {
        let n = x.len();
        if self.nrows != n || self.ncols != n {
            return f64::NAN;
        }
        // `dot`'s summation order, through the same helper: bit for bit `dot(x, A x)`.
        super::reduce::ordered_sum(n, par, |lo, hi| {
            super::reduce::chunk_sum(hi - lo, |j| x[lo + j] * self.row_dot(lo + j, x))
        })
    }

    /// `y = A x`, in parallel above `par.threshold` rows; each row is summed in stored order, so the
    /// result does not depend on the thread count. When `x.len() != ncols` or
    /// `y.len() != nrows`, `y` is filled with NaN (see [`spmv`]).
    pub fn mul_vec(&self, x: &[f64], y: &mut [f64], par: Parallelism) {
        spmv(self, x, y, par);
    }
}

/// `y = A x` (see [`CsrMatrix::mul_vec`]).
///
/// When `x.len() != a.ncols()` or `y.len() != a.nrows()` there is no product: `y` is filled
/// with NaN, which every integrator and solver of the crate refuses as a non-finite value. (The
/// product runs in every step's hot loop, so it returns no `Result`; callers that take lengths
/// from users check them first.)
pub fn spmv(a: &CsrMatrix, x: &[f64], y: &mut [f64], par: Parallelism) {
    if x.len() != a.ncols || y.len() != a.nrows {
        y.fill(f64::NAN);
        return;
    }
    let rows = |start: usize, y: &mut [f64]| {
        for (k, yi) in y.iter_mut().enumerate() {
            // SAFETY: `start + k < y.len() == nrows` and `x.len() == ncols`, checked above.
            *yi = unsafe { a.row_dot_unchecked(start + k, x) };
        }
    };
    if par.parallel_for(a.nrows) {
        y.par_chunks_mut(ROW_CHUNK)
            .enumerate()
            .for_each(|(c, yc)| rows(c * ROW_CHUNK, yc));
    } else {
        rows(0, y);
    }
}

/// Row `i` of the CSR arrays times `x`, summed in stored order from `0.0`.
#[inline(always)]
fn row_dot(indptr: &[usize], indices: &[u32], data: &[f64], i: usize, x: &[f64]) -> f64 {
    let (lo, hi) = (indptr[i], indptr[i + 1]);
    let mut s = 0.0;
    for (c, v) in indices[lo..hi].iter().zip(&data[lo..hi]) {
        s += v * x[*c as usize];
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use sprs::TriMat;

    /// A symmetric matrix with diagonal `2 + (i mod 7)` and `off` at distance `offset`, and a
    /// vector `sin(0.37 i)`.
    fn banded(n: usize, offset: usize, off: f64) -> (CsrMatrix, Vec<f64>) {
        let mut t = TriMat::new((n, n));
        for i in 0..n {
            t.add_triplet(i, i, 2.0 + (i % 7) as f64);
            if i + offset < n {
                t.add_triplet(i, i + offset, off);
                t.add_triplet(i + offset, i, off);
            }
        }
        let a = CsrMatrix::from_sprs("K", &t.to_csr()).unwrap();
        (a, (0..n).map(|i| (i as f64 * 0.37).sin()).collect())
    }

    #[test]
    fn product_matches_dense_and_is_thread_independent() {
        let n = 5000;
        let (a, x) = banded(n, 1, -1.0);
        let mut y1 = vec![0.0; n];
        let mut y2 = vec![0.0; n];
        a.mul_vec(&x, &mut y1, Parallelism::serial());
        a.mul_vec(&x, &mut y2, Parallelism { threshold: 1 });
        assert_eq!(y1, y2);
        let i = 17;
        let expect = -x[i - 1] + (2.0 + (i % 7) as f64) * x[i] - x[i + 1];
        assert!((y1[i] - expect).abs() < 1e-14);
    }

    /// `x^T A x` without the product vector is bit for bit `dot(x, A x)`, serial and parallel,
    /// and the unchecked row products are `spmv`'s rows.
    #[test]
    fn quadratic_form_and_row_products_match_the_product() {
        let n = 50_001;
        let (a, x) = banded(n, 3, -0.7);
        let mut ax = vec![0.0; n];
        a.mul_vec(&x, &mut ax, Parallelism::serial());
        for par in [Parallelism::serial(), Parallelism { threshold: 1 }] {
            let q = a.quadratic_form(&x, par);
            let ex = super::super::Execution::serial().with_parallelism(par);
            assert_eq!(q.to_bits(), super::super::dot(&x, &ax, &ex).to_bits());
        }
        for i in [0, 1, 17, n - 1] {
            assert_eq!(a.row_dot(i, &x).to_bits(), ax[i].to_bits());
        }
        assert!(a.quadratic_form(&x[1..], Parallelism::serial()).is_nan());
    }

    #[test]
    fn non_finite_entries_are_refused() {
        let mut t = TriMat::new((2, 2));
        t.add_triplet(1, 0, f64::NAN);
        let e = CsrMatrix::from_sprs("K", &t.to_csr()).unwrap_err();
        assert!(e.to_string().contains("(1, 0)"), "{e}");
    }
}
