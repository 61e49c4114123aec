//! Published stability bounds, closed-form critical `Omega`, and verdicts with their reasons.

use serde::{Deserialize, Serialize};

use super::metrics::{
    INSTABILITY_MARGIN, largest_step_for_period_error, metrics, omega_crit_numeric,
    order_of_accuracy, rho_inf, spectral_radius,
};
use super::scheme::Scheme;
use crate::error::{Error, Result};
use crate::explicit::ForceVelocity;

/// Largest `Omega` the numerical scan looks at for sets no published bound covers.
pub const SCAN_LIMIT: f64 = 1e4;

/// Stability of a scheme for one mode with physical damping ratio `xi`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Stability {
    /// Stable for every step.
    Unconditional,
    /// Stable for `omega dt <= omega_crit`.
    Conditional {
        /// The critical `Omega`.
        omega_crit: f64,
    },
    /// Unstable for every step (also arbitrarily small ones).
    Unstable,
}

/// What the user knows about the model and the run, to judge a parameter set against.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct CheckContext {
    /// The model's highest circular frequency (rad/s).
    pub omega_max: Option<f64>,
    /// The step the user plans (s).
    pub dt: Option<f64>,
    /// A circular frequency whose period must be accurate (rad/s).
    pub omega_interest: Option<f64>,
    /// The period-error target at `omega_interest` (default 0.01, common practice).
    pub period_error_target: Option<f64>,
}

/// The verdict on a parameter set.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Verdict {
    /// Stability.
    pub stability: Stability,
    /// The critical `Omega` from the published closed form, where one exists.
    pub omega_crit_closed_form: Option<f64>,
    /// Order of accuracy (from the local truncation error).
    pub order: u32,
    /// High-frequency spectral radius (`None`: unbounded, explicit schemes).
    pub rho_inf: Option<f64>,
    /// True when the scheme damps the highest frequencies (`rho_inf < 1`).
    pub dissipative: bool,
    /// The largest stable step for the context's `omega_max` (`None`: no limit or not asked).
    pub dt_stable: Option<f64>,
    /// True when the context's step is stable for its `omega_max` (`None`: not asked).
    pub step_stable: Option<bool>,
    /// Period error at the frequency of interest with the context's step.
    pub period_error_at_interest: Option<f64>,
    /// The largest step meeting the period-error target at the frequency of interest.
    pub dt_accuracy: Option<f64>,
    /// Reasons, each naming the bound or computation it rests on.
    pub reasons: Vec<String>,
}

/// The closed-form critical `Omega` where a published one exists:
///
/// - central difference, lagged damping: `2 (sqrt(1 + xi^2) - xi)` (Belytschko, Liu & Moran 2000);
///   predicted: `2 (sqrt(1 + 4 xi^2) - 2 xi)` (derived for stepgauge, `docs/explicit.md`);
/// - Newmark with `gamma >= 1/2`, `beta < gamma/2`:
///   `Omega_crit = (xi (gamma - 1/2) + sqrt(gamma/2 - beta + xi^2 (gamma - 1/2)^2)) / (gamma/2 - beta)`
///   (Hughes 1987, sec. 9.1, from memory), which for `gamma = 1/2` is `1/sqrt(gamma/2 - beta)`.
pub fn omega_crit_closed_form(scheme: &Scheme, xi: f64) -> Option<f64> {
    match scheme {
        Scheme::CentralDifference(fv) => Some(fv.critical_omega_dt(xi)),
        Scheme::Alpha(p) if p.alpha_m == 0.0 && p.alpha_f == 0.0 => {
            let (b, g) = (p.beta, p.gamma);
            let d = 0.5 * g - b;
            if g >= 0.5 && d > 0.0 {
                let e = g - 0.5;
                Some((xi * e + (d + xi * xi * e * e).sqrt()) / d)
            } else {
                None
            }
        }
        Scheme::Alpha(_) => None,
    }
}

