//! Reference problems with exact (or tightly tabulated) solutions, shared by the tests, the
//! benchmarks and the comparison of schemes.
//!
//! Every problem implements [`ReferenceProblem`]: it builds its [`Model`](crate::model::Model) (with its [`Tangent`]), gives the initial
//! [`State`], an end time, the DOF it observes and the exact displacement and velocity of that DOF
//! at any time. A comparison loops over [`all`]:
//!
//! ```
//! use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, ForceVelocity};
//! use stepgauge::reference;
//!
//! # fn main() -> stepgauge::Result<()> {
//! for problem in reference::smooth() {
//!     let mut model = problem.model()?;
//!     let mut state = problem.initial_state();
//!     let mut options = CentralDifferenceOptions::default();
//!     options.force_velocity = ForceVelocity::Predicted; // second order with damping
//!     let mut cd = CentralDifference::new(&mut *model, &mut state, options)?;
//!     let dt = 0.5 * cd.stable_limit().unwrap();
//!     let t_end = problem.t_end().min(0.5); // a short stretch, for the doctest
//!     while state.t + dt <= t_end {
//!         cd.step(&mut *model, &mut state, dt)?;
//!     }
//!     let dof = problem.observed_dof();
//!     let error = (state.u[dof] - problem.exact(state.t)).abs();
//!     assert!(error.is_finite(), "{}: {error}", problem.name());
//! }
//! # Ok(())
//! # }
//! ```
//!
//! The problems, with our own parameter values (none is taken from a book; the books are cited
//! for the form of the exact solution):
//!
//! | problem | type | exact solution |
//! |---|---|---|
//! | free vibration, undamped / damped | [`SdofFree`] | closed form, every damping regime |
//! | harmonic load from rest, damped / resonant | [`SdofHarmonic`] | closed form, every `r` |
//! | half-sine pulse, undamped / damped | [`SdofHalfSine`] | closed form, piecewise |
//! | two DOFs under a step load | [`TwoDofStep`] | modal superposition |
//! | stiff and soft springs | [`StiffSoft`] | modal superposition |
//! | bar struck at constant speed | [`BarImpact`] | one-dimensional wave theory (continuum) |
//! | hardening (Duffing) oscillator | [`Hardening`] | SciPy DOP853 table (read by the caller), interpolated |
//!
//! [`ReferenceProblem::is_smooth`] is false for the pulse and the bar: a kink in the load or a
//! travelling front caps the convergence order a scheme can show on them.
//!
//! The convergence studies on these problems (a scheme's error and order) and the verification
//! suite live in the repository's command-line package (`stepgauge_cli::study`,
//! `stepgauge_cli::verification`), beside `stepgauge compare`, which is built on them.
//!
//! # Single-DOF solutions
//!
//! Notation: `omega = sqrt(k / m)`, `c = 2 xi m omega`, static deflection `A = f0 / k`.
//!
//! ## Free response in every damping regime
//!
//! Let `h(t)` be the unit impulse response, the solution of `h'' + 2 xi omega h' + omega^2 h = 0`
//! with `h(0) = 0`, `h'(0) = 1`. The solution from `u(0) = u0`, `u'(0) = v0` is
//!
//! ```text
//! u(t) = u0 (h'(t) + 2 xi omega h(t)) + v0 h(t),        v(t) = -omega^2 u0 h(t) + v0 h'(t)
//! ```
//!
//! (`h'` solves the equation as `h` does, and `h'' + 2 xi omega h' = -omega^2 h` gives `v`; at
//! `t = 0` the two give `u0` and `v0`). With `e = exp(-xi omega t)`:
//!
//! - underdamped, `xi < 1`, `omega_D = omega sqrt(1 - xi^2)`: `h = e sin(omega_D t) / omega_D`
//!   (Chopra, *Dynamics of Structures*, sec. 2.2; for `xi = 0` sec. 2.1);
//! - critically damped, `xi = 1`: `h = e t`;
//! - overdamped, `xi > 1`, roots `s_1,2 = -xi omega +- omega sqrt(xi^2 - 1)`:
//!   `h = (exp(s_1 t) - exp(s_2 t)) / (s_1 - s_2)`.
//!
//! `sin(omega_D t) / omega_D` is evaluated as `t sinc(omega_D t)` and the overdamped difference
//! through `expm1`, so the three forms join continuously at `xi = 1`.
//!
//! ## Harmonic load from rest
//!
//! For `f = f0 sin(w t)`, `r = w / omega`, the damped steady state is (Chopra, sec. 3.2)
//!
//! ```text
//! u_p = C sin(w t) + D cos(w t),   C = A (1 - r^2) / q,   D = -A 2 xi r / q,
//! q = (1 - r^2)^2 + (2 xi r)^2,
//! ```
//!
//! and the full solution is `u_p` plus the free response from `(-D, -w C)`, which cancels `u_p`'s
//! initial values. Undamped, the solution from rest is `A (sin(w t) - r sin(omega t)) / (1 - r^2)`
//! (Chopra, sec. 3.1), singular at resonance as written. With `sigma = (omega + w) / 2`,
//! `d = (omega - w) / 2` and `sin(w t) - sin(omega t) = -2 cos(sigma t) sin(d t)`,
//! `1 - r = 2 d / omega`, it becomes
//!
//! ```text
//! u(t) = A / (1 + r) [sin(omega t) - omega cos(sigma t) s(t)],
//! v(t) = A omega / (1 + r) [cos(omega t) + sigma sin(sigma t) s(t) - cos(sigma t) cos(d t)],
//! s(t) = sin(d t) / d = t sinc(d t),
//! ```
//!
//! which holds for every `r`; at `r = 1` (`d = 0`, `s = t`) it is the secular solution
//! `u = (A / 2)(sin(omega t) - omega t cos(omega t))` (Chopra, sec. 3.1, resonant case), and near
//! resonance it loses no digits.
//!
//! With light damping near resonance, `C`, `D` and the transient are each of size `A / (2 xi)`
//! while `u` is smaller at early times: the general formula loses about `log10(1 / xi)` digits.
//!
//! # Two-DOF modal solutions
//!
//! For `M u'' + K u = f` with a diagonal `M = diag(m1, m2)`, a symmetric `K` and a load `f`
//! constant for `t > 0`, the generalised eigenproblem `K phi = omega^2 M phi` becomes the symmetric
//! `A y = lambda y` with `A = M^-1/2 K M^-1/2`, `phi = M^-1/2 y`:
//!
//! ```text
//! A = [[a, b], [b, d]],  a = K11 / m1,  b = K12 / sqrt(m1 m2),  d = K22 / m2,
//! lambda_2 = (a + d) / 2 + sqrt(((a - d) / 2)^2 + b^2),   lambda_1 = det(K) / (m1 m2 lambda_2),
//! y_2 = (cos theta, sin theta),  y_1 = (-sin theta, cos theta),  theta = atan2(2 b, a - d) / 2
//! ```
//!
//! (the Jacobi rotation that diagonalises `A`; `lambda_1` from the determinant avoids the
//! cancellation in `(a + d) / 2 - sqrt(...)` when the frequencies are far apart). The modes
//! `phi_i` are M-orthonormal, and with `q_i(0) = phi_i^T M u0`, `q_i'(0) = phi_i^T M v0`,
//! `f_i = phi_i^T f`, each modal coordinate is
//!
//! ```text
//! q_i(t) = q_i(0) cos(omega_i t) + q_i'(0) sin(omega_i t) / omega_i
//!          + (f_i / omega_i^2)(1 - cos(omega_i t)),
//! ```
//!
//! and `u = sum_i phi_i q_i` (e.g. Chopra, *Dynamics of Structures*, ch. 10 and 12;
//! Clough & Penzien, *Dynamics of Structures*, ch. 12).

