//! Central difference on single-DOF oscillators: dispersion, stability limit, damped accuracy.

mod common;

use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, ForceVelocity, StableLimit,
};
use stepgauge::run::{Flow, RunOptions, StepControl, StopReason, run};
use stepgauge::{Error, State};

fn unchecked() -> CentralDifferenceOptions {
    {
        let mut o = CentralDifferenceOptions::default();
        o.stable_limit = StableLimit::Unchecked;
        o
    }
}

/// Undamped SDOF from u0 = 1, v0 = 0: the central-difference solution is exactly
/// u_n = cos(n omega_bar dt) with omega_bar dt = 2 asin(omega dt / 2) (the central-difference
/// dispersion relation; Hughes 1987, *The Finite Element Method*, sec. 9.3). The start
/// u_1 = 1 - Omega^2/2 = cos(omega_bar dt) makes the sine component vanish.
#[test]
fn undamped_sdof_follows_the_dispersion_relation() {
    for omega_dt in [0.1f64, 0.7, 1.3, 1.9] {
        let (m, k) = (2.0f64, 50.0f64);
        let omega = (k / m).sqrt();
        let dt = omega_dt / omega;
        let mut model = common::sdof(m, k);
        let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
        let mut cd = CentralDifference::new(&mut model, &mut state, unchecked()).unwrap();
        let theta = 2.0 * (omega_dt / 2.0).asin();
        let mut worst: f64 = 0.0;
        for n in 1..=2000 {
            cd.step(&mut model, &mut state, dt).unwrap();
            worst = worst.max((state.u[0] - (n as f64 * theta).cos()).abs());
        }
        assert!(worst < 1e-10, "Omega = {omega_dt}: deviation {worst:e}");
    }
}

/// Just below the limit Omega = 2 the amplitude stays bounded; just above it the instability guard
/// stops the run long before any value overflows (stability limit of central difference:
/// Omega_crit = 2, Hughes 1987, sec. 9.3).
#[test]
fn stability_limit_two_is_sharp() {
    let mut model = common::sdof(1.0, 1.0);
    let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
    let mut cd = CentralDifference::new(&mut model, &mut state, unchecked()).unwrap();
    let mut peak: f64 = 0.0;
    for _ in 0..100_000 {
        cd.step(&mut model, &mut state, 1.99).unwrap();
        peak = peak.max(state.u[0].abs());
    }
    assert!(peak <= 1.0 + 1e-6, "peak {peak}");

    let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
    let mut cd = CentralDifference::new(&mut model, &mut state, unchecked()).unwrap();
    let opts = RunOptions::new(1e6, StepControl::Fixed(2.01));
    let out = run(&mut cd, &mut model, &mut state, &opts, |_| Flow::Continue).unwrap();
    match out.stop {
        StopReason::Failed(Error::Unstable { step, .. }) => {
            assert!(step < 200, "stopped only at step {step}");
        }
        other => panic!("expected the instability guard, got {other:?}"),
    }
    assert!(
        state.u[0].is_finite() && state.u[0].abs() < 1e3,
        "{}",
        state.u[0]
    );
    assert!(state.v[0].is_finite() && state.a[0].is_finite());

    // Far above the limit a mode grows by about Omega^2 - 2 per step (the larger root of
    // z^2 - (2 - Omega^2) z + 1, common practice) and would overflow after about
    // 308 / log10(Omega^2 - 2) steps: the guard stops every such run within half of that (values
    // below about 1e150), keeping the last
    // accepted state (the step before the rejected one), whose kinetic energy is within the
    // guard's factor (10, the default growth limit) of the initial energy 1/2.
    for omega_dt in [2.5, 4.0, 10.0, 100.0, 1e4] {
        let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
        let mut cd = CentralDifference::new(&mut model, &mut state, unchecked()).unwrap();
        let opts = RunOptions::new(1e9, StepControl::Fixed(omega_dt));
        let out = run(&mut cd, &mut model, &mut state, &opts, |_| Flow::Continue).unwrap();
        let overflow_steps = 300.0 / (2.0 * f64::log10(omega_dt * omega_dt - 2.0));
        match out.stop {
            StopReason::Failed(Error::Unstable { step, .. }) => {
                assert!(
                    (step as f64) < overflow_steps,
                    "Omega {omega_dt}: stopped at step {step}"
                );
                assert_eq!(
                    state.step,
                    step - 1,
                    "Omega {omega_dt}: not the last good state"
                );
            }
            other => panic!("Omega {omega_dt}: expected the instability guard, got {other:?}"),
        }
        assert!(state.u[0].is_finite() && state.v[0].is_finite() && state.a[0].is_finite());
        let kinetic = 0.5 * state.v[0] * state.v[0];
        assert!(
            kinetic <= 10.0 * 0.5,
            "Omega {omega_dt}: kept kinetic energy {kinetic}"
        );
    }
}

