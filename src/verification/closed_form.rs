//! Checks of kind [`Kind::ClosedForm`](super::Kind): stability limits, spectral radii, period
//! errors and algorithmic damping of the schemes against their published closed forms, and the
//! reference problems' exact solutions against their equations of motion.
//!
//! Every closed form is written out in the check itself, not taken from stepgauge's code; the
//! computed side comes from the spectral analysis (eigenvalues of the amplification matrices and
//! the verdict's exact criterion for the critical `Omega`), or from stepgauge's parameter
//! constructors.
//! The same facts are tested in `tests/spectral.rs`; these checks put them in the validation
//! table.

use super::{Check, Kind};
use stepgauge::explicit::ForceVelocity;
use stepgauge::params::AlphaParams;
use stepgauge::reference::{ReferenceProblem, SdofFree, SdofHalfSine, SdofHarmonic, TwoDofStep};
use stepgauge::spectral::{
    CheckContext, Scheme, Stability, check, log_space, metrics, order_of_accuracy, rho_inf,
    spectral_radius,
};

const KIND: Kind = Kind::ClosedForm;

/// Hughes (1987), the chapter on transient algorithms for structural dynamics.
const HUGHES: &str = "Hughes (1987), The Finite Element Method: Linear Static and Dynamic \
                      Finite Element Analysis, ch. 9";

/// The checks of this kind.
pub(crate) fn checks() -> Vec<Check> {
    let mut out = central_difference();
    out.extend(newmark());
    out.extend(trapezoidal());
    out.extend(dissipative_family());
    out.push(reference_equations());
    out
}

/// The largest of `f` over `xs` (`NaN` as soon as one value is `NaN`).
fn worst(xs: impl IntoIterator<Item = f64>) -> f64 {
    xs.into_iter().fold(0.0, |m: f64, x| {
        if x.is_nan() || m.is_nan() {
            f64::NAN
        } else {
            m.max(x)
        }
    })
}

/// The critical `Omega` the verdict reports (`NaN` unless conditionally stable).
fn verdict_omega_crit(s: &Scheme, xi: f64) -> f64 {
    match check(s, xi, &CheckContext::default()).map(|v| v.stability) {
        Ok(Stability::Conditional { omega_crit, .. }) => omega_crit,
        _ => f64::NAN,
    }
}

/// The verdict's critical `Omega` is exact to double-double rounding and rounded once; the
/// closed forms are evaluated in double precision with a few roundings: a few units in the last
/// place apart at most.
const CRIT_TOL: f64 = 1e-14;

/// Where the period-error series are compared: large enough that rounding (which grows like
/// `Omega^-4`, [`series_rounding`]) stays far below the series' third term (which shrinks like
/// `Omega^4`).
const SERIES_OMEGA: f64 = 0.1;

/// The rounding error of a period error `Omega^2 / k` relative to itself. Near
/// `Omega = 0` the two principal roots meet at 1 and are `2 Omega` apart, so each carries an
/// error of up to about `eps / Omega` (a root's error is the polynomial's rounding over its
/// derivative there); `omega_bar` carries that over `Omega` relative, and the period error,
/// `Omega^2 / k` of the period, `k / Omega^2` times more: `k eps / Omega^4`, here with a factor
/// 100 for the constants left out (the cubic's coefficients of order one, its third root).
fn series_rounding(k: f64) -> f64 {
    100.0 * k * f64::EPSILON / SERIES_OMEGA.powi(4)
}

/// Newmark's low-frequency damping, compared at `Omega = 0.01` with two terms: the neglected
/// term is of relative size `Omega^4 = 1e-8` times a coefficient made of `beta`, `gamma - 1/2`
/// and the terms of the `cos` and `ln` series (not derived here; every one is below one for these
/// sets, so a factor 10 is allowed); rounding: `xi_bar Omega_bar = -ln|z|` is about `m Omega^2 / 2
/// = 5e-6`, and the roots near the double root at 1 carry up to `eps / Omega` (see
/// [`series_rounding`]), `4e-9` of it. 1e-7 covers both.
const SERIES_TOL: f64 = 1e-7;

