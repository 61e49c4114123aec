//! stepgauge's integrators against the library's reference problems (`stepgauge::reference`): second
//! order on the half-sine pulses (not smooth) for the central-difference method and the
//! average-acceleration (trapezoidal) rule, and the struck bar against one-dimensional wave
//! theory. The orders of every scheme on every smooth problem are verification checks
//! (`stepgauge_cli::verification`, kind `Convergence`, in `src/verification/convergence.rs`).

use stepgauge::State;
use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, ForceVelocity, StableLimit,
};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::Model;
use stepgauge::params::AlphaParams;
use stepgauge::reference::{BarImpact, ReferenceProblem};
use stepgauge::run::Integrator;

#[derive(Debug, Clone, Copy, PartialEq)]
enum Scheme {
    /// Central difference with the predicted velocity in the damping force (second order with
    /// damping), stable limit unchecked (every step used here is far below it).
    CentralDifference,
    /// Newmark's average-acceleration rule with the sparse Cholesky solver.
    AverageAcceleration,
}

/// The coarse grid of an order study: `n0` steps of `dt0` up to the horizon.
struct Grid {
    n0: usize,
    dt0: f64,
}

/// `omega_max dt0 <= 0.2`, and a horizon of at most `t_end` and 1250 coarse steps, so that the
/// finest of five levels takes at most 20,000 steps; 0.02 s for the hardening oscillator (its
/// frequency rises to about 4 rad/s at its amplitude; 0.02 divides the table's 0.1 s).
fn grid(p: &dyn ReferenceProblem) -> Grid {
    let dt_max = match p.natural_frequencies().last() {
        Some(w) => 0.2 / w,
        None => 0.02,
    };
    let horizon = p.t_end().min(1250.0 * dt_max);
    let n0 = (horizon / dt_max - 1e-9).ceil() as usize;
    Grid {
        n0,
        dt0: horizon / n0 as f64,
    }
}

/// Steps `state` with `dt0 / 2^level` and returns the largest error of the observed DOF at the
/// coarse-grid times where the reference is exact (all of them, or the table's rows).
fn walk<M: Model + ?Sized, I: Integrator<M>>(
    it: &mut I,
    model: &mut M,
    state: &mut State,
    p: &dyn ReferenceProblem,
    g: &Grid,
    level: u32,
) -> f64 {
    let sub = 1usize << level;
    let dt = g.dt0 / sub as f64;
    let dof = p.observed_dof();
    let mut err: f64 = 0.0;
    for i in 1..=g.n0 {
        for _ in 0..sub {
            it.step(model, state, dt).unwrap();
        }
        let t = i as f64 * g.dt0;
        let checked = p
            .tabulated_times()
            .is_none_or(|rows| rows.iter().any(|r| (r - t).abs() < 1e-9));
        if checked {
            err = err.max((state.u[dof] - p.exact(t)).abs());
        }
    }
    err
}

fn max_error(p: &dyn ReferenceProblem, scheme: Scheme, g: &Grid, level: u32) -> f64 {
    let mut model = p.model().unwrap();
    let mut state = p.initial_state();
    match scheme {
        Scheme::CentralDifference => {
            let mut options = CentralDifferenceOptions::default();
            options.stable_limit = StableLimit::Unchecked;
            options.force_velocity = ForceVelocity::Predicted;
            let mut it = CentralDifference::new(&mut *model, &mut state, options).unwrap();
            walk(&mut it, &mut *model, &mut state, p, g, level)
        }
        Scheme::AverageAcceleration => {
            let mut it = AlphaIntegrator::new(
                &mut *model,
                &mut state,
                AlphaParams::average_acceleration(),
                Box::new(SparseCholesky::new()),
                ImplicitOptions::default(),
            )
            .unwrap();
            walk(&mut it, &mut *model, &mut state, p, g, level)
        }
    }
}

fn sci(x: &[f64]) -> String {
    let v: Vec<String> = x.iter().map(|e| format!("{e:.2e}")).collect();
    format!("[{}]", v.join(", "))
}

/// Errors on five levels (four halvings) and the slopes log2(e_l / e_{l+1}).
fn study(p: &dyn ReferenceProblem, scheme: Scheme) -> (Grid, Vec<f64>, Vec<f64>) {
    let g = grid(p);
    let errors: Vec<f64> = (0..5).map(|l| max_error(p, scheme, &g, l)).collect();
    let slopes = errors.windows(2).map(|w| (w[0] / w[1]).log2()).collect();
    (g, errors, slopes)
}

