//! Checks of kind [`Kind::CrossCheck`]: stepgauge against independent computations with NumPy and
//! SciPy, committed as data under `tests/data/` by `tests/data/crosscheck.py` (see
//! `tests/data/MANIFEST.md`).
//!
//! - **Reference solutions** (`cross-check.solution.*`): the closed-form
//!   [`exact`](stepgauge::reference::ReferenceProblem::exact) and
//!   [`exact_velocity`](stepgauge::reference::ReferenceProblem::exact_velocity) of every reference
//!   problem with a closed form against SciPy's integration of its equations of motion
//!   (`scipy_reference_solutions.csv`). The bar's closed form is the continuum's, which the
//!   discrete chain only approaches; for it, stepgauge's central difference on the chain model at two
//!   fine steps is compared with SciPy's solution of the same semi-discrete chain, and the
//!   measured order with 2.
//! - **Amplification eigenvalues** (`cross-check.amplification.*`):
//!   [`spectral::eigenvalues`](stepgauge::spectral::eigenvalues) and
//!   [`spectral_radius`](stepgauge::spectral::spectral_radius) of each named scheme against NumPy's
//!   eigenvalues of the matrix built from the scheme's defining recurrences
//!   (`scipy_amplification.csv`), and the named constructors' parameters against the published
//!   formulas evaluated by the script.
//! - **Provenance** (`cross-check.data-headers`): every committed table records the command that
//!   made it and the Python, NumPy and SciPy versions.
//!
//! A malformed or incomplete file gives failed checks that say what is wrong, never a panic.

use std::collections::BTreeMap;

use nalgebra::Complex;

use super::{Check, Kind, sci};
use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, ForceVelocity, StableLimit,
};
use stepgauge::params::AlphaParams;
use stepgauge::reference::{BarImpact, ReferenceProblem};
use stepgauge::spectral::{self, Scheme};

/// SciPy's solutions of the reference problems.
const SOLUTIONS: &str = include_str!("../../tests/data/scipy_reference_solutions.csv");
/// NumPy's amplification eigenvalues.
const AMPLIFICATION: &str = include_str!("../../tests/data/scipy_amplification.csv");
/// SciPy's table of the hardening oscillator (checked here for its provenance only).
const DUFFING: &str = include_str!("../../tests/data/duffing_reference.csv");
/// The same oscillator from rest (read by the tests; its header is checked here).
const DUFFING_FROM_REST: &str = include_str!("../../tests/data/duffing_from_rest.csv");

/// The script that makes the two cross-check tables.
const SCRIPT: &str = "tests/data/crosscheck.py";

/// Largest difference between stepgauge's closed forms and SciPy's solutions, relative to the
/// problem's largest `|u|` (resp. `|v|`). SciPy's values are accurate to about 1e-11 of that scale
/// (DOP853 at rtol 1e-13 agrees with the exact propagator `scipy.linalg.expm` within 1.5e-11 on
/// every problem, within 5e-13 on the single-DOF ones: the `measured` lines of the file's header),
/// and the closed forms to round-off; 1e-9 leaves a factor of about 100 for that and still catches
/// any wrong term, sign or parameter, which moves the solution by far more.
const SOLUTION_TOL: f64 = 1e-9;

/// Eigenvalues and spectral radius at well-separated points, relative to `max(1, |lambda|)`:
/// both sides balance the matrix and run a backward-stable QR iteration (LAPACK `geev`; nalgebra's
/// real Schur form in [`spectral::eigenvalues3`]), which gives well-separated roots to a few
/// hundred units of round-off (the largest difference measured is 4.9e-13; NumPy's values agreed
/// with a one-off 50-digit mpmath computation, not committed, within 5e-13). 1e-10 leaves a wide margin. Before stepgauge balanced
/// its matrices, generalised-alpha with `rho_inf = 1` differed by 4.9e-10 at `Omega = 1000`: this
/// check found it.
const EIG_TOL: f64 = 1e-10;

/// Points whose eigenvalues lie within `CLUSTER * max(1, |lambda|max)` of each other count as
/// clustered (the same threshold as `crosscheck.py --check`). Near a double root an eigen-solver loses about
/// half the digits (a root moves by `sqrt(eps |A|)`, about 1e-8), so the eigenvalues there are
/// not compared one by one: the characteristic polynomial's coefficients (well conditioned in the
/// matrix entries) are compared at [`EIG_TOL`] times `scale^k` for the coefficient of degree
/// `3 - k`, and the spectral radius at [`CLUSTER_RHO_TOL`].
const CLUSTER: f64 = 1e-3;

/// The spectral radius at clustered points, relative to `max(1, rho)`: two independent solvers
/// each move a double root by about 1e-8; 1e-6 leaves a margin of 100. (A triple root would move
/// by `eps^(1/3)`, about 6e-6: the grid has none; one would fail here visibly, not be dropped.)
const CLUSTER_RHO_TOL: f64 = 1e-6;

/// The named constructors' parameters against the script's evaluation of the published formulas
/// (a few units of round-off on values of order one).
const PARAM_TOL: f64 = 1e-15;

