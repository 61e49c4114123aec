//! A ready-made linear model from sparse matrices: `M a + C v + K u = f(t)`.

use std::fmt;
use std::sync::Arc;

use sprs::CsMat;

use super::constraints::{locate, validate_times};
use super::{Constraints, Damping, Hints, Model, Tangent, TimeFunction};
use crate::error::{Error, ModelError, Result};
use crate::linalg::{CsrMatrix, Parallelism};

/// A table of nodal loads against time.
///
/// Row `r` gives, at time `times[r]`, the load on each DOF of `dofs`. The load is piecewise-linear in
/// time between rows, held at the first row before it and at the last row after it, and zero on
/// every DOF not listed.
#[derive(Debug, Clone, PartialEq)]
pub struct LoadTable {
    times: Vec<f64>,
    dofs: Vec<usize>,
    /// Row-major: `values[r * dofs.len() + j]` is the load on `dofs[j]` at `times[r]`.
    values: Vec<f64>,
}

impl LoadTable {
    /// A load table from its columns; `values` is row-major (`times.len()` rows of `dofs.len()`).
    ///
    /// # Errors
    /// [`Error::InvalidTable`] for an empty table, times not strictly increasing, a non-finite
    /// value or a wrong number of values.
    pub fn new(times: Vec<f64>, dofs: Vec<usize>, values: Vec<f64>) -> Result<Self> {
        validate_times("load table", &times)?;
        if values.len() != times.len() * dofs.len() {
            return Err(Error::InvalidTable {
                what: "load table",
                row: values.len() / dofs.len().max(1),
                problem: "the number of values is not rows x DOFs",
            });
        }
        if let Some(i) = values.iter().position(|v| !v.is_finite()) {
            return Err(Error::InvalidTable {
                what: "load table",
                row: i / dofs.len().max(1),
                problem: "load value is not finite",
            });
        }
        Ok(LoadTable {
            times,
            dofs,
            values,
        })
    }

    /// The loaded DOFs.
    pub fn dofs(&self) -> &[usize] {
        &self.dofs
    }

    /// Writes the load at time `t` into `out` (length: the model's DOF count). A NaN `t` gives the
    /// load of the first row (as any time before the table does).
    ///
    /// # Errors
    /// [`Error::DofOutOfRange`] when a loaded DOF is not below `out.len()`; `out` is then all
    /// zero.
    pub fn eval(&self, t: f64, out: &mut [f64]) -> Result<()> {
        out.fill(0.0);
        let n = out.len();
        if let Some(&dof) = self.dofs.iter().find(|&&d| d >= n) {
            return Err(Error::DofOutOfRange {
                what: "load table",
                dof,
                n,
            });
        }
        let m = self.dofs.len();
        let (i, w) = locate(&self.times, t);
        let row0 = &self.values[i * m..(i + 1) * m];
        if w == 0.0 {
            for (d, v) in self.dofs.iter().zip(row0) {
                out[*d] += v;
            }
        } else {
            let row1 = &self.values[(i + 1) * m..(i + 2) * m];
            for ((d, v0), v1) in self.dofs.iter().zip(row0).zip(row1) {
                out[*d] += v0 + w * (v1 - v0);
            }
        }
        Ok(())
    }
}

/// A user load function: writes `f(t)` into its buffer.
pub type LoadFn = Arc<dyn Fn(f64, &mut [f64]) + Send + Sync>;

/// The external load of a [`LinearModel`].
#[derive(Clone, Default)]
pub enum Load {
    /// No load.
    #[default]
    None,
    /// Piecewise-linear nodal loads from a table.
    Table(LoadTable),
    /// A fixed spatial pattern scaled by a function of time: `f(t) = factor(t) * pattern`.
    Pattern {
        /// The spatial pattern, one entry per DOF.
        pattern: Vec<f64>,
        /// The time factor.
        factor: TimeFunction,
    },
    /// A user function writing `f(t)` into its buffer (which it must overwrite).
    Function(LoadFn),
}

impl fmt::Debug for Load {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Load::None => write!(f, "None"),
            Load::Table(t) => f.debug_tuple("Table").field(t).finish(),
            Load::Pattern { pattern, factor } => f
                .debug_struct("Pattern")
                .field("pattern", pattern)
                .field("factor", factor)
                .finish(),
            Load::Function(_) => write!(f, "Function(..)"),
        }
    }
}

