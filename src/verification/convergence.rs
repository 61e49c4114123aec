//! Checks of kind [`Kind::Convergence`]: for every scheme on every smooth reference problem
//! ([`reference::smooth`]), the measured order of accuracy equals the theoretical one within 0.1.
//!
//! # Method
//!
//! - **Steps.** The coarse grid of `stepgauge compare` ([`study::smooth_grid`] with
//!   [`MAX_COARSE_STEPS`]): `dt0 = T_min / 20` (0.02 s for the hardening oscillator), horizon
//!   `t_end` or 400 coarse steps. The runs use `dt0 / 2^l` for the levels `l = s .. s + 4` (five
//!   steps, four halvings), with the start level `s = 0` unless the pairing is still
//!   pre-asymptotic at `dt0` (see [`start_level`]; the check's note says why and gives the
//!   successive-halving orders from `l = 0`).
//! - **Error.** The largest error of the observed displacement at the coarse-grid times (for the
//!   tabulated hardening oscillator only at its table rows, where the reference is accurate to
//!   about `1e-12`); implicit runs converge Newton to [`NEWTON_TOLERANCE`] so that the iteration
//!   error stays far below the discretisation error.
//! - **Measured order.** The least-squares slope of `ln(error)` against `ln(dt)` over the five
//!   steps ([`study::fitted_order`]); the successive-halving orders `log2(e_l / e_(l+1))` are
//!   shown beside it.
//! - **Floor.** The finest error must stay above [`FLOOR_EXACT`] (closed-form references, whose
//!   runs carry round-off of about `1e-13`) or [`FLOOR_TABULATED`] (the hardening oscillator's
//!   table); a sequence that goes below fails, since round-off would bend the slope.
//! - **Theoretical order.** Per scheme from its source ([`cases`]), cross-checked against
//!   [`spectral::order_of_accuracy`] (a disagreement fails the check), and per problem from the
//!   facts of [`facts`]: damped or not, and whether the start is quiet (see below).
//!
//! # Fox-Goodwin and the start
//!
//! With `gamma = 1/2`, eliminating `v` and `a` from two Newmark steps of an undamped linear model
//! leaves the displacement recurrence
//!
//! ```text
//! u_(n+1) - 2 u_n + u_(n-1) = dt^2 (beta a_(n+1) + (1 - 2 beta) a_n + beta a_(n-1)),
//! a_n = M^-1 (f(t_n) - K u_n),
//! ```
//!
//! which for `beta = 1/12` is Numerov's method, fourth order for `u'' = g(t, u)` (Hairer, Norsett
//! & Wanner 1993, *Solving Ordinary Differential Equations I*, sec. III.10, from memory); the
//! fourth-order period error of Fox-Goodwin (Hughes 1987, *The Finite Element Method*, ch. 9) is
//! the same fact seen on one mode. The one-step start, however,
//! `u_1 = u_0 + dt v_0 + dt^2 (5/12 a_0 + 1/12 a_1)`, differs from the Taylor series of the exact
//! solution by `dt^3 a'(0) / 12 + O(dt^5)` (derived here: expand `a_1 = a_0 + dt a'(0) + ...`). A
//! perturbation of `u_1` excites the two-step recurrence's free solution with a gain of about
//! `1 / (omega dt)`, so the start adds a global error `O(dt^2) a'(0)`: the scheme shows fourth
//! order only when `a'(0) = M^-1 (f'(0) - K v_0) = 0` (a *quiet start*), second order otherwise.
//! The trapezoidal and linear-acceleration rules have second-order recurrences, so the start
//! does not change their order. With damping the recurrence is no longer Numerov's and
//! Fox-Goodwin is second order (its `order_of_accuracy` with damping is 2).

use super::{Check, Kind};
use crate::study;
use stepgauge::explicit::ForceVelocity;
use stepgauge::implicit::NewtonOptions;
use stepgauge::params::AlphaParams;
use stepgauge::reference::ReferenceProblem;
use stepgauge::spectral::{self, Scheme};

