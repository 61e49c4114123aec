//! Checks of kind [`Kind::Published`](super::Kind): worked examples printed in textbooks; and,
//! beside them, of kind [`Kind::Rederived`](super::Kind): the same runs against the textbook's
//! recurrence written out in the check itself (the book's algebra, different from stepgauge's, but
//! written here: a second derivation by the same hands, not an outside reference), so that a
//! disagreement with a table can be told apart from a fault of stepgauge.
//!
//! The printed numbers are data, not code: `tests/data/chopra_2012_ch5.csv` and
//! `tests/data/bathe_1996_sec9_2.csv`, each with its `# source:` line (covered by the attribution
//! test of `tests/data_manifest.rs`). They were recalled, not read from the books: every source
//! says "from memory". The tolerances follow from the printed precision and the stated rounding
//! of the inputs, never from the differences observed: half a unit of the last printed decimal
//! (read from the printed text, so `4.00` has a unit of 0.01), plus, where an input is printed
//! rounded (Chopra's `m = 0.2533` for `T_n = 1 s`), the change of the computed values when the
//! input goes from its printed to its unrounded value (the book may have computed with either).
//! An entry the file's header marks as disputed (a recalled value that both independent
//! calculations contradict) is allowed one unit more, and named in the check's result.
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
use stepgauge::error::Result;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, ForceVelocity};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::{LinearModel, Load, TimeFunction};
use stepgauge::params::AlphaParams;
use stepgauge::reference::{ReferenceProblem, SdofHalfSine, TwoDofStep};
use stepgauge::state::State;

const KIND: Kind = Kind::Published;

/// The checks of this kind.
pub(crate) fn checks() -> Vec<Check> {
    let mut out = chopra();
    out.extend(bathe());
    out
}

/// A check from a computation that may fail: the check, or a failed one saying why (of the kind
/// its id names: `published.*` or `rederived.*`).
fn checked(id: &str, what: &str, source: &str, make: impl FnOnce() -> Result<Check>) -> Check {
    let kind = if id.starts_with("rederived.") {
        Kind::Rederived
    } else {
        KIND
    };
    make().unwrap_or_else(|e| Check::failed_to_run(id, kind, what, source, e))
}

/// The id of a recurrence check beside the published check `id`: a re-derivation in the project
/// (the recurrence is written out here, from the book's algebra), not a published value.
fn recurrence_id(id: &str) -> String {
    format!("{}.recurrence", id.replacen("published.", "rederived.", 1))
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

/// The mass the book rounds to [`CH_M`]: `k / (2 pi)^2` for `T_n = 1 s` (0.253303).
fn chopra_m_unrounded() -> f64 {
    CH_K / (4.0 * PI * PI)
}

/// Chopra's printed columns (`t,average_acceleration,linear_acceleration,exact`; from memory).
const CHOPRA_DATA: &str = include_str!("../../tests/data/chopra_2012_ch5.csv");
/// Where [`CHOPRA_DATA`] lives, for the sources.
const CHOPRA_FILE: &str = "tests/data/chopra_2012_ch5.csv";
/// Bathe's printed columns (`step,central_difference_u1,...,trapezoidal_u2`; from memory).
const BATHE_DATA: &str = include_str!("../../tests/data/bathe_1996_sec9_2.csv");
/// Where [`BATHE_DATA`] lives, for the sources.
const BATHE_FILE: &str = "tests/data/bathe_1996_sec9_2.csv";

/// Two independent double-precision computations of the same linear recurrence over a dozen
/// steps: each step rounds a few operations (a few `eps` relative), and a stable recurrence
/// carries the errors of earlier steps without growth beyond the number of steps, so the two
/// differ by at most about `steps x 10 eps`, 3e-14; 1e-12 leaves a margin of 30 and is still far
/// below any difference of algebra (a wrong constant moves the values by 1e-6 or more).
const RECURRENCE_TOL: f64 = 1e-12;

/// A printed value: the number and one unit of its last printed decimal.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Printed {
    value: f64,
    unit: f64,
}

/// A number as printed: its value and one unit of its last decimal (`4.00` -> 0.01, `1.0825` ->
/// 1e-4, `12` -> 1). `None` for text that is not a plain decimal number.
fn printed(field: &str) -> Option<Printed> {
    let f = field.trim();
    if f.is_empty()
        || !f
            .chars()
            .all(|c| c.is_ascii_digit() || c == '.' || c == '-')
    {
        return None;
    }
    let value: f64 = f.parse().ok()?;
    let decimals = f.split_once('.').map_or(0, |(_, d)| d.len());
    Some(Printed {
        value,
        unit: 10f64.powi(-(decimals as i32)),
    })
}

