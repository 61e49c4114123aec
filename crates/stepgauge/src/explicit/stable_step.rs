//! The stable step of the central-difference method.
//!
//! The central-difference method on a lumped (diagonal) mass `M` is conditionally stable. Without
//! damping the limit is
//!
//! ```text
//! dt <= dt_crit = 2 / omega_max,     omega_max^2 = lambda_max(M^-1 K)
//! ```
//!
//! where `lambda_max(M^-1 K)` equals the largest eigenvalue of the symmetric matrix
//! `D^-1/2 K D^-1/2`, `D = diag(M)`, on the subspace of free (unconstrained) DOFs. With a modal
//! damping ratio `xi` at `omega_max` and the damping force taken at the lagged half-step velocity,
//! the limit shrinks to
//!
//! ```text
//! dt <= (2 / omega_max) (sqrt(1 + xi^2) - xi).
//! ```
//!
//! This module gives three ways to the limit:
//!
//! * [`element_stable_step`]: the classical `min_e L_e / c_e` over elements (the model computes
//!   lengths and wave speeds; [`Model::element_stable_step`] hands the result over);
//! * [`omega_max_gershgorin`]: a cheap, guaranteed upper bound on `omega_max` from an assembled
//!   stiffness matrix (so a guaranteed *lower* bound on the stable step);
//! * [`omega_max_lanczos`]: an accurate estimate of `omega_max` from stiffness products alone, by a
//!   thick-restart Lanczos process with full reorthogonalisation.
//!
//! [`estimate`] ties them to a [`Model`]: the element step when the model gives one, otherwise
//! Lanczos on [`Model::stiffness_product`], or on central finite differences of
//! [`Model::internal_force`] when the model has no stiffness product.
//!
//! Note that a Lanczos Ritz value never exceeds the true `lambda_max` (it is a Rayleigh quotient),
//! so the Lanczos `omega_max` is approximated from below and the resulting step from above. The
//! estimate therefore also gives an upper bound, [`OmegaMaxEstimate::lambda_upper`] (see
//! [`lanczos_margin`]), and [`StableStep::dt_limit_damped`], the step the integrator refuses to
//! exceed, rests on an upper bound (that one, Gershgorin's, or the model's element step), never on
//! the estimate itself.

use crate::error::{Error, ModelError, Result};
pub use crate::linalg::lanczos::{
    EigenOptions, LANCZOS_FAILURE, LANCZOS_MARGIN_TARGET, OmegaMaxEstimate, lanczos_margin,
    omega_max_lanczos,
};
use crate::linalg::lanczos::{inverse_sqrt_mass, lanczos};
use crate::linalg::{CsrMatrix, Execution};
use crate::model::Model;
use crate::state::State;
use crate::validate::{check_finite, check_len};

/// The default fraction of the estimated critical step that a run uses: `0.9`.
///
/// Common practice in explicit dynamics codes is to run at 0.67 to 0.95 of the estimated limit.
/// The margin covers three things:
///
/// * the error of the estimate itself: a Lanczos estimate of `omega_max` converges from below, so
///   the step derived from it is slightly too large (the recommended step is also capped at the
///   enforced limit [`StableStep::dt_limit_damped`]), and element formulas `L / c` are only
///   approximations of `2 / omega_max` for distorted or higher-order elements;
/// * stiffening of nonlinear models between two estimates (the limit is recomputed only every so
///   many steps, while contact, hardening or large deformation can raise `omega_max` meanwhile);
/// * damping that the estimate does not account for (a damping matrix or a damping force of
///   unknown type, [`Damping::Matrix`](crate::model::Damping::Matrix) and
///   [`Damping::Force`](crate::model::Damping::Force)), which lowers the limit by the factor
///   `sqrt(1 + xi^2) - xi ~ 1 - xi` for small `xi`.
///
/// A 10 % margin covers a few percent of each, and costs only about 11 % more steps than running
/// at the limit.
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6
/// (the critical step is multiplied by a reduction factor below 1 in practice).
pub const DEFAULT_SAFETY: f64 = 0.9;

