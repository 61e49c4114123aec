//! The built-in demonstration, run by `stepgauge` with no arguments (or `stepgauge demo`): the
//! explicit engine on reference problems of our own with known answers, and the stable-step
//! estimate of a demo model.

use sprs::TriMat;
use stepgauge::explicit::stable_step::{self, StableStepOptions};
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, StableLimit};
use stepgauge::linalg::Execution;
use stepgauge::model::{Constraints, LinearModel, TimeFunction};
use stepgauge::run::{Flow, RunOptions, StepControl, StopReason, run};
use stepgauge::{Error, State};

/// Prints one check line and returns whether it passed.
fn check(label: &str, got: f64, expected: f64, rel_tol: f64) -> bool {
    let rel = ((got - expected) / expected).abs();
    let ok = rel <= rel_tol;
    println!(
        "  {:<46} {:>13.6e}  expected {:>13.6e}  rel. diff {:>8.1e}  {}",
        label,
        got,
        expected,
        rel,
        if ok { "ok" } else { "FAILED" }
    );
    ok
}

/// A chain of `n` masses joined by springs `k`; an end without a wall spring is free and carries
/// half a mass (the lumped mass of a bar of two-node elements).
fn chain(n: usize, mass: f64, k: f64, walls: bool) -> Result<LinearModel, Error> {
    let mut m = TriMat::new((n, n));
    let mut kk = TriMat::new((n, n));
    for i in 0..n {
        let end = i == 0 || i == n - 1;
        m.add_triplet(i, i, if end && !walls { 0.5 * mass } else { mass });
        let left = if i > 0 || walls { k } else { 0.0 };
        let right = if i + 1 < n || walls { k } else { 0.0 };
        kk.add_triplet(i, i, left + right);
        if i + 1 < n {
            kk.add_triplet(i, i + 1, -k);
            kk.add_triplet(i + 1, i, -k);
        }
    }
    LinearModel::new(&m.to_csr(), &kk.to_csr())
}

