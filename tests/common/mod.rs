//! Helpers shared by the integration tests: small models built from sprs triplets.
#![allow(dead_code)]

pub mod roots;

use sprs::{CsMat, TriMat};
use stepgauge::model::LinearModel;

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

/// A dense LU solver for small test problems (nalgebra), standing in for the sparse solvers
/// where a test wants a solver independent of them.
pub struct DenseLu {
    lu: Option<nalgebra::LU<f64, nalgebra::Dyn, nalgebra::Dyn>>,
}

impl DenseLu {
    pub fn boxed() -> Box<dyn stepgauge::linalg::LinearSolver> {
        Box::new(DenseLu { lu: None })
    }
}

impl stepgauge::linalg::LinearSolver for DenseLu {
    fn analyze(&mut self, _a: &stepgauge::linalg::CsrMatrix) -> stepgauge::Result<()> {
        Ok(())
    }
    fn factor(&mut self, a: &stepgauge::linalg::CsrMatrix) -> stepgauge::Result<()> {
        let n = a.nrows();
        let mut d = nalgebra::DMatrix::zeros(n, n);
        for i in 0..n {
            for (j, v) in a.row(i) {
                d[(i, j)] += v;
            }
        }
        self.lu = Some(d.lu());
        Ok(())
    }
    fn solve_in_place(
        &mut self,
        rhs: &mut [f64],
    ) -> stepgauge::Result<stepgauge::linalg::SolveInfo> {
        let Some(lu) = self.lu.as_ref() else {
            return Err(stepgauge::Error::SolverNotReady {
                solver: "dense LU (test)",
                missing: "factor",
            });
        };
        let b = nalgebra::DVector::from_column_slice(rhs);
        // A singular matrix (or a right-hand side of another length) is an error, not a panic.
        let x = match (b.len() == lu.l().nrows()).then(|| lu.solve(&b)).flatten() {
            Some(x) => x,
            None => {
                return Err(stepgauge::Error::SingularMatrix {
                    solver: "dense LU (test)",
                    evidence: stepgauge::error::Singularity::NonFiniteSolution { index: 0 },
                });
            }
        };
        rhs.copy_from_slice(x.as_slice());
        Ok(stepgauge::linalg::SolveInfo {
            iterations: 0,
            relative_residual: f64::NAN,
        })
    }
    fn name(&self) -> &'static str {
        "dense LU (test)"
    }
}

/// The hardening oscillator of `tests/data/duffing_reference.py`:
/// `m u'' + c u' + k u + k3 u^3 = F0 sin(w t)` (now part of the library's reference problems).
#[allow(unused_imports)]
pub use stepgauge::reference::Duffing;

/// The committed reference solution: rows of `(t, u, v)` (the table compiled into
/// `stepgauge::reference::Hardening`).
pub fn duffing_reference() -> Vec<(f64, f64, f64)> {
    stepgauge_cli::problems::hardening()
        .rows()
        .iter()
        .map(|r| (r[0], r[1], r[2]))
        .collect()
}

/// The same oscillator from rest (`tests/data/duffing_from_rest.csv`, written by
/// `tests/data/duffing_reference.py`): rows of `(t, u, v)`.
#[allow(dead_code)]
pub fn duffing_from_rest() -> Vec<(f64, f64, f64)> {
    include_str!("../data/duffing_from_rest.csv")
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("t,"))
        .map(|l| {
            let f: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
            (f[0], f[1], f[2])
        })
        .collect()
}

/// A left eigenvector of the real 3x3 matrix `a` for its (simple) eigenvalue `z`: a null vector of
/// `A^T - z I`, the cross product of two of its rows.
pub fn left_eigenvector(
    a: &[[f64; 3]; 3],
    z: nalgebra::Complex<f64>,
) -> [nalgebra::Complex<f64>; 3] {
    let b = |i: usize, j: usize| {
        nalgebra::Complex::new(a[j][i], 0.0)
            - if i == j {
                z
            } else {
                nalgebra::Complex::new(0.0, 0.0)
            }
    };
    let cross = |r: [nalgebra::Complex<f64>; 3], s: [nalgebra::Complex<f64>; 3]| {
        [
            r[1] * s[2] - r[2] * s[1],
            r[2] * s[0] - r[0] * s[2],
            r[0] * s[1] - r[1] * s[0],
        ]
    };
    let rows: Vec<[nalgebra::Complex<f64>; 3]> =
        (0..3).map(|i| [b(i, 0), b(i, 1), b(i, 2)]).collect();
    // The pair of rows giving the largest cross product is the best conditioned.
    [(0, 1), (0, 2), (1, 2)]
        .iter()
        .map(|&(i, j)| cross(rows[i], rows[j]))
        .max_by(|p, q| {
            let n = |v: &[nalgebra::Complex<f64>; 3]| v.iter().map(|c| c.norm_sqr()).sum::<f64>();
            n(p).total_cmp(&n(q))
        })
        .unwrap()
}