/// Relative distance below a Gershgorin upper bound `g` on `lambda_max` at which a Lanczos Ritz
/// value `theta <= lambda_max` settles the estimate for a linear model ([`estimate`]): then
/// `lambda_max` lies in `[(1 - 1e-3) g, g]` and `g` is used, so `omega_max` is over-estimated by
/// at most 0.05 % and the step is never above the true limit (up to rounding). The value is
/// chosen against [`DEFAULT_SAFETY`] (a 10 % margin): a 0.05 % loss of step is negligible.
pub const GERSHGORIN_MATCH: f64 = 1e-3;

/// Critical step of the central-difference method for the highest circular frequency
/// `omega_max` and the modal damping ratio `xi` at that frequency:
///
/// ```text
/// dt_crit = (2 / omega_max) (sqrt(1 + xi^2) - xi) = (2 / omega_max) / (sqrt(1 + xi^2) + xi)
/// ```
///
/// The second form, which is the one evaluated, is free of cancellation for large `xi`
/// (`sqrt(1 + xi^2)` is evaluated with [`f64::hypot`], so it does not overflow either). With
/// `xi = 0` it is the undamped limit `2 / omega_max`; `omega_max = 0` (nothing can vibrate)
/// gives `f64::INFINITY`.
///
/// # Errors
/// [`Error::InvalidParameter`] when `omega_max` or `xi` is negative or not finite.
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6
/// (stability of the central-difference method, with and without damping).
pub fn critical_step(omega_max: f64, xi: f64) -> Result<f64> {
    if !(omega_max.is_finite() && omega_max >= 0.0) {
        return Err(Error::InvalidParameter {
            name: "omega_max",
            value: omega_max,
            expected: "a non-negative, finite circular frequency",
        });
    }
    if !(xi.is_finite() && xi >= 0.0) {
        return Err(Error::InvalidParameter {
            name: "xi",
            value: xi,
            expected: "a non-negative, finite damping ratio",
        });
    }
    if omega_max == 0.0 {
        return Ok(f64::INFINITY);
    }
    Ok(2.0 / omega_max / (1.0_f64.hypot(xi) + xi))
}

/// The element estimate of the stable step, `min_e L_e / c_e`, over elements with characteristic
/// lengths `lengths` and dilatational wave speeds `speeds` (the time a wave needs to cross the
/// smallest element).
///
/// # Errors
/// * [`Error::DimensionMismatch`] when `speeds` and `lengths` differ in length;
/// * [`Error::InvalidParameter`] (`name` `"element count"`) when there is no element;
/// * [`Error::NonFiniteInput`] naming the first non-finite entry (NaN or infinity);
/// * [`Error::InvalidParameter`] (`name` `"element length"` or `"element wave speed"`) for an
///   entry that is zero or negative.
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6
/// (the element eigenvalue inequality and the Courant condition `dt <= L_e / c_e`).
pub fn element_stable_step(lengths: &[f64], speeds: &[f64]) -> Result<f64> {
    check_len("element wave speeds", lengths.len(), speeds.len())?;
    if lengths.is_empty() {
        return Err(Error::InvalidParameter {
            name: "element count",
            value: 0.0,
            expected: "at least one element (one length and one wave speed)",
        });
    }
    check_finite("element lengths", lengths)?;
    check_finite("element wave speeds", speeds)?;
    let mut dt = f64::INFINITY;
    for (&l, &c) in lengths.iter().zip(speeds) {
        if l <= 0.0 {
            return Err(Error::InvalidParameter {
                name: "element length",
                value: l,
                expected: "a positive characteristic length",
            });
        }
        if c <= 0.0 {
            return Err(Error::InvalidParameter {
                name: "element wave speed",
                value: c,
                expected: "a positive wave speed",
            });
        }
        dt = dt.min(l / c);
    }
    Ok(dt)
}