/// Runs the demonstration; `Ok(false)` when a check fails.
pub fn demo() -> Result<bool, Error> {
    let mut ok = true;
    println!(
        "stepgauge demonstration: explicit central difference on problems with known answers\n"
    );

    // 1. Dispersion of the undamped oscillator: omega_bar dt = 2 asin(omega dt / 2).
    println!("1. Single oscillator, omega dt = 1.5: discrete frequency (Hughes 1987, sec. 9.3)");
    let mut sdof = LinearModel::new(&diag(1.0), &diag(4.0))?;
    let dt = 0.75; // omega = 2
    let mut state = State::new(0.0, vec![1.0], vec![0.0])?;
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Estimate;
    let mut cd = CentralDifference::new(&mut sdof, &mut state, opts)?;
    // Count zero crossings over many steps to measure the discrete period.
    let (mut crossings, mut first, mut last, mut prev) = (0, 0.0, 0.0, state.u[0]);
    for _ in 0..20_000 {
        let t0 = state.t;
        cd.step(&mut sdof, &mut state, dt)?;
        if prev > 0.0 && state.u[0] <= 0.0 {
            let tc = t0 + dt * prev / (prev - state.u[0]);
            if crossings == 0 {
                first = tc;
            }
            last = tc;
            crossings += 1;
        }
        prev = state.u[0];
    }
    let measured = 2.0 * std::f64::consts::PI * f64::from(crossings - 1) / (last - first);
    let expected = 2.0 * (1.5f64 / 2.0).asin() / dt;
    ok &= check(
        "discrete circular frequency (rad/s)",
        measured,
        expected,
        1e-4,
    );

    // 2. Stable step of a fixed-fixed chain: omega_max^2 = (4k/m) sin^2(n pi / (2(n+1))).
    println!(
        "\n2. Stable step of a 500-mass chain (closed-form eigenvalues of the tridiagonal matrix)"
    );
    let (n, m, k) = (500usize, 2.0f64, 8.0e5f64);
    let mut model = chain(n, m, k, true)?;
    let state = State::at_rest(n, 0.0);
    // The demonstration compares omega_max with its closed form: Lanczos to its tolerance.
    let mut exact_omega = StableStepOptions::default();
    exact_omega.accept_gershgorin = false;
    let est = stable_step::estimate(&mut model, &state, &exact_omega, &Execution::default())?;
    let exact =
        (4.0 * k / m).sqrt() * (n as f64 * std::f64::consts::PI / (2.0 * (n + 1) as f64)).sin();
    ok &= check(
        "omega_max by Lanczos (rad/s)",
        est.omega_max.unwrap_or(f64::NAN),
        exact,
        1e-6,
    );
    let bound = stable_step::omega_max_gershgorin(model.stiffness_matrix(), model.lumped(), None)?;
    println!(
        "  Gershgorin upper bound on omega_max          {bound:>13.6e}  (never below the true value)"
    );
    println!(
        "  critical step 2/omega_max                    {:>13.6e}  recommended (x{}) {:.6e}",
        est.dt_critical,
        stable_step::DEFAULT_SAFETY,
        est.recommended(stable_step::DEFAULT_SAFETY)?
    );

    // 3. A bar struck at one end: wave arrival after L/c, stress rho c v0.
    println!("\n3. Bar struck at one end at 5 m/s (one-dimensional wave theory, Kolsky 1963)");
    let (ne, len, e, rho, v0) = (300usize, 1.0f64, 70e9f64, 2700.0f64, 5.0f64);
    let h = len / ne as f64;
    let c = (e / rho).sqrt();
    let mut bar = chain(ne + 1, rho * h, e / h, false)?;
    bar =
        bar.with_constraints(Constraints::new().prescribe_velocity(0, TimeFunction::Constant(v0)))?;
    let mut state = State::at_rest(ne + 1, 0.0);
    let mut cd = CentralDifference::new(&mut bar, &mut state, CentralDifferenceOptions::default())?;
    let mut opts = RunOptions::new(
        1.1 * len / c,
        StepControl::Auto {
            safety: stable_step::DEFAULT_SAFETY,
            reestimate_every: 0,
        },
    );
    opts.record.dofs = Some(vec![ne]);
    opts.record.velocity = true;
    let out = run(&mut cd, &mut bar, &mut state, &opts, |_| Flow::Continue)?;
    if let StopReason::Failed(e) = out.stop {
        return Err(e);
    }
    let arrival = out
        .record
        .times
        .iter()
        .zip(&out.record.v)
        .find(|(_, v)| **v >= v0)
        .map(|(t, _)| *t)
        .unwrap_or(f64::NAN);
    ok &= check(
        "arrival time at the free end (s)",
        arrival,
        len / c,
        2.0 / ne as f64,
    );
    let stress: f64 = (ne / 10..ne / 2)
        .map(|i| e * (state.u[i + 1] - state.u[i]) / h)
        .sum::<f64>()
        / (ne / 2 - ne / 10) as f64;
    ok &= check("stress behind the front (Pa)", -stress, rho * c * v0, 0.01);
    let l = cd.energy();
    println!(
        "  {} steps of {:.3e} s; impactor work {:.4e} J = kinetic {:.4e} J + internal {:.4e} J (balance error {:.1e})",
        out.steps,
        out.dt_max,
        l.constraint_work,
        l.kinetic,
        l.internal(),
        l.relative_balance_error()
    );
    ok &= implicit_demo()?;
    ok &= spectral_demo()?;
    println!(
        "\n{}",
        if ok {
            "all demonstration checks passed"
        } else {
            "SOME DEMONSTRATION CHECKS FAILED"
        }
    );
    Ok(ok)
}