/// The bar chain: the difference between stepgauge's run at the finer step and SciPy's solution
/// must be the scheme's own step error, estimated without SciPy from the two runs (Richardson):
/// for a method of order `p`, `u_fine - u = (u_coarse - u_fine) / (2^p - 1)` to leading order, so
/// with `p >= 2 - BAR_ORDER_TOL` (which the order check asserts) the fine run's error is at most
/// `max |u_coarse - u_fine| / (2^1.8 - 1)`, plus SciPy's own error (below 1e-11 of the largest
/// displacement, the file's header). A model, constraint or stepping error adds to the
/// difference with SciPy but not to the Richardson estimate, and fails.
fn bar_tolerance(max_coarse_minus_fine: f64) -> f64 {
    max_coarse_minus_fine / (2f64.powf(2.0 - BAR_ORDER_TOL) - 1.0) + SCIPY_SOLUTION_ERROR
}

/// SciPy's DOP853 solutions against the exact propagator, relative to the largest displacement:
/// within 1.5e-11 on every problem (the `measured` lines of the file's header).
const SCIPY_SOLUTION_ERROR: f64 = 1.5e-11;

/// The measured order on the chain must be within this of 2: the errors are maxima over time of
/// a wave whose steepest part moves, so the ratio of two maxima is not the pointwise ratio; 0.2
/// is the band the Richardson bound of [`bar_tolerance`] assumes.
const BAR_ORDER_TOL: f64 = 0.2;

/// The chain's output spacing is `t_end / 60` (the file has 61 times); the central difference
/// takes this many steps per spacing in the coarse run and twice as many in the fine run
/// (Courant numbers 0.0995 and 0.0498: a spacing is `4 L / (60 c) = 6.67 h / c`).
const BAR_STEPS_PER_OUTPUT: usize = 67;

/// All the checks of this kind.
pub(crate) fn checks() -> Vec<Check> {
    let mut out = solution_checks(SOLUTIONS);
    out.extend(amplification_checks(AMPLIFICATION));
    out.push(header_check(&[
        ("scipy_reference_solutions.csv", SOLUTIONS, SCRIPT),
        ("scipy_amplification.csv", AMPLIFICATION, SCRIPT),
        (
            "duffing_reference.csv",
            DUFFING,
            "tests/data/duffing_reference.py",
        ),
        (
            "duffing_from_rest.csv",
            DUFFING_FROM_REST,
            "tests/data/duffing_reference.py",
        ),
    ]));
    out
}

/// A parsed CSV file: its rows (1-based line number, fields as text); `#` lines are skipped.
struct Table<'a> {
    rows: Vec<(usize, Vec<&'a str>)>,
}

/// The rows of `text`; the first line that is not a `#` comment must be `columns`, and every row
/// must have as many fields.
fn parse_table<'a>(text: &'a str, columns: &str) -> Result<Table<'a>, String> {
    let width = columns.split(',').count();
    let mut rows = Vec::new();
    let mut seen_columns = false;
    for (n, line) in text.lines().enumerate() {
        let line = line.trim_end();
        if line.starts_with('#') || line.is_empty() {
            continue;
        } else if !seen_columns {
            if line != columns {
                return Err(format!(
                    "line {}: expected the columns `{columns}`, found `{line}`",
                    n + 1
                ));
            }
            seen_columns = true;
        } else {
            let fields: Vec<&str> = line.split(',').collect();
            if fields.len() != width {
                return Err(format!(
                    "line {}: {} fields, expected {width}",
                    n + 1,
                    fields.len()
                ));
            }
            rows.push((n + 1, fields));
        }
    }
    if !seen_columns {
        return Err(format!("no column line `{columns}`"));
    }
    if rows.is_empty() {
        return Err("no rows".to_string());
    }
    Ok(Table { rows })
}

/// The numbers of `fields[from..]`.
fn numbers(line: usize, fields: &[&str], from: usize) -> Result<Vec<f64>, String> {
    fields
        .iter()
        .skip(from)
        .map(|f| {
            f.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| format!("line {line}: `{f}` is not a finite number"))
        })
        .collect()
}

// ------------------------------------------------------------------------------------------------
// Reference solutions
// ------------------------------------------------------------------------------------------------

const SOLUTION_COLUMNS: &str = "problem,t,u,v";

fn solution_source() -> String {
    format!(
        "SciPy solve_ivp DOP853 (rtol 1e-13) on the problem's equations of motion, checked \
         against the exact propagator scipy.linalg.expm and against Radau: \
         tests/data/scipy_reference_solutions.csv, made by `python3 {SCRIPT}`"
    )
}

/// One problem's rows: `(t, u, v)`.
type Samples = Vec<(f64, f64, f64)>;

/// The rows of the solutions file, grouped by problem in the order of the file.
fn parse_solutions(text: &str) -> Result<Vec<(String, Samples)>, String> {
    let table = parse_table(text, SOLUTION_COLUMNS)?;
    let mut groups: Vec<(String, Samples)> = Vec::new();
    for (line, fields) in &table.rows {
        let x = numbers(*line, fields, 1)?;
        let (name, row) = (fields[0], (x[0], x[1], x[2]));
        match groups.iter_mut().find(|(n, _)| n == name) {
            Some((_, rows)) => rows.push(row),
            None => groups.push((name.to_string(), vec![row])),
        }
    }
    Ok(groups)
}