/// The half-sine pulses are not smooth: the load's slope jumps at t_d (here between grid points),
/// so u''' jumps there. One step's local error is then O(dt^3) instead of O(dt^(p+1)), which caps
/// the global order at three but leaves second-order schemes at two: both schemes keep slopes
/// within 0.1 of 2 (measured 1.98 to 2.04).
#[test]
fn half_sine_pulses_keep_second_order() {
    for p in stepgauge_cli::problems::all()
        .into_iter()
        .filter(|p| !p.is_smooth() && p.name().starts_with("sdof-half-sine"))
    {
        for scheme in [Scheme::CentralDifference, Scheme::AverageAcceleration] {
            let (g, errors, slopes) = study(p.as_ref(), scheme);
            eprintln!(
                "{:<24} {:?}: n0 {} dt0 {:.3e}, errors {}, slopes {:.3?}",
                p.name(),
                scheme,
                g.n0,
                g.dt0,
                sci(&errors),
                slopes
            );
            assert!(
                slopes.iter().all(|s| (s - 2.0).abs() < 0.1),
                "{} {scheme:?}: {slopes:?}",
                p.name()
            );
        }
    }
}

/// Struck bar (`BarImpact::standard()` and the same bar with 50, 200 and 400 elements): the
/// explicit run's free-end displacement at 1.5 L/c and 2.5 L/c, while the free end moves at
/// 2 v0 (one-dimensional wave theory: Kolsky 1963; Graff 1975, ch. 2), is within a tenth of an
/// element-transit error (2 v0 h / c, what the free end moves in one element transit time) of
/// the continuum value at Courant number about 0.9. The tenth is a ceiling, not a derived bound:
/// the error is the integral of the ringing behind the lumped mesh's dispersed front, which
/// changes sign and size with the mesh (0.023, 0.0003, 0.0087 and 0.0056 of a transit at 1.5 L/c
/// for 50 to 400 elements), so the test runs several meshes rather than one lucky one; a bound
/// from the chain's dispersion is not attempted. The time-step part of the error is checked
/// against SciPy's solution of the same chain to a Richardson bound
/// (`cross-check.solution.bar-impact-chain` in docs/validation.md). At Courant number 1 (the
/// "magic" step h / c) every node follows the continuum to round-off.
#[test]
fn struck_bar_free_end_follows_wave_theory() {
    for elements in [50, 100, 200, 400] {
        let mut p = BarImpact::standard();
        p.elements = elements;
        let (tl, h, c) = (
            p.length / p.wave_speed(),
            p.element_length(),
            p.wave_speed(),
        );
        let transit = 2.0 * p.v0 * h / c;
        let dof = p.observed_dof();
        let mut model = p.model().unwrap();
        let mut state = p.initial_state();
        let mut cd =
            CentralDifference::new(&mut *model, &mut state, CentralDifferenceOptions::default())
                .unwrap();
        let dt_stable = cd.stable_limit().unwrap();
        // tl = 2q dt with dt at most 0.9 of the stable step, so that 1.5 tl and 2.5 tl are on
        // the grid.
        let q = (tl / (2.0 * 0.9 * dt_stable)).ceil() as usize;
        let dt = tl / (2 * q) as f64;
        let mut results = Vec::new();
        for (target, steps) in [(1.5, 3 * q), (2.5, 5 * q)] {
            while (state.step as usize) < steps {
                cd.step(&mut *model, &mut state, dt).unwrap();
            }
            let t = target * tl;
            assert!((state.t - t).abs() < 1e-9 * tl);
            let (num, exact) = (state.u[dof], p.exact(t));
            results.push((target, num, exact, (num - exact) / transit));
            assert!(
                (num - exact).abs() < 0.1 * transit,
                "{elements} elements, t = {target} L/c: {num:e} vs {exact:e} ({} transits)",
                (num - exact) / transit
            );
        }
        eprintln!(
            "bar, {elements} elements, Courant {:.3}: (t / (L/c), u, exact, error / transit) \
             {results:?}",
            c * dt / h
        );
    }

    let p = BarImpact::standard();
    let (tl, h) = (p.length / p.wave_speed(), p.element_length());
    // The magic step: c dt = h.
    let mut model = p.model().unwrap();
    let mut state = p.initial_state();
    let mut options = CentralDifferenceOptions::default();
    options.stable_limit = StableLimit::Unchecked;
    let mut cd = CentralDifference::new(&mut *model, &mut state, options).unwrap();
    let n = p.elements;
    let mut worst: f64 = 0.0;
    for i in 1..=4 * n {
        cd.step(&mut *model, &mut state, tl / n as f64).unwrap();
        let t = i as f64 * tl / n as f64;
        for (j, u) in state.u.iter().enumerate() {
            worst = worst.max((u - p.displacement_at(j as f64 * h, t)).abs());
        }
    }
    eprintln!(
        "bar, Courant 1: largest nodal error over 4 L/c {worst:e} (v0 L/c = {:e})",
        p.v0 * tl
    );
    assert!(worst < 1e-9 * p.v0 * tl, "{worst:e}");
}