/// A guaranteed upper bound on `omega_max` from the assembled stiffness `k`, the lumped `mass` and
/// the optional mask of `constrained` DOFs (`true` = constrained; such rows and columns are left
/// out, and their mass may be zero).
///
/// Two Gershgorin bounds on `lambda_max` are formed over the free rows and columns: on the
/// symmetric scaling `D^-1/2 K D^-1/2` and on `M^-1 K` (the two matrices are similar, so both
/// bound the same eigenvalues). Each is the largest right end of a Gershgorin disc:
///
/// ```text
/// b_sym = max_i ( K_ii / m_i + sum_{j != i} |K_ij| / sqrt(m_i m_j) )
/// b_inv = max_i ( K_ii / m_i + sum_{j != i} |K_ij| / m_i )
/// omega_max <= sqrt(max(0, min(b_sym, b_inv)))
/// ```
///
/// (with `K_ii >= 0`, the usual case, these are `max_i sum_j |K_ij| / sqrt(m_i m_j)` and
/// `max_i sum_j |K_ij| / m_i`). The step `2 / bound` is therefore always stable for the
/// undamped scheme, at the price of being pessimistic (for the uniform spring chain the bound is
/// `sqrt(4 k / m)`, the limit of the exact value for many masses). With no free DOF the result
/// is `0`.
///
/// # Errors
/// * [`Error::EmptyModel`] for an empty `mass`;
/// * [`Error::DimensionMismatch`] when `k` is not `n x n` or the mask does not have `n` entries;
/// * [`Error::NonFiniteInput`] for a non-finite stored entry of `k`;
/// * [`Error::NonPositiveMass`] for a zero, negative or non-finite mass on a free DOF.
///
/// # Reference
/// Gershgorin circle theorem (S. Gershgorin, 1931; e.g. Golub & Van Loan, *Matrix Computations*,
/// 4th ed., § 7.2).
pub fn omega_max_gershgorin(
    k: &CsrMatrix,
    mass: &[f64],
    constrained: Option<&[bool]>,
) -> Result<f64> {
    let n = mass.len();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    check_len("stiffness matrix rows", n, k.nrows())?;
    check_len("stiffness matrix columns", n, k.ncols())?;
    // The checked constructors keep entries finite, but `from_diagonal` and `data_mut` do not,
    // and `f64::max` below would drop a NaN bound silently.
    check_finite("stiffness matrix", k.data())?;
    let scale = inverse_sqrt_mass(mass, constrained)?;
    let mut b_sym = f64::NEG_INFINITY;
    let mut b_inv = f64::NEG_INFINITY;
    for i in (0..n).filter(|&i| scale[i] > 0.0) {
        let inv_m = 1.0 / mass[i];
        let (mut diag, mut r_sym, mut r_inv) = (0.0, 0.0, 0.0);
        for (j, v) in k.row(i) {
            if scale[j] == 0.0 {
                continue;
            }
            if j == i {
                diag += v * inv_m;
            } else {
                r_sym += v.abs() * scale[i] * scale[j];
                r_inv += v.abs() * inv_m;
            }
        }
        b_sym = b_sym.max(diag + r_sym);
        b_inv = b_inv.max(diag + r_inv);
    }
    if b_sym == f64::NEG_INFINITY {
        // No free DOF.
        return Ok(0.0);
    }
    Ok(b_sym.min(b_inv).max(0.0).sqrt())
}

/// Which way a [`StableStep`] was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StableStepMethod {
    /// From the model's element estimate ([`Model::element_stable_step`]).
    Elements,
    /// Lanczos on the model's stiffness product ([`Model::stiffness_product`]).
    Lanczos,
    /// A linear model's Gershgorin bound ([`omega_max_gershgorin`] on its assembled stiffness),
    /// confirmed by a Lanczos Ritz value within [`GERSHGORIN_MATCH`] below it: `omega_max` is a
    /// guaranteed upper bound, at most 0.05 % above the true value.
    LanczosGershgorin,
    /// Lanczos on central finite differences of the model's internal force (the model has no
    /// stiffness product).
    FiniteDifferenceLanczos,
}