/// How a [`LinearModel`] is damped.
#[derive(Debug, Clone)]
enum LinearDamping {
    None,
    Rayleigh { a0: f64, a1: f64 },
    Matrix(CsrMatrix),
}

/// A linear model `M a + C v + K u = f(t)` from sparse matrices.
///
/// `M` may be consistent: the explicit scheme uses its row-sum lumped diagonal
/// ([`lumped`](LinearModel::lumped)); the integrator refuses a non-positive lumped mass on a free DOF.
///
/// ```
/// use sprs::TriMat;
/// use stepgauge::model::{LinearModel, Model};
/// let mut m = TriMat::new((2, 2));
/// m.add_triplet(0, 0, 2.0);
/// m.add_triplet(1, 1, 1.0);
/// let mut k = TriMat::new((2, 2));
/// for (i, j, v) in [(0, 0, 6.0), (0, 1, -2.0), (1, 0, -2.0), (1, 1, 4.0)] {
///     k.add_triplet(i, j, v);
/// }
/// let model = LinearModel::new(&m.to_csr(), &k.to_csr()).unwrap();
/// assert_eq!(model.dofs(), 2);
/// ```
#[derive(Debug, Clone)]
pub struct LinearModel {
    mass: CsrMatrix,
    stiffness: CsrMatrix,
    lumped: Vec<f64>,
    damping: LinearDamping,
    load: Load,
    constraints: Constraints,
    parallel: Parallelism,
}

impl LinearModel {
    /// A model from its mass and stiffness matrices (same square size), undamped and unloaded.
    ///
    /// # Errors
    /// [`Error::InvalidMatrix`] for a non-square matrix, non-finite entries or an empty model;
    /// [`Error::DimensionMismatch`] when `M` and `K` differ in size.
    pub fn new(mass: &CsMat<f64>, stiffness: &CsMat<f64>) -> Result<Self> {
        let mass = square("mass", mass)?;
        let stiffness = square("stiffness", stiffness)?;
        if mass.nrows() != stiffness.nrows() {
            return Err(Error::DimensionMismatch {
                what: "stiffness matrix",
                expected: mass.nrows(),
                found: stiffness.nrows(),
            });
        }
        let lumped = mass.row_sums();
        Ok(LinearModel {
            mass,
            stiffness,
            lumped,
            damping: LinearDamping::None,
            load: Load::None,
            constraints: Constraints::new(),
            parallel: Parallelism::default(),
        })
    }

    /// Sets the load.
    ///
    /// # Errors
    /// [`Error::DofOutOfRange`] for a loaded DOF outside the model, [`Error::DimensionMismatch`]
    /// for a pattern of the wrong length, [`Error::NonFiniteInput`] for a non-finite pattern.
    pub fn with_load(mut self, load: Load) -> Result<Self> {
        let n = self.dofs();
        match &load {
            Load::Table(t) => {
                if let Some(&dof) = t.dofs.iter().find(|&&d| d >= n) {
                    return Err(Error::DofOutOfRange {
                        what: "load table",
                        dof,
                        n,
                    });
                }
            }
            Load::Pattern { pattern, .. } => {
                crate::validate::check_len("load pattern", n, pattern.len())?;
                crate::validate::check_finite("load pattern", pattern)?;
            }
            Load::None | Load::Function(_) => {}
        }
        self.load = load;
        Ok(self)
    }

    /// Rayleigh damping `C = a0 M + a1 K` (with the lumped `M` in the explicit scheme).
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for a negative or non-finite coefficient.
    pub fn with_rayleigh(mut self, a0: f64, a1: f64) -> Result<Self> {
        crate::validate::check_rayleigh(a0, a1)?;
        self.damping = LinearDamping::Rayleigh { a0, a1 };
        Ok(self)
    }

    /// A damping matrix `C` (same size as `M`).
    ///
    /// # Errors
    /// As for [`LinearModel::new`].
    pub fn with_damping_matrix(mut self, c: &CsMat<f64>) -> Result<Self> {
        let c = square("damping", c)?;
        crate::validate::check_len("damping matrix", self.dofs(), c.nrows())?;
        self.damping = LinearDamping::Matrix(c);
        Ok(self)
    }