/// Judges a scheme for physical damping ratio `xi`, and against the context when given.
///
/// Unconditional stability is decided by the published bounds (Newmark: `2 beta >= gamma >= 1/2`,
/// Newmark 1959 and Hughes 1987; HHT: `alpha` in `[-1/3, 0]`, Hilber, Hughes & Taylor 1977;
/// WBZ / generalised-alpha: `alpha_m <= alpha_f <= 1/2`, `beta >= 1/4 + (alpha_f - alpha_m)/2`,
/// Chung & Hulbert 1993) and the limit analysis (`rho_inf <= 1`), never by scanning to huge
/// `Omega` alone. Conditional sets get `Omega_crit` by a bracketing search (and the closed form
/// beside it where one exists).
///
/// # Errors
/// [`Error::InvalidParameter`] for a negative or non-finite `xi` or context value, and for family
/// parameters that [`AlphaParams::raw`](crate::params::AlphaParams::raw) refuses (a non-finite
/// value, `alpha_m >= 1`, `alpha_f >= 1`, a negative `beta` or `gamma`: the fields are public, so
/// such a set can be built without a constructor, and no verdict on it would mean anything).
pub fn check(scheme: &Scheme, xi: f64, ctx: &CheckContext) -> Result<Verdict> {
    if let Scheme::Alpha(p) = scheme {
        crate::params::AlphaParams::raw(p.alpha_m, p.alpha_f, p.beta, p.gamma)?;
    }
    if !(xi.is_finite() && xi >= 0.0) {
        return Err(Error::InvalidParameter {
            name: "xi",
            value: xi,
            expected: "a non-negative, finite damping ratio",
        });
    }
    for (name, v) in [
        ("omega_max", ctx.omega_max),
        ("dt", ctx.dt),
        ("omega_interest", ctx.omega_interest),
        ("period_error_target", ctx.period_error_target),
    ] {
        if let Some(v) = v
            && !(v.is_finite() && v > 0.0)
        {
            return Err(Error::InvalidParameter {
                name,
                value: v,
                expected: "a positive, finite value",
            });
        }
    }
    let mut reasons = Vec::new();
    let rho_inf = rho_inf(scheme);
    let order = order_of_accuracy(scheme, xi);
    let closed = omega_crit_closed_form(scheme, xi);
    let stability = stability(scheme, xi, rho_inf, &mut reasons);
    if let (Stability::Conditional { omega_crit }, Some(c)) = (stability, closed) {
        reasons.push(format!(
            "critical Omega {omega_crit:.12} found by bracketing; the closed form gives {c:.12}"
        ));
    }
    reasons.push(match order {
        2.. => format!(
            "order {order}: the local truncation error falls like Omega^{} (Hughes 1987, sec. 9.1)",
            order + 2
        ),
        _ => format!(
            "order {order}: first-order accurate{}",
            match scheme {
                Scheme::Alpha(p) if p.alpha_m == 0.0 && p.alpha_f == 0.0 =>
                    " because gamma differs from 1/2 (Newmark 1959; Hughes 1987, sec. 9.1)",
                Scheme::Alpha(_) =>
                    " because gamma differs from 1/2 - alpha_m + alpha_f (Chung & Hulbert 1993, eq. 17)",
                Scheme::CentralDifference(ForceVelocity::Lagged) =>
                    " with damping, because the damping force takes the lagged half-step velocity (second order without damping)",
                Scheme::CentralDifference(ForceVelocity::Predicted) => "",
            }
        ),
    });
    let dissipative = rho_inf.is_some_and(|r| r < 1.0 - 1e-12);
    reasons.push(match rho_inf {
        Some(r) if dissipative => format!(
            "dissipative at high frequency: rho_inf = {r:.12} < 1 (from the limit of the amplification matrix)"
        ),
        Some(r) if r > 1.0 + INSTABILITY_MARGIN => format!(
            "the high frequencies are amplified: rho_inf = {r:.12} > 1 (from the limit of the amplification matrix)"
        ),
        Some(r) => format!("no high-frequency dissipation: rho_inf = {r:.12}"),
        None => "explicit: the spectral radius grows without bound as Omega grows".to_string(),
    });
    let mut verdict = Verdict {
        stability,
        omega_crit_closed_form: closed,
        order,
        rho_inf,
        dissipative,
        dt_stable: None,
        step_stable: None,
        period_error_at_interest: None,
        dt_accuracy: None,
        reasons,
    };
    if let Some(w) = ctx.omega_max {
        match stability {
            Stability::Conditional { omega_crit } => {
                let dt_stable = omega_crit / w;
                verdict.dt_stable = Some(dt_stable);
                verdict.reasons.push(format!(
                    "with omega_max = {w} rad/s the largest stable step is {dt_stable:.6e} s"
                ));
                if let Some(dt) = ctx.dt {
                    let ok = dt <= dt_stable;
                    verdict.step_stable = Some(ok);
                    verdict.reasons.push(if ok {
                        format!("dt = {dt} s is within the stable limit")
                    } else {
                        format!("dt = {dt} s exceeds the stable limit {dt_stable:.6e} s")
                    });
                }
            }
            Stability::Unconditional => {
                if ctx.dt.is_some() {
                    verdict.step_stable = Some(true);
                }
            }
            Stability::Unstable => {
                if ctx.dt.is_some() {
                    verdict.step_stable = Some(false);
                }
            }
        }
    } else if let (Some(dt), Stability::Unstable) = (ctx.dt, stability) {
        let _ = dt;
        verdict.step_stable = Some(false);
    }
    if let Some(wi) = ctx.omega_interest {
        let target = ctx.period_error_target.unwrap_or(0.01);
        let dt_acc = largest_step_for_period_error(scheme, wi, xi, target)?;
        verdict.dt_accuracy = Some(dt_acc);
        verdict.reasons.push(format!(
            "the period error at {wi} rad/s stays within {target} for dt <= {dt_acc:.6e} s"
        ));
        if let Some(dt) = ctx.dt {
            let m = metrics(scheme, wi * dt, xi);
            verdict.period_error_at_interest = m.period_error;
        }
    }
    Ok(verdict)
}