mod bar;
mod hardening;
mod modal;
mod sdof;

pub use bar::BarImpact;
pub use hardening::{Duffing, Hardening};
pub use modal::{StiffSoft, TwoDofStep};
pub use sdof::{SdofFree, SdofHalfSine, SdofHarmonic};

use std::fmt;

use sprs::{CsMat, TriMat};

use crate::error::{Error, Result};
use crate::model::Tangent;
use crate::state::State;

/// A problem with a known solution: the model, its start, and the exact motion of one DOF.
///
/// The trait is object-safe: `Vec<Box<dyn ReferenceProblem>>` holds problems of every kind (see
/// [`all`]).
pub trait ReferenceProblem: fmt::Debug + Send + Sync {
    /// A short identifier, unique within [`all`] (for example `"two-dof-step"`).
    fn name(&self) -> &'static str;

    /// One sentence on what is modelled.
    fn description(&self) -> &'static str;

    /// Where the exact solution comes from: a published source, or "exact solution (derived in
    /// the doc)" when it is derived in this module's documentation.
    fn source(&self) -> &'static str;

    /// Checks the parameters.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] naming the first parameter out of range.
    fn validate(&self) -> Result<()>;

    /// Builds the model (after [`validate`](ReferenceProblem::validate)), with its tangent so
    /// that the explicit and the implicit integrators can step it.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for parameters out of range.
    fn model(&self) -> Result<Box<dyn Tangent + Send>>;

