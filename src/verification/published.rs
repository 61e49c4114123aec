//! Checks of kind [`Kind::Published`](super::Kind): worked examples printed in textbooks.
//!
//! Each example is solved with stepgauge's integrators and compared with the printed table, and
//! with an independent recurrence written out in the check itself (the textbook's own algebra,
//! different from stepgauge's), so that a disagreement with a table can be told apart from a fault
//! of stepgauge. The printed numbers below were recalled, not read from the books: every source
//! says "(from memory)". The tolerances follow the printed rounding: half a unit of the last
//! printed digit, plus a tenth of a unit for the rounding of the book's own inputs and
//! intermediate values (for example `m = 0.2533` for `T_n = 1 s`).
//!
//! - Chopra (2012), *Dynamics of Structures*, 4th ed., ch. 5 (example numbers from memory):
//!   `m = 0.2533 kip-s^2/in`, `k = 10 kips/in`, `zeta = 0.05`, `p(t) = 10 sin(pi t / 0.6)` kips
//!   for `t <= 0.6 s`, from rest, `dt = 0.1 s`, by the Newmark average- and linear-acceleration
//!   methods (Examples 5.3, 5.4) and the exact solution; the central difference (Example 5.2)
//!   against the book's recurrence, the printed column not being recalled.
//! - Bathe (1996), *Finite Element Procedures*, sec. 9.2 (example numbers from memory):
//!   `M = diag(2, 1)`, `K = [[6, -2], [-2, 4]]`, `R = (0, 10)`, from rest, `dt = 0.28`, twelve
//!   steps, by the central difference and the trapezoidal rule, printed to three significant
//!   figures.

use std::f64::consts::PI;

use super::{Check, Kind};
use crate::error::Result;
use crate::explicit::{CentralDifference, CentralDifferenceOptions, ForceVelocity};
use crate::implicit::{AlphaIntegrator, ImplicitOptions};
use crate::linalg::SparseCholesky;
use crate::model::{LinearModel, Load, TimeFunction};
use crate::params::AlphaParams;
use crate::reference::{ReferenceProblem, SdofHalfSine, TwoDofStep};
use crate::state::State;

const KIND: Kind = Kind::Published;

/// The checks of this kind.
pub(crate) fn checks() -> Vec<Check> {
    let mut out = chopra();
    out.extend(bathe());
    out
}

/// A check from a computation that may fail: the check, or a failed one saying why.
fn checked(id: &str, what: &str, source: &str, make: impl FnOnce() -> Result<Check>) -> Check {
    make().unwrap_or_else(|e| Check::failed_to_run(id, KIND, what, source, e))
}

/// The largest absolute difference of two equally long sequences (`NaN` when a value is not
/// finite, or when the lengths differ).
fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    if a.len() != b.len() {
        return f64::NAN;
    }
    a.iter().zip(b).fold(0.0, |m: f64, (x, y)| {
        let d = (x - y).abs();
        if d.is_nan() { f64::NAN } else { m.max(d) }
    })
}

/// The largest absolute value of a sequence.
fn max_abs(a: &[f64]) -> f64 {
    a.iter().fold(0.0, |m: f64, x| m.max(x.abs()))
}

// ---------------------------------------------------------------------------------------------
// Chopra (2012), ch. 5: a damped SDOF under a half-sine pulse.

/// Mass (kip-s^2/in): `T_n = 2 pi sqrt(m / k) = 1 s`.
const CH_M: f64 = 0.2533;
/// Stiffness (kips/in).
const CH_K: f64 = 10.0;
/// Damping ratio.
const CH_ZETA: f64 = 0.05;
/// Pulse amplitude (kips).
const CH_P0: f64 = 10.0;
/// Pulse duration (s).
const CH_TD: f64 = 0.6;
/// Time step (s).
const CH_DT: f64 = 0.1;
/// Steps printed: `t = 0.1 .. 1.0 s`.
const CH_STEPS: usize = 10;