/// A table of printed values from `tests/data/`: `# key: value` header lines, a line of column
/// names, then rows of printed numbers.
#[derive(Debug)]
struct PrintedTable {
    header: Vec<(String, String)>,
    columns: Vec<String>,
    rows: Vec<Vec<Printed>>,
}

impl PrintedTable {
    /// Parses the file `name`'s text; an error names the file and line.
    fn parse(name: &str, text: &str) -> std::result::Result<PrintedTable, String> {
        let mut header = Vec::new();
        let mut columns: Vec<String> = Vec::new();
        let mut rows = Vec::new();
        for (i, line) in text.lines().enumerate() {
            let line = line.trim();
            if let Some(body) = line.strip_prefix('#') {
                if let Some((k, v)) = body.split_once(':') {
                    header.push((k.trim().to_string(), v.trim().to_string()));
                }
            } else if line.is_empty() {
                continue;
            } else if columns.is_empty() {
                columns = line.split(',').map(|c| c.trim().to_string()).collect();
            } else {
                let row: Option<Vec<Printed>> = line.split(',').map(printed).collect();
                match row {
                    Some(r) if r.len() == columns.len() => rows.push(r),
                    _ => {
                        return Err(format!(
                            "{name}, line {}: expected {} printed numbers, found `{line}`",
                            i + 1,
                            columns.len()
                        ));
                    }
                }
            }
        }
        if rows.is_empty() {
            return Err(format!("{name}: no rows"));
        }
        Ok(PrintedTable {
            header,
            columns,
            rows,
        })
    }

    /// The header values under `key`, in order.
    fn header_values<'a>(&'a self, key: &'a str) -> impl Iterator<Item = &'a str> + 'a {
        self.header
            .iter()
            .filter(move |(k, _)| k == key)
            .map(|(_, v)| v.as_str())
    }

    /// The column `name`.
    fn column(&self, name: &str) -> std::result::Result<Vec<Printed>, String> {
        let j = self
            .columns
            .iter()
            .position(|c| c == name)
            .ok_or_else(|| format!("no column `{name}`"))?;
        Ok(self.rows.iter().map(|r| r[j]).collect())
    }

    /// The steps (1-based) of column `name` that the header marks `# disputed: <name> step <n>:`.
    fn disputed(&self, name: &str) -> Vec<usize> {
        self.header_values("disputed")
            .filter_map(|v| {
                let mut words = v.split_whitespace();
                (words.next() == Some(name) && words.next() == Some("step"))
                    .then(|| words.next()?.trim_end_matches(':').parse().ok())
                    .flatten()
            })
            .collect()
    }
}

fn values(col: &[Printed]) -> Vec<f64> {
    col.iter().map(|p| p.value).collect()
}

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

/// The example with mass `m` as a [`LinearModel`]: mass-proportional damping `c = a0 m` with
/// `c = 2 zeta sqrt(k m)`, the load as a function of time.
fn chopra_model(zeta: f64, m: f64) -> Result<LinearModel> {
    let one = |v: f64| {
        let mut t = sprs::TriMat::new((1, 1));
        t.add_triplet(0, 0, v);
        t.to_csr()
    };
    let mut model = LinearModel::new(&one(m), &one(CH_K))?.with_load(Load::Pattern {
        pattern: vec![1.0],
        factor: TimeFunction::function(chopra_load),
    })?;
    if zeta > 0.0 {
        model = model.with_rayleigh(2.0 * zeta * (CH_K * m).sqrt() / m, 0.0)?;
    }
    Ok(model)
}

/// stepgauge's [`AlphaIntegrator`] on the example with the printed mass: `u` at
/// `t = 0.1 .. 1.0 s`.
fn chopra_alpha(p: AlphaParams) -> Result<Vec<f64>> {
    chopra_alpha_with_mass(p, CH_M)
}

