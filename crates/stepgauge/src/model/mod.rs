//! The model seam: what a user plugs in.
//!
//! A [`Model`] is the user's element loop. stepgauge never needs to know about elements; it asks the
//! model for its lumped mass, its internal force `f_int(t, u, v)`, its external force `f_ext(t)`,
//! its damping and its constraints, always writing into buffers that the caller owns, so that a
//! time step allocates nothing.
//!
//! The equation of motion is
//!
//! ```text
//! M a + C v + f_int(t, u, v) + sum_k f_k(t, u, v) = f_ext(t)
//! ```
//!
//! where the `f_k` are optional *extra* force contributions (hourglass control, contact, ...) that
//! the user wants accounted separately in the energy ledger.
//!
//! # Trial evaluations and history variables
//!
//! Force evaluations are *trial* evaluations: a step may be rejected, an implicit solver evaluates
//! many times per step, and the stable-step estimator may probe perturbed configurations. A model
//! with history variables (plasticity, damage, friction) must therefore compute trial values in its
//! force routines and make them permanent only in [`Model::accept_step`], which the integrator calls
//! once for every accepted step.

mod constraints;
mod hints;
mod linear;

pub use constraints::{Constraint, Constraints, Motion, TimeFunction};
pub use hints::{Hints, Linearity, check_hints};
pub use linear::{LinearModel, Load, LoadFn, LoadTable};

use crate::error::ModelError;
use crate::linalg::CsrMatrix;

/// How a model is damped: one typed value ([`Model::damping`]).
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum Damping<'a> {
    /// No viscous damping.
    #[default]
    None,
    /// Rayleigh damping `C = a0 M + a1 K`. The integrators form `C v` from the mass and `K v`:
    /// [`Model::stiffness_product`], or, in the implicit scheme, the model's
    /// [`Tangent`] when it gives no stiffness product. The modal damping ratio is
    /// `xi(omega) = a0 / (2 omega) + a1 omega / 2` (Rayleigh's classical damping; e.g. Chopra,
    /// *Dynamics of Structures*, ch. 11).
    Rayleigh {
        /// Mass-proportional coefficient (1/s).
        a0: f64,
        /// Stiffness-proportional coefficient (s).
        a1: f64,
    },
    /// A constant damping matrix: the integrators form `C v` themselves, and the implicit schemes
    /// put `C` in the iteration matrix (so a linear model with it is solved once per step).
    Matrix(&'a CsrMatrix),
    /// The model computes its own damping force in [`Model::damping_force`] (for example a
    /// nonlinear one); implicit schemes leave it out of the iteration matrix, so it enters the
    /// residual only and Newton's convergence becomes linear.
    Force,
}

impl Damping<'_> {
    /// Modal damping ratio at circular frequency `omega`, when the damping type determines it
    /// (`Some(0)` for no damping, the Rayleigh formula for Rayleigh damping, `None` for a matrix
    /// or a user force).
    pub fn ratio_at(&self, omega: f64) -> Option<f64> {
        match *self {
            Damping::None => Some(0.0),
            Damping::Rayleigh { a0, a1 } => Some(a0 / (2.0 * omega) + a1 * omega / 2.0),
            Damping::Matrix(_) | Damping::Force => None,
        }
    }

    /// Rayleigh coefficients `(a0, a1)` that give damping ratio `xi1` at circular frequency `w1` and
    /// `xi2` at `w2` (the usual two-equation solve; Chopra, *Dynamics of Structures*, eq. 11.4.9).
    ///
    /// # Errors
    /// [`crate::Error::InvalidParameter`] when a frequency is not positive and finite, the two are
    /// equal, a ratio is negative or not finite, or the coefficients overflow.
    pub fn rayleigh_from_modes(
        w1: f64,
        xi1: f64,
        w2: f64,
        xi2: f64,
    ) -> crate::Result<Damping<'static>> {
        for (name, w) in [("omega_1", w1), ("omega_2", w2)] {
            if !(w.is_finite() && w > 0.0) {
                return Err(crate::Error::InvalidParameter {
                    name,
                    value: w,
                    expected: "a positive, finite circular frequency",
                });
            }
        }
        for (name, xi) in [("xi_1", xi1), ("xi_2", xi2)] {
            if !(xi.is_finite() && xi >= 0.0) {
                return Err(crate::Error::InvalidParameter {
                    name,
                    value: xi,
                    expected: "a non-negative, finite damping ratio",
                });
            }
        }
        // Nearly equal frequencies make the two equations (almost) singular.
        if (w2 - w1).abs() <= 1e-8 * w1.max(w2) {
            return Err(crate::Error::InvalidParameter {
                name: "omega_2",
                value: w2,
                expected: "a frequency clearly different from omega_1",
            });
        }
        // xi_i = a0/(2 w_i) + a1 w_i/2 for i = 1, 2, solved for a0 and a1:
        // a0 = 2 w1 w2 (xi1 w2 - xi2 w1)/(w2^2 - w1^2), a1 = 2 (xi2 w2 - xi1 w1)/(w2^2 - w1^2).
        let d = w2 * w2 - w1 * w1;
        let a0 = 2.0 * w1 * w2 * (xi1 * w2 - xi2 * w1) / d;
        let a1 = 2.0 * (xi2 * w2 - xi1 * w1) / d;
        // Frequencies or ratios near the overflow limit make the coefficients overflow.
        for (name, value, a) in [("omega_1", w1, a0), ("omega_2", w2, a1)] {
            if !a.is_finite() {
                return Err(crate::Error::InvalidParameter {
                    name,
                    value,
                    expected: "frequencies and ratios whose Rayleigh coefficients are finite \
                               (these overflow)",
                });
            }
        }
        Ok(Damping::Rayleigh { a0, a1 })
    }
}