/// Coarse steps at most per problem (as `stepgauge compare`).
pub(crate) const MAX_COARSE_STEPS: usize = 400;
/// Halvings in a sequence (five steps).
const HALVINGS: u32 = 4;
/// The tolerance on the measured order (the issue's 0.1).
const TOLERANCE: f64 = 0.1;
/// Newton's residual and displacement tolerances for the implicit runs.
pub(crate) const NEWTON_TOLERANCE: f64 = 1e-11;
/// Smallest finest-step error accepted against a closed-form reference.
pub(crate) const FLOOR_EXACT: f64 = 1e-11;
/// Smallest finest-step error accepted against a tabulated reference (table accurate to about
/// `1e-12`).
pub(crate) const FLOOR_TABULATED: f64 = 1e-9;

/// A scheme with its theoretical order and the source of that order.
struct Case {
    /// The id segment.
    slug: &'static str,
    /// The name in the `what` column.
    label: &'static str,
    scheme: Scheme,
    /// The order on undamped (`[0]`) and damped (`[1]`) problems, from `source`.
    order: [u32; 2],
    /// Where the order comes from.
    source: &'static str,
}

const NEWMARK_SOURCE: &str = "Newmark 1959, A method of computation for structural dynamics, \
     J. Eng. Mech. Div. ASCE 85; Hughes 1987, The Finite Element Method, ch. 9 (Newmark-beta is \
     second order for gamma = 1/2, first order otherwise)";

