//! Help for assembling a model's sparse matrices from its elements: the pattern from the
//! elements' DOF lists or from triplets, an element scatter with the positions of every element
//! entry found once (so that adding an element matrix costs one indexed add per entry), and a
//! finite-difference check of a model's tangent stiffness against its internal force.
//!
//! ```
//! use stepgauge::linalg::{CsrMatrix, ElementScatter};
//!
//! # fn main() -> stepgauge::Result<()> {
//! // Two springs in a chain of three DOFs: elements (0, 1) and (1, 2).
//! let elements = [[0usize, 1], [1, 2]];
//! let mut k = CsrMatrix::pattern_from_elements(3, &elements)?;
//! let scatter = ElementScatter::new(&k, &elements)?;
//! for e in 0..elements.len() {
//!     scatter.add(e, &[1.0, -1.0, -1.0, 1.0], &mut k); // the element matrix, row-major
//! }
//! assert_eq!(k.diagonal(), vec![1.0, 2.0, 1.0]);
//! # Ok(())
//! # }
//! ```

use crate::error::{Error, Result};
use crate::linalg::CsrMatrix;
use crate::model::Tangent;
use crate::setup::model_err;
use crate::validate::check_len;

impl CsrMatrix {
    /// The `n x n` pattern (every value zero) that holds every pair of DOFs of each element: the
    /// union of the `k x k` blocks of the elements' DOF lists, rows sorted.
    ///
    /// # Errors
    /// [`Error::DofOutOfRange`] for a DOF at or above `n`.
    pub fn pattern_from_elements<E: AsRef<[usize]>>(n: usize, elements: &[E]) -> Result<CsrMatrix> {
        let mut rows: Vec<Vec<u32>> = vec![Vec::new(); n];
        for dofs in elements {
            let dofs = dofs.as_ref();
            for &i in dofs {
                if i >= n {
                    return Err(Error::DofOutOfRange {
                        what: "element DOF list",
                        dof: i,
                        n,
                    });
                }
                rows[i].extend(dofs.iter().map(|&j| j as u32));
            }
        }
        Self::from_rows(n, n, rows, None)
    }

    /// An `nrows x ncols` matrix from `(row, column, value)` triplets; duplicates are summed.
    ///
    /// # Errors
    /// [`Error::DofOutOfRange`] for an index outside the shape, [`Error::InvalidMatrix`] for a
    /// value that is not finite.
    pub fn from_triplets(
        nrows: usize,
        ncols: usize,
        triplets: &[(usize, usize, f64)],
    ) -> Result<CsrMatrix> {
        let mut rows: Vec<Vec<u32>> = vec![Vec::new(); nrows];
        for &(i, j, v) in triplets {
            if i >= nrows || j >= ncols {
                return Err(Error::DofOutOfRange {
                    what: if i >= nrows {
                        "triplet row"
                    } else {
                        "triplet column"
                    },
                    dof: if i >= nrows { i } else { j },
                    n: if i >= nrows { nrows } else { ncols },
                });
            }
            if !v.is_finite() {
                return Err(Error::InvalidMatrix {
                    what: "triplets",
                    problem: format!("entry ({i}, {j}) is {v}"),
                });
            }
            rows[i].push(j as u32);
        }
        Self::from_rows(nrows, ncols, rows, Some(triplets))
    }

    /// Sorts and deduplicates the rows' columns into a matrix; adds `values` when given.
    fn from_rows(
        nrows: usize,
        ncols: usize,
        mut rows: Vec<Vec<u32>>,
        values: Option<&[(usize, usize, f64)]>,
    ) -> Result<CsrMatrix> {
        let mut indptr = Vec::with_capacity(nrows + 1);
        indptr.push(0);
        let mut indices = Vec::new();
        for r in &mut rows {
            r.sort_unstable();
            r.dedup();
            indices.extend_from_slice(r);
            indptr.push(indices.len());
        }
        let data = vec![0.0; indices.len()];
        let mut m = CsrMatrix::try_from_csr("pattern", nrows, ncols, indptr, indices, data)?;
        if let Some(triplets) = values {
            for &(i, j, v) in triplets {
                let at = m
                    .position(i, j)
                    .expect("every triplet is in the pattern built from them");
                m.data_mut()[at] += v;
            }
        }
        Ok(m)
    }