/// The checks of the reference solutions: one per problem with a closed form, two for the bar
/// chain, and a failed one for each problem of the file that stepgauge does not know.
fn solution_checks(text: &str) -> Vec<Check> {
    let source = solution_source();
    let groups = match parse_solutions(text) {
        Ok(g) => g,
        Err(e) => {
            return vec![Check::failed_to_run(
                "cross-check.solution.file",
                Kind::CrossCheck,
                "the SciPy reference solutions can be read",
                source,
                format!("scipy_reference_solutions.csv: {e}"),
            )];
        }
    };
    let problems = crate::problems::all();
    let mut out = Vec::new();
    for p in &problems {
        let name = p.name();
        if name == "hardening" {
            continue; // a SciPy table itself (tests/data/duffing_reference.py)
        }
        let rows = groups.iter().find(|(n, _)| n == name).map(|(_, r)| r);
        if name == "bar-impact" {
            out.extend(bar_checks(rows, &source));
            continue;
        }
        let id = format!("cross-check.solution.{name}");
        let what = format!(
            "{name}: stepgauge's closed-form displacement and velocity of DOF {} against SciPy's \
             integration, largest difference relative to the largest |u| and |v| of the run",
            p.observed_dof()
        );
        match rows {
            None => out.push(Check::failed_to_run(
                id,
                Kind::CrossCheck,
                what,
                source.clone(),
                format!("no rows for `{name}` in scipy_reference_solutions.csv"),
            )),
            Some(rows) => {
                let e = closed_form_error(&**p, rows);
                out.push(Check::at_most(
                    id,
                    Kind::CrossCheck,
                    what,
                    source.clone(),
                    "max relative difference",
                    e,
                    SOLUTION_TOL,
                    "",
                ));
            }
        }
    }
    for (name, _) in &groups {
        if !problems.iter().any(|p| p.name() == name) || name == "hardening" {
            out.push(Check::failed_to_run(
                format!("cross-check.solution.{name}"),
                Kind::CrossCheck,
                format!("{name}: a problem of the SciPy file"),
                source.clone(),
                "not a reference problem of stepgauge with a closed form (stepgauge::reference::all)",
            ));
        }
    }
    out
}

/// `max(|du| / max|u|, |dv| / max|v|)` over the rows (`NaN` for degenerate data).
fn closed_form_error(p: &dyn ReferenceProblem, rows: &[(f64, f64, f64)]) -> f64 {
    let umax = rows.iter().fold(0.0, |m: f64, r| m.max(r.1.abs()));
    let vmax = rows.iter().fold(0.0, |m: f64, r| m.max(r.2.abs()));
    if umax == 0.0 || vmax == 0.0 {
        return f64::NAN;
    }
    rows.iter().fold(0.0, |m: f64, &(t, u, v)| {
        let du = (p.exact(t) - u).abs() / umax;
        let dv = (p.exact_velocity(t) - v).abs() / vmax;
        // NaN propagates (a NaN from the closed form must fail the check).
        if du.is_nan() || dv.is_nan() {
            f64::NAN
        } else {
            m.max(du).max(dv)
        }
    })
}

/// The bar: stepgauge's chain model stepped by the central difference at two fine steps against
/// SciPy's semi-discrete solution; the error at the finer step and the measured order.
fn bar_checks(rows: Option<&Samples>, source: &str) -> Vec<Check> {
    let id = "cross-check.solution.bar-impact-chain";
    let id_order = "cross-check.solution.bar-impact-chain-order";
    let what = "bar-impact: the free end's displacement of stepgauge's 100-element chain model \
                (BarImpact::model, driven end at constant speed), stepped by the central \
                difference at the Courant number 0.0498, against SciPy's solution of the same \
                semi-discrete chain, largest difference relative to the largest |u|; tolerance: \
                the step error estimated from the runs at the Courant numbers 0.0995 and 0.0498 \
                alone (Richardson, max |u_coarse - u_fine| / (2^1.8 - 1)) plus SciPy's error \
                (1.5e-11)";
    let what_order = "bar-impact: order of the central difference on the chain model, from the \
                      largest displacement errors against SciPy's semi-discrete solution at the \
                      Courant numbers 0.0995 and 0.0498";
    let note = "The bar's closed form is the continuum's, which the chain only approaches (mesh \
                dispersion), so it is not compared with SciPy's chain solution; the chain model \
                itself is, through a fine central-difference run.";
    let result = rows
        .ok_or_else(|| "no rows for `bar-impact` in scipy_reference_solutions.csv".to_string())
        .and_then(|rows| {
            let coarse = bar_run(rows, BAR_STEPS_PER_OUTPUT)?;
            let fine = bar_run(rows, 2 * BAR_STEPS_PER_OUTPUT)?;
            let umax = rows.iter().fold(0.0, |m: f64, r| m.max(r.1.abs()));
            let error = |u: &[f64]| {
                u.iter()
                    .zip(rows)
                    .fold(0.0, |m: f64, (x, r)| m.max((x - r.1).abs()))
                    / umax
            };
            let richardson = coarse
                .iter()
                .zip(&fine)
                .fold(0.0, |m: f64, (c, f)| m.max((c - f).abs()))
                / umax;
            Ok((error(&coarse), error(&fine), richardson))
        });
    match result {
        Err(e) => vec![
            Check::failed_to_run(id, Kind::CrossCheck, what, source, &e).with_note(note),
            Check::failed_to_run(id_order, Kind::CrossCheck, what_order, source, e),
        ],
        Ok((coarse, fine, richardson)) => vec![
            Check::at_most(
                id,
                Kind::CrossCheck,
                what,
                source,
                "max relative difference",
                fine,
                bar_tolerance(richardson),
                "",
            )
            .with_note(note),
            Check::near(
                id_order,
                Kind::CrossCheck,
                what_order,
                source,
                "order",
                (coarse / fine).log2(),
                2.0,
                BAR_ORDER_TOL,
            ),
        ],
    }
}