    /// The state at `t = 0`, acceleration left at zero (the integrators compute it).
    fn initial_state(&self) -> State;

    /// The end time of the problem's standard run.
    fn t_end(&self) -> f64;

    /// The DOF whose motion [`exact`](ReferenceProblem::exact) gives.
    fn observed_dof(&self) -> usize;

    /// Exact displacement of the observed DOF at time `t >= 0` (within `[0, t_end]` for a tabulated
    /// reference, `NaN` outside its table).
    fn exact(&self, t: f64) -> f64;

    /// Exact velocity of the observed DOF at time `t` (same range as
    /// [`exact`](ReferenceProblem::exact)).
    fn exact_velocity(&self, t: f64) -> f64;

    /// The times at which [`exact`](ReferenceProblem::exact) is as accurate as the reference
    /// itself, when the reference is a table interpolated in between; `None` when it is exact at
    /// every time. An order-of-convergence study should compare only at these times.
    fn tabulated_times(&self) -> Option<&[f64]> {
        None
    }

    /// False when the load or the solution has a kink or a front, which caps the convergence
    /// order a scheme can show: a half-sine pulse's slope jump makes `u'''` jump, so one step's
    /// local error is `O(dt^3)` and the global order is at most three (second-order schemes keep
    /// theirs); at an impact the velocity jumps and pointwise errors converge more slowly still.
    fn is_smooth(&self) -> bool;

    /// The model's undamped natural circular frequencies (rad/s), in increasing order, when known;
    /// empty for a nonlinear model.
    fn natural_frequencies(&self) -> Vec<f64>;
}

/// The standard set of problems whose exact solution the library computes, with our own parameter
/// values (documented on each constructor used here). The [`Hardening`] oscillator is not in it:
/// its reference is a table that the caller reads ([`Hardening::from_table`]); the command line's
/// set (`stepgauge_cli::problems::all` in the repository) adds it.
///
/// ```
/// let names: Vec<&str> = stepgauge::reference::all().iter().map(|p| p.name()).collect();
/// assert!(names.contains(&"two-dof-step"));
/// ```
pub fn all() -> Vec<Box<dyn ReferenceProblem>> {
    vec![
        Box::new(SdofFree::standard_undamped()),
        Box::new(SdofFree::standard_damped()),
        Box::new(SdofHarmonic::standard_damped()),
        Box::new(SdofHarmonic::standard_resonant()),
        Box::new(SdofHalfSine::standard_undamped()),
        Box::new(SdofHalfSine::standard_damped()),
        Box::new(TwoDofStep),
        Box::new(StiffSoft::standard()),
        Box::new(BarImpact::standard()),
    ]
}