/// The implicit engine on the two-DOF step-load example (M = diag(2, 1), K = [[6, -2], [-2, 4]],
/// R = [0, 10]; Bathe, *Finite Element Procedures*, 1996, example 9.1) against its exact modal
/// solution, and the high-frequency filtering of a stiff spurious mode.
fn implicit_demo() -> Result<bool, Error> {
    use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
    use stepgauge::linalg::SparseCholesky;
    use stepgauge::model::Load;
    use stepgauge::params::AlphaParams;
    let mut ok = true;
    println!(
        "\n4. Implicit engine: two-DOF step load (Bathe 1996, example 9.1), 12 steps of 0.28 s"
    );
    let mut m = TriMat::new((2, 2));
    m.add_triplet(0, 0, 2.0);
    m.add_triplet(1, 1, 1.0);
    let mut k = TriMat::new((2, 2));
    for (i, j, v) in [(0, 0, 6.0), (0, 1, -2.0), (1, 0, -2.0), (1, 1, 4.0)] {
        k.add_triplet(i, j, v);
    }
    // Exact modal solution: omega^2 = 2, 5; M-orthonormal modes [1, 1]/sqrt(3) and
    // [1/2, -1]/sqrt(3/2); q_i = (f_i / omega_i^2)(1 - cos omega_i t).
    let exact = |t: f64| {
        let phi = [
            [1.0 / 3f64.sqrt(), 1.0 / 3f64.sqrt()],
            [0.5 / 1.5f64.sqrt(), -1.0 / 1.5f64.sqrt()],
        ];
        let w2 = [2.0, 5.0];
        let mut u = [0.0; 2];
        for i in 0..2 {
            let f = 10.0 * phi[i][1];
            let q = f / w2[i] * (1.0 - (w2[i].sqrt() * t).cos());
            u[0] += phi[i][0] * q;
            u[1] += phi[i][1] * q;
        }
        u
    };
    for (name, p) in [
        ("average acceleration", AlphaParams::average_acceleration()),
        ("HHT alpha = -0.1", AlphaParams::hht(-0.1)?),
        (
            "generalised-alpha rho_inf = 0.8",
            AlphaParams::generalized_alpha(0.8)?,
        ),
    ] {
        let mut model = LinearModel::new(&m.to_csr(), &k.to_csr())?.with_load(Load::Pattern {
            pattern: vec![0.0, 10.0],
            factor: TimeFunction::Constant(1.0),
        })?;
        let mut state = State::at_rest(2, 0.0);
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            p,
            Box::new(SparseCholesky::new()),
            ImplicitOptions::default(),
        )?;
        for _ in 0..12 {
            it.step(&mut model, &mut state, 0.28)?;
        }
        let ex = exact(state.t);
        println!(
            "  {name:<32} u = [{:.4}, {:.4}]  exact [{:.4}, {:.4}]  numerical dissipation {:.2e}",
            state.u[0],
            state.u[1],
            ex[0],
            ex[1],
            it.energy().numerical_dissipation
        );
        // The error stays within the period error of the second mode over 12 steps (a few
        // percent of the response): a coarse sanity bound for the demonstration.
        ok &= (state.u[1] - ex[1]).abs() < 0.1 * ex[1].abs().max(1.0);
    }
    Ok(ok)
}

/// The pre-run check of the standard parameter sets.
fn spectral_demo() -> Result<bool, Error> {
    use stepgauge::explicit::ForceVelocity;
    use stepgauge::params::AlphaParams;
    use stepgauge::spectral::{CheckContext, Scheme, Stability, check};
    println!("\n5. Stability and accuracy of the standard parameter sets (xi = 0)");
    println!(
        "  {:<34} {:>16} {:>10} {:>6} {:>12}",
        "scheme", "Omega_crit", "rho_inf", "order", "dissipative"
    );
    let sets = [
        (
            "central difference",
            Scheme::CentralDifference(ForceVelocity::Lagged),
        ),
        (
            "average acceleration",
            Scheme::Alpha(AlphaParams::average_acceleration()),
        ),
        (
            "linear acceleration",
            Scheme::Alpha(AlphaParams::linear_acceleration()),
        ),
        ("Fox-Goodwin", Scheme::Alpha(AlphaParams::fox_goodwin())),
        ("HHT alpha = -0.1", Scheme::Alpha(AlphaParams::hht(-0.1)?)),
        (
            "WBZ rho_inf = 0.8",
            Scheme::Alpha(AlphaParams::wbz_from_rho_inf(0.8)?),
        ),
        (
            "generalised-alpha rho_inf = 0.8",
            Scheme::Alpha(AlphaParams::generalized_alpha(0.8)?),
        ),
    ];
    let mut ok = true;
    for (name, s) in sets {
        let v = check(&s, 0.0, &CheckContext::default())?;
        let crit = match v.stability {
            Stability::Conditional { omega_crit, .. } => format!("{omega_crit:.10}"),
            Stability::Unconditional => "unconditional".to_string(),
            Stability::Unstable => "unstable".to_string(),
        };
        let rho = v
            .rho_inf
            .map_or("unbounded".to_string(), |r| format!("{r:.6}"));
        println!(
            "  {name:<34} {crit:>16} {rho:>10} {:>6} {:>12}",
            v.order, v.dissipative
        );
        ok &= v.stability != Stability::Unstable;
    }
    Ok(ok)
}

fn diag(x: f64) -> sprs::CsMat<f64> {
    let mut t = TriMat::new((1, 1));
    t.add_triplet(0, 0, x);
    t.to_csr()
}