/// The free end's displacement by the central difference on the standard bar with `per_output`
/// steps between the file's equally spaced times, at those times.
fn bar_run(rows: &[(f64, f64, f64)], per_output: usize) -> Result<Vec<f64>, String> {
    let p = BarImpact::standard();
    let n_out = rows.len().saturating_sub(1);
    if n_out == 0 {
        return Err("fewer than two bar-impact rows".to_string());
    }
    let spacing = p.t_end() / n_out as f64;
    for (i, r) in rows.iter().enumerate() {
        if (r.0 - spacing * i as f64).abs() > 1e-12 * p.t_end() {
            return Err(format!(
                "bar-impact row {i}: t = {} is not i t_end / {n_out}",
                r.0
            ));
        }
    }
    let umax = rows.iter().fold(0.0, |m: f64, r| m.max(r.1.abs()));
    if umax == 0.0 {
        return Err("bar-impact: SciPy's displacement is zero throughout".to_string());
    }
    let fail = |e: stepgauge::Error| format!("bar-impact chain run: {e}");
    let mut model = p.model().map_err(fail)?;
    let mut state = p.initial_state();
    let mut options = CentralDifferenceOptions::default();
    options.stable_limit = StableLimit::Unchecked;
    // Undamped: both treatments step alike.
    options.force_velocity = ForceVelocity::Lagged;
    let mut cd = CentralDifference::new(&mut *model, &mut state, options).map_err(fail)?;
    let dt = spacing / per_output as f64;
    let dof = p.observed_dof();
    let mut u = Vec::with_capacity(rows.len());
    u.push(state.u[dof]);
    for _ in rows.iter().skip(1) {
        for _ in 0..per_output {
            cd.step(&mut *model, &mut state, dt).map_err(fail)?;
        }
        u.push(state.u[dof]);
    }
    Ok(u)
}

// ------------------------------------------------------------------------------------------------
// Amplification eigenvalues
// ------------------------------------------------------------------------------------------------

const AMPLIFICATION_COLUMNS: &str =
    "set,alpha_m,alpha_f,beta,gamma,omega,xi,rho,l1_re,l1_im,l2_re,l2_im,l3_re,l3_im";

/// One row of the amplification file.
struct AmpRow {
    line: usize,
    params: [f64; 4],
    omega: f64,
    xi: f64,
    rho: f64,
    eig: [Complex<f64>; 3],
}

/// The sets of the file, each with stepgauge's scheme made by its named constructor and the
/// source of its formulas.
fn named_scheme(set: &str) -> Option<(stepgauge::Result<Scheme>, &'static str)> {
    const NEWMARK: &str = "Newmark 1959, J. Eng. Mech. Div. ASCE 85:67-94";
    const HHT: &str = "Hilber, Hughes & Taylor 1977, Earthquake Eng. Struct. Dyn. 5:283-292";
    const WBZ: &str = "Wood, Bossak & Zienkiewicz 1980, Int. J. Numer. Meth. Eng. 15:1562-1566; \
                       Chung & Hulbert 1993, J. Appl. Mech. 60:371-375, eq. (25)";
    const GA: &str = "Chung & Hulbert 1993, J. Appl. Mech. 60:371-375, eqs. (17) and (25)";
    const CD: &str = "central difference in half-step form, stepping equations of \
                      docs/explicit.md: stepgauge's own documentation, so a re-derivation in \
                      the project, not an outside reference";
    let alpha = |p: stepgauge::Result<AlphaParams>| p.map(Scheme::Alpha);
    Some(match set {
        "average-acceleration" => (
            Ok(Scheme::Alpha(AlphaParams::average_acceleration())),
            NEWMARK,
        ),
        "linear-acceleration" => (
            Ok(Scheme::Alpha(AlphaParams::linear_acceleration())),
            NEWMARK,
        ),
        "fox-goodwin" => (Ok(Scheme::Alpha(AlphaParams::fox_goodwin())), NEWMARK),
        "newmark-beta0.3025-gamma0.6" => (alpha(AlphaParams::newmark(0.3025, 0.6)), NEWMARK),
        "hht-alpha-minus0.1" => (alpha(AlphaParams::hht(-0.1)), HHT),
        "hht-alpha-minus0.3" => (alpha(AlphaParams::hht(-0.3)), HHT),
        "wbz-rho0.8" => (alpha(AlphaParams::wbz_from_rho_inf(0.8)), WBZ),
        "generalized-alpha-rho1" => (alpha(AlphaParams::generalized_alpha(1.0)), GA),
        "generalized-alpha-rho0.8" => (alpha(AlphaParams::generalized_alpha(0.8)), GA),
        "generalized-alpha-rho0.5" => (alpha(AlphaParams::generalized_alpha(0.5)), GA),
        "generalized-alpha-rho0" => (alpha(AlphaParams::generalized_alpha(0.0)), GA),
        "central-difference-lagged" => (Ok(Scheme::CentralDifference(ForceVelocity::Lagged)), CD),
        "central-difference-predicted" => {
            (Ok(Scheme::CentralDifference(ForceVelocity::Predicted)), CD)
        }
        _ => return None,
    })
}