/// Chopra (2012), Example 5.3, Newmark average acceleration, `u_i` (in) at `t = 0.1 .. 1.0 s`
/// (from memory).
const CH_AVERAGE: [f64; CH_STEPS] = [
    0.0437, 0.2326, 0.6121, 1.0825, 1.4309, 1.4231, 0.9622, 0.1908, -0.6044, -1.1442,
];
/// Chopra (2012), Example 5.4, Newmark linear acceleration (from memory).
const CH_LINEAR: [f64; CH_STEPS] = [
    0.0300, 0.2193, 0.6166, 1.1130, 1.4782, 1.4625, 0.9514, 0.1273, -0.6954, -1.2208,
];
/// Chopra (2012), Examples 5.3 and 5.4, the exact solution column (from memory).
const CH_EXACT: [f64; CH_STEPS] = [
    0.0328, 0.2332, 0.6487, 1.1605, 1.5241, 1.4814, 0.9245, 0.0593, -0.7751, -1.2718,
];
/// Four printed decimals: half a unit (5e-5) plus a tenth of a unit for the rounded inputs.
const CH_TOL: f64 = 6e-5;

fn chopra_load(t: f64) -> f64 {
    if (0.0..CH_TD).contains(&t) {
        CH_P0 * (PI * t / CH_TD).sin()
    } else {
        0.0
    }
}

/// `c = 2 zeta sqrt(k m)`.
fn chopra_c(zeta: f64) -> f64 {
    2.0 * zeta * (CH_K * CH_M).sqrt()
}

/// The example as a [`LinearModel`]: mass-proportional damping `c = a0 m`, the load as a
/// function of time.
fn chopra_model(zeta: f64) -> Result<LinearModel> {
    let one = |v: f64| {
        let mut t = sprs::TriMat::new((1, 1));
        t.add_triplet(0, 0, v);
        t.to_csr()
    };
    let mut model = LinearModel::new(&one(CH_M), &one(CH_K))?.with_load(Load::Pattern {
        pattern: vec![1.0],
        factor: TimeFunction::function(chopra_load),
    })?;
    if zeta > 0.0 {
        model = model.with_rayleigh(chopra_c(zeta) / CH_M, 0.0)?;
    }
    Ok(model)
}

/// stepgauge's [`AlphaIntegrator`] on the example: `u` at `t = 0.1 .. 1.0 s`.
fn chopra_alpha(p: AlphaParams) -> Result<Vec<f64>> {
    let mut model = chopra_model(CH_ZETA)?;
    let mut state = State::at_rest(1, 0.0);
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        p,
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )?;
    let mut u = Vec::with_capacity(CH_STEPS);
    for _ in 0..CH_STEPS {
        it.step(&mut model, &mut state, CH_DT)?;
        u.push(state.u[0]);
    }
    Ok(u)
}

/// stepgauge's [`CentralDifference`] on the example with damping ratio `zeta`.
fn chopra_cd(zeta: f64) -> Result<Vec<f64>> {
    let mut model = chopra_model(zeta)?;
    let mut state = State::at_rest(1, 0.0);
    let options = CentralDifferenceOptions {
        force_velocity: ForceVelocity::Lagged,
        ..Default::default()
    };
    let mut cd = CentralDifference::new(&mut model, &mut state, options)?;
    let mut u = Vec::with_capacity(CH_STEPS);
    for _ in 0..CH_STEPS {
        cd.step(&mut model, &mut state, CH_DT)?;
        u.push(state.u[0]);
    }
    Ok(u)
}

/// Newmark's method for linear systems in Chopra's incremental form (Chopra 2012, sec. 5.4;
/// written out here independently of stepgauge's total, predictor-corrector form):
///
/// ```text
/// k^ = k + gamma c / (beta dt) + m / (beta dt^2)
/// a = m / (beta dt) + gamma c / beta,   b = m / (2 beta) + dt (gamma / (2 beta) - 1) c
/// dp^ = dp + a v_i + b a_i,   du = dp^ / k^
/// dv = gamma du / (beta dt) - gamma v_i / beta + dt (1 - gamma / (2 beta)) a_i
/// da = du / (beta dt^2) - v_i / (beta dt) - a_i / (2 beta)
/// ```
fn chopra_newmark_recurrence(beta: f64, gamma: f64) -> Vec<f64> {
    let (m, k, c, dt) = (CH_M, CH_K, chopra_c(CH_ZETA), CH_DT);
    let k_hat = k + gamma * c / (beta * dt) + m / (beta * dt * dt);
    let a = m / (beta * dt) + gamma * c / beta;
    let b = m / (2.0 * beta) + dt * (gamma / (2.0 * beta) - 1.0) * c;
    let (mut u, mut v) = (0.0, 0.0);
    let mut acc = (chopra_load(0.0) - c * v - k * u) / m;
    let mut out = Vec::with_capacity(CH_STEPS);
    for i in 0..CH_STEPS {
        let dp = chopra_load((i + 1) as f64 * dt) - chopra_load(i as f64 * dt);
        let du = (dp + a * v + b * acc) / k_hat;
        let dv =
            gamma * du / (beta * dt) - gamma * v / beta + dt * (1.0 - gamma / (2.0 * beta)) * acc;
        let da = du / (beta * dt * dt) - v / (beta * dt) - acc / (2.0 * beta);
        u += du;
        v += dv;
        acc += da;
        out.push(u);
    }
    out
}