fn stability(
    scheme: &Scheme,
    xi: f64,
    rho_inf: Option<f64>,
    reasons: &mut Vec<String>,
) -> Stability {
    let conditional =
        |reasons: &mut Vec<String>, why: String| match omega_crit_numeric(scheme, xi, SCAN_LIMIT) {
            Some(o) if o > 0.0 => {
                reasons.push(why);
                Stability::Conditional { omega_crit: o }
            }
            Some(_) => {
                reasons.push(format!("{why}; but already unstable at Omega = 1e-3"));
                Stability::Unstable
            }
            None => {
                reasons.push(format!(
                    "{why}; no instability found up to Omega = {SCAN_LIMIT:e} (numerical scan)"
                ));
                Stability::Unconditional
            }
        };
    match scheme {
        Scheme::CentralDifference(fv) => conditional(
            reasons,
            format!(
                "central difference is conditionally stable: Omega_crit = {} (Belytschko, Liu & Moran 2000; Hughes 1987, sec. 9.3)",
                match fv {
                    ForceVelocity::Lagged =>
                        "2 (sqrt(1 + xi^2) - xi) with the lagged damping velocity",
                    ForceVelocity::Predicted =>
                        "2 (sqrt(1 + 4 xi^2) - 2 xi) with the predicted damping velocity",
                }
            ),
        ),
        Scheme::Alpha(p) => {
            let (am, af, b, g) = (p.alpha_m, p.alpha_f, p.beta, p.gamma);
            if g < 0.5 - 1e-15 && am == 0.0 && af == 0.0 {
                reasons.push(format!(
                    "unstable: gamma = {g} < 1/2 makes the amplification grow for every step (Newmark 1959; Hughes 1987, sec. 9.1)"
                ));
                return Stability::Unstable;
            }
            if am == 0.0 && af == 0.0 {
                if 2.0 * b >= g - 1e-15 {
                    reasons.push(format!(
                        "unconditionally stable: 2 beta = {} >= gamma = {g} >= 1/2 (Newmark 1959; Hughes 1987, sec. 9.1)",
                        2.0 * b
                    ));
                    return Stability::Unconditional;
                }
                return conditional(
                    reasons,
                    format!(
                        "conditionally stable: gamma = {g} >= 1/2 but 2 beta = {} < gamma (Newmark 1959; Hughes 1987, sec. 9.1)",
                        2.0 * b
                    ),
                );
            }
            let hht_form = am == 0.0
                && (g - (0.5 + af)).abs() < 1e-12
                && (b - (1.0 + af) * (1.0 + af) / 4.0).abs() < 1e-12;
            if hht_form && (0.0..=1.0 / 3.0 + 1e-15).contains(&af) {
                reasons.push(format!(
                        "unconditionally stable: HHT alpha = {} lies in [-1/3, 0] (Hilber, Hughes & Taylor 1977)",
                        -af
                    ));
                return Stability::Unconditional;
            }
            // Chung & Hulbert (1993): unconditional stability of the generalised-alpha family for
            // alpha_m <= alpha_f <= 1/2 and beta >= 1/4 + (alpha_f - alpha_m)/2 (with gamma =
            // 1/2 - alpha_m + alpha_f for second order).
            let tol = 1e-12;
            if am <= af + tol
                && af <= 0.5 + tol
                && b >= 0.25 + 0.5 * (af - am) - tol
                && g >= 0.5 - am + af - tol
            {
                reasons.push(format!(
                    "unconditionally stable: alpha_m = {am} <= alpha_f = {af} <= 1/2 and beta = {b} >= 1/4 + (alpha_f - alpha_m)/2 (Chung & Hulbert 1993)"
                ));
                return Stability::Unconditional;
            }
            match rho_inf {
                Some(r) if r > 1.0 + INSTABILITY_MARGIN => conditional(
                    reasons,
                    format!(
                        "no published unconditional bound covers these parameters and rho_inf = {r} > 1: unstable at high frequency"
                    ),
                ),
                _ => conditional(
                    reasons,
                    "no published unconditional bound covers these parameters".to_string(),
                ),
            }
        }
    }
}

/// `(Omega, rho)` pairs confirming the verdict near the critical value: just below and just
/// above `omega_crit` (relative offset `eps`).
pub fn bracket_check(scheme: &Scheme, xi: f64, omega_crit: f64, eps: f64) -> (f64, f64) {
    (
        spectral_radius(scheme, omega_crit * (1.0 - eps), xi),
        spectral_radius(scheme, omega_crit * (1.0 + eps), xi),
    )
}