/// The stable step of the central-difference method for a model in a given state.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StableStep {
    /// The highest circular frequency, when it was computed (`None` for the element estimate).
    pub omega_max: Option<f64>,
    /// The modal damping ratio at `omega_max`, when the model's damping determines it.
    pub xi: Option<f64>,
    /// The undamped critical step `2 / omega_max`, or the element step (`f64::INFINITY` when
    /// nothing can vibrate: no free DOF, or no stiffness on them).
    pub dt_critical: f64,
    /// The damped limit `(2 / omega_max) (sqrt(1 + xi^2) - xi)` when `xi` is known and positive
    /// (the limit with the damping force at the lagged half-step velocity); otherwise equal to
    /// `dt_critical`. [`CentralDifference`](crate::explicit::CentralDifference) replaces it by the
    /// limit of its own treatment ([`ForceVelocity`](crate::params::ForceVelocity)) and applies
    /// the damping of an element estimate at `omega = 2 / dt`.
    pub dt_critical_damped: f64,
    /// An upper bound on the highest circular frequency, when one was computed: Gershgorin's
    /// bound for [`StableStepMethod::LanczosGershgorin`] (guaranteed), the Lanczos estimate's
    /// [`OmegaMaxEstimate::lambda_upper`] (capped by Gershgorin's bound for a linear model)
    /// otherwise, with a margin of `1e-6` for finite-difference products.
    pub omega_max_upper: Option<f64>,
    /// The step limit this estimate vouches for, undamped: `2 / omega_max_upper`, or the element
    /// step. As sure as its upper bound: certain for Gershgorin's; for the Lanczos bound, missed
    /// only with a probability of about `1e-9` under the assumptions stated at
    /// [`OmegaMaxEstimate::lambda_upper`]; for an element step, a bound for two-node bars with
    /// lumped mass and as good as the model's element formula otherwise.
    pub dt_limit: f64,
    /// The same with the damping ratio at `omega_max_upper` (lagged damping velocity, as
    /// `dt_critical_damped`): the step above which
    /// [`CentralDifference`](crate::explicit::CentralDifference) refuses to go.
    pub dt_limit_damped: f64,
    /// How the estimate was made.
    pub method: StableStepMethod,
}

impl StableStep {
    /// The step to use with the safety fraction `safety` (for example [`DEFAULT_SAFETY`]):
    /// `safety * dt_critical_damped`, and never above `dt_limit_damped`.
    ///
    /// The damped limit is used because the explicit scheme takes the damping force at the lagged
    /// half-step velocity, which lowers the stability limit below `2 / omega_max`.
    ///
    /// # Reference
    /// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*,
    /// ch. 6.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for a safety fraction outside `(0, 1]`.
    pub fn recommended(&self, safety: f64) -> Result<f64> {
        crate::validate::check_safety(safety)?;
        Ok((safety * self.dt_critical_damped).min(self.dt_limit_damped))
    }
}

/// Settings of [`estimate`].
///
/// New fields may be added in later versions: start from `StableStepOptions::default()` and set
/// fields.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub struct StableStepOptions {
    /// Settings of the Lanczos estimate.
    pub eigen: EigenOptions,
    /// Use the model's element estimate when it gives one. Default `true`.
    pub prefer_elements: bool,
    /// For a linear model, take the Gershgorin bound as `omega_max^2` once a Lanczos Ritz value
    /// is within [`GERSHGORIN_MATCH`] below it ([`StableStepMethod::LanczosGershgorin`]: a
    /// guaranteed upper bound, found in far fewer products). Default `true`; set `false` when
    /// `omega_max` itself is wanted to the Lanczos tolerance (a frequency report).
    pub accept_gershgorin: bool,
}

impl Default for StableStepOptions {
    fn default() -> Self {
        StableStepOptions {
            eigen: EigenOptions::default(),
            prefer_elements: true,
            accept_gershgorin: true,
        }
    }
}

