//! The checks of inputs shared by the integrators, the models and the files: lengths, finite
//! values, masses, guard settings and steps. Each returns the typed error a user sees.

use crate::error::{Error, Result};

/// Returns an error naming the first non-finite entry of `x`.
pub(crate) fn check_finite(what: &'static str, x: &[f64]) -> Result<()> {
    match x.iter().position(|v| !v.is_finite()) {
        Some(index) => Err(Error::NonFiniteInput {
            what,
            index,
            value: x[index],
        }),
        None => Ok(()),
    }
}

/// Returns an error when `found != expected`.
pub(crate) fn check_len(what: &'static str, expected: usize, found: usize) -> Result<()> {
    if expected == found {
        Ok(())
    } else {
        Err(Error::DimensionMismatch {
            what,
            expected,
            found,
        })
    }
}

/// Checks a lumped mass: positive and finite on free DOFs, non-negative and finite on
/// constrained ones.
pub(crate) fn check_lumped_mass(mass: &[f64], mask: &[bool]) -> Result<()> {
    for (i, (&m, &fixed)) in mass.iter().zip(mask).enumerate() {
        let ok = m.is_finite() && if fixed { m >= 0.0 } else { m > 0.0 };
        if !ok {
            return Err(Error::NonPositiveMass { dof: i, value: m });
        }
    }
    Ok(())
}

/// Checks the growth-guard factor of the options.
pub(crate) fn check_growth_limit(limit: f64) -> Result<()> {
    if limit.is_nan() || limit <= 0.0 {
        return Err(Error::InvalidParameter {
            name: "growth_limit",
            value: limit,
            expected: "a positive factor (infinity disables the guard)",
        });
    }
    Ok(())
}

/// Checks that a step of size `dt` (already known positive and finite) from time `t` can be
/// taken: `t` finite (the state's fields are public, so it may have been set to NaN or infinity
/// since the start) and `t + dt > t` in floating point. A step below the rounding of `t` would
/// move the state without advancing its time, and a loop stepping to an end time would never end.
pub(crate) fn check_step_advances(t: f64, dt: f64) -> Result<()> {
    check_finite("state time", &[t])?;
    if t + dt > t {
        Ok(())
    } else {
        Err(Error::InvalidParameter {
            name: "dt",
            value: dt,
            expected: "a step above the rounding of the state's time (t + dt must differ from t)",
        })
    }
}

/// `Ok` when both Rayleigh coefficients (`C = a0 M + a1 K`) are non-negative and finite.
///
/// # Errors
/// [`Error::InvalidParameter`] naming the coefficient.
pub(crate) fn check_rayleigh(a0: f64, a1: f64) -> Result<()> {
    for (name, v) in [("a0", a0), ("a1", a1)] {
        if !(v.is_finite() && v >= 0.0) {
            return Err(Error::InvalidParameter {
                name,
                value: v,
                expected: "a non-negative, finite Rayleigh coefficient",
            });
        }
    }
    Ok(())
}

/// Checks a safety fraction of the critical step: finite, in `(0, 1]`.
///
/// # Errors
/// [`Error::InvalidParameter`] (named `safety`) otherwise.
pub(crate) fn check_safety(safety: f64) -> Result<()> {
    if safety.is_finite() && safety > 0.0 && safety <= 1.0 {
        Ok(())
    } else {
        Err(Error::InvalidParameter {
            name: "safety",
            value: safety,
            expected: "a fraction of the critical step in (0, 1], for example 0.9",
        })
    }
}