    /// Sets the constraints.
    ///
    /// # Errors
    /// [`Error::DofOutOfRange`] or [`Error::DuplicateConstraint`].
    pub fn with_constraints(mut self, constraints: Constraints) -> Result<Self> {
        constraints.validate(self.dofs())?;
        self.constraints = constraints;
        Ok(self)
    }

    /// Sets when the matrix products run in parallel.
    pub fn with_parallelism(mut self, parallel: Parallelism) -> Self {
        self.parallel = parallel;
        self
    }

    /// The (consistent) mass matrix.
    pub fn mass_matrix(&self) -> &CsrMatrix {
        &self.mass
    }

    /// The stiffness matrix.
    pub fn stiffness_matrix(&self) -> &CsrMatrix {
        &self.stiffness
    }

    /// The row-sum lumped mass.
    pub fn lumped(&self) -> &[f64] {
        &self.lumped
    }

    /// The load.
    pub fn load(&self) -> &Load {
        &self.load
    }
}

fn square(what: &'static str, m: &CsMat<f64>) -> Result<CsrMatrix> {
    if m.rows() != m.cols() {
        return Err(Error::InvalidMatrix {
            what,
            problem: format!("it is {} x {}, but must be square", m.rows(), m.cols()),
        });
    }
    if m.rows() == 0 {
        return Err(Error::EmptyModel);
    }
    CsrMatrix::from_sprs(what, m)
}

/// Every buffer of a [`Model`] call on a [`LinearModel`] has the model's DOF count: a wrong length
/// is a [`ModelError`], not a panic (an integrator then reports it as [`Error::Model`]).
impl Model for LinearModel {
    fn dofs(&self) -> usize {
        self.mass.nrows()
    }

    /// The row-sum lumped mass; an `out` of the wrong length is filled with NaN (which the
    /// integrators refuse as [`Error::NonPositiveMass`]): this method cannot return an error.
    fn lumped_mass(&self, out: &mut [f64]) {
        if out.len() == self.lumped.len() {
            out.copy_from_slice(&self.lumped);
        } else {
            out.fill(f64::NAN);
        }
    }

    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> std::result::Result<(), ModelError> {
        let n = self.dofs();
        super::check_buffers(n, &[("u", u.len()), ("v", v.len()), ("out", out.len())])?;
        self.stiffness.mul_vec(u, out, self.parallel);
        Ok(())
    }

    fn external_force(&mut self, t: f64, out: &mut [f64]) -> std::result::Result<(), ModelError> {
        super::check_buffers(self.dofs(), &[("out", out.len())])?;
        match &self.load {
            Load::None => out.fill(0.0),
            Load::Table(table) => table
                .eval(t, out)
                .map_err(|e| ModelError::failed(e.to_string()))?,
            Load::Pattern { pattern, factor } => {
                let s = factor.value(t);
                for (o, p) in out.iter_mut().zip(pattern) {
                    *o = s * p;
                }
            }
            Load::Function(f) => f(t, out),
        }
        Ok(())
    }

    fn damping(&self) -> Damping<'_> {
        match &self.damping {
            LinearDamping::None => Damping::None,
            LinearDamping::Rayleigh { a0, a1 } => Damping::Rayleigh { a0: *a0, a1: *a1 },
            LinearDamping::Matrix(c) => Damping::Matrix(c),
        }
    }

    fn stiffness_product(
        &mut self,
        _t: f64,
        u: &[f64],
        x: &[f64],
        out: &mut [f64],
    ) -> std::result::Result<(), ModelError> {
        let n = self.dofs();
        super::check_buffers(n, &[("u", u.len()), ("x", x.len()), ("out", out.len())])?;
        self.stiffness.mul_vec(x, out, self.parallel);
        Ok(())
    }

    fn constraints(&self) -> &Constraints {
        &self.constraints
    }

    fn mass_matrix(&self) -> Option<&CsrMatrix> {
        Some(&self.mass)
    }

    /// Linear with the stiffness matrix ([`internal_force`](Model::internal_force) is its
    /// product with `u`); unloaded without a load ([`Load::None`]).
    fn hints(&self) -> Hints<'_> {
        let h = Hints::default().stiffness(&self.stiffness);
        if matches!(self.load, Load::None) {
            h.unloaded()
        } else {
            h
        }
    }

    /// `u^T K u / 2`; `None` for a `u` of the wrong length.
    fn stored_energy(&self, u: &[f64]) -> Option<f64> {
        if u.len() != self.dofs() {
            return None;
        }
        // Bit for bit `0.5 * dot(u, K u)`, without a vector for `K u`.
        Some(0.5 * self.stiffness.quadratic_form(u, self.parallel))
    }
}