fn period_error(s: &Scheme, omega: f64) -> f64 {
    metrics(s, omega, 0.0).period_error().unwrap_or(f64::NAN)
}

fn central_difference() -> Vec<Check> {
    let lagged = Scheme::CentralDifference(ForceVelocity::Lagged);
    let predicted = Scheme::CentralDifference(ForceVelocity::Predicted);
    let cd_src = format!("{HUGHES}, sec. 9.3 (central difference; from memory); common practice");
    let damped = [0.05, 0.2, 0.5, 1.0];
    let omegas = [0.1, 0.5, 1.0, 1.5, 1.9];
    vec![
        Check::at_most(
            "closed-form.central-difference.omega-crit",
            KIND,
            "critical Omega = omega dt of the undamped central difference, from the verdict's exact criterion (Routh-Hurwitz in double-double), against 2",
            cd_src.as_str(),
            "|Omega_crit - 2|",
            (verdict_omega_crit(&lagged, 0.0) - 2.0).abs(),
            CRIT_TOL,
            "",
        ),
        Check::at_most(
            "closed-form.central-difference.dispersion",
            KIND,
            "undamped central-difference period error T_bar/T - 1 against Omega / (2 asin(Omega/2)) - 1 at Omega = 0.1, 0.5, 1, 1.5, 1.9",
            cd_src.as_str(),
            "max abs difference",
            worst(
                omegas.iter().map(|&o| {
                    (period_error(&lagged, o) - (o / (2.0 * (o / 2.0).asin()) - 1.0)).abs()
                }),
            ),
            1e-12,
            "",
        ),
        Check::at_most(
            "rederived.central-difference.period-error-series",
            Kind::Rederived,
            "undamped central-difference period error at Omega = 0.1 against the first two terms of its series, -Omega^2/24 (1 + 17 Omega^2/240), expanded here from 2 asin(Omega/2) = Omega + Omega^3/24 + 3 Omega^5/640 + 5 Omega^7/7168 + ...; difference relative to the leading term; tolerance: the third term of the series (relative size 0.0091 Omega^4, also expanded here) with 5% for the rest, plus 100 k eps / Omega^4 for rounding (the roots meet at Omega = 0: k = 24)",
            "series expansion done in this project of the dispersion relation omega_bar dt = 2 asin(Omega/2) (common practice)",
            "relative difference",
            {
                let lead = -SERIES_OMEGA * SERIES_OMEGA / 24.0;
                (period_error(&lagged, SERIES_OMEGA)
                    - lead * (1.0 + 17.0 * SERIES_OMEGA * SERIES_OMEGA / 240.0))
                    .abs()
                    / lead.abs()
            },
            {
                // -c + 2ab - a^3 of 1 / (1 + a + b + c), relative to the leading term -1/24.
                let third = 24.0 * (5.0 / 7168.0 - 2.0 * (3.0 / 640.0) / 24.0 + 1.0 / 13824.0);
                1.05 * third * SERIES_OMEGA.powi(4) + series_rounding(24.0)
            },
            "",
        ),
        Check::at_most(
            "closed-form.central-difference.damped-limit.lagged",
            KIND,
            "critical Omega with the damping force at the lagged half-step velocity, the verdict's exact criterion against 2 (sqrt(1 + xi^2) - xi) for xi = 0.05, 0.2, 0.5, 1; relative difference",
            "Belytschko, Liu & Moran (2000), Nonlinear Finite Elements for Continua and \
             Structures, sec. 6.2 (from memory)",
            "max relative difference",
            worst(damped.iter().map(|&xi: &f64| {
                let closed = 2.0 * ((1.0 + xi * xi).sqrt() - xi);
                (verdict_omega_crit(&lagged, xi) - closed).abs() / closed
            })),
            CRIT_TOL,
            "",
        ),
        Check::at_most(
            "rederived.central-difference.damped-limit.predicted",
            Kind::Rederived,
            "critical Omega with the damping force at the predicted velocity v_(n+1/2) + dt a_n / 2, the verdict's exact criterion against 2 (sqrt(1 + 4 xi^2) - 2 xi) for xi = 0.05, 0.2, 0.5, 1; relative difference",
            "derived for stepgauge from the characteristic polynomial, docs/explicit.md \
             (not from the literature)",
            "max relative difference",
            worst(damped.iter().map(|&xi: &f64| {
                let closed = 2.0 * ((1.0 + 4.0 * xi * xi).sqrt() - 2.0 * xi);
                (verdict_omega_crit(&predicted, xi) - closed).abs() / closed
            })),
            CRIT_TOL,
            "",
        ),
    ]
}

