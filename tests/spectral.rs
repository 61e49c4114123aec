//! Spectral analysis against the published closed forms.

use proptest::prelude::*;
use stepgauge::explicit::ForceVelocity;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::{
    CheckContext, Prepared, RootPath, Scheme, Stability, check, eigenvalues, eigenvalues3, metrics,
    omega_crit_closed_form, omega_crit_numeric, order_of_accuracy, rho_inf, spectral_radius, sweep,
};

mod common;

use common::roots::{bounds, errors};

fn alpha(p: AlphaParams) -> Scheme {
    Scheme::Alpha(p)
}

fn crit(s: &Scheme, xi: f64) -> Option<f64> {
    match check(s, xi, &CheckContext::default()).unwrap().stability {
        Stability::Conditional { omega_crit, .. } => Some(omega_crit),
        _ => None,
    }
}

/// Central difference: Omega_crit = 2 and omega_bar dt = 2 asin(Omega / 2) (Hughes 1987, *The
/// Finite Element Method*, sec. 9.3).
#[test]
fn central_difference_limit_and_dispersion() {
    let s = Scheme::CentralDifference(ForceVelocity::Lagged);
    assert!((crit(&s, 0.0).unwrap() - 2.0).abs() < 1e-9);
    for o in [0.1f64, 0.5, 1.0, 1.5, 1.9] {
        let m = metrics(&s, o, 0.0);
        let expected = o / (2.0 * (o / 2.0).asin()) - 1.0;
        assert!((m.period_error().unwrap() - expected).abs() < 1e-12, "{o}");
        assert!((m.spectral_radius - 1.0).abs() < 1e-9);
        assert!(m.damping_ratio().unwrap().abs() < 1e-9);
    }
    assert_eq!(rho_inf(&s), None);
    assert_eq!(
        order_of_accuracy(&Scheme::CentralDifference(ForceVelocity::Predicted), 0.1),
        2
    );
    // Lagged damping velocity: second order without damping, first order with it
    // (docs/explicit.md).
    assert_eq!(order_of_accuracy(&s, 0.0), 2);
    assert_eq!(order_of_accuracy(&s, 0.1), 1);
}

/// Damped central difference: Omega_crit = 2 (sqrt(1 + xi^2) - xi) with the damping force at the
/// lagged half-step velocity (Belytschko, Liu & Moran 2000), 2 (sqrt(1 + 4 xi^2) - 2 xi) with the
/// predicted velocity (derived in docs/explicit.md); explicit Newmark (beta = 0, damping centred)
/// keeps 2 for every xi (from the Newmark closed form with beta = 0, gamma = 1/2).
#[test]
fn damped_explicit_limits_depend_on_the_damping_treatment() {
    for xi in [0.0f64, 0.05, 0.2, 0.5, 1.0] {
        let lag = crit(&Scheme::CentralDifference(ForceVelocity::Lagged), xi).unwrap();
        let pred = crit(&Scheme::CentralDifference(ForceVelocity::Predicted), xi).unwrap();
        let centred = crit(&alpha(AlphaParams::newmark(0.0, 0.5).unwrap()), xi).unwrap();
        assert!(
            (lag - 2.0 * ((1.0 + xi * xi).sqrt() - xi)).abs() < 1e-8,
            "{xi}: {lag}"
        );
        assert!(
            (pred - 2.0 * ((1.0 + 4.0 * xi * xi).sqrt() - 2.0 * xi)).abs() < 1e-8,
            "{xi}: {pred}"
        );
        assert!((centred - 2.0).abs() < 1e-8, "{xi}: {centred}");
    }
}