/// The stable step of the central-difference method for `model` in `state`.
///
/// 1. When `options.prefer_elements` and [`Model::element_stable_step`] gives a step, that step
///    ([`StableStepMethod::Elements`]; no frequency, no damping correction).
/// 2. Otherwise `omega_max` by [`omega_max_lanczos`] on the model's lumped mass and constraints,
///    with products `K x` from [`Model::stiffness_product`] at `(state.t, state.u)`
///    ([`StableStepMethod::Lanczos`]).
/// 3. When the model does not provide the stiffness product ([`ModelError::NotProvided`]), the
///    products are central finite differences of the internal force around `state.u` at velocity
///    `state.v` ([`StableStepMethod::FiniteDifferenceLanczos`]):
///
///    ```text
///    K x ~ (f_int(u + h x) - f_int(u - h x)) / (2 h),   h = sqrt(eps) (1 + max|u|) / max|x|
///    ```
///
///    (two internal-force evaluations per product, into buffers allocated once).
///
/// The damping ratio is `model.damping().ratio_at(omega_max)` (for `omega_max > 0`); the damped
/// limit is [`critical_step`]`(omega_max, xi)`. The step to use follows from a safety fraction
/// ([`StableStep::recommended`]); the time loop takes its fraction from
/// [`StepControl::Auto`](crate::run::StepControl::Auto), the only one it applies.
///
/// Global sums and maxima (Lanczos's dot products, Gershgorin's bound, the probe's largest
/// displacement) go through `execution.reduce`.
///
/// # Errors
/// * [`Error::EmptyModel`], [`Error::DimensionMismatch`] (state of the wrong size),
///   [`Error::NonFiniteInput`] (non-finite state, its time included);
/// * [`Error::InvalidParameter`] for an element step that is not positive and finite, invalid
///   [`EigenOptions`], or a negative damping ratio at `omega_max`;
/// * constraint errors of [`Constraints::validate`](crate::model::Constraints::validate);
///   [`Error::NonPositiveMass`] for a free DOF without positive mass;
/// * [`Error::Model`] (with `state.step` and `state.t`) when the model fails;
/// * the errors of [`omega_max_lanczos`], in particular [`Error::EigenNotConverged`].
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6.
pub fn estimate<M: Model + ?Sized>(
    model: &mut M,
    state: &State,
    options: &StableStepOptions,
    execution: &Execution,
) -> Result<StableStep> {
    let n = model.dofs();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    check_len("state displacement", n, state.u.len())?;
    check_len("state velocity", n, state.v.len())?;
    check_finite("state time", &[state.t])?;
    check_finite("state displacement", &state.u)?;
    check_finite("state velocity", &state.v)?;
    let (t, step) = (state.t, state.step);

    if options.prefer_elements
        && let Some(dt) = model.element_stable_step(t, &state.u)
    {
        // The smallest over all processes (each holds its own elements).
        let dt = execution.reduce.min(dt);
        if !(dt.is_finite() && dt > 0.0) {
            return Err(Error::InvalidParameter {
                name: "element stable step",
                value: dt,
                expected: "a positive, finite step from Model::element_stable_step",
            });
        }
        return Ok(StableStep {
            omega_max: None,
            xi: None,
            dt_critical: dt,
            dt_critical_damped: dt,
            omega_max_upper: None,
            dt_limit: dt,
            dt_limit_damped: dt,
            method: StableStepMethod::Elements,
        });
    }

    let mask = model.constraints().validate(n)?;
    let mut mass = vec![0.0; n];
    model.lumped_mass(&mut mass);
    let wrap = |source: ModelError| Error::Model { step, t, source };

    // For a linear model, Gershgorin's bound on the assembled stiffness is a guaranteed upper
    // bound `g` on lambda_max; once the Lanczos Ritz value (a lower bound) is within
    // GERSHGORIN_MATCH of it, `g` itself is taken.
    let upper = if options.accept_gershgorin && model.hints().linearity.is_linear() {
        gershgorin_lambda(model, &mass, &mask, execution)
    } else {
        None
    };
    let accept_at = upper.map_or(f64::INFINITY, |g| (1.0 - GERSHGORIN_MATCH) * g);
    let mut not_provided = false;
    let first = lanczos(
        &mass,
        Some(&mask),
        |x, out| match model.stiffness_product(t, &state.u, x, out) {
            Ok(()) => Ok(()),
            Err(ModelError::NotProvided(what)) => {
                not_provided = true;
                Err(wrap(ModelError::NotProvided(what)))
            }
            Err(e) => Err(wrap(e)),
        },
        &options.eigen,
        execution,
        accept_at,
    );
    let (found, method) = match first {
        Ok(found) => (found, StableStepMethod::Lanczos),
        Err(_) if not_provided => {
            let u = &state.u;
            let v = &state.v;
            let u_max = execution
                .reduce
                .max(u.iter().fold(0.0_f64, |a, &b| a.max(b.abs())));
            let mut probe = vec![0.0; n];
            let mut f_plus = vec![0.0; n];
            let found = omega_max_lanczos(
                &mass,
                Some(&mask),
                |x, out| {
                    let x_max = execution
                        .reduce
                        .max(x.iter().fold(0.0_f64, |a, &b| a.max(b.abs())));
                    if x_max == 0.0 {
                        out.fill(0.0);
                        return Ok(());
                    }
                    let h = f64::EPSILON.sqrt() * (1.0 + u_max) / x_max;
                    for ((p, &ui), &xi) in probe.iter_mut().zip(u).zip(x) {
                        *p = ui + h * xi;
                    }
                    model
                        .internal_force(t, &probe, v, &mut f_plus)
                        .map_err(wrap)?;
                    for ((p, &ui), &xi) in probe.iter_mut().zip(u).zip(x) {
                        *p = ui - h * xi;
                    }
                    model.internal_force(t, &probe, v, out).map_err(wrap)?;
                    let inv = 0.5 / h;
                    for (o, &fp) in out.iter_mut().zip(&f_plus) {
                        *o = (fp - *o) * inv;
                    }
                    Ok(())
                },
                &options.eigen,
                execution,
            )?;
            (found, StableStepMethod::FiniteDifferenceLanczos)
        }
        Err(e) => return Err(e),
    };

    let (omega, method, lambda_upper) = match upper {
        Some(g) if found.lambda_max >= accept_at => {
            (g.sqrt(), StableStepMethod::LanczosGershgorin, g)
        }
        _ => {
            // Finite-difference products carry a relative error of about sqrt(eps); the
            // margin covers it.
            let fd = if method == StableStepMethod::FiniteDifferenceLanczos {
                1.0 + 1e-6
            } else {
                1.0
            };
            let bound = (found.lambda_upper * fd).min(upper.unwrap_or(f64::INFINITY));
            (found.omega_max, method, bound)
        }
    };
    let damping = model.damping();
    let damped = |w: f64| -> Result<f64> {
        let xi = if w > 0.0 { damping.ratio_at(w) } else { None };
        match xi {
            Some(xi) => critical_step(w, xi),
            None => critical_step(w, 0.0),
        }
    };
    let xi = if omega > 0.0 {
        damping.ratio_at(omega)
    } else {
        None
    };
    let dt_critical = critical_step(omega, 0.0)?;
    let dt_critical_damped = damped(omega)?;
    let omega_upper = lambda_upper.max(0.0).sqrt();
    let (dt_limit, dt_limit_damped) = if omega_upper.is_finite() {
        (critical_step(omega_upper, 0.0)?, damped(omega_upper)?)
    } else {
        (0.0, 0.0)
    };
    Ok(StableStep {
        omega_max: Some(omega),
        xi,
        dt_critical,
        dt_critical_damped,
        omega_max_upper: Some(omega_upper),
        dt_limit,
        dt_limit_damped,
        method,
    })
}

/// Gershgorin's upper bound on `lambda_max(M^-1 K)` over the free DOFs for a linear model that
/// hands over its stiffness matrix ([`Linearity::Stiffness`](crate::model::Linearity::Stiffness)
/// in its hints; `None` otherwise).
fn gershgorin_lambda<M: Model + ?Sized>(
    model: &M,
    mass: &[f64],
    mask: &[bool],
    execution: &Execution,
) -> Option<f64> {
    let k = model.hints().stiffness_of_size(mass.len())?;
    // The largest row bound of this process's rows, then over all processes.
    let omega = execution
        .reduce
        .max(omega_max_gershgorin(k, mass, Some(mask)).ok()?);
    // omega^2 may round below the bound it came from by an ulp or two: step it up.
    let g = omega * omega * (1.0 + 4.0 * f64::EPSILON);
    (g.is_finite() && g > 0.0).then_some(g)
}

#[cfg(test)]
mod tests;