fn newmark_scheme(beta: f64, gamma: f64) -> Option<Scheme> {
    AlphaParams::newmark(beta, gamma).ok().map(Scheme::Alpha)
}

fn newmark() -> Vec<Check> {
    let src = format!(
        "Newmark (1959), A method of computation for structural dynamics, J. Eng. Mech. Div. \
         ASCE 85; {HUGHES}, sec. 9.1 (from memory)"
    );
    // Stability region: sampled spectral radius (no use of the verdict's bounds) against the rule.
    let betas = [0.0, 0.1, 0.2, 0.25, 0.3, 0.4];
    let gammas = [0.3, 0.4, 0.5, 0.6, 0.8];
    let omegas = log_space(1e-2, 1e4, 120);
    let mut mismatches = Vec::new();
    for &b in &betas {
        for &g in &gammas {
            let Some(s) = newmark_scheme(b, g) else {
                mismatches.push(format!("({b}, {g}): refused"));
                continue;
            };
            let stable_everywhere = omegas
                .iter()
                .all(|&o| spectral_radius(&s, o, 0.0) <= 1.0 + 1e-9);
            let rule = 2.0 * b >= g && g >= 0.5;
            if stable_everywhere != rule {
                mismatches.push(format!("(beta {b}, gamma {g})"));
            }
        }
    }
    let mut region = Check::at_most(
        "closed-form.newmark.unconditional-region",
        KIND,
        "Newmark-beta on a 6 x 5 grid of (beta, gamma) in [0, 0.4] x [0.3, 0.8]: spectral radius <= 1 + 1e-9 at 120 Omega from 1e-2 to 1e4 exactly where 2 beta >= gamma >= 1/2",
        src.as_str(),
        "grid points classified otherwise",
        mismatches.len() as f64,
        0.0,
        "",
    );
    if !mismatches.is_empty() {
        region = region.with_note(mismatches.join(", "));
    }
    // Critical Omega of conditional sets, undamped.
    let mut crit = Vec::new();
    for &b in &[0.0f64, 1.0 / 12.0, 1.0 / 6.0, 0.2] {
        for &g in &[0.5f64, 0.6, 0.7] {
            let closed = 1.0 / (g / 2.0 - b).sqrt();
            let computed = newmark_scheme(b, g)
                .map(|s| verdict_omega_crit(&s, 0.0))
                .unwrap_or(f64::NAN);
            crit.push((computed - closed).abs() / closed);
        }
    }
    let linear = Scheme::Alpha(AlphaParams::linear_acceleration());
    let low = |g: f64| {
        let b = (g + 0.5) * (g + 0.5) / 4.0;
        let o = 0.01;
        let xi_bar = newmark_scheme(b, g)
            .and_then(|s| metrics(&s, o, 0.0).damping_ratio())
            .unwrap_or(f64::NAN);
        (xi_bar / ((g - 0.5) * o / 2.0) - (1.0 - o * o / 6.0)).abs()
    };
    vec![
        region,
        Check::at_most(
            "closed-form.newmark.omega-crit",
            KIND,
            "undamped Newmark-beta with gamma >= 1/2 and 2 beta < gamma: the verdict's exact criterion against Omega_crit = 1 / sqrt(gamma/2 - beta) for beta = 0, 1/12, 1/6, 0.2 and gamma = 0.5, 0.6, 0.7; relative difference",
            src.as_str(),
            "max relative difference",
            worst(crit),
            CRIT_TOL,
            "",
        ),
        Check::at_most(
            "closed-form.newmark.linear-acceleration",
            KIND,
            "critical Omega of linear acceleration (beta = 1/6, gamma = 1/2) from the verdict's exact criterion, against 2 sqrt(3)",
            src.as_str(),
            "|Omega_crit - 2 sqrt(3)|",
            (verdict_omega_crit(&linear, 0.0) - 12f64.sqrt()).abs(),
            CRIT_TOL,
            "",
        ),
        Check::at_most(
            "closed-form.newmark.low-frequency-damping",
            KIND,
            "algorithmic damping ratio of Newmark-beta with gamma = 0.6, 0.7 and beta = (gamma + 1/2)^2 / 4 at Omega = 0.01 against the leading term (gamma - 1/2) Omega / 2, times (1 - Omega^2/6) (the correction derived in this project, see the note); difference relative to the leading term",
            src.as_str(),
            "max relative difference",
            worst([low(0.6), low(0.7)]),
            SERIES_TOL,
            "",
        )
        .with_note(
            "the leading term was recalled from memory. The correction is a re-derivation in \
             this project, not from the source: with m = gamma - 1/2, p = gamma + 1/2 and \
             D = 1 + beta Omega^2, the undamped roots satisfy |z|^2 = 1 - m Omega^2 / D and \
             cos(Omega_bar) = (1 - p Omega^2 / (2D)) / |z|, so -ln|z| = (m Omega^2 / 2) (1 - \
             beta Omega^2 + m Omega^2 / 2 + ...) and Omega_bar = Omega (1 + c Omega^2 + ...) \
             with c = 1/24 - beta/2 - 3 m^2/8 + p m/4; xi_bar = -ln|z| / Omega_bar = (m Omega / \
             2) (1 + (m/2 - beta - c) Omega^2 + ...), and with beta = p^2/4 the bracket is \
             -1/6 for every gamma.",
        ),
    ]
}

