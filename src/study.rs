//! Runs of a scheme on a reference problem against its exact solution: the scheme's stable limit
//! on the problem, the largest error of the observed DOF over a run, and the order measured from
//! errors at several steps. `stepgauge compare` and the convergence checks of
//! [`verification`](crate::verification) are built on these.
//!
//! ```
//! use stepgauge::explicit::ForceVelocity;
//! use stepgauge::reference::{self, ReferenceProblem};
//! use stepgauge_cli::study;
//! use stepgauge::spectral::Scheme;
//!
//! # fn main() -> stepgauge::Result<()> {
//! let p = reference::SdofFree::standard_undamped(); // omega = 10 rad/s, t_end = 0.6 pi s
//! let scheme = Scheme::CentralDifference(ForceVelocity::Predicted);
//! assert!((study::stable_limit(&p, &scheme)?.unwrap() - 0.2).abs() < 1e-6); // 2 / omega
//! // Errors at the times of a grid of 60 steps of dt0 = pi / 100, stepped with dt0 / 2^l.
//! let dt0 = 0.01 * std::f64::consts::PI;
//! let (mut dts, mut errors) = (Vec::new(), Vec::new());
//! for l in 0..3 {
//!     let stride = 1 << l;
//!     let dt = dt0 / stride as f64;
//!     let run = study::run_scheme(&p, &scheme, dt, 60 * stride, stride, &Default::default())?;
//!     dts.push(dt);
//!     errors.push(run.max_error.unwrap());
//! }
//! let order = study::fitted_order(&dts, &errors).unwrap();
//! assert!((order - 2.0).abs() < 0.1, "{order}");
//! # Ok(())
//! # }
//! ```

use stepgauge::error::Result;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, StableLimit};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions, NewtonOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::Model;
use stepgauge::reference::ReferenceProblem;
use stepgauge::run::Integrator;
use stepgauge::spectral::{CheckContext, Scheme, Stability, check};
use stepgauge::state::State;

/// The default coarse step of a problem: `T_min / 20`, with `T_min` its shortest natural period,
/// or 0.02 s when no frequency is known (the hardening oscillator: 0.02 divides its table's
/// 0.1 s).
pub fn default_dt0(p: &dyn ReferenceProblem) -> f64 {
    match p.natural_frequencies().last() {
        Some(w) => 2.0 * std::f64::consts::PI / w / 20.0,
        None => 0.02,
    }
}

/// A coarse grid: `n0` steps of `dt0` up to `horizon = n0 dt0`. A study steps with
/// `dt0 / 2^l` and compares at the coarse times.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Grid {
    /// The end time of the runs (s).
    pub horizon: f64,
    /// Coarse steps.
    pub n0: usize,
    /// The coarse step (s).
    pub dt0: f64,
}

/// The coarse grid of a smooth problem: `dt0` about [`default_dt0`] (adjusted so that `n0 dt0`
/// is the horizon), the horizon `t_end` or `max_steps` steps of [`default_dt0`], whichever comes
/// first.
pub fn smooth_grid(p: &dyn ReferenceProblem, max_steps: usize) -> Grid {
    let target = default_dt0(p);
    let horizon = p.t_end().min(max_steps as f64 * target);
    let n0 = ((horizon / target) - 1e-9).ceil().max(1.0) as usize;
    Grid {
        horizon,
        n0,
        dt0: horizon / n0 as f64,
    }
}

/// The largest stable step of an explicit or conditionally stable scheme on a problem (`None`:
/// unconditionally stable, or no frequencies known for a conditionally stable implicit scheme).
///
/// The central difference gets the engine's own estimate, with its treatment of damping; a
/// member of the implicit family gets its critical `Omega` (undamped) over the problem's highest
/// natural frequency; an unstable set gets `Some(0.0)`.
///
/// # Errors
/// The problem's model errors, and the estimator's.
pub fn stable_limit(p: &dyn ReferenceProblem, scheme: &Scheme) -> Result<Option<f64>> {
    match scheme {
        Scheme::CentralDifference(fv) => {
            let mut model = p.model()?;
            let mut state = p.initial_state();
            let mut options = CentralDifferenceOptions::default();
            options.stable_limit = StableLimit::Estimate;
            options.force_velocity = *fv;
            let cd = CentralDifference::new(&mut *model, &mut state, options)?;
            Ok(cd.stable_limit())
        }
        Scheme::Alpha(_) => {
            let Some(&w) = p.natural_frequencies().last() else {
                return Ok(None);
            };
            let v = check(scheme, 0.0, &CheckContext::default())?;
            Ok(match v.stability {
                Stability::Conditional { omega_crit, .. } => Some(omega_crit / w),
                Stability::Unconditional => None,
                Stability::Unstable => Some(0.0),
            })
        }
    }
}