impl Tangent for LinearModel {
    fn tangent_pattern(&self) -> &CsrMatrix {
        &self.stiffness
    }

    fn tangent_stiffness(
        &mut self,
        _t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut CsrMatrix,
    ) -> std::result::Result<(), ModelError> {
        let n = self.dofs();
        super::check_buffers(n, &[("u", u.len()), ("v", v.len())])?;
        if !out.same_pattern(&self.stiffness) {
            return Err(ModelError::failed(
                "the tangent matrix given to LinearModel::tangent_stiffness does not have the \
                 pattern of the model's tangent_pattern",
            ));
        }
        out.data_mut().copy_from_slice(self.stiffness.data());
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use sprs::TriMat;

    fn diag(v: &[f64]) -> CsMat<f64> {
        let mut t = TriMat::new((v.len(), v.len()));
        for (i, x) in v.iter().enumerate() {
            t.add_triplet(i, i, *x);
        }
        t.to_csr()
    }

    #[test]
    fn load_table_is_piecewise_linear_and_held() {
        let table = LoadTable::new(vec![0.0, 1.0], vec![2], vec![0.0, 10.0]).unwrap();
        let mut m = LinearModel::new(&diag(&[1.0; 3]), &diag(&[1.0; 3]))
            .unwrap()
            .with_load(Load::Table(table))
            .unwrap();
        let mut f = vec![9.0; 3];
        m.external_force(0.25, &mut f).unwrap();
        assert_eq!(f, vec![0.0, 0.0, 2.5]);
        m.external_force(5.0, &mut f).unwrap();
        assert_eq!(f, vec![0.0, 0.0, 10.0]);
    }

    #[test]
    fn bad_matrices_and_loads_are_refused() {
        let mut t = TriMat::new((2, 3));
        t.add_triplet(0, 0, 1.0);
        let e = LinearModel::new(&t.to_csr(), &diag(&[1.0, 1.0])).unwrap_err();
        assert!(
            matches!(e, Error::InvalidMatrix { what: "mass", .. }),
            "{e}"
        );
        let e = LinearModel::new(&diag(&[1.0, 1.0]), &diag(&[1.0; 3])).unwrap_err();
        assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
        let table = LoadTable::new(vec![0.0], vec![5], vec![1.0]).unwrap();
        let e = LinearModel::new(&diag(&[1.0; 2]), &diag(&[1.0; 2]))
            .unwrap()
            .with_load(Load::Table(table))
            .unwrap_err();
        assert!(
            matches!(e, Error::DofOutOfRange { dof: 5, n: 2, .. }),
            "{e}"
        );
        let e = LinearModel::new(&diag(&[1.0; 2]), &diag(&[1.0; 2]))
            .unwrap()
            .with_rayleigh(-1.0, 0.0)
            .unwrap_err();
        assert!(
            matches!(e, Error::InvalidParameter { name: "a0", .. }),
            "{e}"
        );
    }

    #[test]
    fn consistent_mass_is_lumped_by_row_sums() {
        // Consistent mass of one two-node bar element, rho A L = 6: (rho A L / 6) [[2, 1], [1, 2]].
        let mut t = TriMat::new((2, 2));
        for (i, j, v) in [(0, 0, 2.0), (0, 1, 1.0), (1, 0, 1.0), (1, 1, 2.0)] {
            t.add_triplet(i, j, v);
        }
        let m = LinearModel::new(&t.to_csr(), &diag(&[1.0, 1.0])).unwrap();
        assert_eq!(m.lumped(), &[3.0, 3.0]);
    }
}