fn trapezoidal() -> Vec<Check> {
    let s = Scheme::Alpha(AlphaParams::average_acceleration());
    let src = format!("{HUGHES}, sec. 9.3 (from memory); common practice");
    vec![
        Check::at_most(
            "closed-form.trapezoidal.spectral-radius",
            KIND,
            "spectral radius of the trapezoidal rule (average acceleration) at 50 Omega from 1e-3 to 1e5: largest |rho - 1|",
            src.as_str(),
            "max |rho - 1|",
            worst(
                log_space(1e-3, 1e5, 50)
                    .into_iter()
                    .map(|o| (spectral_radius(&s, o, 0.0) - 1.0).abs()),
            ),
            1e-9,
            "",
        ),
        Check::at_most(
            "closed-form.trapezoidal.period-error",
            KIND,
            "period error T_bar/T - 1 of the trapezoidal rule at 40 Omega from 1e-3 to 1e2 against Omega / (2 atan(Omega/2)) - 1: largest difference relative to T_bar/T",
            src.as_str(),
            "max relative difference",
            worst(log_space(1e-3, 1e2, 40).into_iter().map(|o| {
                let expected = o / (2.0 * (o / 2.0).atan()) - 1.0;
                (period_error(&s, o) - expected).abs() / (1.0 + expected)
            })),
            1e-9,
            "",
        ),
        Check::at_most(
            "rederived.trapezoidal.period-error-series",
            Kind::Rederived,
            "period error of the trapezoidal rule at Omega = 0.1 against the first two terms of its series, Omega^2/12 (1 - Omega^2/15), expanded here from 2 atan(Omega/2) = Omega - Omega^3/12 + Omega^5/80 - Omega^7/448 + ...; difference relative to the leading term; tolerance: the third term of the series (relative size 0.0087 Omega^4, also expanded here) with 5% for the rest, plus 100 k eps / Omega^4 for rounding (the roots meet at Omega = 0: k = 12)",
            "series expansion done in this project of omega_bar dt = 2 atan(Omega/2) (common practice)",
            "relative difference",
            {
                let lead = SERIES_OMEGA * SERIES_OMEGA / 12.0;
                (period_error(&s, SERIES_OMEGA) - lead * (1.0 - SERIES_OMEGA * SERIES_OMEGA / 15.0))
                    .abs()
                    / lead
            },
            {
                // c - 2ab + a^3 of 1 / (1 - a + b - c), relative to the leading term 1/12.
                let third = 12.0 * (1.0 / 448.0 - 2.0 * (1.0 / 80.0) / 12.0 + 1.0 / 1728.0);
                1.05 * third * SERIES_OMEGA.powi(4) + series_rounding(12.0)
            },
            "",
        ),
    ]
}