/// The central difference in Chopra's displacement recurrence (Chopra 2012, sec. 5.2, written
/// out here): with `u_-1 = u_0 - dt v_0 + dt^2 a_0 / 2`,
/// `u_{i+1} = (p_i - a u_{i-1} - b u_i) / k^`, `k^ = m / dt^2 + c_k / (2 dt)`,
/// `a = m / dt^2 - c_k / (2 dt)`, `b = k - 2 m / dt^2`, where the damping term is
/// `c_k (u_{i+1} - u_{i-1}) / (2 dt)` (Chopra's centred velocity, `lagged = false`) or, with
/// `lagged = true`, `c (u_i - u_{i-1}) / dt` (the lagged half-step velocity, as stepgauge's
/// [`ForceVelocity::Lagged`] takes it): then `k^ = m / dt^2`, `a = m / dt^2 - c / dt`,
/// `b = k - 2 m / dt^2 + c / dt`.
fn chopra_cd_recurrence(zeta: f64, lagged: bool) -> Vec<f64> {
    let (m, k, c, dt) = (CH_M, CH_K, chopra_c(zeta), CH_DT);
    let (k_hat, a, b) = if lagged {
        (
            m / (dt * dt),
            m / (dt * dt) - c / dt,
            k - 2.0 * m / (dt * dt) + c / dt,
        )
    } else {
        (
            m / (dt * dt) + c / (2.0 * dt),
            m / (dt * dt) - c / (2.0 * dt),
            k - 2.0 * m / (dt * dt),
        )
    };
    let (u0, v0) = (0.0, 0.0);
    let a0 = (chopra_load(0.0) - c * v0 - k * u0) / m;
    let mut prev = u0 - dt * v0 + 0.5 * dt * dt * a0;
    let mut cur = u0;
    let mut out = Vec::with_capacity(CH_STEPS);
    for i in 0..CH_STEPS {
        let next = (chopra_load(i as f64 * dt) - a * prev - b * cur) / k_hat;
        out.push(next);
        prev = cur;
        cur = next;
    }
    out
}

/// Notes where a computed value, rounded to the printed decimals, differs from the printed one.
fn rounding_note(
    computed: &[f64],
    printed: &[f64],
    decimals: i32,
    dt: f64,
    independent: &str,
) -> Option<String> {
    let scale = 10f64.powi(decimals);
    let diffs: Vec<String> = computed
        .iter()
        .zip(printed)
        .enumerate()
        .filter(|(_, (c, p))| ((*c * scale).round() - (*p * scale).round()).abs() > 0.5)
        .map(|(i, (c, p))| {
            format!(
                "t = {:.2}: computed {c:.7}, printed {p}",
                (i + 1) as f64 * dt
            )
        })
        .collect();
    if diffs.is_empty() {
        None
    } else {
        Some(format!(
            "rounded to the printed digits, {} value(s) differ in the last digit ({}): within \
             the tolerance, which allows a tenth of a unit for the book's rounding of its inputs \
             and constants; {independent}",
            diffs.len(),
            diffs.join("; ")
        ))
    }
}

fn with_optional_note(check: Check, note: Option<String>) -> Check {
    match note {
        Some(n) => check.with_note(n),
        None => check,
    }
}