/// The schemes of the study.
fn cases() -> stepgauge::Result<Vec<Case>> {
    let ga_source = "Chung & Hulbert 1993, A time integration algorithm for structural dynamics \
         with improved numerical dissipation: the generalized-alpha method, J. Appl. Mech. 60 \
         (second order for gamma = 1/2 - alpha_m + alpha_f)";
    let ga = |slug, label, rho| -> stepgauge::Result<Case> {
        Ok(Case {
            slug,
            label,
            scheme: Scheme::Alpha(AlphaParams::generalized_alpha(rho)?),
            order: [2, 2],
            source: ga_source,
        })
    };
    let hht_source = "Hilber, Hughes & Taylor 1977, Improved numerical dissipation for time \
         integration algorithms in structural dynamics, Earthquake Eng. Struct. Dyn. 5 (second \
         order for alpha in [-1/3, 0])";
    Ok(vec![
        Case {
            slug: "central-difference-lagged",
            label: "central difference, lagged damping velocity",
            scheme: Scheme::CentralDifference(ForceVelocity::Lagged),
            order: [2, 1],
            source: "Hughes 1987, The Finite Element Method, ch. 9 (central difference, second \
                     order); first order with damping through the lagged half-step velocity: \
                     derived in docs/explicit.md (per-step residual -xi Omega (lambda dt)^2)",
        },
        Case {
            slug: "central-difference-predicted",
            label: "central difference, predicted damping velocity",
            scheme: Scheme::CentralDifference(ForceVelocity::Predicted),
            order: [2, 2],
            source: "Hughes 1987, The Finite Element Method, ch. 9 (central difference, second \
                     order); the predicted damping velocity keeps second order: derived in \
                     docs/explicit.md",
        },
        Case {
            slug: "average-acceleration",
            label: "Newmark average acceleration (beta = 1/4, gamma = 1/2)",
            scheme: Scheme::Alpha(AlphaParams::average_acceleration()),
            order: [2, 2],
            source: NEWMARK_SOURCE,
        },
        Case {
            slug: "linear-acceleration",
            label: "Newmark linear acceleration (beta = 1/6, gamma = 1/2)",
            scheme: Scheme::Alpha(AlphaParams::linear_acceleration()),
            order: [2, 2],
            source: NEWMARK_SOURCE,
        },
        Case {
            slug: "fox-goodwin",
            label: "Newmark Fox-Goodwin (beta = 1/12, gamma = 1/2)",
            scheme: Scheme::Alpha(AlphaParams::fox_goodwin()),
            order: [4, 2],
            source: "Fox & Goodwin 1949, Some new methods for the numerical integration of \
                     ordinary differential equations, Proc. Cambridge Phil. Soc. 45; Hughes \
                     1987, The Finite Element Method, ch. 9 (fourth-order period error \
                     undamped, second order with damping); the displacement recurrence is \
                     Numerov's method: Hairer, Norsett & Wanner 1993, Solving Ordinary \
                     Differential Equations I, sec. III.10 (from memory); the start's effect: \
                     derived in src/verification/convergence.rs",
        },
        Case {
            slug: "newmark-gamma-0p6",
            label: "Newmark beta = 0.3025, gamma = 0.6",
            scheme: Scheme::Alpha(AlphaParams::newmark(0.3025, 0.6)?),
            order: [1, 1],
            source: NEWMARK_SOURCE,
        },
        Case {
            slug: "hht-alpha-minus-0p1",
            label: "HHT alpha = -0.1",
            scheme: Scheme::Alpha(AlphaParams::hht(-0.1)?),
            order: [2, 2],
            source: hht_source,
        },
        Case {
            slug: "hht-alpha-minus-0p3",
            label: "HHT alpha = -0.3",
            scheme: Scheme::Alpha(AlphaParams::hht(-0.3)?),
            order: [2, 2],
            source: hht_source,
        },
        Case {
            slug: "wbz-rho-0p8",
            label: "WBZ rho_inf = 0.8",
            scheme: Scheme::Alpha(AlphaParams::wbz_from_rho_inf(0.8)?),
            order: [2, 2],
            source: "Wood, Bossak & Zienkiewicz 1980, An alpha modification of Newmark's \
                     method, Int. J. Numer. Meth. Eng. 15 (second order for gamma = 1/2 - \
                     alpha_m); Chung & Hulbert 1993, sec. 3",
        },
        ga(
            "generalized-alpha-rho-1",
            "generalised-alpha rho_inf = 1",
            1.0,
        )?,
        ga(
            "generalized-alpha-rho-0p8",
            "generalised-alpha rho_inf = 0.8",
            0.8,
        )?,
        ga(
            "generalized-alpha-rho-0p5",
            "generalised-alpha rho_inf = 0.5",
            0.5,
        )?,
        ga(
            "generalized-alpha-rho-0",
            "generalised-alpha rho_inf = 0",
            0.0,
        )?,
    ])
}

/// What the theory needs to know about a problem, derived from its definition in
/// [`reference`].
struct Facts {
    /// A damping ratio representative of the problem (0 when undamped), for
    /// [`spectral::order_of_accuracy`], which only tells `xi = 0` from `0 < xi < 1`.
    xi: f64,
    /// `a'(0) = 0`: the start costs Fox-Goodwin no order (see the module documentation).
    quiet_start: bool,
    /// Why, in words.
    why: &'static str,
}