/// The sets the file must hold, in its order.
const SETS: [&str; 13] = [
    "average-acceleration",
    "linear-acceleration",
    "fox-goodwin",
    "newmark-beta0.3025-gamma0.6",
    "hht-alpha-minus0.1",
    "hht-alpha-minus0.3",
    "wbz-rho0.8",
    "generalized-alpha-rho1",
    "generalized-alpha-rho0.8",
    "generalized-alpha-rho0.5",
    "generalized-alpha-rho0",
    "central-difference-lagged",
    "central-difference-predicted",
];

fn parse_amplification(text: &str) -> Result<BTreeMap<String, Vec<AmpRow>>, String> {
    let table = parse_table(text, AMPLIFICATION_COLUMNS)?;
    let mut sets: BTreeMap<String, Vec<AmpRow>> = BTreeMap::new();
    for (line, fields) in &table.rows {
        let x = numbers(*line, fields, 1)?;
        let eig = [
            Complex::new(x[7], x[8]),
            Complex::new(x[9], x[10]),
            Complex::new(x[11], x[12]),
        ];
        sets.entry(fields[0].to_string()).or_default().push(AmpRow {
            line: *line,
            params: [x[0], x[1], x[2], x[3]],
            omega: x[4],
            xi: x[5],
            rho: x[6],
            eig,
        });
    }
    Ok(sets)
}

fn amplification_source(paper: &str) -> String {
    format!(
        "NumPy eigenvalues (LAPACK geev) of the amplification matrix built from the scheme's \
         defining recurrences ({paper}): tests/data/scipy_amplification.csv, made by \
         `python3 {SCRIPT}`"
    )
}

/// One check per set of [`SETS`], and a failed one for each set of the file not in it.
fn amplification_checks(text: &str) -> Vec<Check> {
    let sets = match parse_amplification(text) {
        Ok(s) => s,
        Err(e) => {
            return vec![Check::failed_to_run(
                "cross-check.amplification.file",
                Kind::CrossCheck,
                "the NumPy amplification eigenvalues can be read",
                amplification_source("see the file's header"),
                format!("scipy_amplification.csv: {e}"),
            )];
        }
    };
    let mut out = Vec::new();
    for set in SETS {
        // The central-difference matrices are built from stepgauge's own documentation.
        let (id, kind) = if set.starts_with("central-difference") {
            (format!("rederived.amplification.{set}"), Kind::Rederived)
        } else {
            (format!("cross-check.amplification.{set}"), Kind::CrossCheck)
        };
        let what = format!(
            "{set}: stepgauge's eigenvalues and spectral radius of the amplification matrix, and \
             its parameters, against NumPy's on the file's grid of Omega and xi"
        );
        let (scheme, paper) = match named_scheme(set) {
            Some((scheme, paper)) => (Some(scheme), paper),
            None => (None, "see the file's header"),
        };
        let source = amplification_source(paper);
        let result = match (scheme, sets.get(set)) {
            (None, _) => Err(format!("no stepgauge constructor for `{set}`")),
            (Some(Err(e)), _) => Err(format!("stepgauge refuses the parameters: {e}")),
            (_, None) => Err(format!("no rows for `{set}` in scipy_amplification.csv")),
            (Some(Ok(scheme)), Some(rows)) => Ok(compare_set(&scheme, rows)),
        };
        out.push(match result {
            Err(e) => Check::failed_to_run(id, kind, what, source, e),
            Ok(c) => c.into_check(id, kind, what, source),
        });
    }
    for set in sets.keys() {
        if !SETS.contains(&set.as_str()) {
            out.push(Check::failed_to_run(
                format!("cross-check.amplification.{set}"),
                Kind::CrossCheck,
                format!("{set}: a set of the NumPy file"),
                amplification_source("see the file's header"),
                "not a set this check knows how to make with stepgauge's constructors",
            ));
        }
    }
    out
}