fn chopra() -> Vec<Check> {
    let src_avg = "Chopra (2012), Dynamics of Structures, 4th ed., Example 5.3 (Newmark average \
                   acceleration, dt = 0.1 s), printed u_i, t = 0.1..1.0 s (example number and \
                   values from memory)";
    let src_lin = "Chopra (2012), Dynamics of Structures, 4th ed., Example 5.4 (Newmark linear \
                   acceleration, dt = 0.1 s), printed u_i, t = 0.1..1.0 s (example number and \
                   values from memory)";
    let mut out = Vec::new();
    for (id, what, src, params, table, beta) in [
        (
            "published.chopra-e5.3.average-acceleration",
            "Newmark average acceleration (AlphaIntegrator) on Chopra's damped SDOF under a half-sine pulse: largest |u - printed u| over 10 steps",
            src_avg,
            AlphaParams::average_acceleration(),
            CH_AVERAGE,
            0.25,
        ),
        (
            "published.chopra-e5.4.linear-acceleration",
            "Newmark linear acceleration (AlphaIntegrator) on Chopra's damped SDOF under a half-sine pulse: largest |u - printed u| over 10 steps",
            src_lin,
            AlphaParams::linear_acceleration(),
            CH_LINEAR,
            1.0 / 6.0,
        ),
    ] {
        out.push(checked(id, what, src, || {
            let u = chopra_alpha(params)?;
            let c = Check::at_most(
                id,
                KIND,
                what,
                src,
                "max |u - u_printed|",
                max_diff(&u, &table),
                CH_TOL,
                "in",
            );
            Ok(with_optional_note(
                c,
                rounding_note(
                    &u,
                    &table,
                    4,
                    CH_DT,
                    "the independent recurrence (next check) agrees with stepgauge to round-off",
                ),
            ))
        }));
        let rid = format!("{id}.recurrence");
        let rwhat = "the same run against Newmark's incremental recurrence for linear systems, \
                     written out in the check: largest |u - u_recurrence| relative to max |u|";
        let rsrc = "Chopra (2012), Dynamics of Structures, 4th ed., sec. 5.4 (Newmark's method, \
                    incremental form for linear systems; from memory)";
        out.push(checked(&rid, rwhat, rsrc, || {
            let u = chopra_alpha(params)?;
            let r = chopra_newmark_recurrence(beta, 0.5);
            Ok(Check::at_most(
                rid.as_str(),
                KIND,
                rwhat,
                rsrc,
                "relative difference",
                max_diff(&u, &r) / max_abs(&r),
                1e-12,
                "",
            ))
        }));
    }
    // The exact column against stepgauge's closed form.
    let id = "published.chopra-e5.3.exact";
    let what = "stepgauge's exact half-sine pulse solution (reference::SdofHalfSine with Chopra's parameters) against the printed exact column: largest difference";
    let src = "Chopra (2012), Dynamics of Structures, 4th ed., Examples 5.3 and 5.4, exact \
               solution column, t = 0.1..1.0 s (values from memory)";
    out.push(checked(id, what, src, || {
        let p = SdofHalfSine::new(CH_M, CH_K, CH_ZETA, CH_P0, CH_TD)?;
        let u: Vec<f64> = (1..=CH_STEPS).map(|i| p.exact(i as f64 * CH_DT)).collect();
        let c = Check::at_most(
            id,
            KIND,
            what,
            src,
            "max |u - u_printed|",
            max_diff(&u, &CH_EXACT),
            CH_TOL,
            "in",
        );
        Ok(with_optional_note(
            c,
            rounding_note(
                &u,
                &CH_EXACT,
                4,
                CH_DT,
                "an independent numerical solution of the same equation (SciPy solve_ivp, \
             rtol 1e-12, run when this check was written, not committed) gave the same \
             values to seven digits",
            ),
        ))
    }));
    // Central difference: the printed column is not recalled; the book's recurrence is.
    let id = "published.chopra-e5.2.central-difference.undamped";
    let what = "central difference (half-step form, started from rest) on Chopra's pulse problem without damping against the book's displacement recurrence with u_-1 = u_0 - dt v_0 + dt^2 a_0 / 2, written out in the check: largest difference relative to max |u|";
    let src = "Chopra (2012), Dynamics of Structures, 4th ed., sec. 5.2 and Example 5.2 \
               (central difference recurrence; from memory; the printed column is not recalled, \
               so the recurrence is the reference)";
    out.push(checked(id, what, src, || {
        let u = chopra_cd(0.0)?;
        let r = chopra_cd_recurrence(0.0, false);
        Ok(Check::at_most(
            id,
            KIND,
            what,
            src,
            "relative difference",
            max_diff(&u, &r) / max_abs(&r),
            1e-12,
            "",
        ))
    }));
    let id = "published.chopra-e5.2.central-difference.damped";
    let what = "central difference with the lagged damping velocity on Chopra's damped pulse problem (zeta = 0.05) against the book's displacement recurrence with the damping term c (u_i - u_(i-1)) / dt in place of the centred term, written out in the check: largest difference relative to max |u|";
    let src = "Chopra (2012), Dynamics of Structures, 4th ed., sec. 5.2 (recurrence; from \
               memory) with the damping force at the lagged half-step velocity (Belytschko, \
               Liu & Moran 2000, Nonlinear Finite Elements for Continua and Structures, sec. 6.2)";
    out.push(checked(id, what, src, || {
        let u = chopra_cd(CH_ZETA)?;
        let lagged = chopra_cd_recurrence(CH_ZETA, true);
        let centred = chopra_cd_recurrence(CH_ZETA, false);
        let exact = SdofHalfSine::new(CH_M, CH_K, CH_ZETA, CH_P0, CH_TD)?;
        let ex: Vec<f64> = (1..=CH_STEPS)
            .map(|i| exact.exact(i as f64 * CH_DT))
            .collect();
        Ok(Check::at_most(
            id,
            KIND,
            what,
            src,
            "relative difference",
            max_diff(&u, &lagged) / max_abs(&lagged),
            1e-12,
            "",
        )
        .with_note(format!(
            "Chopra's recurrence takes the centred velocity (u_(i+1) - u_(i-1)) / (2 dt) in the \
             damping term; stepgauge's central difference takes the lagged half-step velocity \
             (ForceVelocity::Lagged) or a predicted one, never the centred one, so the check \
             uses the lagged variant of the recurrence. The two damping treatments differ here \
             by at most {:.2e} in (largest |u| {:.3} in); against the exact solution the lagged \
             run errs by at most {:.2e} in, the centred recurrence by {:.2e} in",
            max_diff(&u, &centred),
            max_abs(&centred),
            max_diff(&u, &ex),
            max_diff(&centred, &ex)
        )))
    }));
    out
}