/// The facts of the smooth problems, by name (`None`: a problem this file does not know yet,
/// whose checks then fail until its facts are added).
fn facts(name: &str) -> Option<Facts> {
    Some(match name {
        // m = 2, k = 200, u0 = 0.02, v0 = -0.3: a'(0) = -omega^2 v0 = 30.
        "sdof-free-undamped" => Facts {
            xi: 0.0,
            quiet_start: false,
            why: "undamped; a'(0) = -omega^2 v0 = 30, not zero",
        },
        "sdof-free-underdamped" => Facts {
            xi: 0.05,
            quiet_start: false,
            why: "damping ratio 0.05",
        },
        "sdof-harmonic-damped" => Facts {
            xi: 0.05,
            quiet_start: false,
            why: "damping ratio 0.05",
        },
        // m = 1, k = 16, f = 8 sin(4 t) from rest: a'(0) = f'(0) / m = 32.
        "sdof-harmonic-resonant" => Facts {
            xi: 0.0,
            quiet_start: false,
            why: "undamped; a'(0) = f'(0) / m = 32, not zero",
        },
        // From rest under a load held constant: a'(0) = M^-1 (f'(0) - K v0) = 0.
        "two-dof-step" => Facts {
            xi: 0.0,
            quiet_start: true,
            why: "undamped; from rest under a constant load, a'(0) = 0",
        },
        // Released from a displacement at rest, no load: a'(0) = -M^-1 K v0 = 0.
        "stiff-soft" => Facts {
            xi: 0.0,
            quiet_start: true,
            why: "undamped; released at rest without load, a'(0) = 0",
        },
        // c = 0.1, m = k = 1: damping ratio 0.05 at small amplitude (less as the spring hardens).
        "hardening" => Facts {
            xi: 0.05,
            quiet_start: false,
            why: "damped (c = 0.1, damping ratio 0.05 at small amplitude) and nonlinear",
        },
        _ => return None,
    })
}

/// The level of the first step of the sequence (`dt0 / 2^s`) and why it is not 0.
///
/// Not derived: each level was read from the successive-halving orders (given in the check's
/// note, so that a reader can judge the choice) where a
/// lower-order or higher-order term still competes at `dt0`:
///
/// - central difference with the lagged damping velocity on a damped problem: its first-order
///   term (about `xi Omega` per radian) is comparable to the second-order period error (about
///   `Omega^2 / 24` per radian) at `Omega = 2 pi / 20`; from `dt0 / 8` on the first-order term
///   dominates;
/// - dissipative schemes on the stiff-soft pair: its 400 coarse steps span 20 periods of the
///   stiff mode, resolved by only 20 steps each at `dt0`, so the stiff mode's accumulated
///   algorithmic damping is not small there. Newmark with `gamma = 0.6` loses a fraction
///   `1 - exp(-x)` of the stiff mode, `x = (gamma - 1/2) Omega omega t / 2`, about 2 at `dt0`:
///   the slope `x / (exp(x) - 1)` approaches 1 only for `x` well below 1, from `dt0 / 16`;
///   generalised-alpha with `rho_inf = 0` (the strongest dissipation of the set) needs
///   `dt0 / 4`, the others `dt0 / 2`;
/// - generalised-alpha with `rho_inf = 0` elsewhere: its higher-order terms bend the first
///   halving on the linear problems (measured 1.73 to 1.84); from `dt0 / 2` on it is second
///   order. The same start is used on the hardening oscillator, to keep one rule per scheme.
fn start_level(case: &Case, problem: &str, facts: &Facts) -> (u32, Option<&'static str>) {
    let dissipative = !matches!(
        case.slug,
        "central-difference-lagged"
            | "central-difference-predicted"
            | "average-acceleration"
            | "linear-acceleration"
            | "fox-goodwin"
            | "generalized-alpha-rho-1"
    );
    match (case.slug, problem) {
        ("central-difference-lagged", _) if facts.xi > 0.0 => (
            3,
            Some(
                "the first-order term of the lagged damping velocity (about xi Omega per \
                 radian) is comparable to the second-order period error (about Omega^2 / 24) \
                 at dt0 = T_min / 20, so the sequence starts at dt0 / 8",
            ),
        ),
        ("newmark-gamma-0p6", "stiff-soft") => (
            4,
            Some(
                "the 400 coarse steps span 20 periods of the stiff mode: the scheme removes a \
                 fraction 1 - exp(-x) of it, x = (gamma - 1/2) Omega omega t / 2 (about 2 at \
                 dt0), and the slope x / (exp(x) - 1) nears 1 only for x well below 1, so the \
                 sequence starts at dt0 / 16",
            ),
        ),
        ("generalized-alpha-rho-0", "stiff-soft") => (
            2,
            Some(
                "the 400 coarse steps span 20 periods of the stiff mode, which rho_inf = 0 \
                 damps strongly at 20 steps a period, so the sequence starts at dt0 / 4",
            ),
        ),
        (_, "stiff-soft") if dissipative => (
            1,
            Some(
                "the 400 coarse steps span 20 periods of the stiff mode, whose algorithmic \
                 damping accumulates at 20 steps a period, so the sequence starts at dt0 / 2",
            ),
        ),
        ("generalized-alpha-rho-0", _) => (
            1,
            Some(
                "rho_inf = 0 has the strongest dissipation of the set; on the linear problems \
                 its higher-order terms bend the first halving (1.73 to 1.84), so its \
                 sequences start at dt0 / 2 on every problem",
            ),
        ),
        _ => (0, None),
    }
}