/// The problems of [`all`] whose solution is smooth ([`ReferenceProblem::is_smooth`]): the ones
/// on which a scheme shows its full order of accuracy.
pub fn smooth() -> Vec<Box<dyn ReferenceProblem>> {
    all().into_iter().filter(|p| p.is_smooth()).collect()
}

/// `Err` unless `value` is positive and finite.
fn positive(name: &'static str, value: f64) -> Result<()> {
    if value.is_finite() && value > 0.0 {
        Ok(())
    } else {
        Err(Error::InvalidParameter {
            name,
            value,
            expected: "a positive, finite value",
        })
    }
}

/// `Err` unless `value` is non-negative and finite.
fn non_negative(name: &'static str, value: f64) -> Result<()> {
    if value.is_finite() && value >= 0.0 {
        Ok(())
    } else {
        Err(Error::InvalidParameter {
            name,
            value,
            expected: "a non-negative, finite value",
        })
    }
}

/// `Err` unless `value` is finite.
fn finite(name: &'static str, value: f64) -> Result<()> {
    if value.is_finite() {
        Ok(())
    } else {
        Err(Error::InvalidParameter {
            name,
            value,
            expected: "a finite value",
        })
    }
}

/// A square sparse matrix of size `n` from `(row, column, value)` entries.
fn sparse(n: usize, entries: &[(usize, usize, f64)]) -> CsMat<f64> {
    let mut t = TriMat::new((n, n));
    for &(i, j, v) in entries {
        t.add_triplet(i, j, v);
    }
    t.to_csr()
}

/// `sin(x) / x`, 1 at 0.
fn sinc(x: f64) -> f64 {
    if x == 0.0 { 1.0 } else { x.sin() / x }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Names are unique, every problem validates, builds a model whose size matches its state and
    /// whose observed DOF exists, starts where its exact solution starts, and states its source.
    #[test]
    fn the_standard_set_is_consistent() {
        let problems = all();
        let mut names: Vec<&str> = problems.iter().map(|p| p.name()).collect();
        names.sort_unstable();
        let n = names.len();
        names.dedup();
        assert_eq!(names.len(), n, "duplicate names: {names:?}");
        for p in &problems {
            p.validate().unwrap();
            let model = p.model().unwrap();
            let s = p.initial_state();
            assert_eq!(model.dofs(), s.dofs(), "{}", p.name());
            assert!(p.observed_dof() < s.dofs(), "{}", p.name());
            let d = p.observed_dof();
            assert!((p.exact(0.0) - s.u[d]).abs() < 1e-12, "{}", p.name());
            assert!(
                (p.exact_velocity(0.0) - s.v[d]).abs() < 1e-12,
                "{}",
                p.name()
            );
            assert!(p.t_end() > 0.0 && p.t_end().is_finite(), "{}", p.name());
            assert!(!p.source().is_empty() && !p.description().is_empty());
            let w = p.natural_frequencies();
            assert!(w.windows(2).all(|x| x[0] <= x[1]), "{}: {w:?}", p.name());
            assert!(w.iter().all(|x| x.is_finite() && *x > 0.0), "{}", p.name());
        }
        assert!(smooth().len() < n);
        assert!(smooth().iter().all(|p| p.is_smooth()));
    }

    #[test]
    fn sinc_is_one_at_zero_and_accurate_near_it() {
        assert_eq!(sinc(0.0), 1.0);
        assert!((sinc(1e-9) - 1.0).abs() < 1e-16);
        assert!((sinc(std::f64::consts::PI)).abs() < 1e-16);
    }
}