// ---------------------------------------------------------------------------------------------
// Bathe (1996), sec. 9.2: the two-DOF system under a step load.

/// Time step.
const BA_DT: f64 = 0.28;
/// Steps printed.
const BA_STEPS: usize = 12;

/// Bathe (1996), Example 9.1, central difference, `U_1` and `U_2` at `t = dt .. 12 dt`
/// (three significant figures; from memory).
const BA_CD: [[f64; BA_STEPS]; 2] = [
    [
        0.0, 0.0307, 0.168, 0.487, 1.02, 1.70, 2.40, 2.91, 3.07, 2.77, 2.04, 1.02,
    ],
    [
        0.392, 1.45, 2.83, 4.14, 5.02, 5.26, 4.90, 4.17, 3.37, 2.78, 2.54, 2.60,
    ],
];
/// Bathe (1996), the trapezoidal-rule example of sec. 9.2 (from memory).
const BA_TRAPEZOIDAL: [[f64; BA_STEPS]; 2] = [
    [
        0.00673, 0.0505, 0.189, 0.485, 0.961, 1.58, 2.23, 2.76, 3.00, 2.85, 2.28, 1.40,
    ],
    [
        0.364, 1.35, 2.68, 4.00, 4.95, 5.34, 5.13, 4.48, 3.64, 2.90, 2.44, 2.31,
    ],
];
/// Half a unit of the last printed digit plus a tenth of a unit for the book's rounding of its
/// intermediate values.
const BA_TOL_UNITS: f64 = 0.6;

/// One unit of the last digit of `x` printed with `sig` significant figures; for a printed 0
/// (the exact zero of `U_1` at the first step), 1e-4.
fn last_digit_unit(x: f64, sig: i32) -> f64 {
    if x == 0.0 {
        1e-4
    } else {
        10f64.powi(x.abs().log10().floor() as i32 - (sig - 1))
    }
}