/// Trapezoidal rule: spectral radius 1 for all Omega, omega_bar dt = 2 atan(Omega / 2), and no
/// false Omega_crit from round-off (Hughes 1987, sec. 9.3).
#[test]
fn trapezoidal_rule_is_neutral_at_every_omega() {
    let s = alpha(AlphaParams::average_acceleration());
    for o in [1e-3f64, 0.1, 1.0, 10.0, 1e3, 1e5] {
        let m = metrics(&s, o, 0.0);
        assert!(
            (m.spectral_radius - 1.0).abs() < 1e-9,
            "{o}: {}",
            m.spectral_radius
        );
        if o < 1e3 {
            let expected = o / (2.0 * (o / 2.0).atan()) - 1.0;
            assert!(
                (m.period_error().unwrap() - expected).abs() < 1e-9 * (1.0 + expected),
                "{o}"
            );
        }
    }
    let v = check(&s, 0.0, &CheckContext::default()).unwrap();
    assert_eq!(v.stability, Stability::Unconditional);
    assert_eq!(v.rho_inf, Some(1.0));
    assert!(!v.dissipative);
    assert_eq!(v.order, 2);
    assert_eq!(omega_crit_numeric(&s, 0.0, 1e4), None);
}

/// Newmark with gamma = 1/2: Omega_crit = 1 / sqrt(gamma/2 - beta): linear acceleration sqrt(12),
/// Fox-Goodwin sqrt(6) (Hughes 1987, sec. 9.1); the bracketing search agrees with the closed form.
#[test]
fn newmark_critical_omega_matches_the_closed_form() {
    for (p, expected) in [
        (AlphaParams::linear_acceleration(), 12f64.sqrt()),
        (AlphaParams::fox_goodwin(), 6f64.sqrt()),
    ] {
        let s = alpha(p);
        let c = crit(&s, 0.0).unwrap();
        assert!((c - expected).abs() < 1e-9 * expected, "{c} vs {expected}");
        assert!((omega_crit_closed_form(&s, 0.0).unwrap() - expected).abs() < 1e-14);
    }
    // Damped, gamma > 1/2: the closed form (Hughes 1987, sec. 9.1; formula from memory, checked
    // here against the independent bracketing search).
    let s = alpha(AlphaParams::newmark(0.2, 0.6).unwrap());
    for xi in [0.0f64, 0.1, 0.3] {
        let c = crit(&s, xi).unwrap();
        let closed = omega_crit_closed_form(&s, xi).unwrap();
        assert!(
            (c - closed).abs() < 1e-8 * closed,
            "xi {xi}: {c} vs {closed}"
        );
    }
    // Fox-Goodwin is fourth-order accurate without damping, second order with it (Hughes 1987,
    // sec. 9.1: beta = 1/12 cancels the third-order period error).
    let fg = alpha(AlphaParams::fox_goodwin());
    assert_eq!(order_of_accuracy(&fg, 0.0), 4);
    assert_eq!(order_of_accuracy(&fg, 0.1), 2);
    // gamma < 1/2 is unstable, gamma > 1/2 first order.
    let v = check(
        &alpha(AlphaParams::newmark(0.3, 0.4).unwrap()),
        0.0,
        &CheckContext::default(),
    )
    .unwrap();
    assert_eq!(v.stability, Stability::Unstable);
    assert_eq!(
        order_of_accuracy(&alpha(AlphaParams::newmark(0.3025, 0.6).unwrap()), 0.0),
        1
    );
}

/// Generalised-alpha: rho_inf from the limiting matrix equals the requested value to 1e-12 and
/// the order is 2 for every rho_inf in [0, 1] (Chung & Hulbert 1993).
#[test]
fn generalized_alpha_reaches_the_requested_rho_inf() {
    for k in 0..=20 {
        let r = k as f64 / 20.0;
        let s = alpha(AlphaParams::generalized_alpha(r).unwrap());
        assert!((rho_inf(&s).unwrap() - r).abs() < 1e-12, "{r}");
        let v = check(&s, 0.0, &CheckContext::default()).unwrap();
        assert_eq!(v.order, 2, "{r}");
        assert_eq!(v.stability, Stability::Unconditional, "{r}");
        assert_eq!(v.dissipative, r < 1.0);
        // The finite-Omega spectral radius approaches rho_inf only slowly (a triple root,
        // ~ Omega^(-2/3)), so compare loosely at Omega = 1e4.
        assert!((spectral_radius(&s, 1e4, 0.0) - r).abs() < 0.05, "{r}");
    }
}