/// The theoretical order of a scheme on a problem and, when the problem changes it, why.
fn theoretical_order(case: &Case, facts: &Facts) -> (u32, Option<String>) {
    let order = case.order[usize::from(facts.xi > 0.0)];
    if order > 2 && !facts.quiet_start {
        return (
            2,
            Some(format!(
                "fourth-order recurrence, but {}: the start's error dt^3 a'(0) / 12 makes the \
                 global error second order (module documentation of \
                 src/verification/convergence.rs)",
                facts.why
            )),
        );
    }
    if order > 2 {
        return (
            order,
            Some(format!(
                "{}: Fox-Goodwin's displacements follow Numerov's fourth-order recurrence from \
                 an accurate start",
                facts.why
            )),
        );
    }
    (order, None)
}

/// `l = 0, 1, ...`: `dt0 / 2^l`.
fn level_step(dt0: f64, level: u32) -> f64 {
    dt0 / f64::from(1u32 << level)
}

/// The largest errors at levels `0 ..= last` (`None` for a level above the stable limit).
fn errors(
    p: &dyn ReferenceProblem,
    scheme: &Scheme,
    grid: study::Grid,
    last: u32,
    limit: Option<f64>,
) -> stepgauge::Result<Vec<Option<f64>>> {
    let mut newton = NewtonOptions::default();
    newton.residual_tolerance = NEWTON_TOLERANCE;
    newton.displacement_tolerance = NEWTON_TOLERANCE;
    let mut out = Vec::new();
    for level in 0..=last {
        let dt = level_step(grid.dt0, level);
        if limit.is_some_and(|lim| dt > lim) {
            out.push(None);
            continue;
        }
        let stride = 1usize << level;
        let run = study::run_scheme(p, scheme, dt, grid.n0 * stride, stride, &newton)?;
        out.push(run.max_error);
    }
    Ok(out)
}