    /// The same matrix as a `faer` sparse row matrix (indices widened to `usize`).
    pub fn to_faer(&self) -> faer::sparse::SparseRowMat<usize, f64> {
        let symbolic = faer::sparse::SymbolicSparseRowMat::new_checked(
            self.nrows(),
            self.ncols(),
            self.indptr().to_vec(),
            None,
            self.indices().iter().map(|&c| c as usize).collect(),
        );
        faer::sparse::SparseRowMat::new(symbolic, self.data().to_vec())
    }

    /// A matrix from a `faer` sparse row matrix, checked like [`try_from_csr`](Self::try_from_csr).
    ///
    /// # Errors
    /// [`Error::InvalidMatrix`] for unsorted or duplicate columns, a value that is not finite, or
    /// more than `u32::MAX` columns.
    pub fn from_faer(m: faer::sparse::SparseRowMatRef<'_, usize, f64>) -> Result<CsrMatrix> {
        let (nrows, ncols) = (m.nrows(), m.ncols());
        let mut indptr = Vec::with_capacity(nrows + 1);
        let mut indices = Vec::new();
        let mut data = Vec::new();
        indptr.push(0);
        for i in 0..nrows {
            for (&j, &v) in m.col_idx_of_row_raw(i).iter().zip(m.val_of_row(i)) {
                indices.push(u32::try_from(j).map_err(|_| Error::InvalidMatrix {
                    what: "faer matrix",
                    problem: format!("column {j} exceeds the supported 2^32 - 1"),
                })?);
                data.push(v);
            }
            indptr.push(indices.len());
        }
        CsrMatrix::try_from_csr("faer matrix", nrows, ncols, indptr, indices, data)
    }

    /// The same matrix as a `sprs` CSR matrix.
    pub fn to_sprs(&self) -> sprs::CsMat<f64> {
        sprs::CsMat::new(
            (self.nrows(), self.ncols()),
            self.indptr().to_vec(),
            self.indices().iter().map(|&c| c as usize).collect(),
            self.data().to_vec(),
        )
    }
}

/// The positions in a matrix's values of every entry of each element's `k x k` block, found once:
/// adding an element matrix is then one indexed add per entry.
#[derive(Debug, Clone)]
pub struct ElementScatter {
    /// Start of each element's positions in `positions` (one more entry than elements).
    starts: Vec<usize>,
    /// Each element's DOFs, concatenated.
    dofs: Vec<usize>,
    /// Start of each element's DOFs in `dofs` (one more entry than elements).
    dof_starts: Vec<usize>,
    /// Row-major positions of each element's block, concatenated.
    positions: Vec<usize>,
    /// The number of values of the matrix the positions belong to.
    nnz: usize,
}

impl ElementScatter {
    /// The positions in `pattern` of every entry of each element's block.
    ///
    /// # Errors
    /// [`Error::PatternMissing`] naming the first element and DOF pair whose entry the pattern does
    /// not hold (a pattern built from other element lists would otherwise lose that coupling:
    /// Newton would still converge, slowly, with a wrong tangent).
    pub fn new<E: AsRef<[usize]>>(pattern: &CsrMatrix, elements: &[E]) -> Result<Self> {
        let mut starts = Vec::with_capacity(elements.len() + 1);
        let mut dofs = Vec::new();
        let mut positions = Vec::new();
        let mut dof_starts = vec![0];
        starts.push(0);
        for (e, el) in elements.iter().enumerate() {
            let el = el.as_ref();
            for &i in el {
                for &j in el {
                    let at = pattern.position(i, j).ok_or(Error::PatternMissing {
                        element: e,
                        row: i,
                        col: j,
                    })?;
                    positions.push(at);
                }
            }
            dofs.extend_from_slice(el);
            dof_starts.push(dofs.len());
            starts.push(positions.len());
        }
        Ok(ElementScatter {
            starts,
            dofs,
            dof_starts,
            positions,
            nnz: pattern.nnz(),
        })
    }