/// The largest discrepancies of one set.
#[derive(Debug, Default)]
struct SetComparison {
    /// `|parameter - file|`, largest of the four.
    params: f64,
    /// Eigenvalues (best pairing) and spectral radius at separated points, relative to
    /// `max(1, |lambda|max)`.
    separated: f64,
    separated_points: usize,
    /// Characteristic polynomial at clustered points, relative to `scale^k`.
    poly: f64,
    /// Spectral radius at clustered points, relative to `max(1, rho)`.
    cluster_rho: f64,
    clustered_points: usize,
    /// Where the worst separated point is (file line, Omega, xi).
    worst: Option<(usize, f64, f64)>,
}

impl SetComparison {
    fn passed(&self) -> bool {
        let ok = |x: f64, tol: f64| x.is_finite() && x <= tol;
        ok(self.params, PARAM_TOL)
            && ok(self.separated, EIG_TOL)
            && ok(self.poly, EIG_TOL)
            && ok(self.cluster_rho, CLUSTER_RHO_TOL)
            && self.separated_points > 0
    }

    fn into_check(self, id: String, kind: Kind, what: String, source: String) -> Check {
        let worst = self
            .worst
            .map(|(line, o, xi)| format!(" (worst at line {line}: Omega {o}, xi {xi})"))
            .unwrap_or_default();
        let mut result = format!(
            "parameters {}; eigenvalues and rho {} at {} separated points{worst}",
            sci(self.params),
            sci(self.separated),
            self.separated_points,
        );
        if self.clustered_points > 0 {
            result.push_str(&format!(
                "; at {} clustered points: polynomial {}, rho {}",
                self.clustered_points,
                sci(self.poly),
                sci(self.cluster_rho)
            ));
        }
        let passed = self.passed();
        let check = Check {
            id,
            kind,
            what,
            source,
            tolerance: format!(
                "parameters <= {}; eigenvalues (best pairing) and rho <= {} x max(1, |lambda|); \
                 where roots are within {} of each other: characteristic polynomial <= {} x \
                 scale^k, rho <= {} x max(1, rho)",
                sci(PARAM_TOL),
                sci(EIG_TOL),
                sci(CLUSTER),
                sci(EIG_TOL),
                sci(CLUSTER_RHO_TOL)
            ),
            result,
            passed,
            note: None,
        };
        if self.clustered_points > 0 {
            check.with_note(format!(
                "{} grid points have (nearly) double roots, where an eigen-solver keeps only \
                 about half the digits; there the characteristic polynomial and the spectral \
                 radius are compared instead of the single roots (none is left out).",
                self.clustered_points
            ))
        } else {
            check
        }
    }
}

fn compare_set(scheme: &Scheme, rows: &[AmpRow]) -> SetComparison {
    let p = scheme.parameters();
    let mut c = SetComparison::default();
    for r in rows {
        let mine = [p.alpha_m, p.alpha_f, p.beta, p.gamma];
        for (a, b) in mine.iter().zip(r.params) {
            c.params = nan_max(c.params, (a - b).abs());
        }
        let ours = spectral::eigenvalues(scheme, r.omega, r.xi);
        let rho = spectral::spectral_radius(scheme, r.omega, r.xi);
        let scale = r.eig.iter().fold(1.0, |m: f64, z| m.max(z.norm()));
        if clustered(&r.eig) || clustered(&ours) {
            c.clustered_points += 1;
            let theirs = poly_from_roots(&r.eig);
            let cp = spectral::characteristic_polynomial(scheme, r.omega, r.xi);
            // cp = [1, c2, c1, c0]; coefficient of z^(3-k) scales like scale^k.
            for k in 1..4 {
                let d = (cp[k] - theirs[k - 1]).abs() / scale.powi(k as i32);
                c.poly = nan_max(c.poly, d);
            }
            c.cluster_rho = nan_max(c.cluster_rho, (rho - r.rho).abs() / r.rho.max(1.0));
        } else {
            c.separated_points += 1;
            let d = spectral::pairing_distance(&ours, &r.eig).max((rho - r.rho).abs()) / scale;
            if d.is_nan() || d > c.separated {
                c.worst = Some((r.line, r.omega, r.xi));
            }
            c.separated = nan_max(c.separated, d);
        }
    }
    c
}

/// `max(a, b)`, NaN if either is NaN.
fn nan_max(a: f64, b: f64) -> f64 {
    if a.is_nan() || b.is_nan() {
        f64::NAN
    } else {
        a.max(b)
    }
}

/// True when two of the roots are within `CLUSTER * max(1, |lambda|max)`.
fn clustered(e: &[Complex<f64>; 3]) -> bool {
    let scale = e.iter().fold(1.0, |m: f64, z| m.max(z.norm()));
    let sep = (e[0] - e[1])
        .norm()
        .min((e[0] - e[2]).norm())
        .min((e[1] - e[2]).norm());
    sep < CLUSTER * scale
}