/// HHT-alpha: unconditionally stable over [-1/3, 0], rho_inf = (1 + alpha)/(1 - alpha) in the
/// original sign convention (Hilber, Hughes & Taylor 1977); WBZ likewise with
/// rho_inf = (1 + alpha_m)/(1 - alpha_m) (Wood, Bossak & Zienkiewicz 1980).
#[test]
fn hht_and_wbz_limits() {
    for k in 0..=10 {
        let a = -k as f64 / 30.0;
        let s = alpha(AlphaParams::hht(a).unwrap());
        assert!(
            (rho_inf(&s).unwrap() - (1.0 + a) / (1.0 - a)).abs() < 1e-12,
            "{a}"
        );
        let v = check(&s, 0.0, &CheckContext::default()).unwrap();
        assert_eq!(v.stability, Stability::Unconditional);
        assert_eq!(v.order, 2);
        let w = alpha(AlphaParams::wbz(a).unwrap());
        assert!(
            (rho_inf(&w).unwrap() - (1.0 + a) / (1.0 - a)).abs() < 1e-12,
            "{a}"
        );
        assert_eq!(
            check(&w, 0.0, &CheckContext::default()).unwrap().stability,
            Stability::Unconditional
        );
    }
}

/// The context: a step above the limit of a conditional set is flagged, and the step that keeps
/// the period error within 1 percent at a frequency of interest is reported.
#[test]
fn verdicts_in_context() {
    let s = alpha(AlphaParams::linear_acceleration());
    let mut ctx = CheckContext::default();
    ctx.omega_max = Some(1000.0);
    ctx.dt = Some(0.004);
    ctx.omega_interest = Some(10.0);
    ctx.period_error_target = None;
    let v = check(&s, 0.0, &ctx).unwrap();
    assert!((v.dt_stable.unwrap() - 12f64.sqrt() / 1000.0).abs() < 1e-12);
    assert_eq!(v.step_stable, Some(false));
    let dt_acc = v.dt_accuracy.unwrap();
    let pe = metrics(&s, 10.0 * dt_acc, 0.0).period_error().unwrap();
    assert!((pe.abs() - 0.01).abs() < 1e-9, "{pe}");
    assert!(v.reasons.iter().any(|r| r.contains("Newmark 1959")));
    assert!(check(&s, -0.1, &ctx).is_err());
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    /// For random valid sets, sampled Omega below the reported Omega_crit give a spectral radius
    /// <= 1 + 1e-12 and Omega just above it gives more than 1.
    #[test]
    fn below_omega_crit_is_stable_and_above_is_not(
        beta in 0.0f64..0.24,
        gamma in 0.5f64..0.7,
        xi in 0.0f64..0.3,
        fractions in proptest::collection::vec(0.01f64..0.999, 8),
    ) {
        let s = alpha(AlphaParams::newmark(beta, gamma).unwrap());
        // Newmark with gamma >= 1/2 and 2 beta < gamma is conditionally stable, with damping
        // too (Hughes 1987, sec. 9.1): the verdict must say so (no vacuous pass).
        let c = crit(&s, xi);
        prop_assert!(c.is_some(), "beta {beta} gamma {gamma} xi {xi}: not conditional");
        let c = c.unwrap();
        for f in fractions {
            prop_assert!(spectral_radius(&s, f * c, xi) <= 1.0 + 1e-12, "f {f} c {c}");
        }
        prop_assert!(spectral_radius(&s, c * (1.0 + 1e-6), xi) > 1.0);
    }
}