/// The largest deviation from the printed table in units of the last printed digit, and the
/// entries whose rounded value differs from the printed one.
fn bathe_deviation(u: &[[f64; 2]], table: &[[f64; BA_STEPS]; 2]) -> (f64, Vec<String>) {
    let mut worst: f64 = if u.len() == BA_STEPS { 0.0 } else { f64::NAN };
    let mut off = Vec::new();
    for (n, un) in u.iter().enumerate().take(BA_STEPS) {
        for d in 0..2 {
            let p = table[d][n];
            let unit = last_digit_unit(p, 3);
            let dev = (un[d] - p).abs() / unit;
            worst = if dev.is_nan() {
                f64::NAN
            } else {
                worst.max(dev)
            };
            if dev > 0.5 {
                off.push(format!(
                    "U{} at t = {} dt: computed {:.6}, printed {p} ({dev:.2} units of the last digit)",
                    d + 1,
                    n + 1,
                    un[d]
                ));
            }
        }
    }
    (worst, off)
}

fn bathe_stepgauge_cd() -> Result<Vec<[f64; 2]>> {
    let problem = TwoDofStep;
    let mut model = problem.model()?;
    let mut state = problem.initial_state();
    let mut cd = CentralDifference::new(&mut *model, &mut state, Default::default())?;
    let mut out = Vec::with_capacity(BA_STEPS);
    for _ in 0..BA_STEPS {
        cd.step(&mut *model, &mut state, BA_DT)?;
        out.push([state.u[0], state.u[1]]);
    }
    Ok(out)
}

fn bathe_stepgauge_trapezoidal() -> Result<Vec<[f64; 2]>> {
    let problem = TwoDofStep;
    let mut model = problem.model()?;
    let mut state = problem.initial_state();
    let mut it = AlphaIntegrator::new(
        &mut *model,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )?;
    let mut out = Vec::with_capacity(BA_STEPS);
    for _ in 0..BA_STEPS {
        it.step(&mut *model, &mut state, BA_DT)?;
        out.push([state.u[0], state.u[1]]);
    }
    Ok(out)
}

/// `K u` for the example's stiffness.
fn bathe_k(u: [f64; 2]) -> [f64; 2] {
    let k = TwoDofStep::STIFFNESS;
    [
        k[0][0] * u[0] + k[0][1] * u[1],
        k[1][0] * u[0] + k[1][1] * u[1],
    ]
}

/// Bathe's central difference in displacement form (Bathe 1996, sec. 9.2.1; written out here):
/// `U_-dt = U_0 - dt U'_0 + dt^2 U''_0 / 2` with `U''_0 = M^-1 (R - K U_0)`, then
/// `(M / dt^2) U_{t+dt} = R - (K - 2 M / dt^2) U_t - (M / dt^2) U_{t-dt}`.
fn bathe_cd_recurrence() -> Vec<[f64; 2]> {
    let (m, r, dt) = (TwoDofStep::MASS, TwoDofStep::LOAD, BA_DT);
    let u0 = [0.0; 2];
    let ku0 = bathe_k(u0);
    let a0 = [(r[0] - ku0[0]) / m[0], (r[1] - ku0[1]) / m[1]];
    let mut prev = [u0[0] + 0.5 * dt * dt * a0[0], u0[1] + 0.5 * dt * dt * a0[1]];
    let mut cur = u0;
    let mut out = Vec::with_capacity(BA_STEPS);
    for _ in 0..BA_STEPS {
        let ku = bathe_k(cur);
        let mut next = [0.0; 2];
        for d in 0..2 {
            let md = m[d] / (dt * dt);
            next[d] = (r[d] - (ku[d] - 2.0 * md * cur[d]) - md * prev[d]) / md;
        }
        out.push(next);
        prev = cur;
        cur = next;
    }
    out
}