/// A consistent (tridiagonal) mass matrix of a chain of two-node bar elements with unit element
/// mass: (1/6) [[2, 1], [1, 2]] per element, assembled.
pub fn dense_band_mass(n: usize) -> CsMat<f64> {
    let mut t = TriMat::new((n, n));
    for e in 0..n - 1 {
        for (i, j, v) in [(0, 0, 2.0), (0, 1, 1.0), (1, 0, 1.0), (1, 1, 2.0)] {
            t.add_triplet(e + i, e + j, v / 6.0);
        }
    }
    t.to_csr()
}

/// A spring `k u` on a unit mass with a constant load and nothing else: in particular no
/// `stored_energy`, so the integrators cannot be told the energy of a deformed start (the growth
/// guard's tests in `tests/explicit_sdof.rs` and `tests/implicit_model.rs`).
#[allow(dead_code)]
pub struct BareSpring {
    pub k: f64,
    pub load: f64,
    pattern: stepgauge::linalg::CsrMatrix,
}

#[allow(dead_code)]
impl BareSpring {
    pub fn new(k: f64, load: f64) -> Self {
        BareSpring {
            k,
            load,
            pattern: stepgauge::linalg::CsrMatrix::from_diagonal(&[k]),
        }
    }
}

impl stepgauge::model::Model for BareSpring {
    fn dofs(&self) -> usize {
        1
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        out[0] = 1.0;
    }
    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), stepgauge::ModelError> {
        out[0] = self.k * u[0];
        Ok(())
    }
    fn external_force(&mut self, _t: f64, out: &mut [f64]) -> Result<(), stepgauge::ModelError> {
        out[0] = self.load;
        Ok(())
    }
}

impl stepgauge::model::Tangent for BareSpring {
    fn tangent_pattern(&self) -> &stepgauge::linalg::CsrMatrix {
        &self.pattern
    }

    fn tangent_stiffness(
        &mut self,
        _t: f64,
        _u: &[f64],
        _v: &[f64],
        out: &mut stepgauge::linalg::CsrMatrix,
    ) -> Result<(), stepgauge::ModelError> {
        out.data_mut()[0] = self.k;
        Ok(())
    }
}

/// A model seen only through the general `Model` methods (forces, damping, stiffness product,
/// constraints, stored energy) and its `Tangent`: no hints (no stiffness, not unloaded), no
/// mass matrix, so the integrators take their general paths. With `products` false it does not
/// give the stiffness product either (the stable step then comes from finite differences).
pub struct Opaque<M> {
    pub model: M,
    pub products: bool,
}

impl<M> Opaque<M> {
    /// With the stiffness product.
    pub fn new(model: M) -> Self {
        Opaque {
            model,
            products: true,
        }
    }
}

impl<M: stepgauge::model::Model> stepgauge::model::Model for Opaque<M> {
    fn dofs(&self) -> usize {
        self.model.dofs()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.model.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), stepgauge::ModelError> {
        self.model.internal_force(t, u, v, out)
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), stepgauge::ModelError> {
        self.model.external_force(t, out)
    }
    fn damping(&self) -> stepgauge::model::Damping<'_> {
        self.model.damping()
    }
    fn stiffness_product(
        &mut self,
        t: f64,
        u: &[f64],
        x: &[f64],
        out: &mut [f64],
    ) -> Result<(), stepgauge::ModelError> {
        if self.products {
            self.model.stiffness_product(t, u, x, out)
        } else {
            Err(stepgauge::ModelError::NotProvided("stiffness_product"))
        }
    }
    fn constraints(&self) -> &stepgauge::model::Constraints {
        self.model.constraints()
    }
    fn stored_energy(&self, u: &[f64]) -> Option<f64> {
        self.model.stored_energy(u)
    }
}

impl<M: stepgauge::model::Tangent> stepgauge::model::Tangent for Opaque<M> {
    fn tangent_pattern(&self) -> &stepgauge::linalg::CsrMatrix {
        self.model.tangent_pattern()
    }
    fn tangent_stiffness(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut stepgauge::linalg::CsrMatrix,
    ) -> Result<(), stepgauge::ModelError> {
        self.model.tangent_stiffness(t, u, v, out)
    }
}

/// `impl Tangent for $wrapper` forwarding both methods to the wrapped model in field `.0`.
#[macro_export]
macro_rules! forward_tangent {
    ($wrapper:ty) => {
        impl stepgauge::model::Tangent for $wrapper {
            fn tangent_pattern(&self) -> &stepgauge::linalg::CsrMatrix {
                self.0.tangent_pattern()
            }
            fn tangent_stiffness(
                &mut self,
                t: f64,
                u: &[f64],
                v: &[f64],
                out: &mut stepgauge::linalg::CsrMatrix,
            ) -> Result<(), stepgauge::ModelError> {
                self.0.tangent_stiffness(t, u, v, out)
            }
        }
    };
}