/// A sweep equals the pointwise metrics, whatever the thread count; the stability map over the
/// (beta, gamma) plane shows the three Newmark regions (Newmark 1959; Hughes 1987, sec. 9.1).
#[test]
fn sweeps_and_stability_map() {
    use stepgauge::spectral::{log_space, newmark_stability_map, sweep};
    let schemes = [
        alpha(AlphaParams::average_acceleration()),
        alpha(AlphaParams::hht(-0.2).unwrap()),
        Scheme::CentralDifference(ForceVelocity::Lagged),
    ];
    let omegas = log_space(0.01, 100.0, 300);
    assert_eq!(omegas.len(), 300);
    assert!((omegas[0] - 0.01).abs() < 1e-15 && (omegas[299] - 100.0).abs() < 1e-12);
    let one = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let two = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let a = one.install(|| sweep(&schemes, &omegas, 0.05));
    let b = two.install(|| sweep(&schemes, &omegas, 0.05));
    assert_eq!(a, b);
    for (s, row) in schemes.iter().zip(&a) {
        for (o, m) in omegas.iter().zip(row) {
            assert_eq!(*m, metrics(s, *o, 0.05));
        }
    }
    let map = newmark_stability_map(&[0.1, 0.25, 0.3], &[0.4, 0.5], 0.0).unwrap();
    assert_eq!(map[1][1], Stability::Unconditional);
    assert!(matches!(map[0][1], Stability::Conditional { .. }));
    assert_eq!(map[2][0], Stability::Unstable);
    assert!(newmark_stability_map(&[-0.1], &[0.5], 0.0).is_err());
}

/// Inverse design: the largest step for a damping target gives exactly that algorithmic damping
/// at the frequency of interest (bisection on the computed metric).
#[test]
fn largest_step_for_a_damping_target() {
    use stepgauge::spectral::largest_step_for_damping;
    let s = alpha(AlphaParams::hht(-0.3).unwrap());
    let w = 20.0;
    let dt = largest_step_for_damping(&s, w, 0.0, 0.01).unwrap().unwrap();
    let d = metrics(&s, w * dt, 0.0).damping_ratio().unwrap();
    assert!((d - 0.01).abs() < 1e-9, "{d}");
    assert!(largest_step_for_damping(&s, -1.0, 0.0, 0.01).is_err());
    // With xi >= 1 there is no exact oscillation: no accuracy step (before: 0, "dt <= 0 s").
    use stepgauge::spectral::largest_step_for_period_error;
    for xi in [1.0, 1.5] {
        assert_eq!(largest_step_for_damping(&s, w, xi, 0.01).unwrap(), None);
        assert_eq!(
            largest_step_for_period_error(&s, w, xi, 0.01).unwrap(),
            None
        );
        let mut ctx = stepgauge::spectral::CheckContext::default();
        ctx.omega_interest = Some(w);
        let v = stepgauge::spectral::check(&s, xi, &ctx).unwrap();
        assert_eq!(v.dt_accuracy, None);
        assert!(
            v.reasons.iter().any(|r| r.contains("does not oscillate")),
            "{v:#?}"
        );
    }
    let p = largest_step_for_period_error(&s, w, 0.5, 0.01)
        .unwrap()
        .unwrap();
    assert!(p > 0.0);
}