/// Bathe's Newmark step with the effective stiffness (Bathe 1996, sec. 9.2.4; written out
/// here), `delta = 1/2`, `alpha = 1/4`: `a0 = 1 / (alpha dt^2)`, `a2 = 1 / (alpha dt)`,
/// `a3 = 1 / (2 alpha) - 1`, `a6 = dt (1 - delta)`, `a7 = delta dt`; `K^ = K + a0 M`,
/// `R^ = R + M (a0 U + a2 U' + a3 U'')`, `K^ U_new = R^` (2x2, by Cramer's rule),
/// `U''_new = a0 (U_new - U) - a2 U' - a3 U''`, `U'_new = U' + a6 U'' + a7 U''_new`.
fn bathe_trapezoidal_recurrence() -> Vec<[f64; 2]> {
    let (m, r, k, dt) = (
        TwoDofStep::MASS,
        TwoDofStep::LOAD,
        TwoDofStep::STIFFNESS,
        BA_DT,
    );
    let (alpha, delta) = (0.25, 0.5);
    let a0 = 1.0 / (alpha * dt * dt);
    let a2 = 1.0 / (alpha * dt);
    let a3 = 1.0 / (2.0 * alpha) - 1.0;
    let a6 = dt * (1.0 - delta);
    let a7 = delta * dt;
    let kh = [
        [k[0][0] + a0 * m[0], k[0][1]],
        [k[1][0], k[1][1] + a0 * m[1]],
    ];
    let det = kh[0][0] * kh[1][1] - kh[0][1] * kh[1][0];
    let mut u = [0.0f64; 2];
    let mut v = [0.0f64; 2];
    let ku = bathe_k(u);
    let mut a = [(r[0] - ku[0]) / m[0], (r[1] - ku[1]) / m[1]];
    let mut out = Vec::with_capacity(BA_STEPS);
    for _ in 0..BA_STEPS {
        let rh = [
            r[0] + m[0] * (a0 * u[0] + a2 * v[0] + a3 * a[0]),
            r[1] + m[1] * (a0 * u[1] + a2 * v[1] + a3 * a[1]),
        ];
        let un = [
            (rh[0] * kh[1][1] - kh[0][1] * rh[1]) / det,
            (kh[0][0] * rh[1] - kh[1][0] * rh[0]) / det,
        ];
        let mut an = [0.0; 2];
        for d in 0..2 {
            an[d] = a0 * (un[d] - u[d]) - a2 * v[d] - a3 * a[d];
            v[d] += a6 * a[d] + a7 * an[d];
        }
        u = un;
        a = an;
        out.push(u);
    }
    out
}

fn flat(u: &[[f64; 2]]) -> Vec<f64> {
    u.iter().flat_map(|x| x.iter().copied()).collect()
}

/// One of Bathe's examples: the run, the printed table, and the independent recurrence.
struct BatheCase {
    id: &'static str,
    what: &'static str,
    source: &'static str,
    run: fn() -> Result<Vec<[f64; 2]>>,
    table: &'static [[f64; BA_STEPS]; 2],
    rwhat: &'static str,
    rsource: &'static str,
    recurrence: fn() -> Vec<[f64; 2]>,
    rnote: &'static str,
}