/// The same with mass `m`.
fn chopra_alpha_with_mass(p: AlphaParams, m: f64) -> Result<Vec<f64>> {
    let mut model = chopra_model(CH_ZETA, m)?;
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
    let mut model = chopra_model(zeta, CH_M)?;
    let mut state = State::at_rest(1, 0.0);
    let mut options = CentralDifferenceOptions::default();
    options.force_velocity = ForceVelocity::Lagged;
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
fn rounding_note(computed: &[f64], printed: &[Printed], dt: f64, why: &str) -> Option<String> {
    let diffs: Vec<String> = computed
        .iter()
        .zip(printed)
        .enumerate()
        .filter(|(_, (c, p))| ((*c / p.unit).round() - (p.value / p.unit).round()).abs() > 0.5)
        .map(|(i, (c, p))| {
            format!(
                "t = {:.2}: computed {c:.7}, printed {}",
                (i + 1) as f64 * dt,
                p.value
            )
        })
        .collect();
    if diffs.is_empty() {
        None
    } else {
        Some(format!(
            "rounded to the printed digits, {} value(s) differ in the last digit ({}): within \
             the tolerance, which allows for the book's rounded mass; {why}",
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

/// The largest difference from a printed column, and its tolerance: half a unit of the last
/// printed decimal plus `input_rounding` (the change of the computed values between the
/// printed and the unrounded mass).
fn against_printed(u: &[f64], col: &[Printed], input_rounding: f64) -> (f64, f64) {
    let half_unit = col.iter().fold(0.0, |m: f64, p| m.max(0.5 * p.unit));
    (max_diff(u, &values(col)), half_unit + input_rounding)
}

/// The check's source: the book and example, and where the printed values are kept.
fn with_file(source: &str, file: &str) -> String {
    format!("{source}; the printed values are in {file}")
}

/// One of Chopra's printed columns against `run(m)`, the computed `u_i` with mass `m`: the
/// largest difference, within half a printed unit plus the change of `run` between the printed
/// and the unrounded mass; a note where rounded values differ (saying `why` they are trusted).
fn chopra_printed_check(
    id: &str,
    what: &str,
    src: &str,
    column: std::result::Result<Vec<Printed>, String>,
    run: impl Fn(f64) -> Result<Vec<f64>>,
    why: &str,
) -> Check {
    match column {
        Err(e) => Check::failed_to_run(id, KIND, what, src, e),
        Ok(col) => checked(id, what, src, || {
            let u = run(CH_M)?;
            let unrounded = run(chopra_m_unrounded())?;
            let (diff, tol) = against_printed(&u, &col, max_diff(&u, &unrounded));
            let c = Check::at_most(id, KIND, what, src, "max |u - u_printed|", diff, tol, "in");
            Ok(with_optional_note(c, rounding_note(&u, &col, CH_DT, why)))
        }),
    }
}

fn chopra() -> Vec<Check> {
    let src_avg = with_file(
        "Chopra (2012), Dynamics of Structures, 4th ed., Example 5.3 (Newmark average \
         acceleration, dt = 0.1 s), printed u_i, t = 0.1..1.0 s (example number and values \
         from memory)",
        CHOPRA_FILE,
    );
    let src_lin = with_file(
        "Chopra (2012), Dynamics of Structures, 4th ed., Example 5.4 (Newmark linear \
         acceleration, dt = 0.1 s), printed u_i, t = 0.1..1.0 s (example number and values \
         from memory)",
        CHOPRA_FILE,
    );
    let table = PrintedTable::parse(CHOPRA_FILE, CHOPRA_DATA);
    let column = |name: &str| -> std::result::Result<Vec<Printed>, String> {
        let col = table.as_ref().map_err(Clone::clone)?.column(name)?;
        if col.len() == CH_STEPS {
            Ok(col)
        } else {
            Err(format!(
                "{CHOPRA_FILE}: {} rows, expected {CH_STEPS}",
                col.len()
            ))
        }
    };
    let tolerance_words = "tolerance: half a unit of the fourth printed decimal plus the change \
                           of the computed u when m goes from the printed 0.2533 to k / (2 pi)^2 \
                           (the book may have computed with either)";
    let mut out = Vec::new();
    for (id, what, src, params, name, beta) in [
        (
            "published.chopra-e5.3.average-acceleration",
            format!(
                "Newmark average acceleration (AlphaIntegrator) on Chopra's damped SDOF under a half-sine pulse: largest |u - printed u| over 10 steps ({tolerance_words})"
            ),
            src_avg,
            AlphaParams::average_acceleration(),
            "average_acceleration",
            0.25,
        ),
        (
            "published.chopra-e5.4.linear-acceleration",
            format!(
                "Newmark linear acceleration (AlphaIntegrator) on Chopra's damped SDOF under a half-sine pulse: largest |u - printed u| over 10 steps ({tolerance_words})"
            ),
            src_lin,
            AlphaParams::linear_acceleration(),
            "linear_acceleration",
            1.0 / 6.0,
        ),
    ] {
        let what = what.as_str();
        let src = src.as_str();
        out.push(chopra_printed_check(
            id,
            what,
            src,
            column(name),
            |m| chopra_alpha_with_mass(params, m),
            "the book's recurrence written out in the check agrees with stepgauge to round-off",
        ));
        let rid = recurrence_id(id);
        let rwhat = "the same run against Newmark's incremental recurrence for linear systems, \
                     written out in the check: largest |u - u_recurrence| relative to max |u|";
        let rsrc = "Chopra (2012), Dynamics of Structures, 4th ed., sec. 5.4 (Newmark's method, \
                    incremental form for linear systems; from memory)";
        out.push(checked(&rid, rwhat, rsrc, || {
            let u = chopra_alpha(params)?;
            let r = chopra_newmark_recurrence(beta, 0.5);
            Ok(Check::at_most(
                rid.as_str(),
                Kind::Rederived,
                rwhat,
                rsrc,
                "relative difference",
                max_diff(&u, &r) / max_abs(&r),
                RECURRENCE_TOL,
                "",
            ))
        }));
    }
    // The exact column against stepgauge's closed form.
    let id = "published.chopra-e5.3.exact";
    let what = format!(
        "stepgauge's exact half-sine pulse solution (reference::SdofHalfSine with Chopra's parameters) against the printed exact column: largest difference ({tolerance_words})"
    );
    let what = what.as_str();
    let src = with_file(
        "Chopra (2012), Dynamics of Structures, 4th ed., Examples 5.3 and 5.4, exact solution \
         column, t = 0.1..1.0 s (values from memory)",
        CHOPRA_FILE,
    );
    let src = src.as_str();
    out.push(chopra_printed_check(
        id,
        what,
        src,
        column("exact"),
        |m| {
            let p = SdofHalfSine::new(m, CH_K, CH_ZETA, CH_P0, CH_TD)?;
            Ok((1..=CH_STEPS).map(|i| p.exact(i as f64 * CH_DT)).collect())
        },
        "an independent numerical solution of the same equation (SciPy solve_ivp, rtol 1e-12, \
         run when this check was written, not committed) gave the same values to seven digits",
    ));
    // Central difference: the printed column is not recalled; the book's recurrence is.
    let id = "rederived.chopra-e5.2.central-difference.undamped";
    let what = "central difference (half-step form, started from rest) on Chopra's pulse problem without damping against the book's displacement recurrence with u_-1 = u_0 - dt v_0 + dt^2 a_0 / 2, written out in the check: largest difference relative to max |u|";
    let src = "Chopra (2012), Dynamics of Structures, 4th ed., sec. 5.2 and Example 5.2 \
               (central difference recurrence; from memory; the printed column is not recalled, \
               so the recurrence is the reference)";
    out.push(checked(id, what, src, || {
        let u = chopra_cd(0.0)?;
        let r = chopra_cd_recurrence(0.0, false);
        Ok(Check::at_most(
            id,
            Kind::Rederived,
            what,
            src,
            "relative difference",
            max_diff(&u, &r) / max_abs(&r),
            RECURRENCE_TOL,
            "",
        ))
    }));
    let id = "rederived.chopra-e5.2.central-difference.damped";
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
            Kind::Rederived,
            what,
            src,
            "relative difference",
            max_diff(&u, &lagged) / max_abs(&lagged),
            RECURRENCE_TOL,
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

/// Half a unit of the last printed digit: Bathe's inputs are exact (no rounding to allow for).
const BA_TOL_UNITS: f64 = 0.5;
/// A disputed entry (the file's header says why) may be one unit further off.
const BA_DISPUTED_TOL_UNITS: f64 = 1.5;

/// Bathe's printed `U_1`, `U_2` of one scheme (`prefix` `central_difference` or `trapezoidal`)
/// with the steps the header disputes per DOF.
struct BatheColumns {
    dofs: [Vec<Printed>; 2],
    disputed: [Vec<usize>; 2],
}

fn bathe_columns(prefix: &str) -> std::result::Result<BatheColumns, String> {
    let table = PrintedTable::parse(BATHE_FILE, BATHE_DATA)?;
    let name = |d: usize| format!("{prefix}_u{}", d + 1);
    let dofs = [table.column(&name(0))?, table.column(&name(1))?];
    if dofs.iter().any(|c| c.len() != BA_STEPS) {
        return Err(format!("{BATHE_FILE}: expected {BA_STEPS} rows"));
    }
    let steps = table.column("step")?;
    if steps
        .iter()
        .enumerate()
        .any(|(i, s)| (s.value - (i + 1) as f64).abs() > 0.0)
    {
        return Err(format!(
            "{BATHE_FILE}: the steps are not 1, 2, ..., {BA_STEPS}"
        ));
    }
    Ok(BatheColumns {
        disputed: [table.disputed(&name(0)), table.disputed(&name(1))],
        dofs,
    })
}

/// The comparison of a run with Bathe's printed values: the largest deviation over the
/// undisputed entries and over the disputed ones, in units of the last printed digit, and the
/// entries whose rounded value differs from the printed one.
#[derive(Debug)]
struct BatheDeviation {
    undisputed: f64,
    disputed: f64,
    disputed_entries: Vec<String>,
    off: Vec<String>,
}

fn bathe_deviation(u: &[[f64; 2]], cols: &BatheColumns) -> BatheDeviation {
    let nan_max = |m: f64, x: f64| {
        if x.is_nan() || m.is_nan() {
            f64::NAN
        } else {
            m.max(x)
        }
    };
    let mut out = BatheDeviation {
        undisputed: if u.len() == BA_STEPS { 0.0 } else { f64::NAN },
        disputed: 0.0,
        disputed_entries: Vec::new(),
        off: Vec::new(),
    };
    for (n, un) in u.iter().enumerate().take(BA_STEPS) {
        for d in 0..2 {
            let p = cols.dofs[d][n];
            let dev = (un[d] - p.value).abs() / p.unit;
            let entry = format!(
                "U{} at t = {} dt: computed {:.6}, printed {} ({dev:.2} units of the last digit)",
                d + 1,
                n + 1,
                un[d],
                p.value
            );
            if cols.disputed[d].contains(&(n + 1)) {
                out.disputed = nan_max(out.disputed, dev);
                out.disputed_entries.push(entry);
            } else {
                out.undisputed = nan_max(out.undisputed, dev);
                if dev > 0.5 {
                    out.off.push(entry);
                }
            }
        }
    }
    out
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
    /// The prefix of its columns in [`BATHE_FILE`].
    columns: &'static str,
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
            columns: "central_difference",
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
            columns: "trapezoidal",
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
        columns,
        rwhat,
        rsource: rsrc,
        recurrence,
        rnote,
    } in cases
    {
        let src = with_file(src, BATHE_FILE);
        let src = src.as_str();
        out.push(match bathe_columns(columns) {
            Err(e) => Check::failed_to_run(id, KIND, what, src, e),
            Ok(cols) => checked(id, what, src, || {
                let u = run()?;
                let dev = bathe_deviation(&u, &cols);
                let mut c = Check::at_most(
                    id,
                    KIND,
                    what,
                    src,
                    "max |U - U_printed| / unit",
                    dev.undisputed,
                    BA_TOL_UNITS,
                    "",
                );
                if !dev.disputed_entries.is_empty() {
                    c.tolerance.push_str(&format!(
                        "; entries the file disputes <= {BA_DISPUTED_TOL_UNITS}"
                    ));
                    c.result
                        .push_str(&format!("; disputed: {}", dev.disputed_entries.join("; ")));
                    c.passed &= dev.disputed <= BA_DISPUTED_TOL_UNITS;
                }
                Ok(if dev.off.is_empty() {
                    c
                } else {
                    c.with_note(format!(
                        "rounded to the printed digits, {} undisputed value(s) differ from the \
                         printed ones: {}",
                        dev.off.len(),
                        dev.off.join("; ")
                    ))
                })
            }),
        });
        let rid = recurrence_id(id);
        out.push(checked(&rid, rwhat, rsrc, || {
            let u = flat(&run()?);
            let r = flat(&recurrence());
            Ok(Check::at_most(
                rid.as_str(),
                Kind::Rederived,
                rwhat,
                rsrc,
                "relative difference",
                max_diff(&u, &r) / max_abs(&r),
                RECURRENCE_TOL,
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
            // The kind its id names: printed values, or recurrences written out here.
            match c.kind {
                Kind::Published => assert!(c.id.starts_with("published."), "{}", c.id),
                Kind::Rederived => assert!(c.id.starts_with("rederived."), "{}", c.id),
                k => panic!("{}: kind {k:?}", c.id),
            }
            assert!(c.source.contains("from memory"), "{}: {}", c.id, c.source);
        }
        let printed = checks.iter().filter(|c| c.kind == Kind::Published).count();
        assert_eq!(printed, 5, "printed-value checks");
        let mut ids: Vec<&str> = checks.iter().map(|c| c.id.as_str()).collect();
        ids.sort_unstable();
        let n = ids.len();
        ids.dedup();
        assert_eq!(ids.len(), n, "duplicate ids");
    }

    /// The comparisons can fail: a wrong step size or scheme misses the printed tables.
    #[test]
    fn the_tables_tell_schemes_apart() {
        let table = PrintedTable::parse(CHOPRA_FILE, CHOPRA_DATA).unwrap();
        let avg_printed = values(&table.column("average_acceleration").unwrap());
        let lin_printed = values(&table.column("linear_acceleration").unwrap());
        let avg = chopra_alpha(AlphaParams::average_acceleration()).unwrap();
        let lin = chopra_alpha(AlphaParams::linear_acceleration()).unwrap();
        assert!(max_diff(&avg, &lin_printed) > 1e-3);
        assert!(max_diff(&lin, &avg_printed) > 1e-3);
        let cd_cols = bathe_columns("central_difference").unwrap();
        let tr_cols = bathe_columns("trapezoidal").unwrap();
        let cd = bathe_stepgauge_cd().unwrap();
        assert!(bathe_deviation(&cd, &tr_cols).undisputed > 10.0);
        let nm = bathe_stepgauge_trapezoidal().unwrap();
        assert!(bathe_deviation(&nm, &cd_cols).undisputed > 10.0);
        // The recurrences are not trivially equal to each other either.
        let lagged = chopra_cd_recurrence(CH_ZETA, true);
        let centred = chopra_cd_recurrence(CH_ZETA, false);
        assert!(max_diff(&lagged, &centred) > 1e-6);
    }

    #[test]
    fn printed_numbers_carry_their_last_unit() {
        let p = |t: &str| printed(t).unwrap();
        assert_eq!(p("0.00673").unit, 1e-5);
        assert_eq!(p("4.00").unit, 1e-2);
        assert_eq!(p("-1.1442").unit, 1e-4);
        assert_eq!(p("12").unit, 1.0);
        assert_eq!(p("-1.1442").value, -1.1442);
        assert!(printed("1e-3").is_none() && printed("").is_none() && printed("x").is_none());
    }

    /// The data files are what the checks say: the printed precision, the sources, the one
    /// disputed entry; a malformed file fails the check instead of passing it.
    #[test]
    fn the_printed_tables_are_read_with_their_sources() {
        let chopra = PrintedTable::parse(CHOPRA_FILE, CHOPRA_DATA).unwrap();
        for name in ["average_acceleration", "linear_acceleration", "exact"] {
            let col = chopra.column(name).unwrap();
            assert_eq!(col.len(), CH_STEPS);
            assert!(col.iter().all(|p| p.unit == 1e-4), "{name}: four decimals");
        }
        let source: Vec<&str> = chopra.header_values("source").collect();
        assert!(
            source.len() == 1
                && source[0].starts_with("Chopra (2012), Dynamics of Structures, 4th ed.")
        );
        assert!(source[0].contains("from memory"));
        let bathe = PrintedTable::parse(BATHE_FILE, BATHE_DATA).unwrap();
        let source: Vec<&str> = bathe.header_values("source").collect();
        assert!(
            source.len() == 1 && source[0].starts_with("Bathe (1996), Finite Element Procedures")
        );
        assert!(source[0].contains("from memory"));
        assert_eq!(bathe.disputed("trapezoidal_u1"), vec![2]);
        assert!(bathe.disputed("central_difference_u1").is_empty());
        // Malformed files are refused with file and line.
        let e = PrintedTable::parse("f.csv", "# source: x\nt,u\n0.1,abc\n").unwrap_err();
        assert!(e.contains("f.csv, line 3"), "{e}");
        assert!(PrintedTable::parse("f.csv", "t,u\n").is_err());
        // The disputed entry is allowed 1.5 units, and only it.
        let nm = bathe_stepgauge_trapezoidal().unwrap();
        let dev = bathe_deviation(&nm, &bathe_columns("trapezoidal").unwrap());
        assert_eq!(dev.disputed_entries.len(), 1, "{dev:?}");
        assert!(
            dev.disputed > BA_TOL_UNITS && dev.disputed <= BA_DISPUTED_TOL_UNITS,
            "{dev:?}"
        );
    }
}