/// One check: `case` on `p`.
fn check_one(case: &Case, p: &dyn ReferenceProblem) -> Check {
    let id = format!("convergence.{}.{}", case.slug, p.name());
    let grid = study::smooth_grid(p, MAX_COARSE_STEPS);
    let Some(facts) = facts(p.name()) else {
        let what = format!("order of {} on {}", case.label, p.name());
        return Check::failed_to_run(
            id,
            Kind::Convergence,
            what,
            case.source,
            "no theoretical order is stated for this problem (add its facts to \
             src/verification/convergence.rs)",
        );
    };
    let (start, start_why) = start_level(case, p.name(), &facts);
    let last = start + HALVINGS;
    let (dt_hi, dt_lo) = (level_step(grid.dt0, start), level_step(grid.dt0, last));
    let dt0_text = if p.natural_frequencies().is_empty() {
        "dt0 = 0.02 s".to_string()
    } else {
        "dt0 = T_min / 20".to_string()
    };
    let what = format!(
        "order of the largest displacement error of {} on {} ({}); runs to t = {:.4} s with \
         steps {} .. {} s, four halvings from {}{}",
        case.label,
        p.name(),
        facts.why,
        grid.horizon,
        short(dt_hi),
        short(dt_lo),
        if start > 0 {
            format!("dt0 / {}, ", 1u32 << start)
        } else {
            String::new()
        },
        dt0_text,
    );
    let (expected, theory_note) = theoretical_order(case, &facts);
    let source = format!(
        "{}; measured order: least-squares slope of ln(error) against ln(dt) (common practice)",
        case.source
    );
    let failed = |why: String| {
        Check::failed_to_run(
            id.clone(),
            Kind::Convergence,
            what.clone(),
            source.clone(),
            why,
        )
    };
    let limit = match study::stable_limit(p, &case.scheme) {
        Ok(l) => l,
        Err(e) => return failed(format!("no stable limit: {e}")),
    };
    if let Some(lim) = limit
        && dt_hi > lim
    {
        return failed(format!(
            "the sequence's largest step {dt_hi:.4e} s is above the stable limit {lim:.4e} s"
        ));
    }
    let errs = match errors(p, &case.scheme, grid, last, limit) {
        Ok(e) => e,
        Err(e) => return failed(format!("a run failed: {e}")),
    };
    let window: Vec<f64> = errs[start as usize..]
        .iter()
        .map(|e| e.unwrap_or(f64::NAN))
        .collect();
    let dts: Vec<f64> = (start..=last).map(|l| level_step(grid.dt0, l)).collect();
    let measured = study::fitted_order(&dts, &window).unwrap_or(f64::NAN);
    let successive = |from: usize| -> String {
        errs[from..]
            .windows(2)
            .map(|w| match (w[0], w[1]) {
                (Some(a), Some(b)) if a > 0.0 && b > 0.0 => format!("{:.3}", (a / b).log2()),
                _ => "-".to_string(),
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let finest = window[window.len() - 1];
    let mut check = Check::near(
        id,
        Kind::Convergence,
        what,
        source,
        "order",
        measured,
        f64::from(expected),
        TOLERANCE,
    );
    check.tolerance = format!(
        "{}; finest error >= {}",
        check.tolerance,
        super::sci(floor(p))
    );
    check.result = format!(
        "{} (5 steps, dt {} .. {}; successive orders {}; errors {} .. {})",
        check.result,
        short(dt_hi),
        short(dt_lo),
        successive(start as usize),
        super::sci(window[0]),
        super::sci(finest),
    );
    let mut notes: Vec<String> = Vec::new();
    if let Some(n) = theory_note {
        notes.push(format!("theory: {n}."));
    }
    let oa = spectral::order_of_accuracy(&case.scheme, facts.xi);
    if oa != case.order[usize::from(facts.xi > 0.0)] {
        check.passed = false;
        notes.push(format!(
            "spectral::order_of_accuracy gives {oa}, the source {}.",
            case.order[usize::from(facts.xi > 0.0)]
        ));
    }
    if let Some(why) = start_why {
        notes.push(format!(
            "start: {why}; successive-halving orders from dt0: {}. The start level is not \
             derived: it was read from these orders, where the stated term visibly bends the \
             first halvings; the order is then measured over the five steps from there.",
            successive(0)
        ));
    }
    if finest.is_nan() || finest < floor(p) {
        check.passed = false;
        notes.push(format!(
            "the finest error {} is below {}, where round-off or the reference's own error \
             bends the slope: use larger steps.",
            super::sci(finest),
            super::sci(floor(p))
        ));
    }
    if !notes.is_empty() {
        check = check.with_note(notes.join(" "));
    }
    check
}

/// The smallest finest-step error a problem's reference supports.
fn floor(p: &dyn ReferenceProblem) -> f64 {
    if p.tabulated_times().is_some() {
        FLOOR_TABULATED
    } else {
        FLOOR_EXACT
    }
}

/// A step with up to four significant digits, trailing zeros dropped (`0.003125`, `1.389e-2`).
fn short(x: f64) -> String {
    if (1e-3..1.0).contains(&x) {
        let s = format!("{x:.6}");
        let s = s.trim_end_matches('0');
        if s.len() <= 8 {
            return s.to_string();
        }
    }
    format!("{x:.4e}")
}

/// The checks of this kind: one per scheme of [`cases`] and problem of [`reference::smooth`].
pub(crate) fn checks() -> Vec<Check> {
    let cases = match cases() {
        Ok(c) => c,
        Err(e) => {
            return vec![Check::failed_to_run(
                "convergence.schemes",
                Kind::Convergence,
                "the schemes of the convergence study",
                "-",
                e,
            )];
        }
    };
    let problems = crate::problems::smooth();
    let mut out = Vec::new();
    for case in &cases {
        for p in &problems {
            out.push(check_one(case, p.as_ref()));
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every scheme reaches its theoretical order within 0.1 on every smooth problem (about 17 s
    /// in a debug build on one core; the slowest checks are printed with `--nocapture`).
    #[test]
    fn every_scheme_reaches_its_order_on_every_smooth_problem() {
        let start = std::time::Instant::now();
        let mut timed = Vec::new();
        for case in &cases().unwrap() {
            for p in crate::problems::smooth() {
                let t = std::time::Instant::now();
                let c = check_one(case, p.as_ref());
                timed.push((t.elapsed().as_secs_f64(), c));
            }
        }
        eprintln!(
            "{} checks in {:.1} s",
            timed.len(),
            start.elapsed().as_secs_f64()
        );
        for (_, c) in &timed {
            eprintln!("{:<62} {} {}", c.id, c.passed, c.result);
        }
        timed.sort_by(|a, b| b.0.total_cmp(&a.0));
        for (t, c) in timed.iter().take(5) {
            eprintln!("slowest: {t:.2} s {}", c.id);
        }
        let failed: Vec<&Check> = timed.iter().map(|(_, c)| c).filter(|c| !c.passed).collect();
        assert!(failed.is_empty(), "{failed:#?}");
        assert_eq!(timed.len(), 13 * crate::problems::smooth().len());
    }

    /// A wrong theoretical order fails the check, and so does a disagreement with
    /// `spectral::order_of_accuracy`: Newmark with gamma = 0.6 claimed second order.
    #[test]
    fn a_wrong_theoretical_order_fails() {
        let p = stepgauge::reference::SdofFree::standard_undamped();
        let case = Case {
            slug: "wrong",
            label: "Newmark beta = 0.3025, gamma = 0.6, claimed second order",
            scheme: Scheme::Alpha(AlphaParams::newmark(0.3025, 0.6).unwrap()),
            order: [2, 2],
            source: "none",
        };
        let c = check_one(&case, &p);
        assert!(!c.passed, "{c:#?}");
        assert!(c.result.starts_with("order = 0.98"), "{}", c.result);
        assert!(
            c.note
                .as_deref()
                .unwrap()
                .contains("order_of_accuracy gives 1"),
            "{c:#?}"
        );
    }

    /// Fox-Goodwin: fourth order only from a quiet start on an undamped problem.
    #[test]
    fn fox_goodwin_theory_depends_on_the_start() {
        let cases = cases().unwrap();
        let fg = cases.iter().find(|c| c.slug == "fox-goodwin").unwrap();
        let order = |name: &str| theoretical_order(fg, &facts(name).unwrap()).0;
        assert_eq!(order("two-dof-step"), 4);
        assert_eq!(order("stiff-soft"), 4);
        assert_eq!(order("sdof-free-undamped"), 2);
        assert_eq!(order("sdof-harmonic-resonant"), 2);
        assert_eq!(order("hardening"), 2);
        assert!(facts("no-such-problem").is_none());
    }

    #[test]
    fn short_steps() {
        assert_eq!(short(0.05), "0.05");
        assert_eq!(short(0.003125), "0.003125");
        assert_eq!(short(1.3884e-4), "1.3884e-4");
        assert_eq!(short(0.138_84), "0.13884");
    }
}