/// The outcome of [`run_scheme`].
#[derive(Debug, Clone, PartialEq)]
pub struct Outcome {
    /// The largest error of the observed DOF at the checked times (`None`: no checked time).
    pub max_error: Option<f64>,
    /// The observed DOF at the start and at every `stride`-th step: `(t, u)`.
    pub history: Vec<(f64, f64)>,
}

/// Steps a problem `n` times with `dt` and compares the observed DOF with the exact solution at
/// every `stride`-th step, at the nominal time `i dt` (free of the rounding accumulated in the
/// state's time) and, for a tabulated reference, only where the time is one of its
/// [`tabulated_times`](ReferenceProblem::tabulated_times) (within `1e-9`).
///
/// The central difference runs with its stable-limit guard off (the caller decides which steps to
/// run; see [`stable_limit`]); the implicit family with the sparse Cholesky solver and `newton`
/// (the defaults for `stepgauge compare`).
///
/// # Errors
/// The problem's model errors and the integrator's step errors.
pub fn run_scheme(
    p: &dyn ReferenceProblem,
    scheme: &Scheme,
    dt: f64,
    n: usize,
    stride: usize,
    newton: &NewtonOptions,
) -> Result<Outcome> {
    let mut model = p.model()?;
    let mut state = p.initial_state();
    let stride = stride.max(1);
    match scheme {
        Scheme::CentralDifference(fv) => {
            let mut options = CentralDifferenceOptions::default();
            options.stable_limit = StableLimit::Unchecked;
            options.force_velocity = *fv;
            let mut it = CentralDifference::new(&mut *model, &mut state, options)?;
            walk(&mut it, &mut *model, &mut state, p, dt, n, stride)
        }
        Scheme::Alpha(params) => {
            let mut options = ImplicitOptions::default();
            options.newton = *newton;
            let mut it = AlphaIntegrator::new(
                &mut *model,
                &mut state,
                *params,
                Box::new(SparseCholesky::new()),
                options,
            )?;
            walk(&mut it, &mut *model, &mut state, p, dt, n, stride)
        }
    }
}

fn walk<M: Model + ?Sized, I: Integrator<M>>(
    it: &mut I,
    model: &mut M,
    state: &mut State,
    p: &dyn ReferenceProblem,
    dt: f64,
    n: usize,
    stride: usize,
) -> Result<Outcome> {
    let dof = p.observed_dof();
    let mut err: Option<f64> = None;
    let mut history = vec![(0.0, state.u[dof])];
    for i in 1..=n {
        it.step(model, state, dt)?;
        if i % stride != 0 {
            continue;
        }
        // The nominal time, free of the rounding accumulated in state.t.
        let t = i as f64 * dt;
        history.push((t, state.u[dof]));
        let checked = p
            .tabulated_times()
            .is_none_or(|rows| rows.iter().any(|r| (r - t).abs() < 1e-9));
        if checked {
            let e = (state.u[dof] - p.exact(t)).abs();
            err = Some(err.map_or(e, |m: f64| m.max(e)));
        }
    }
    Ok(Outcome {
        max_error: err,
        history,
    })
}