fn bathe() -> Vec<Check> {
    let mut out = Vec::new();
    let cases = [
        BatheCase {
            id: "published.bathe-e9.1.central-difference",
            what: "central difference (half-step form, started from rest with a_0 = M^-1 R) on Bathe's two-DOF step-load example: largest deviation of U_1, U_2 from the printed values over 12 steps, in units of the last printed digit",
            source: "Bathe (1996), Finite Element Procedures, sec. 9.2, Example 9.1 (central \
                difference, dt = 0.28), printed U at t = dt..12 dt to three significant figures \
                (example number and values from memory)",
            run: bathe_stepgauge_cd,
            table: &BA_CD,
            rwhat: "the same run against Bathe's displacement recurrence started with U_-dt = U_0 - dt U'_0 + dt^2 U''_0 / 2, written out in the check: largest difference relative to max |U|",
            rsource: "Bathe (1996), Finite Element Procedures, sec. 9.2.1 (central difference \
                recurrence and its start; from memory)",
            recurrence: bathe_cd_recurrence,
            rnote: "the half-step form from rest gives U_dt = dt^2 a_0 / 2 and, eliminating the \
                half-step velocities, U_(t+dt) = 2 U_t - U_(t-dt) + dt^2 M^-1 (R - K U_t): the \
                same displacements as the book's start with U_-dt, algebraically",
        },
        BatheCase {
            id: "published.bathe-e9.x.trapezoidal",
            what: "Newmark trapezoidal rule (AlphaIntegrator, beta = 1/4, gamma = 1/2) on Bathe's two-DOF step-load example: largest deviation of U_1, U_2 from the printed values over 12 steps, in units of the last printed digit",
            source: "Bathe (1996), Finite Element Procedures, sec. 9.2, the trapezoidal-rule \
                (Newmark) example on the same system, dt = 0.28, printed U at t = dt..12 dt to \
                three significant figures (example number and values from memory)",
            run: bathe_stepgauge_trapezoidal,
            table: &BA_TRAPEZOIDAL,
            rwhat: "the same run against Bathe's effective-stiffness Newmark recurrence, written out in the check: largest difference relative to max |U|",
            rsource: "Bathe (1996), Finite Element Procedures, sec. 9.2.4 (Newmark's method with the \
                integration constants a_0..a_7; from memory)",
            recurrence: bathe_trapezoidal_recurrence,
            rnote: "stepgauge solves the predictor-corrector form for u_(n+1); the book's form solves \
                the effective stiffness K + a_0 M for U_(t+dt): the same scheme, different algebra",
        },
    ];
    for BatheCase {
        id,
        what,
        source: src,
        run,
        table,
        rwhat,
        rsource: rsrc,
        recurrence,
        rnote,
    } in cases
    {
        out.push(checked(id, what, src, || {
            let u = run()?;
            let (dev, off) = bathe_deviation(&u, table);
            let c = Check::at_most(
                id,
                KIND,
                what,
                src,
                "max |U - U_printed| / unit",
                dev,
                BA_TOL_UNITS,
                "",
            );
            Ok(if off.is_empty() {
                c
            } else {
                c.with_note(format!(
                    "rounded to three significant figures, {} value(s) differ from the printed \
                     ones: {}. The independent recurrence (next check) gives the same values as \
                     stepgauge; the tolerance allows a tenth of a unit for the book's rounding of \
                     intermediate values",
                    off.len(),
                    off.join("; ")
                ))
            })
        }));
        let rid = format!("{id}.recurrence");
        out.push(checked(&rid, rwhat, rsrc, || {
            let u = flat(&run()?);
            let r = flat(&recurrence());
            Ok(Check::at_most(
                rid.as_str(),
                KIND,
                rwhat,
                rsrc,
                "relative difference",
                max_diff(&u, &r) / max_abs(&r),
                1e-12,
                "",
            )
            .with_note(rnote))
        }));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn all_published_checks_pass_and_ids_are_unique() {
        let checks = checks();
        assert!(checks.len() >= 11, "{}", checks.len());
        for c in &checks {
            assert!(c.passed, "{c:#?}");
            assert_eq!(c.kind, Kind::Published);
            assert!(c.id.starts_with("published."), "{}", c.id);
            assert!(c.source.contains("from memory"), "{}: {}", c.id, c.source);
        }
        let mut ids: Vec<&str> = checks.iter().map(|c| c.id.as_str()).collect();
        ids.sort_unstable();
        let n = ids.len();
        ids.dedup();
        assert_eq!(ids.len(), n, "duplicate ids");
    }

    /// The comparisons can fail: a wrong step size or scheme misses the printed tables.
    #[test]
    fn the_tables_tell_schemes_apart() {
        let avg = chopra_alpha(AlphaParams::average_acceleration()).unwrap();
        let lin = chopra_alpha(AlphaParams::linear_acceleration()).unwrap();
        assert!(max_diff(&avg, &CH_LINEAR) > 10.0 * CH_TOL);
        assert!(max_diff(&lin, &CH_AVERAGE) > 10.0 * CH_TOL);
        let cd = bathe_stepgauge_cd().unwrap();
        assert!(bathe_deviation(&cd, &BA_TRAPEZOIDAL).0 > 10.0 * BA_TOL_UNITS);
        let nm = bathe_stepgauge_trapezoidal().unwrap();
        assert!(bathe_deviation(&nm, &BA_CD).0 > 10.0 * BA_TOL_UNITS);
        // The recurrences are not trivially equal to each other either.
        let lagged = chopra_cd_recurrence(CH_ZETA, true);
        let centred = chopra_cd_recurrence(CH_ZETA, false);
        assert!(max_diff(&lagged, &centred) > 1e-6);
    }

    #[test]
    fn last_digit_units() {
        assert!((last_digit_unit(0.00673, 3) - 1e-5).abs() < 1e-18);
        assert!((last_digit_unit(2.54, 3) - 1e-2).abs() < 1e-15);
        assert!((last_digit_unit(0.392, 3) - 1e-3).abs() < 1e-16);
        assert!((last_digit_unit(-1.02, 3) - 1e-2).abs() < 1e-15);
    }
}
