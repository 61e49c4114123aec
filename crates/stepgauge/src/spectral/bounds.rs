//! Published stability bounds, closed-form critical `Omega`, and verdicts with their reasons.

use serde::{Deserialize, Serialize};

use super::metrics::{
    INSTABILITY_MARGIN, largest_step_for_period_error, metrics, order_of_accuracy, rho_inf,
    spectral_radius,
};
use super::stability::{BoundaryKind, StabilityRegion, StepStability};
use crate::error::{Error, Result};
use crate::params::ForceVelocity;
use crate::params::Scheme;

/// Largest `Omega` of the numerical scans ([`omega_crit_numeric`](super::omega_crit_numeric),
/// an independent cross-check; the verdicts rest on [`StabilityRegion`], which covers every
/// `Omega`).
pub const SCAN_LIMIT: f64 = 1e4;

/// Stability of a scheme for one mode with physical damping ratio `xi`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "kebab-case")]
pub enum Stability {
    /// Stable for every step.
    Unconditional,
    /// Stable for `omega dt < omega_crit`, and at `omega_crit` itself when
    /// `stable_at_omega_crit`.
    Conditional {
        /// The critical `Omega`.
        omega_crit: f64,
        /// Whether `Omega = omega_crit` itself is stable: `true` for a simple root on the unit
        /// circle there (bounded), `false` for a double root at -1 (which grows linearly: the
        /// undamped central difference at `Omega = 2`) or a root beyond it.
        stable_at_omega_crit: bool,
    },
    /// Unstable for every step (also arbitrarily small ones).
    Unstable,
}

impl Stability {
    /// For a conditionally stable set, whether `Omega = omega_crit` itself is stable; `None`
    /// for the other kinds.
    pub fn stable_at_omega_crit(&self) -> Option<bool> {
        match *self {
            Stability::Conditional {
                stable_at_omega_crit,
                ..
            } => Some(stable_at_omega_crit),
            _ => None,
        }
    }
}

/// What the user knows about the model and the run, to judge a parameter set against.
///
/// New fields may be added in later versions: start from `CheckContext::default()` and set
/// fields.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
#[non_exhaustive]
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
    /// Stability (for a conditionally stable set with its critical `Omega` and whether that
    /// `Omega` itself is stable).
    pub stability: Stability,
    /// Intervals of `Omega` above `omega_crit` (or above zero, for an unstable set) where the
    /// set is stable again, `(from, to)`, `to` infinite for the last; empty for most sets.
    pub stable_again: Vec<(f64, f64)>,
    /// The critical `Omega` from the published closed form, where one exists for the scheme and
    /// damping ratio (see [`omega_crit_closed_form`]).
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
/// Stability is decided by [`StabilityRegion`]: the Routh-Hurwitz conditions on the bilinear
/// transform of the characteristic polynomial, evaluated in double-double at every `Omega` where
/// one of them can change, so the verdict covers every `Omega > 0` and `omega_crit` is exact to
/// that rounding (see `docs/spectral.md`). The step of the context is judged by the same
/// criterion at its own `Omega`. The published bounds (Newmark 1959 and Hughes 1987; Hilber,
/// Hughes & Taylor 1977; Chung & Hulbert 1993, for the second-order `gamma` only) and the closed
/// forms of `omega_crit` are quoted beside it in the reasons, where their sources state them.
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
    let region = StabilityRegion::new(scheme, xi);
    let stability = stability(&region, closed, &mut reasons);
    published_bounds(scheme, xi, stability, &mut reasons);
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
        stable_again: region.stable_again(),
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
        if let Stability::Conditional { omega_crit, .. } = stability {
            // The largest step whose Omega = omega_max dt, as computed from it, is within the
            // limit: the quotient rounded to nearest may give back a product a unit above.
            let mut dt_stable = omega_crit / w;
            while dt_stable > 0.0 && w * dt_stable > omega_crit {
                dt_stable = dt_stable.next_down();
            }
            while w * dt_stable.next_up() <= omega_crit {
                dt_stable = dt_stable.next_up();
            }
            verdict.dt_stable = Some(dt_stable);
            verdict.reasons.push(format!(
                "with omega_max = {w} rad/s the largest stable step is {dt_stable} s (every \
                 omega dt up to omega_max dt within Omega_crit)"
            ));
        }
        if let Some(dt) = ctx.dt {
            // Every mode up to omega_max must be stable, not only the highest: Omega in
            // (0, omega_max dt], against the critical Omega (rounded to its stable side, so that
            // a step a unit in the last place inside the limit is stable and one outside is not).
            let omega = w * dt;
            let stable = region.stable_up_to(omega);
            verdict.step_stable = Some(stable);
            if let Stability::Conditional { .. } = stability {
                let limit = verdict
                    .dt_stable
                    .map_or(String::new(), |d| format!(" {d} s"));
                verdict.reasons.push(match (stable, region.at(omega)) {
                    (true, StepStability::Marginal) => format!(
                        "dt = {dt} s (Omega = {omega}) is stable, with a root on the unit circle"
                    ),
                    (true, _) => {
                        format!("dt = {dt} s (Omega = {omega}) is within the stable limit")
                    }
                    (false, StepStability::Unstable) => {
                        format!("dt = {dt} s (Omega = {omega}) exceeds the stable limit{limit}")
                    }
                    (false, _) => format!(
                        "dt = {dt} s exceeds the stable limit{limit}: its own Omega = {omega} \
                         lies in a window where the scheme is stable again, but the modes with \
                         omega dt between Omega_crit and that window are not, and a model with \
                         omega_max = {w} rad/s may have modes there"
                    ),
                });
            }
        }
    } else if let (Some(_), Stability::Unstable) = (ctx.dt, stability) {
        verdict.step_stable = Some(false);
    }
    if let Some(wi) = ctx.omega_interest {
        let target = ctx.period_error_target.unwrap_or(0.01);
        let dt_acc = largest_step_for_period_error(scheme, wi, xi, target)?;
        verdict.dt_accuracy = dt_acc;
        verdict.reasons.push(match dt_acc {
            Some(d) if d > 0.0 => {
                format!("the period error at {wi} rad/s stays within {target} for dt <= {d:.6e} s")
            }
            Some(_) => format!(
                "no step keeps the period error at {wi} rad/s within {target}: it exceeds the \
                 target even at Omega = 1e-6"
            ),
            None => format!(
                "no accuracy step: with xi = {xi} >= 1 the exact mode does not oscillate, so there \
                 is no period at {wi} rad/s to keep (the period error is not defined)"
            ),
        });
        if let Some(dt) = ctx.dt {
            let m = metrics(scheme, wi * dt, xi);
            verdict.period_error_at_interest = m.period_error();
        }
    }
    Ok(verdict)
}

