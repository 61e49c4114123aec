//! Checks and set-up shared by the integrators: the model and the starting state are validated
//! the same way whichever scheme steps them.

use crate::error::{Error, ModelError, Result};
use crate::model::{Damping, Model, Motion};
use crate::state::{State, check_finite, check_len};

/// What every integrator needs to know about a model before its first step.
pub(crate) struct Setup {
    /// DOF count.
    pub n: usize,
    /// `true` at constrained DOFs.
    pub mask: Vec<bool>,
    /// The constrained DOFs and their motions, in the model's order.
    pub constraints: Vec<(usize, Motion)>,
    /// The model's damping (Rayleigh coefficients checked).
    pub damping: Damping,
    /// Names of the extra force contributions.
    pub extra_names: Vec<String>,
}

/// Validates the model's size, constraints and damping and the state's sizes and values.
pub(crate) fn setup<M: Model + ?Sized>(model: &M, state: &State) -> Result<Setup> {
    let n = model.dofs();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    check_len("state displacement", n, state.u.len())?;
    check_len("state velocity", n, state.v.len())?;
    check_len("state acceleration", n, state.a.len())?;
    check_finite("time", &[state.t])?;
    check_finite("displacement", &state.u)?;
    check_finite("velocity", &state.v)?;
    let mask = model.constraints().validate(n)?;
    let constraints = model
        .constraints()
        .as_slice()
        .iter()
        .map(|c| (c.dof, c.motion.clone()))
        .collect();
    let damping = model.damping();
    if let Damping::Rayleigh { a0, a1 } = damping {
        for (name, v) in [("a0", a0), ("a1", a1)] {
            if !(v.is_finite() && v >= 0.0) {
                return Err(Error::InvalidParameter {
                    name,
                    value: v,
                    expected: "a non-negative, finite Rayleigh coefficient",
                });
            }
        }
    }
    Ok(Setup {
        n,
        mask,
        constraints,
        damping,
        extra_names: model.extra_force_names(),
    })
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

/// A copy of `state` with the constraints applied at its time: `v = a = 0` at fixed DOFs,
/// `u = g(t)`, `v = g'(t)`, `a = g''(t)` at prescribed-displacement DOFs, and `v = h(t)`,
/// `a = h'(t)` at prescribed-velocity DOFs (the rates of [`TimeFunction::rates`]).
///
/// [`TimeFunction::rates`]: crate::model::TimeFunction::rates
pub(crate) fn constrained_start(constraints: &[(usize, Motion)], state: &State) -> Result<State> {
    let mut s = state.clone();
    for (dof, motion) in constraints {
        let d = *dof;
        // The motion's own velocity and acceleration at the start: a prescribed displacement
        // g(t) starts with v = g'(t0) and a = g''(t0) (whatever the state held), so that the
        // scheme's updates of the constrained DOF carry no start error on.
        (s.v[d], s.a[d]) = match motion {
            Motion::Fixed => (0.0, 0.0),
            Motion::Displacement(g) => {
                s.u[d] = g.value(s.t);
                g.rates(s.t)
            }
            Motion::Velocity(h) => (h.value(s.t), h.rates(s.t).0),
        };
    }
    check_finite("constrained initial displacement", &s.u)?;
    check_finite("constrained initial velocity", &s.v)?;
    check_finite("constrained initial acceleration", &s.a)?;
    Ok(s)
}

/// Wraps a model failure with the step and time at which it happened.
pub(crate) fn model_err(step: u64, t: f64) -> impl Fn(ModelError) -> Error {
    move |source| Error::Model { step, t, source }
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