fn dissipative_family() -> Vec<Check> {
    let hht_src = "Hilber, Hughes & Taylor (1977), Improved numerical dissipation for time \
                   integration algorithms in structural dynamics, Earthquake Eng. Struct. Dyn. 5";
    let ga_src = "Chung & Hulbert (1993), A time integration algorithm for structural dynamics \
                  with improved numerical dissipation: the generalized-alpha method, J. Appl. \
                  Mech. 60, eqs. (17) and (25) (equation numbers from memory)";
    let wbz_src = "Wood, Bossak & Zienkiewicz (1980), An alpha modification of Newmark's \
                   method, Int. J. Numer. Meth. Eng. 15; Chung & Hulbert (1993), eq. (25) \
                   (from memory)";
    let alphas: Vec<f64> = (0..=10).map(|k| -(k as f64) / 30.0).collect();
    let rhos: Vec<f64> = (0..=20).map(|k| k as f64 / 20.0).collect();
    let nan = f64::NAN;

    let hht_rho = worst(alphas.iter().map(|&a| {
        AlphaParams::hht(a)
            .ok()
            .and_then(|p| rho_inf(&Scheme::Alpha(p)))
            .map_or(nan, |r| (r - (1.0 + a) / (1.0 - a)).abs())
    }));
    let hht_params = worst(alphas.iter().map(|&a| match AlphaParams::hht(a) {
        Ok(p) => worst([
            p.alpha_m().abs(),
            (p.alpha_f() + a).abs(),
            (p.gamma() - (0.5 - a)).abs(),
            (p.beta() - (1.0 - a) * (1.0 - a) / 4.0).abs(),
        ]),
        Err(_) => nan,
    }));
    let hht_order = alphas
        .iter()
        .filter(|&&a| {
            AlphaParams::hht(a).map_or(true, |p| order_of_accuracy(&Scheme::Alpha(p), 0.0) != 2)
        })
        .count();

    let ga_rho = worst(rhos.iter().map(|&r| {
        AlphaParams::generalized_alpha(r)
            .ok()
            .and_then(|p| rho_inf(&Scheme::Alpha(p)))
            .map_or(nan, |x| (x - r).abs())
    }));
    let ga_params = worst(
        rhos.iter()
            .map(|&r| match AlphaParams::generalized_alpha(r) {
                Ok(p) => {
                    let am = (2.0 * r - 1.0) / (r + 1.0);
                    let af = r / (r + 1.0);
                    let g = 0.5 - am + af;
                    let b = (1.0 - am + af) * (1.0 - am + af) / 4.0;
                    worst([
                        (p.alpha_m() - am).abs(),
                        (p.alpha_f() - af).abs(),
                        (p.gamma() - g).abs(),
                        (p.beta() - b).abs(),
                    ])
                }
                Err(_) => nan,
            }),
    );
    let ga_order = rhos
        .iter()
        .filter(|&&r| {
            AlphaParams::generalized_alpha(r)
                .map_or(true, |p| order_of_accuracy(&Scheme::Alpha(p), 0.0) != 2)
        })
        .count();

    let wbz = worst(
        rhos.iter()
            .map(|&r| match AlphaParams::wbz_from_rho_inf(r) {
                Ok(p) => worst([
                    (p.alpha_m() - (r - 1.0) / (r + 1.0)).abs(),
                    p.alpha_f().abs(),
                    rho_inf(&Scheme::Alpha(p)).map_or(nan, |x| (x - r).abs()),
                ]),
                Err(_) => nan,
            }),
    );

    vec![
        Check::at_most(
            "closed-form.hht.rho-inf",
            KIND,
            "high-frequency spectral radius of HHT-alpha (limit of the amplification matrix) against (1 + alpha)/(1 - alpha), alpha = 0, -1/30, ..., -1/3 (original sign convention)",
            hht_src,
            "max abs difference",
            hht_rho,
            1e-12,
            "",
        ),
        Check::at_most(
            "closed-form.hht.parameters",
            KIND,
            "HHT-alpha parameters for alpha = 0, -1/30, ..., -1/3 against alpha_m = 0, alpha_f = -alpha, gamma = 1/2 - alpha, beta = (1 - alpha)^2 / 4",
            hht_src,
            "max abs difference",
            hht_params,
            1e-15,
            "",
        ),
        Check::at_most(
            "closed-form.hht.second-order",
            KIND,
            "order of accuracy of HHT-alpha from the local truncation error, alpha = 0, -1/30, ..., -1/3: sets not of order 2",
            hht_src,
            "sets of another order",
            hht_order as f64,
            0.0,
            "",
        ),
        Check::at_most(
            "closed-form.generalized-alpha.rho-inf",
            KIND,
            "high-frequency spectral radius of generalised-alpha made with rho_inf = 0, 0.05, ..., 1: largest |rho_inf(computed) - rho_inf(requested)|",
            ga_src,
            "max abs difference",
            ga_rho,
            1e-12,
            "",
        ),
        Check::at_most(
            "closed-form.generalized-alpha.parameters",
            KIND,
            "generalised-alpha parameters for rho_inf = 0, 0.05, ..., 1 against alpha_m = (2 rho - 1)/(rho + 1), alpha_f = rho/(rho + 1), gamma = 1/2 - alpha_m + alpha_f, beta = (1 - alpha_m + alpha_f)^2 / 4",
            ga_src,
            "max abs difference",
            ga_params,
            1e-15,
            "",
        ),
        Check::at_most(
            "closed-form.generalized-alpha.second-order",
            KIND,
            "order of accuracy of generalised-alpha from the local truncation error, rho_inf = 0, 0.05, ..., 1: sets not of order 2",
            ga_src,
            "sets of another order",
            ga_order as f64,
            0.0,
            "",
        ),
        Check::at_most(
            "closed-form.wbz.rho-inf",
            KIND,
            "WBZ-alpha made with rho_inf = 0, 0.05, ..., 1: alpha_m against (rho - 1)/(rho + 1), alpha_f = 0, and the computed high-frequency spectral radius against rho_inf",
            wbz_src,
            "max abs difference",
            wbz,
            1e-12,
            "",
        ),
    ]
}