/// Checks that every buffer handed to a [`Model`] method has the model's DOF count `n`; the
/// ready-made models ([`LinearModel`], [`Duffing`](crate::reference::Duffing)) answer a wrong
/// length with this error rather than a panic. Allocates only on the error path.
pub(crate) fn check_buffers(n: usize, buffers: &[(&'static str, usize)]) -> Result<(), ModelError> {
    match buffers.iter().find(|(_, len)| *len != n) {
        Some((what, len)) => Err(ModelError::failed(format!(
            "the buffer `{what}` has length {len}, but the model has {n} DOFs"
        ))),
        None => Ok(()),
    }
}

/// The user's model: mass, forces, damping and constraints of `M a + C v + f_int = f_ext`.
///
/// Only [`dofs`](Model::dofs) and [`internal_force`](Model::internal_force) are required, with
/// the mass as [`lumped_mass`](Model::lumped_mass) or [`mass_matrix`](Model::mass_matrix)
/// (whose row sums are then the lumped mass); everything else has a default
/// (no external force, no damping, no constraints, no extra forces, no hints). The tangent
/// stiffness, which the implicit integrator needs, is its own trait, [`Tangent`].
///
/// All `out` buffers have length [`dofs`](Model::dofs) and must be *overwritten* (not added to).
///
/// # Example
///
/// Two masses on a hardening spring each (`f = k d + k3 d^3`), the first tied to the ground;
/// the core methods for the explicit scheme, the [`Tangent`] for the implicit one:
///
/// ```
/// use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
/// use stepgauge::implicit::{AlphaIntegrator, AlphaParams, ImplicitOptions};
/// use stepgauge::linalg::{CsrMatrix, SparseCholesky};
/// use stepgauge::model::{Model, Tangent};
/// use stepgauge::{ModelError, State};
///
/// struct Springs {
///     k: f64,
///     k3: f64,
///     pattern: CsrMatrix,
/// }
///
/// impl Springs {
///     /// Elongations of the ground spring and the spring between the masses.
///     fn stretch(u: &[f64]) -> [f64; 2] {
///         [u[0], u[1] - u[0]]
///     }
/// }
///
/// impl Model for Springs {
///     fn dofs(&self) -> usize {
///         2
///     }
///     fn lumped_mass(&self, out: &mut [f64]) {
///         out.fill(1.0);
///     }
///     fn internal_force(
///         &mut self,
///         _t: f64,
///         u: &[f64],
///         _v: &[f64],
///         out: &mut [f64],
///     ) -> Result<(), ModelError> {
///         let [d0, d1] = Self::stretch(u);
///         let f = |d: f64| self.k * d + self.k3 * d * d * d;
///         out[0] = f(d0) - f(d1);
///         out[1] = f(d1);
///         Ok(())
///     }
/// }
///
/// impl Tangent for Springs {
///     fn tangent_pattern(&self) -> &CsrMatrix {
///         &self.pattern
///     }
///     fn tangent_stiffness(
///         &mut self,
///         _t: f64,
///         u: &[f64],
///         _v: &[f64],
///         out: &mut CsrMatrix,
///     ) -> Result<(), ModelError> {
///         let [d0, d1] = Self::stretch(u);
///         let (k0, k1) = (self.k + 3.0 * self.k3 * d0 * d0, self.k + 3.0 * self.k3 * d1 * d1);
///         // Row-major entries of the full 2 x 2 pattern: (0,0), (0,1), (1,0), (1,1).
///         out.data_mut().copy_from_slice(&[k0 + k1, -k1, -k1, k1]);
///         Ok(())
///     }
/// }
///
/// # fn main() -> stepgauge::Result<()> {
/// let pattern = CsrMatrix::pattern_from_elements(2, &[[0usize, 1]])?;
/// let mut model = Springs { k: 100.0, k3: 1e4, pattern };
/// let start = State::new(0.0, vec![0.0, 0.0], vec![0.0, 1.0])?;
///
/// let mut state = start.clone();
/// let mut cd = CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())?;
/// let dt = 0.5 * cd.stable_limit().unwrap();
/// for _ in 0..100 {
///     cd.step(&mut model, &mut state, dt)?;
/// }
///
/// let mut state = start.clone();
/// let p = AlphaParams::hht(-0.1)?;
/// let mut it = AlphaIntegrator::new(
///     &mut model,
///     &mut state,
///     p,
///     Box::new(SparseCholesky::new()),
///     ImplicitOptions::default(),
/// )?;
/// it.step(&mut model, &mut state, 1e-3)?;
/// assert!(state.u[1] > 0.0);
/// # Ok(())
/// # }
/// ```
pub trait Model {
    /// Number of degrees of freedom.
    fn dofs(&self) -> usize;

    /// The lumped (diagonal) mass, written into `out`.
    ///
    /// Every DOF that is free to move needs a positive, finite mass; constrained DOFs may have zero
    /// mass. Default: the row sums of [`mass_matrix`](Model::mass_matrix) when the model gives
    /// one (row-sum lumping, common practice; the explicit scheme steps with it, the implicit
    /// schemes use the matrix itself), NaN otherwise (which the integrators refuse with
    /// [`Error::NonPositiveMass`](crate::Error::NonPositiveMass)): a model gives one or the other.
    fn lumped_mass(&self, out: &mut [f64]) {
        match self.mass_matrix() {
            Some(m) if m.nrows() == out.len() => {
                for (i, o) in out.iter_mut().enumerate() {
                    *o = m.row(i).map(|(_, v)| v).sum();
                }
            }
            _ => out.fill(f64::NAN),
        }
    }

    /// Internal force `f_int(t, u, v)`, written into `out`.
    ///
    /// For the explicit scheme `v` is the lagged half-step velocity `v_{n-1/2}`, or a predicted
    /// integer-step velocity (see [`ForceVelocity`](crate::params::ForceVelocity)).
    ///
    /// # Errors
    /// Whatever the model cannot evaluate (for example an inverted element).
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError>;

    /// External force `f_ext(t)`, written into `out`. Default: zero.
    ///
    /// # Errors
    /// Whatever the model cannot evaluate.
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), ModelError> {
        let _ = t;
        out.fill(0.0);
        Ok(())
    }

    /// How the model is damped, as one typed value: none, Rayleigh, a constant matrix, or the
    /// model's own force ([`damping_force`](Model::damping_force)). Default: [`Damping::None`].
    fn damping(&self) -> Damping<'_> {
        Damping::None
    }

    /// The model's own damping force when [`damping`](Model::damping) is [`Damping::Force`].
    /// Default: [`ModelError::NotProvided`].
    ///
    /// # Errors
    /// Whatever the model cannot evaluate.
    fn damping_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        let _ = (t, u, v, out);
        Err(ModelError::NotProvided("damping_force"))
    }

    /// The product `K x` of a stiffness matrix with a vector, written into `out`.
    ///
    /// `K` is the stiffness the model wants used for Rayleigh damping and for the stable-step
    /// estimate: the tangent at `u` for a nonlinear model, or its initial stiffness. Default:
    /// [`ModelError::NotProvided`]; the stable-step estimator then falls back to central finite
    /// differences of [`internal_force`](Model::internal_force).
    ///
    /// # Errors
    /// Whatever the model cannot evaluate.
    fn stiffness_product(
        &mut self,
        t: f64,
        u: &[f64],
        x: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        let _ = (t, u, x, out);
        Err(ModelError::NotProvided("stiffness_product"))
    }

    /// Names of the extra force contributions the model reports separately (hourglass control,
    /// contact, ...). Called once when an integrator is created. Default: none.
    fn extra_force_names(&self) -> Vec<String> {
        Vec::new()
    }

    /// Extra force contribution number `index` (in the order of
    /// [`extra_force_names`](Model::extra_force_names)), written into `out`. It acts like an
    /// internal force (it resists motion) and its work is booked under its own name.
    ///
    /// # Errors
    /// Whatever the model cannot evaluate.
    fn extra_force(
        &mut self,
        index: usize,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        let _ = (index, t, u, v, out);
        Err(ModelError::NotProvided("extra_force"))
    }

    /// Fixed DOFs and DOFs with a prescribed motion. Default: none.
    fn constraints(&self) -> &Constraints {
        Constraints::none()
    }

    /// The stable step of the explicit scheme from element sizes and wave speeds (for example
    /// [`element_stable_step`](crate::explicit::element_stable_step) over the model's elements in
    /// configuration `u`), when the model can give one. Default: `None`, and the estimator uses
    /// the highest eigenvalue of `M^-1 K` instead.
    fn element_stable_step(&mut self, t: f64, u: &[f64]) -> Option<f64> {
        let _ = (t, u);
        None
    }

    /// The internal (strain) energy stored at `u` relative to the undeformed state, when the model
    /// knows it. Used once, at the start of a run, so that the energy ledger also balances for runs
    /// that start from a deformed configuration. Default: `None` (taken as zero).
    fn stored_energy(&self, u: &[f64]) -> Option<f64> {
        let _ = u;
        None
    }

    /// The consistent mass matrix, when the model has one. Implicit schemes use it; without it
    /// (the default) they use the lumped mass. The explicit scheme always uses the lumped mass.
    fn mass_matrix(&self) -> Option<&CsrMatrix> {
        None
    }

    /// Facts about the forces that let the integrators leave out work: whether the internal
    /// force is linear (and its matrix), whether the model is unloaded. Declared once, checked
    /// against the forces by [`check_hints`] when an integrator is created.
    /// Default: no claims ([`Hints::default`]).
    fn hints(&self) -> Hints<'_> {
        Hints::default()
    }

    /// Called once for every accepted step, with the time reached: make trial history variables
    /// permanent. Default: nothing.
    fn accept_step(&mut self, t: f64) {
        let _ = t;
    }
}