/// The order measured from errors at several steps: the least-squares slope of `ln(error)`
/// against `ln(dt)` (common practice). `None` with fewer than two points, a non-positive or
/// non-finite step or error, or steps that are all equal.
///
/// ```
/// let dts = [0.1, 0.05, 0.025];
/// let errors = dts.map(|h: f64| 3.0 * h * h);
/// let order = stepgauge_cli::study::fitted_order(&dts, &errors).unwrap();
/// assert!((order - 2.0).abs() < 1e-12);
/// ```
pub fn fitted_order(dts: &[f64], errors: &[f64]) -> Option<f64> {
    if dts.len() != errors.len() || dts.len() < 2 {
        return None;
    }
    let ok = |x: f64| x.is_finite() && x > 0.0;
    if !dts.iter().chain(errors).all(|&x| ok(x)) {
        return None;
    }
    let n = dts.len() as f64;
    let x: Vec<f64> = dts.iter().map(|h| h.ln()).collect();
    let y: Vec<f64> = errors.iter().map(|e| e.ln()).collect();
    let (mx, my) = (x.iter().sum::<f64>() / n, y.iter().sum::<f64>() / n);
    let sxx: f64 = x.iter().map(|a| (a - mx) * (a - mx)).sum();
    let sxy: f64 = x.iter().zip(&y).map(|(a, b)| (a - mx) * (b - my)).sum();
    if sxx <= 0.0 {
        return None;
    }
    Some(sxy / sxx)
}

#[cfg(test)]
mod tests {
    use super::*;
    use stepgauge::explicit::ForceVelocity;
    use stepgauge::params::AlphaParams;
    use stepgauge::reference::{SdofFree, StiffSoft};

    #[test]
    fn fitted_order_recovers_a_power_law_and_rejects_bad_data() {
        let dts = [0.2, 0.1, 0.05, 0.025];
        let e: Vec<f64> = dts.iter().map(|h| 0.7 * h).collect();
        assert!((fitted_order(&dts, &e).unwrap() - 1.0).abs() < 1e-12);
        assert_eq!(fitted_order(&dts[..1], &e[..1]), None);
        assert_eq!(fitted_order(&dts, &e[..3]), None);
        assert_eq!(fitted_order(&[0.1, 0.1], &[1.0, 2.0]), None);
        assert_eq!(fitted_order(&[0.1, 0.05], &[1.0, 0.0]), None);
        assert_eq!(fitted_order(&[0.1, f64::NAN], &[1.0, 0.5]), None);
    }

    /// The central difference's limit is 2 / omega_max (undamped, exact estimate on two DOFs:
    /// common practice), Fox-Goodwin's sqrt(6) / omega_max (Hughes 1987, *The Finite Element
    /// Method*, sec. 9.1), and the trapezoidal rule has none.
    #[test]
    fn stable_limits_on_the_stiff_soft_pair() {
        let p = StiffSoft::standard();
        let w = *p.natural_frequencies().last().unwrap();
        let cd = stable_limit(&p, &Scheme::CentralDifference(ForceVelocity::Lagged))
            .unwrap()
            .unwrap();
        assert!((cd * w / 2.0 - 1.0).abs() < 1e-3, "{}", cd * w);
        let fg = stable_limit(&p, &Scheme::Alpha(AlphaParams::fox_goodwin()))
            .unwrap()
            .unwrap();
        assert!((fg * w / 6f64.sqrt() - 1.0).abs() < 1e-6, "{}", fg * w);
        let aa = Scheme::Alpha(AlphaParams::average_acceleration());
        assert_eq!(stable_limit(&p, &aa).unwrap(), None);
    }

    /// The error is taken only at the table's rows for the hardening oscillator (0.1 s apart):
    /// none within the first 0.09 s, one history point per stride.
    #[test]
    fn run_scheme_checks_only_tabulated_times() {
        let p = crate::problems::hardening();
        let aa = Scheme::Alpha(AlphaParams::average_acceleration());
        let short = run_scheme(&p, &aa, 0.01, 9, 1, &NewtonOptions::default()).unwrap();
        assert_eq!(short.max_error, None);
        assert_eq!(short.history.len(), 10);
        let one = run_scheme(&p, &aa, 0.01, 10, 5, &NewtonOptions::default()).unwrap();
        let e = one.max_error.unwrap();
        assert!(e > 0.0 && e < 1e-3, "{e}");
        assert_eq!(one.history.len(), 3);
        let free = SdofFree::standard_undamped();
        let r = run_scheme(&free, &aa, 0.01, 4, 2, &NewtonOptions::default()).unwrap();
        assert_eq!(r.history[2].0, 0.04);
    }
}