/// `[c2, c1, c0]` of `(z - l1)(z - l2)(z - l3) = z^3 + c2 z^2 + c1 z + c0` (real parts).
fn poly_from_roots(e: &[Complex<f64>; 3]) -> [f64; 3] {
    let c2 = -(e[0] + e[1] + e[2]);
    let c1 = e[0] * e[1] + e[0] * e[2] + e[1] * e[2];
    let c0 = -(e[0] * e[1] * e[2]);
    [c2.re, c1.re, c0.re]
}

// ------------------------------------------------------------------------------------------------
// Provenance
// ------------------------------------------------------------------------------------------------

/// Every file's header names the command that made it and the Python, NumPy and SciPy versions.
fn header_check(files: &[(&str, &str, &str)]) -> Check {
    let mut problems = Vec::new();
    let mut versions = Vec::new();
    for (name, text, script) in files {
        let header: Vec<&str> = text
            .lines()
            .take_while(|l| l.starts_with('#'))
            .map(str::trim_end)
            .collect();
        let command = format!("# command: python3 {script}");
        if !header.iter().any(|l| l.starts_with(&command)) {
            problems.push(format!("{name}: no `{command}` line"));
        }
        match header.iter().find_map(|l| version_line(l)) {
            Some(v) => versions.push(format!("{name}: {v}")),
            None => problems.push(format!(
                "{name}: no `# python X, numpy Y, scipy Z` version line"
            )),
        }
    }
    Check {
        id: "cross-check.data-headers".to_string(),
        kind: Kind::CrossCheck,
        what: "every committed SciPy table records the command that made it and the Python, \
               NumPy and SciPy versions in its header"
            .to_string(),
        source: "tests/data/MANIFEST.md; the scripts tests/data/crosscheck.py and \
                 tests/data/duffing_reference.py"
            .to_string(),
        tolerance: "a `# command:` line naming the script and a version line in each file"
            .to_string(),
        result: if problems.is_empty() {
            versions.join("; ")
        } else {
            problems.join("; ")
        },
        passed: problems.is_empty() && !files.is_empty(),
        note: None,
    }
}