/// The tangent stiffness on a fixed pattern: the capability the implicit integrator
/// ([`AlphaIntegrator`](crate::implicit::AlphaIntegrator)) requires at compile time, for linear
/// and nonlinear models alike ([`LinearModel`] has it).
///
/// The pattern is fixed for the run; [`check_tangent`](crate::linalg::check_tangent) compares
/// the values with central differences of the internal force, and
/// [`CsrMatrix::pattern_from_elements`] with an [`ElementScatter`](crate::linalg::ElementScatter)
/// builds and fills it from element DOF lists.
pub trait Tangent: Model {
    /// A matrix whose stored entries are the fixed sparsity pattern of the tangent stiffness
    /// (values ignored).
    fn tangent_pattern(&self) -> &CsrMatrix;

    /// The tangent stiffness `d f_int / d u` at `(t, u, v)`, written into the values of `out`,
    /// whose pattern is [`tangent_pattern`](Tangent::tangent_pattern).
    ///
    /// # Errors
    /// Whatever the model cannot evaluate.
    fn tangent_stiffness(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut CsrMatrix,
    ) -> Result<(), ModelError>;
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Rayleigh coefficients from two modes reproduce both damping ratios (the defining equations
    /// xi_i = a0 / (2 w_i) + a1 w_i / 2; Chopra, *Dynamics of Structures*, sec. 11.4).
    #[test]
    fn rayleigh_from_two_modes_reproduces_both_ratios() {
        let d = Damping::rayleigh_from_modes(10.0, 0.05, 60.0, 0.02).unwrap();
        assert!((d.ratio_at(10.0).unwrap() - 0.05).abs() < 1e-15);
        assert!((d.ratio_at(60.0).unwrap() - 0.02).abs() < 1e-15);
        assert!(Damping::rayleigh_from_modes(10.0, 0.05, 10.0, 0.05).is_err());
        assert!(Damping::rayleigh_from_modes(-1.0, 0.05, 10.0, 0.05).is_err());
        assert!(Damping::rayleigh_from_modes(1.0, f64::NAN, 10.0, 0.05).is_err());
        assert_eq!(Damping::None.ratio_at(3.0), Some(0.0));
        assert_eq!(Damping::Force.ratio_at(3.0), None);
    }
}