/// The verdict from the exact region, with its reasons (the closed form beside it where one
/// exists for the scheme and damping ratio).
fn stability(
    region: &StabilityRegion,
    closed: Option<f64>,
    reasons: &mut Vec<String>,
) -> Stability {
    const CRITERION: &str = "the Routh-Hurwitz conditions on the bilinear transform of the \
        characteristic polynomial, evaluated in double-double at every Omega where one can change \
        (common practice; Hughes 1987, sec. 9.1, uses the same criterion for Newmark's method)";
    let windows = |again: &[(f64, f64)]| -> String {
        again
            .iter()
            .map(|(a, b)| {
                if b.is_finite() {
                    format!("{a:.12} < Omega < {b:.12}")
                } else {
                    format!("Omega > {a:.12}")
                }
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let again = region.stable_again();
    if !region.below_first.is_stable() {
        reasons.push(format!(
            "unstable for every step: a root lies outside the unit circle for every small Omega ({CRITERION})"
        ));
        if !again.is_empty() {
            reasons.push(format!(
                "stable only for larger steps, where no accuracy is left: {}",
                windows(&again)
            ));
        }
        return Stability::Unstable;
    }
    let Some(b) = region.critical_boundary() else {
        let mut on_circle = Vec::new();
        if region.pair_on_circle_everywhere() {
            on_circle.push("the principal pair lies on the unit circle at every Omega (no algorithmic damping)");
        }
        if region.root_at_minus_one_everywhere() {
            on_circle.push(
                "a root stays at z = -1 at every Omega (rho = 1: no high-frequency dissipation)",
            );
        }
        reasons.push(format!(
            "unconditionally stable: every root stays in the closed unit disk for every Omega > 0 ({CRITERION}){}",
            on_circle
                .iter()
                .map(|t| format!("; {t}"))
                .collect::<String>()
        ));
        return Stability::Unconditional;
    };
    // The boundary rounded to its stable side: every Omega up to it is stable, so a step pasted
    // from it is accepted (the boundary rounded to nearest may lie a unit above the limit).
    let omega_crit = b.stable_side;
    let boundary = b.omega;
    let how = match b.kind {
        BoundaryKind::RootAtMinusOne => "a real root passes through z = -1 (P(-1) = 0)",
        BoundaryKind::PairOnCircle => "a complex pair crosses the unit circle",
        BoundaryKind::Coefficient => "a root crosses the unit circle",
    };
    reasons.push(format!(
        "conditionally stable: the stability boundary lies at Omega = {boundary:.15}, where {how} ({CRITERION})"
    ));
    reasons.push(match b.at {
        StepStability::Unstable => format!(
            "at the boundary itself: unstable (a double root at -1, or a root beyond the circle: the solution grows linearly or faster), so stable below it; Omega_crit = {omega_crit}, the largest double below the boundary"
        ),
        _ => format!(
            "at the boundary itself: stable (a simple root on the unit circle: bounded, not growing); Omega_crit = {omega_crit}, the largest double at or below the boundary"
        ),
    });
    if !again.is_empty() {
        reasons.push(format!(
            "unstable above Omega_crit, but stable again for {}",
            windows(&again)
        ));
    }
    if let Some(c) = closed {
        reasons.push(format!(
            "the published closed form gives Omega_crit = {c:.15} (relative difference {:.1e})",
            (c - omega_crit).abs() / omega_crit
        ));
    }
    Stability::Conditional {
        omega_crit,
        stable_at_omega_crit: region.critical_boundary().is_some_and(|b| b.at.is_stable()),
    }
}

/// The published unconditional-stability bounds as cross-checks, only where their sources state
/// them: Newmark 1959 / Hughes 1987 (`alpha_m = alpha_f = 0`), Hilber, Hughes & Taylor 1977 (the
/// HHT relations), Chung & Hulbert 1993 (the second-order `gamma = 1/2 - alpha_m + alpha_f`), all
/// for the undamped mode (`xi = 0`); elsewhere the reason says that the criterion alone decides.
fn published_bounds(scheme: &Scheme, xi: f64, stability: Stability, reasons: &mut Vec<String>) {
    let Scheme::Alpha(p) = scheme else {
        return;
    };
    let (am, af, b, g) = (p.alpha_m, p.alpha_f, p.beta, p.gamma);
    let tol = 1e-12;
    // What the source states, where it applies: the stability it gives (None: the set lies
    // outside a sufficient bound, so the source says nothing), and the statement.
    let statement: Option<(Option<&str>, String)> = if am == 0.0 && af == 0.0 {
        Some(if g < 0.5 {
            (
                Some("unstable"),
                format!("gamma = {g} < 1/2: unstable (Newmark 1959; Hughes 1987, sec. 9.1)"),
            )
        } else if 2.0 * b >= g {
            (
                Some("unconditional"),
                format!(
                    "2 beta = {} >= gamma = {g} >= 1/2: unconditionally stable (Newmark 1959; Hughes 1987, sec. 9.1)",
                    2.0 * b
                ),
            )
        } else {
            (
                Some("conditional"),
                format!(
                    "gamma = {g} >= 1/2 but 2 beta = {} < gamma: conditionally stable (Newmark 1959; Hughes 1987, sec. 9.1)",
                    2.0 * b
                ),
            )
        })
    } else if am == 0.0
        && (g - (0.5 + af)).abs() <= tol
        && (b - (1.0 + af) * (1.0 + af) / 4.0).abs() <= tol
    {
        let inside = (0.0..=1.0 / 3.0 + tol).contains(&af);
        Some((
            inside.then_some("unconditional"),
            format!(
                "HHT alpha = {} {} (Hilber, Hughes & Taylor 1977: unconditionally stable for alpha in [-1/3, 0])",
                -af,
                if inside {
                    "lies in [-1/3, 0]"
                } else {
                    "lies outside [-1/3, 0]"
                },
            ),
        ))
    } else if (g - (0.5 - am + af)).abs() <= tol {
        let inside = am <= af + tol && af <= 0.5 + tol && b >= 0.25 + 0.5 * (af - am) - tol;
        Some((
            inside.then_some("unconditional"),
            format!(
                "alpha_m = {am}, alpha_f = {af}, beta = {b} with the second-order gamma {} (Chung & Hulbert 1993: unconditionally stable for alpha_m <= alpha_f <= 1/2 and beta >= 1/4 + (alpha_f - alpha_m)/2)",
                if inside {
                    "lie inside the bound"
                } else {
                    "lie outside the bound"
                }
            ),
        ))
    } else {
        None
    };
    let found = match stability {
        Stability::Unconditional => "unconditional",
        Stability::Conditional { .. } => "conditional",
        Stability::Unstable => "unstable",
    };
    match statement {
        None => reasons.push(format!(
            "no published bound covers gamma = {g} with alpha_m = {am}, alpha_f = {af} (the bounds of Chung & Hulbert 1993 are stated for the second-order gamma = 1/2 - alpha_m + alpha_f): the criterion above decides"
        )),
        Some(_) if xi > 0.0 => reasons.push(
            "the published bounds are stated for the undamped mode (xi = 0); with physical damping the criterion above decides"
                .to_string(),
        ),
        Some((None, text)) => reasons.push(format!(
            "the published bound says nothing here: {text}; the criterion above decides"
        )),
        Some((Some(stated), text)) => reasons.push(format!(
            "{} the published bound: {text}",
            if stated == found { "agrees with" } else { "DIFFERS from" }
        )),
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