/// A scheme drawn from every family over its whole range: generalised-alpha, HHT-alpha and
/// WBZ-alpha by `rho_inf`, Newmark-beta in the unconditionally stable region
/// `2 beta >= gamma >= 1/2`, and the central difference.
fn any_scheme() -> impl Strategy<Value = Scheme> {
    prop_oneof![
        (0.0f64..=1.0).prop_map(|r| alpha(AlphaParams::generalized_alpha(r).unwrap())),
        (0.5f64..=1.0).prop_map(|r| alpha(AlphaParams::hht_from_rho_inf(r).unwrap())),
        (0.0f64..=1.0).prop_map(|r| alpha(AlphaParams::wbz_from_rho_inf(r).unwrap())),
        (0.5f64..=1.0, 0.0f64..=1.0).prop_map(|(g, f)| {
            // beta from gamma / 2 to 1.
            let b = 0.5 * g + f * (1.0 - 0.5 * g);
            alpha(AlphaParams::newmark(b, g).unwrap())
        }),
        prop_oneof![Just(ForceVelocity::Lagged), Just(ForceVelocity::Predicted)]
            .prop_map(Scheme::CentralDifference),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(2000))]

    /// The fast path (characteristic polynomial from the parameters, closed-form cubic or the
    /// compensated path where roots meet, `spectral::eigenvalues`) against the robust path (balanced real Schur form of the matrix,
    /// `eigenvalues3`), with `Omega` from 1e-6 to 1e6 and `xi` from 0 to 1: each root within the
    /// sum of the two paths' error bounds (`common::roots`, evaluated at the Schur roots), which
    /// is about `1e-13` of the scale for well-separated roots and grows as roots meet. Neither
    /// path is the reference: against exact roots, the Schur form was the less accurate one at
    /// a WBZ pair 1.6e-4 apart (1.4e-12 against 1e-15; `tests/spectral_exact.rs` checks both
    /// against exact roots). The spectral radius, the sweep and the staged blocks agree with the
    /// single-point functions bit for bit.
    #[test]
    fn fast_path_agrees_with_the_schur_form(
        scheme in any_scheme(),
        log_omega in -6.0f64..=6.0,
        xi in 0.0f64..=1.0,
    ) {
        let o = 10f64.powf(log_omega);
        let a = scheme.amplification(o, xi);
        let (fast, path) = Prepared::new(&scheme).eigenvalues_with_path(o, xi);
        prop_assert_eq!(fast, eigenvalues(&scheme, o, xi));
        let robust = eigenvalues3(&a);
        let b = bounds(&robust, &a);
        let e = errors(&fast, &robust);
        let mine = match path {
            RootPath::ClosedForm => b.closed_form,
            RootPath::Compensated => b.compensated,
            RootPath::Schur => b.schur,
        };
        let tol = [0, 1, 2].map(|i| mine[i] + b.schur[i]);
        for i in 0..3 {
            prop_assert!(e[i] <= tol[i],
                "{} Omega {o:e} xi {xi}: root {i} {:e} apart (bound {:e})\n{fast:?}\n{robust:?}",
                scheme.name(), e[i], tol[i]);
        }
        let rho = spectral_radius(&scheme, o, xi);
        let rho_robust = robust.iter().map(|z| z.norm()).fold(0.0f64, f64::max);
        prop_assert!((rho - rho_robust).abs() <= tol.iter().copied().fold(0.0, f64::max));
        let p = Prepared::new(&scheme);
        prop_assert_eq!(p.spectral_radius(o, xi).to_bits(), rho.to_bits());
        let m = metrics(&scheme, o, xi);
        let swept = sweep(&[scheme], &[o], xi);
        prop_assert_eq!(format!("{:?}", swept[0][0]), format!("{m:?}"));
    }
}

/// The independent scan of `omega_crit_numeric` finds the published critical `Omega`: 2 for the
/// undamped central difference (Hughes 1987, sec. 9.3), `sqrt(12)` and `sqrt(6)` for linear
/// acceleration and Fox-Goodwin, Newmark's closed form with damping (Hughes 1987, sec. 9.1), and
/// the lagged central difference's `2 (sqrt(1 + xi^2) - xi)` (Belytschko, Liu & Moran 2000,
/// sec. 6.2, from memory). Its margin of `1e-12` shifts a crossing by about the margin over the
/// slope of `rho` (of order one here), so `1e-9` relative is a wide bound.
#[test]
fn the_numeric_scan_finds_the_published_limits() {
    let cases = [
        (Scheme::CentralDifference(ForceVelocity::Lagged), 0.0, 2.0),
        (alpha(AlphaParams::linear_acceleration()), 0.0, 12f64.sqrt()),
        (alpha(AlphaParams::fox_goodwin()), 0.0, 6f64.sqrt()),
        (
            Scheme::CentralDifference(ForceVelocity::Lagged),
            0.2,
            2.0 * ((1.0f64 + 0.04).sqrt() - 0.2),
        ),
    ];
    for (s, xi, expected) in cases {
        let o = omega_crit_numeric(&s, xi, 1e4).expect("conditionally stable");
        assert!(
            (o - expected).abs() <= 1e-9 * expected,
            "{s:?} xi {xi}: {o} vs {expected}"
        );
    }
    let s = alpha(AlphaParams::newmark(0.2, 0.6).unwrap());
    for xi in [0.0, 0.1, 0.3] {
        let closed = omega_crit_closed_form(&s, xi).unwrap();
        let o = omega_crit_numeric(&s, xi, 1e4).unwrap();
        assert!(
            (o - closed).abs() <= 1e-9 * closed,
            "xi {xi}: {o} vs {closed}"
        );
    }
}