    /// The number of elements.
    pub fn elements(&self) -> usize {
        self.starts.len() - 1
    }

    /// Adds element `e`'s matrix `block` (row-major, `k x k` for its `k` DOFs) into `matrix`.
    ///
    /// # Panics
    /// When `e` is not an element of the scatter, `block` has not `k * k` entries, or `matrix`
    /// is not the matrix (the pattern) the scatter was built for: programming errors of the
    /// caller's element loop, not input errors.
    pub fn add(&self, e: usize, block: &[f64], matrix: &mut CsrMatrix) {
        let at = &self.positions[self.starts[e]..self.starts[e + 1]];
        assert_eq!(
            block.len(),
            at.len(),
            "element {e}: block of {} entries, expected {}",
            block.len(),
            at.len()
        );
        assert_eq!(
            matrix.nnz(),
            self.nnz,
            "the matrix is not the scatter's pattern"
        );
        let data = matrix.data_mut();
        for (&p, &v) in at.iter().zip(block) {
            data[p] += v;
        }
    }

    /// Element `e`'s DOFs, as given.
    pub fn dofs(&self, e: usize) -> &[usize] {
        &self.dofs[self.dof_starts[e]..self.dof_starts[e + 1]]
    }
}

/// The result of [`check_tangent`]: the model's tangent against central differences of its
/// internal force.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TangentCheck {
    /// The entry `(row, column)` with the largest difference.
    pub worst: (usize, usize),
    /// The largest difference `|K_ij - (f_i(u + h e_j) - f_i(u - h e_j)) / (2 h)|`.
    pub abs_error: f64,
    /// `abs_error` over the largest magnitude of the difference quotients.
    pub rel_error: f64,
    /// The largest difference quotient outside the tangent's pattern, with its entry: a coupling
    /// that the pattern misses.
    pub outside_pattern: Option<(usize, usize, f64)>,
}