/// Exact free vibration of a damped SDOF (any structural-dynamics textbook, e.g. Chopra,
/// *Dynamics of Structures*, eq. 2.2.4): u = e^{-xi w t} (u0 cos wd t + (v0 + xi w u0)/wd sin wd t).
fn damped_exact(t: f64, w: f64, xi: f64, u0: f64, v0: f64) -> f64 {
    let wd = w * (1.0 - xi * xi).sqrt();
    (-xi * w * t).exp() * (u0 * (wd * t).cos() + (v0 + xi * w * u0) / wd * (wd * t).sin())
}

fn damped_error(dt: f64, treatment: ForceVelocity) -> f64 {
    let (m, k, xi) = (1.5f64, 60.0f64, 0.05f64);
    let w = (k / m).sqrt();
    let c = 2.0 * xi * w * m;
    // C = c as a mass-proportional Rayleigh term: a0 M with a0 = c / m.
    let mut model = common::sdof(m, k).with_rayleigh(c / m, 0.0).unwrap();
    let mut state = State::new(0.0, vec![0.02], vec![0.3]).unwrap();
    let mut opts = unchecked();
    opts.force_velocity = treatment;
    let mut cd = CentralDifference::new(&mut model, &mut state, opts).unwrap();
    let t_end = 1.0;
    let n = (t_end / dt).round() as usize;
    let mut err: f64 = 0.0;
    for _ in 0..n {
        cd.step(&mut model, &mut state, dt).unwrap();
        err = err.max((state.u[0] - damped_exact(state.t, w, xi, 0.02, 0.3)).abs());
    }
    err
}

fn slopes(treatment: ForceVelocity) -> Vec<f64> {
    let errs: Vec<f64> = (0..5)
        .map(|i| damped_error(0.01 / 2f64.powi(i), treatment))
        .collect();
    errs.windows(2).map(|e| (e[0] / e[1]).log2()).collect()
}

/// With the predicted velocity the damped scheme converges at second order (measured slope within
/// 0.1 of 2 over four halvings); the classical lagged half-step velocity makes the damping term
/// first order (slope within 0.1 of 1). Both orders follow from the local truncation error of the
/// two amplification matrices (derivation in docs/explicit.md).
#[test]
fn damped_sdof_converges_at_the_order_of_its_damping_treatment() {
    for s in slopes(ForceVelocity::Predicted) {
        assert!((s - 2.0).abs() < 0.1, "predicted: slope {s}");
    }
    for s in slopes(ForceVelocity::Lagged) {
        assert!((s - 1.0).abs() < 0.1, "lagged: slope {s}");
    }
}

