//! Checks and set-up shared by the integrators: the model and the starting state are validated
//! the same way whichever scheme steps them.

use crate::error::{Error, ModelError, Result};
use crate::linalg::{CsrMatrix, Execution};
use crate::model::{Damping, Model, Motion};
use crate::state::State;
use crate::validate::{check_finite, check_len};

/// What every integrator needs to know about a model before its first step.
pub(crate) struct Setup {
    /// DOF count.
    pub n: usize,
    /// `true` at constrained DOFs.
    pub mask: Vec<bool>,
    /// The constrained DOFs and their motions, in the model's order.
    pub constraints: Vec<(usize, Motion)>,
    /// The model's damping (Rayleigh coefficients checked, a matrix checked for size and copied).
    pub damping: DampingModel,
    /// Names of the extra force contributions.
    pub extra_names: Vec<String>,
}

/// The model's [`Damping`] as an integrator keeps it (a matrix copied once, at creation).
#[derive(Debug, Clone)]
pub(crate) enum DampingModel {
    /// No viscous damping.
    None,
    /// `C = a0 M + a1 K`.
    Rayleigh { a0: f64, a1: f64 },
    /// A constant matrix.
    Matrix(CsrMatrix),
    /// The model's own force.
    Force,
}

impl DampingModel {
    /// Modal damping ratio at `omega`, as [`Damping::ratio_at`].
    pub(crate) fn ratio_at(&self, omega: f64) -> Option<f64> {
        match *self {
            DampingModel::None => Damping::None.ratio_at(omega),
            DampingModel::Rayleigh { a0, a1 } => Damping::Rayleigh { a0, a1 }.ratio_at(omega),
            DampingModel::Matrix(_) | DampingModel::Force => None,
        }
    }

    /// The damping matrix, for [`DampingModel::Matrix`].
    pub(crate) fn matrix(&self) -> Option<&CsrMatrix> {
        match self {
            DampingModel::Matrix(c) => Some(c),
            _ => None,
        }
    }

    /// True unless [`DampingModel::None`].
    pub(crate) fn is_damped(&self) -> bool {
        !matches!(self, DampingModel::None)
    }
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
    let damping = match model.damping() {
        Damping::None => DampingModel::None,
        Damping::Rayleigh { a0, a1 } => {
            crate::validate::check_rayleigh(a0, a1)?;
            DampingModel::Rayleigh { a0, a1 }
        }
        Damping::Matrix(c) => {
            check_len("damping matrix rows", n, c.nrows())?;
            check_len("damping matrix columns", n, c.ncols())?;
            DampingModel::Matrix(c.clone())
        }
        Damping::Force => DampingModel::Force,
    };
    Ok(Setup {
        n,
        mask,
        constraints,
        damping,
        extra_names: model.extra_force_names(),
    })
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

/// The internal energy held at the start, for the growth guard's energy budget: the model's
/// [`stored_energy`](Model::stored_energy) when it gives one; otherwise the work of the internal
/// forces along the straight path from the undeformed state to `u` (at rest, time `t`),
/// `W = int_0^1 f_int(s u) . u ds`, by Simpson's rule on `s = 0, 1/2, 1` (exact for forces up to
/// cubic in `u`; for a path-dependent model an estimate of the right size, which is all a guard
/// scaled by a factor of 10 needs). Without it a model released from a deformed shape that does
/// not give its stored energy starts with no energy "put in": the guard then stays off (an
/// unstable run goes on to overflow), or a tiny load's work becomes the whole budget and a
/// stable release is stopped as unstable. Falls back to `|f_int(u) . u| / 2` when the model
/// cannot evaluate the intermediate states, and to 0 when it cannot evaluate `u` either. Called
/// once per integrator, at its creation.
pub(crate) fn start_internal_energy<M: Model + ?Sized>(
    model: &mut M,
    t: f64,
    u: &[f64],
    execution: &Execution,
) -> f64 {
    if let Some(e) = model.stored_energy(u) {
        return e;
    }
    // Global, so that every process takes the same branch.
    if execution
        .reduce
        .max(u.iter().fold(0.0, |m: f64, x| m.max(x.abs())))
        == 0.0
    {
        return 0.0;
    }
    let n = u.len();
    let zero = vec![0.0; n];
    let mut f = vec![0.0; n];
    let mut us = vec![0.0; n];
    let mut work_at = |s: f64, model: &mut M| -> Option<f64> {
        for (a, b) in us.iter_mut().zip(u) {
            *a = s * b;
        }
        model.internal_force(t, &us, &zero, &mut f).ok()?;
        let w = crate::linalg::dot(&f, u, execution);
        w.is_finite().then_some(w)
    };
    let at_end = work_at(1.0, model);
    match (work_at(0.0, model), work_at(0.5, model), at_end) {
        (Some(w0), Some(wh), Some(w1)) => (w0 + 4.0 * wh + w1) / 6.0,
        (_, _, Some(w1)) => 0.5 * w1.abs(),
        _ => 0.0,
    }
}