/// The five-point central difference `f'(t)`.
fn derivative(f: impl Fn(f64) -> f64, t: f64, h: f64) -> f64 {
    (f(t - 2.0 * h) - 8.0 * f(t - h) + 8.0 * f(t + h) - f(t + 2.0 * h)) / (12.0 * h)
}

/// Largest residual of `m u'' + c u' + k u - f` of a single-DOF problem over 400 times in
/// `(0, t_end]`, `u''` by differences of the exact velocity, relative to the largest term;
/// times within `3h` of `skip` (a kink of the load) left out.
fn sdof_residual(
    p: &dyn ReferenceProblem,
    (m, k, xi): (f64, f64, f64),
    force: impl Fn(f64) -> f64,
    skip: Option<f64>,
) -> f64 {
    let h = 1e-4;
    let c = 2.0 * xi * (k * m).sqrt();
    let rows: Vec<[f64; 4]> = (1..=400)
        .map(|i| p.t_end() * f64::from(i) / 400.0)
        .filter(|t| !skip.is_some_and(|s| (t - s).abs() < 3.0 * h))
        .map(|t| {
            [
                m * derivative(|t| p.exact_velocity(t), t, h),
                c * p.exact_velocity(t),
                k * p.exact(t),
                -force(t),
            ]
        })
        .collect();
    let scale = worst(rows.iter().flatten().map(|x| x.abs()));
    worst(rows.iter().map(|r| r.iter().sum::<f64>().abs() / scale))
}

/// The same for the two-DOF step load, on both DOFs: `M u'' + K u - R`.
fn two_dof_residual() -> f64 {
    let p = TwoDofStep;
    let (m, k, r) = (TwoDofStep::MASS, TwoDofStep::STIFFNESS, TwoDofStep::LOAD);
    let h = 1e-4;
    let mut rows = Vec::new();
    for i in 1..=400 {
        let t = p.t_end() * f64::from(i) / 400.0;
        let u = p.displacement(t);
        for d in 0..2 {
            let a = derivative(|t| p.velocity(t)[d], t, h);
            rows.push([m[d] * a, k[d][0] * u[0] + k[d][1] * u[1], -r[d]]);
        }
    }
    let scale = worst(rows.iter().flatten().map(|x| x.abs()));
    worst(rows.iter().map(|r| r.iter().sum::<f64>().abs() / scale))
}