/// Stepping agrees with the spectral analysis: the central-difference state of a damped SDOF,
/// projected on the left eigenvector of the dominant eigenvalue of its amplification matrix
/// (docs/spectral.md), decays at exactly the spectral radius, for both damping treatments
/// (the stepped map is the matrix, so c_n = c_0 z^n).
#[test]
fn stepped_decay_equals_the_spectral_radius() {
    use stepgauge::spectral::{Scheme, cd_amplification, eigenvalues3, spectral_radius};
    for fv in [ForceVelocity::Lagged, ForceVelocity::Predicted] {
        for (omega_dt, xi) in [(0.3f64, 0.05f64), (1.2, 0.1), (1.7, 0.02)] {
            let a = cd_amplification(fv, omega_dt, xi);
            let z = *eigenvalues3(&a)
                .iter()
                .max_by(|x, y| x.norm().total_cmp(&y.norm()))
                .unwrap();
            let rho = spectral_radius(&Scheme::CentralDifference(fv), omega_dt, xi);
            let l = common::left_eigenvector(&a, z);
            // m = k = 1: omega = 1, dt = Omega, c = 2 xi.
            let mut model = common::sdof(1.0, 1.0).with_rayleigh(2.0 * xi, 0.0).unwrap();
            let mut state = State::new(0.0, vec![1.0], vec![0.2]).unwrap();
            let mut opts = unchecked();
            opts.force_velocity = fv;
            let mut cd = CentralDifference::new(&mut model, &mut state, opts).unwrap();
            let project = |s: &State| {
                let x = [s.u[0], omega_dt * s.v[0], omega_dt * omega_dt * s.a[0]];
                l[0] * x[0] + l[1] * x[1] + l[2] * x[2]
            };
            let c0 = project(&state);
            let n = 40;
            for _ in 0..n {
                cd.step(&mut model, &mut state, omega_dt).unwrap();
            }
            let measured = (project(&state).norm() / c0.norm()).powf(1.0 / n as f64);
            assert!(
                (measured - rho).abs() < 1e-9,
                "{fv:?} Omega {omega_dt} xi {xi}: measured {measured}, predicted {rho}"
            );
        }
    }
}

/// The growth guard for a model released from a deformed shape that does not give its stored
/// energy: the guard must still stop a run above the stability limit (before: no energy had
/// been "put in", so the guard stayed off and the run went on to overflow), and a tiny load must
/// not make it stop a stable run (before: the load's work, 1e-12, became the whole energy budget,
/// and the released spring's kinetic energy, 0.5, "exceeded" ten times it at the first steps).
#[test]
fn growth_guard_for_a_deformed_release_without_stored_energy() {
    // Stable (Omega = 1.9) with no load and with a tiny one: 2000 steps, no guard.
    for load in [0.0, 1e-12, 1e-300] {
        let mut model = common::BareSpring::new(1.0, load);
        let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
        let mut cd = CentralDifference::new(&mut model, &mut state, unchecked()).unwrap();
        for n in 0..2000 {
            cd.step(&mut model, &mut state, 1.9)
                .unwrap_or_else(|e| panic!("load {load}: step {n}: {e}"));
        }
        // The discrete (shadow) energy bounds the amplitude by 1 / sqrt(1 - Omega^2 / 4).
        assert!(state.u[0].abs() <= 1.0 / (1.0f64 - 1.9 * 1.9 / 4.0).sqrt() + 1e-6);
    }
    // Unstable (Omega = 2.5 and 10): the guard stops the run long before an overflow, keeping
    // the last accepted state, with and without the tiny load.
    for (omega_dt, load) in [(2.5, 0.0), (10.0, 0.0), (2.5, 1e-12)] {
        let mut model = common::BareSpring::new(1.0, load);
        let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
        let mut cd = CentralDifference::new(&mut model, &mut state, unchecked()).unwrap();
        let overflow_steps = 300.0 / (2.0 * f64::log10(omega_dt * omega_dt - 2.0));
        let mut stopped = None;
        for n in 0..10_000 {
            if let Err(e) = cd.step(&mut model, &mut state, omega_dt) {
                stopped = Some((n, e));
                break;
            }
        }
        match stopped {
            Some((n, Error::Unstable { .. })) => {
                assert!((n as f64) < overflow_steps, "Omega {omega_dt}: step {n}")
            }
            other => panic!("Omega {omega_dt} load {load}: expected the guard, got {other:?}"),
        }
        assert!(state.u[0].is_finite() && state.v[0].is_finite());
    }
}
