//! The `truss` example's checks: a Green-strain truss whose undeformed state carries a round-off
//! residual force, stepped from rest with default options (explicit and implicit), and the
//! implicit path's reports when Newton cannot converge or the model's force is not finite.

mod common;
#[path = "../examples/truss/model.rs"]
#[allow(dead_code)]
mod model;

use model::Truss;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::implicit::{AlphaIntegrator, Criterion, ImplicitOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::{Constraints, Model, Tangent};
use stepgauge::params::AlphaParams;
use stepgauge::run::{Flow, RunOptions, StepControl, run};
use stepgauge::{Error, ModelError, State};

fn hht(model: &mut dyn Tangent, s: &mut State) -> AlphaIntegrator {
    let p = AlphaParams::hht(-0.1).unwrap();
    AlphaIntegrator::new(
        model,
        s,
        p,
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap()
}

/// HHT (-0.1) from rest with default options, 1 ms steps to 50 ms, on the 8-panel truss under
/// `load` per node ramped over `ramp`: the run's outcome and the final state.
fn implicit_ramp(load: f64, ramp: f64) -> (stepgauge::Result<stepgauge::run::RunOutcome>, State) {
    let mut m = Truss::new(8, load, ramp);
    let mut s = State::at_rest(m.dofs(), 0.0);
    let mut it = hht(&mut m, &mut s);
    let opts = RunOptions::new(0.05, StepControl::Fixed(1e-3));
    let out = run(&mut it, &mut m, &mut s, &opts, |_| Flow::Continue)
        .unwrap()
        .into_result();
    (out, s)
}

/// The premise: the undeformed truss is not force-free in floating point (the Green strain
/// `d . d - L0^2` with `L0` from `hypot` rounds), by far less than any load of the tests.
#[test]
fn the_undeformed_truss_carries_a_round_off_residual() {
    let mut m = Truss::new(8, -2e4, 0.05);
    let n = m.dofs();
    let mut f = vec![0.0; n];
    m.internal_force(0.0, &vec![0.0; n], &vec![0.0; n], &mut f)
        .unwrap();
    let worst = f.iter().fold(0.0f64, |a, x| a.max(x.abs()));
    assert!(worst > 0.0 && worst < 1e-6, "{worst:e}");
}

/// Explicit, from rest, default options, step 0.9 of the estimated limit. Before the growth
/// guard counted the work in flight, step 1 stopped as an "instability": the residual moved the
/// nodes by a rounding error, so the booked work was ~1e-16 J against a kinetic energy of ~1e-3 J.
/// The largest relative balance error is step 1's, 1/4 to rounding: the error of the central
/// difference ledger is `dt^2/8 (a_n . M a_n - a_0 . M a_0)` and the reference at step 1 is the
/// in-flight work `dt^2/2 a_1 . M a_1` (re-derived in this project, `stepgauge::energy`); the
/// residual (1e-8 N against 96 N of load at step 1) shifts it by far less than 1e-6.
#[test]
fn explicit_from_rest_runs_with_default_options() {
    let mut m = Truss::new(8, -2e4, 0.05);
    let mut s = State::at_rest(m.dofs(), 0.0);
    let mut cd =
        CentralDifference::new(&mut m, &mut s, CentralDifferenceOptions::default()).unwrap();
    let auto = StepControl::Auto {
        safety: 0.9,
        reestimate_every: 0,
    };
    let out = run(&mut cd, &mut m, &mut s, &RunOptions::new(0.1, auto), |_| {
        Flow::Continue
    })
    .unwrap()
    .into_result()
    .unwrap();
    assert_eq!(s.t, 0.1);
    assert!(
        (out.max_relative_balance_error - 0.25).abs() < 1e-6,
        "{}",
        out.max_relative_balance_error
    );
    // The truss sags under the downward load.
    assert!(s.u[2 * 4 + 1] < 0.0);
}

/// Implicit HHT from rest, default Newton options, a load ramped slowly (200 N per node over
/// 10 s): at the first steps the loads are ~0.02 N and the residual's rounding ~1e-8 N, a relative
/// residual of 1e-5 that no iteration or cut-back lowers. It is a stall at round-off and counts as
/// converged (before: "did not converge" after 6 cut-backs, each making the loads smaller).
#[test]
fn implicit_from_rest_converges_through_a_round_off_stall() {
    let (out, s) = implicit_ramp(-200.0, 10.0);
    assert_eq!(out.unwrap().steps, 50);
    assert!(s.u[2 * 4 + 1] < 0.0);
}

/// With loads a hundred times smaller still, the rounding plateau sits above sqrt(1e-8): the step
/// fails, and the error names the residual criterion, the residual history (flat at the end) and
/// a DOF, and does not advise a smaller step.
#[test]
fn a_plateau_above_the_stall_bound_is_reported_with_its_criterion_and_history() {
    let (out, s) = implicit_ramp(-2.0, 10.0);
    let e = out.unwrap_err();
    let text = e.to_string();
    match e {
        Error::NewtonNotConverged {
            criterion,
            history,
            dof,
            ..
        } => {
            assert_eq!(criterion, Criterion::Residual);
            let tail = &history[history.len() - 3..];
            assert!(
                tail.iter().all(|r| *r > 1e-4 && *r < 2.0 * tail[0]),
                "{history:?}"
            );
            assert!(dof < s.u.len());
        }
        other => panic!("{other}"),
    }
    assert!(
        text.contains("residual criterion") && !text.contains("Reduce the step"),
        "{text}"
    );
}

/// A model whose internal force turns NaN at one DOF after 5 ms.
struct NanAfter(Truss);

impl Model for NanAfter {
    fn dofs(&self) -> usize {
        self.0.dofs()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.0.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.0.internal_force(t, u, v, out)?;
        if t > 5e-3 {
            out[9] = f64::NAN;
        }
        Ok(())
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), ModelError> {
        self.0.external_force(t, out)
    }
    fn constraints(&self) -> &Constraints {
        self.0.constraints()
    }
}

forward_tangent!(NanAfter);

/// A non-finite force is reported at once with its quantity and DOF, without cut-backs (they
/// cannot make a model's NaN go away), and the state is the last good one.
#[test]
fn a_non_finite_force_is_reported_at_once_with_its_dof() {
    let mut m = NanAfter(Truss::new(8, -2e4, 0.05));
    let mut s = State::at_rest(m.dofs(), 0.0);
    let mut it = hht(&mut m, &mut s);
    let mut e = None;
    for _ in 0..10 {
        if let Err(x) = it.step(&mut m, &mut s, 1e-3) {
            e = Some(x);
            break;
        }
    }
    match e {
        Some(Error::NonFiniteState {
            quantity, dof, t, ..
        }) => {
            assert_eq!((quantity, dof), ("internal force", 9));
            assert!((t - 6e-3).abs() < 1e-12, "{t}");
        }
        other => panic!("{other:?}"),
    }
    assert!((s.t - 5e-3).abs() < 1e-12 && s.u.iter().all(|x| x.is_finite()));
    assert_eq!(it.last_report().cutbacks, 0);
}

/// The bars' tangent against central differences of their forces
/// (`stepgauge::linalg::check_tangent`, h = 1e-6 m) at a deformed state (every DOF moved by up to
/// 5 cm): the truncation `h^2 |f'''| / 6` with `|f'''| ~ E A / L^3 ~ 3e8 N/m^3` is 5e-5 N/m and the
/// rounding `eps |f| / h` with `|f| ~ 1e6 N` is 2e-4 N/m, against entries of `E A / L ~ 2e8 N/m`:
/// both near 1e-12 relative, so 1e-9 leaves room and still catches any wrong term.
#[test]
fn the_bars_tangent_matches_their_forces() {
    let mut m = Truss::new(4, -2e4, 0.05);
    let n = m.dofs();
    let u: Vec<f64> = (0..n).map(|i| 0.05 * ((i as f64) * 0.7).sin()).collect();
    let c = stepgauge::linalg::check_tangent(&mut m, 0.0, &u, &vec![0.0; n], 1e-6).unwrap();
    assert!(c.rel_error < 1e-9 && c.outside_pattern.is_none(), "{c:?}");
}