fn reference_equations() -> Check {
    let free = [SdofFree::standard_undamped(), SdofFree::standard_damped()];
    let harmonic = [
        SdofHarmonic::standard_damped(),
        SdofHarmonic::standard_resonant(),
    ];
    let pulse = [
        SdofHalfSine::standard_undamped(),
        SdofHalfSine::standard_damped(),
    ];
    let mut residuals = Vec::new();
    for p in &free {
        residuals.push(sdof_residual(p, (p.m, p.k, p.xi), |_| 0.0, None));
    }
    for p in &harmonic {
        let (f0, w) = (p.f0, p.w);
        residuals.push(sdof_residual(
            p,
            (p.m, p.k, p.xi),
            |t| f0 * (w * t).sin(),
            None,
        ));
    }
    for p in &pulse {
        residuals.push(sdof_residual(
            p,
            (p.m, p.k, p.xi),
            |t| p.force(t),
            Some(p.t_d),
        ));
    }
    residuals.push(two_dof_residual());
    Check::at_most(
        "closed-form.reference.equations-of-motion",
        KIND,
        "the exact solutions of the reference problems (SDOF free undamped and damped, harmonic damped and resonant, half-sine undamped and damped, two-DOF step) put into their equations of motion, accelerations by five-point differences (h = 1e-4) of the exact velocities: largest residual relative to the largest term",
        "the equations of motion themselves; forms as in Chopra (2012), Dynamics of \
         Structures, chs. 2-4 and 10-12 (from memory), derived in the reference module \
         documentation",
        "max relative residual",
        worst(residuals),
        1e-9,
        "",
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_closed_form_checks_pass_and_ids_are_unique() {
        let checks = checks();
        assert!(checks.len() >= 20, "{}", checks.len());
        for c in &checks {
            assert!(c.passed, "{c:#?}");
            // The kind its id names: published closed forms, or series and limits derived here.
            match c.kind {
                Kind::ClosedForm => assert!(c.id.starts_with("closed-form."), "{}", c.id),
                Kind::Rederived => assert!(c.id.starts_with("rederived."), "{}", c.id),
                k => panic!("{}: kind {k:?}", c.id),
            }
            assert!(!c.source.is_empty());
        }
        let mut ids: Vec<&str> = checks.iter().map(|c| c.id.as_str()).collect();
        ids.sort_unstable();
        let n = ids.len();
        ids.dedup();
        assert_eq!(ids.len(), n, "duplicate ids");
    }

    /// The measures can fail: a wrong closed form or a wrong scheme is caught.
    #[test]
    fn the_measures_detect_wrong_answers() {
        let lagged = Scheme::CentralDifference(ForceVelocity::Lagged);
        let predicted = Scheme::CentralDifference(ForceVelocity::Predicted);
        // The two damped limits differ by far more than the tolerance.
        let xi: f64 = 0.2;
        let pred_closed = 2.0 * ((1.0 + 4.0 * xi * xi).sqrt() - 2.0 * xi);
        assert!((verdict_omega_crit(&lagged, xi) - pred_closed).abs() / pred_closed > 1e-3);
        assert!((verdict_omega_crit(&predicted, xi) - pred_closed).abs() / pred_closed < CRIT_TOL);
        // Linear acceleration's period error is not the trapezoidal rule's.
        let lin = Scheme::Alpha(AlphaParams::linear_acceleration());
        let o: f64 = 0.5;
        assert!((period_error(&lin, o) - (o / (2.0 * (o / 2.0).atan()) - 1.0)).abs() > 1e-4);
        // A wrong residual is seen: the half-sine solution is not a free vibration.
        let p = SdofHalfSine::standard_damped();
        assert!(sdof_residual(&p, (p.m, p.k, p.xi), |_| 0.0, None) > 1e-3);
        assert!(worst([1.0, f64::NAN]).is_nan());
    }
}