/// `python X, numpy Y, scipy Z` from a header line, when every version is given.
fn version_line(line: &str) -> Option<&str> {
    let rest = line.strip_prefix("# ")?;
    let parts: Vec<&str> = rest.split(", ").collect();
    let ok = parts.len() == 3
        && ["python ", "numpy ", "scipy "]
            .iter()
            .zip(&parts)
            .all(|(name, p)| {
                p.strip_prefix(name).is_some_and(|v| {
                    !v.is_empty() && v.chars().next().is_some_and(|c| c.is_ascii_digit())
                })
            });
    ok.then_some(rest)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Problems with a closed form (8), the bar chain (2), the scheme sets (13), the headers (1).
    const EXPECTED: usize = 8 + 2 + SETS.len() + 1;

    #[test]
    fn every_cross_check_passes() {
        let checks = checks();
        for c in &checks {
            assert!(c.passed, "{c:#?}");
            match c.kind {
                Kind::CrossCheck => assert!(c.id.starts_with("cross-check."), "{}", c.id),
                Kind::Rederived => assert!(
                    c.id.starts_with("rederived.amplification.central-difference"),
                    "{}",
                    c.id
                ),
                k => panic!("{}: kind {k:?}", c.id),
            }
        }
        let rederived = checks.iter().filter(|c| c.kind == Kind::Rederived).count();
        assert_eq!(rederived, 2, "the two central-difference sets");
        assert_eq!(checks.len(), EXPECTED, "{checks:#?}");
        let mut ids: Vec<&str> = checks.iter().map(|c| c.id.as_str()).collect();
        ids.sort_unstable();
        ids.dedup();
        assert_eq!(ids.len(), checks.len(), "duplicate ids");
    }

    /// Every problem of `crate::problems::all()` but the hardening one (its own SciPy table) has rows.
    #[test]
    fn the_file_covers_every_problem_with_a_closed_form() {
        let groups = parse_solutions(SOLUTIONS).unwrap();
        for p in crate::problems::all() {
            let found = groups.iter().any(|(n, _)| n == p.name());
            assert_eq!(found, p.name() != "hardening", "{}", p.name());
        }
        for (name, rows) in &groups {
            assert!((40..=100).contains(&rows.len()), "{name}: {}", rows.len());
        }
    }

    /// Malformed files give failed checks with a reason, not panics.
    #[test]
    fn malformed_files_fail_without_panicking() {
        let cases = [
            String::new(),
            "# only a header\n".to_string(),
            "problem,t,u\nx,1,2\n".to_string(),
            "problem,t,u,v\n".to_string(),
            "problem,t,u,v\nsdof-free-undamped,0,1\n".to_string(),
            "problem,t,u,v\nsdof-free-undamped,0,abc,1\n".to_string(),
            "problem,t,u,v\nsdof-free-undamped,0,NaN,1\n".to_string(),
        ];
        for text in &cases {
            let c = solution_checks(text);
            assert!(c.iter().any(|c| !c.passed), "{text:?}: {c:#?}");
            let c = amplification_checks(text);
            assert!(c.iter().all(|c| !c.passed), "{text:?}");
        }
        // A truncated file: only the first problem's rows. The others fail as missing.
        let cut: String = SOLUTIONS
            .lines()
            .take(40)
            .map(|l| format!("{l}\n"))
            .collect();
        let c = solution_checks(&cut);
        assert!(c.iter().filter(|c| !c.passed).count() >= 7, "{c:#?}");
        let cut: String = AMPLIFICATION
            .lines()
            .take(60)
            .map(|l| format!("{l}\n"))
            .collect();
        let c = amplification_checks(&cut);
        assert_eq!(c.iter().filter(|c| !c.passed).count(), SETS.len() - 1);
    }

    /// The checks can fail: a changed value, an unknown name, a missing version line.
    #[test]
    fn wrong_data_fails_the_checks() {
        // Displacement of one row off by 1e-6 of the run's largest.
        let bad = replace_field(SOLUTIONS, "two-dof-step,", 5, 2, |x| x + 1e-6 * 5.84);
        let c = solution_checks(&bad);
        let two = c.iter().find(|c| c.id.ends_with("two-dof-step")).unwrap();
        assert!(!two.passed, "{two:#?}");
        assert_eq!(c.iter().filter(|c| !c.passed).count(), 1);
        // One eigenvalue off by 1e-8 at a separated point.
        let bad = replace_field(AMPLIFICATION, "fox-goodwin,", 10, 8, |x| x + 1e-8);
        let c = amplification_checks(&bad);
        let fg = c.iter().find(|c| c.id.ends_with("fox-goodwin")).unwrap();
        assert!(!fg.passed, "{fg:#?}");
        assert_eq!(c.iter().filter(|c| !c.passed).count(), 1);
        // A parameter off by 1e-12.
        let bad = replace_field(AMPLIFICATION, "wbz-rho0.8,", 0, 1, |x| x + 1e-12);
        let c = amplification_checks(&bad);
        assert!(
            !c.iter()
                .find(|c| c.id.ends_with("wbz-rho0.8"))
                .unwrap()
                .passed
        );
        // An unknown set and an unknown problem.
        let bad = AMPLIFICATION.replacen("fox-goodwin,", "fox-goodwin-x,", 1);
        assert!(
            amplification_checks(&bad)
                .iter()
                .any(|c| c.id.ends_with("fox-goodwin-x") && !c.passed)
        );
        let bad = SOLUTIONS.replacen("stiff-soft,", "stiff-soft-x,", 1);
        assert!(
            solution_checks(&bad)
                .iter()
                .any(|c| c.id.ends_with("stiff-soft-x") && !c.passed)
        );
        // Headers.
        let no_version: String = SOLUTIONS
            .lines()
            .filter(|l| !l.starts_with("# python "))
            .map(|l| format!("{l}\n"))
            .collect();
        assert!(!header_check(&[("a", &no_version, SCRIPT)]).passed);
        assert!(!header_check(&[("a", SOLUTIONS, "tests/data/other.py")]).passed);
        assert!(header_check(&[("a", SOLUTIONS, SCRIPT)]).passed);
    }

    /// At the clustered points the file's own roots show the lost digits (the double root of the
    /// lagged central difference at Omega = 1.6, xi = 0.2 is -0.6 exactly: the characteristic
    /// polynomial is z (z + 0.6)^2), and stepgauge's polynomial matches while the roots need not.
    #[test]
    fn clustered_points_are_compared_on_the_polynomial() {
        let sets = parse_amplification(AMPLIFICATION).unwrap();
        let rows = &sets["central-difference-lagged"];
        let r = rows.iter().find(|r| r.omega == 1.6 && r.xi == 0.2).unwrap();
        assert!(clustered(&r.eig));
        assert!(
            (r.rho - 0.6).abs() > 1e-12 && (r.rho - 0.6).abs() < 1e-6,
            "{}",
            r.rho
        );
        let cp = spectral::characteristic_polynomial(
            &Scheme::CentralDifference(ForceVelocity::Lagged),
            1.6,
            0.2,
        );
        assert!(
            (cp[1] - 1.2).abs() < 1e-14 && (cp[2] - 0.36).abs() < 1e-14,
            "{cp:?}"
        );
        assert!(cp[3].abs() < 1e-15);
        let c = compare_set(&Scheme::CentralDifference(ForceVelocity::Lagged), rows);
        assert!(c.clustered_points >= 1 && c.passed(), "{c:?}");
    }

    fn replace_field(
        text: &str,
        prefix: &str,
        nth: usize,
        field: usize,
        f: impl Fn(f64) -> f64,
    ) -> String {
        let mut k = 0;
        text.lines()
            .map(|l| {
                if l.starts_with(prefix) {
                    k += 1;
                    if k == nth + 1 {
                        let mut parts: Vec<String> = l.split(',').map(str::to_string).collect();
                        let x: f64 = parts[field].parse().unwrap();
                        parts[field] = format!("{:?}", f(x));
                        return parts.join(",") + "\n";
                    }
                }
                format!("{l}\n")
            })
            .collect()
    }
}