/// Checks a model's [`tangent_stiffness`](Tangent::tangent_stiffness) at `(t, u, v)` against
/// central differences of its [`internal_force`](crate::model::Model::internal_force) with step `h` (in the
/// units of `u`; about `cbrt(eps) = 6e-6` times the displacement scale balances truncation and
/// rounding). Costs `2 n` force evaluations: a tool for development and tests, not for a run.
///
/// A correct tangent gives `rel_error` of the order of `h^2` times the force's third derivative
/// plus `eps |f| / h`; a wrong entry shows as an error of the entry's size.
///
/// # Errors
/// [`Error::InvalidParameter`] for `h` not positive and finite; [`Error::DimensionMismatch`] for
/// `u` or `v` of the wrong length; [`Error::Model`] when the model fails.
pub fn check_tangent<M: Tangent + ?Sized>(
    model: &mut M,
    t: f64,
    u: &[f64],
    v: &[f64],
    h: f64,
) -> Result<TangentCheck> {
    let n = model.dofs();
    if !(h.is_finite() && h > 0.0) {
        return Err(Error::InvalidParameter {
            name: "h",
            value: h,
            expected: "a positive, finite perturbation",
        });
    }
    check_len("displacement", n, u.len())?;
    check_len("velocity", n, v.len())?;
    let model_err = model_err(0, t);
    let mut k = model.tangent_pattern().clone();
    model
        .tangent_stiffness(t, u, v, &mut k)
        .map_err(&model_err)?;
    let (mut up, mut fp, mut fm) = (u.to_vec(), vec![0.0; n], vec![0.0; n]);
    let mut check = TangentCheck {
        worst: (0, 0),
        abs_error: 0.0,
        rel_error: 0.0,
        outside_pattern: None,
    };
    let mut scale = 0.0f64;
    for j in 0..n {
        up[j] = u[j] + h;
        model
            .internal_force(t, &up, v, &mut fp)
            .map_err(&model_err)?;
        up[j] = u[j] - h;
        model
            .internal_force(t, &up, v, &mut fm)
            .map_err(&model_err)?;
        up[j] = u[j];
        for i in 0..n {
            let fd = (fp[i] - fm[i]) / (2.0 * h);
            scale = scale.max(fd.abs());
            let kij = match k.position(i, j) {
                Some(at) => k.data()[at],
                None => {
                    if fd != 0.0
                        && check
                            .outside_pattern
                            .is_none_or(|(_, _, x)| fd.abs() > x.abs())
                    {
                        check.outside_pattern = Some((i, j, fd));
                    }
                    0.0
                }
            };
            let d = (kij - fd).abs();
            if d > check.abs_error || d.is_nan() {
                check.abs_error = d;
                check.worst = (i, j);
            }
        }
    }
    check.rel_error = if scale > 0.0 {
        check.abs_error / scale
    } else {
        check.abs_error
    };
    Ok(check)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::ModelError;
    use crate::model::{Model, Tangent};

    /// Two DOFs joined by a cubic spring `f = k (d + d^3)`, `d = u1 - u0`, both tied to ground by
    /// linear springs; the tangent follows from the force by hand (`k (1 + 3 d^2)` on the
    /// coupling), optionally scaled wrong or with a pattern that misses the coupling.
    struct Cubic {
        pattern: CsrMatrix,
        wrong: f64,
    }

    impl Model for Cubic {
        fn dofs(&self) -> usize {
            2
        }
        fn lumped_mass(&self, out: &mut [f64]) {
            out.fill(1.0);
        }
        fn internal_force(
            &mut self,
            _t: f64,
            u: &[f64],
            _v: &[f64],
            out: &mut [f64],
        ) -> std::result::Result<(), ModelError> {
            let d = u[1] - u[0];
            let f = 3.0 * (d + d * d * d);
            out[0] = 2.0 * u[0] - f;
            out[1] = 5.0 * u[1] + f;
            Ok(())
        }
    }

    impl Tangent for Cubic {
        fn tangent_pattern(&self) -> &CsrMatrix {
            &self.pattern
        }

        fn tangent_stiffness(
            &mut self,
            _t: f64,
            u: &[f64],
            _v: &[f64],
            out: &mut CsrMatrix,
        ) -> std::result::Result<(), ModelError> {
            let d = u[1] - u[0];
            let c = 3.0 * (1.0 + 3.0 * d * d) * self.wrong;
            out.data_mut().fill(0.0);
            for (i, j, v) in [(0, 0, 2.0 + c), (0, 1, -c), (1, 0, -c), (1, 1, 5.0 + c)] {
                if let Some(at) = out.position(i, j) {
                    out.data_mut()[at] = v;
                }
            }
            Ok(())
        }
    }

    /// A correct tangent agrees with central differences to the truncation `h^2 |f'''| / 6`
    /// (`f''' = 18` on the coupling: 3e-9 at h = 1e-5) plus rounding (`eps |f| / h`, 1e-10); a
    /// tangent 1 % off shows an error of 1 % of the coupling; a pattern without the coupling
    /// shows it outside the pattern.
    #[test]
    fn the_tangent_check_finds_wrong_values_and_missing_couplings() {
        let full = CsrMatrix::pattern_from_elements(2, &[[0usize, 1]]).unwrap();
        let (u, v) = ([0.1, 0.4], [0.0, 0.0]);
        let mut m = Cubic {
            pattern: full.clone(),
            wrong: 1.0,
        };
        let c = check_tangent(&mut m, 0.0, &u, &v, 1e-5).unwrap();
        assert!(c.rel_error < 1e-8 && c.outside_pattern.is_none(), "{c:?}");
        m.wrong = 1.01;
        let c = check_tangent(&mut m, 0.0, &u, &v, 1e-5).unwrap();
        let coupling = 3.0 * (1.0 + 3.0 * 0.09);
        assert!((c.abs_error - 0.01 * coupling).abs() < 1e-7, "{c:?}");
        let diag = CsrMatrix::from_diagonal(&[0.0, 0.0]);
        let mut m = Cubic {
            pattern: diag,
            wrong: 1.0,
        };
        let c = check_tangent(&mut m, 0.0, &u, &v, 1e-5).unwrap();
        let (i, j, x) = c.outside_pattern.unwrap();
        assert!(i != j && (x + coupling).abs() < 1e-7, "{c:?}");
        assert!(check_tangent(&mut m, 0.0, &u, &v, 0.0).is_err());
        assert!(check_tangent(&mut m, 0.0, &u[..1], &v, 1e-5).is_err());
    }

    /// The scatter adds each element block at its positions; a pattern without an element's
    /// coupling is refused with the element and the pair.
    #[test]
    fn scatter_adds_blocks_and_names_missing_entries() {
        let elements = vec![vec![0usize, 2], vec![2, 1]];
        let mut k = CsrMatrix::pattern_from_elements(3, &elements).unwrap();
        assert_eq!(k.nnz(), 7);
        let s = ElementScatter::new(&k, &elements).unwrap();
        assert_eq!((s.elements(), s.dofs(1)), (2, &[2usize, 1][..]));
        s.add(0, &[1.0, 2.0, 3.0, 4.0], &mut k);
        s.add(1, &[10.0, 20.0, 30.0, 40.0], &mut k);
        let at = |k: &CsrMatrix, i, j| k.data()[k.position(i, j).unwrap()];
        assert_eq!((at(&k, 0, 2), at(&k, 2, 0), at(&k, 2, 2)), (2.0, 3.0, 14.0));
        assert_eq!(
            (at(&k, 2, 1), at(&k, 1, 2), at(&k, 1, 1)),
            (20.0, 30.0, 40.0)
        );
        let partial = CsrMatrix::pattern_from_elements(3, &elements[..1]).unwrap();
        match ElementScatter::new(&partial, &elements) {
            Err(Error::PatternMissing {
                element: 1,
                row: 2,
                col: 1,
            }) => {}
            other => panic!("{other:?}"),
        }
        assert!(CsrMatrix::pattern_from_elements(3, &[[0usize, 3]]).is_err());
    }

    /// Triplets sum their duplicates; the faer and sprs conversions give the same matrix back;
    /// `position` (a binary search) agrees with a scan of the row.
    #[test]
    fn triplets_conversions_and_positions() {
        let t = [(0, 0, 1.0), (1, 2, 2.0), (0, 0, 0.5), (1, 0, -1.0)];
        let a = CsrMatrix::from_triplets(2, 3, &t).unwrap();
        assert_eq!(a.data()[a.position(0, 0).unwrap()], 1.5);
        assert_eq!(a.nnz(), 3);
        assert_eq!(CsrMatrix::from_faer(a.to_faer().as_ref()).unwrap(), a);
        assert_eq!(CsrMatrix::from_sprs("a", &a.to_sprs()).unwrap(), a);
        assert!(CsrMatrix::from_triplets(2, 3, &[(2, 0, 1.0)]).is_err());
        assert!(CsrMatrix::from_triplets(2, 3, &[(0, 3, 1.0)]).is_err());
        assert!(CsrMatrix::from_triplets(2, 3, &[(0, 0, f64::NAN)]).is_err());
        for i in 0..3 {
            for j in 0..4 {
                let scan = a.row(i).position(|(c, _)| c == j);
                let lo = if i < 2 { a.indptr()[i] } else { 0 };
                assert_eq!(a.position(i, j), scan.map(|k| lo + k), "({i}, {j})");
            }
        }
    }
}
