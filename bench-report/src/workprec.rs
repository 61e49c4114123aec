//! Section `work-precision`: wall time to reach a relative error, stepgauge against diffsol.
//!
//! **Problem** ([`chain`]): a uniform fixed-free chain of `N = 200` unit masses and unit springs
//! (invented values), undamped, with its exact solution by modal superposition. `N = 200` makes
//! the chain stiff in the sense that matters here (`omega_max / omega_1 = 256`, so an explicit
//! step is limited to about `1 / 128` of the lowest period) and lets the step load excite 200
//! modes, while each run stays short enough for the tolerance and step searches to fit in the
//! section's budget. The horizon is one lowest period `T_1 = 2 pi / omega_1` (about 804).
//!
//! - Case (a): released from the lowest mode shape (free end at 1), at rest, no load: a single
//!   smooth mode.
//! - Case (b): at rest, a unit load suddenly applied at the free end at `t = 0`: every mode is
//!   excited (the free end's share of mode `j` falls only like `1 / (2j - 1)^2`).
//!
//! **Error**: the free end's displacement at `S = 400` equally spaced sample times
//! `t_k = k T_1 / S`, `k = 1..S`: `max_k |u_k - u(t_k)| / max_k |u(t_k)|` (relative to the peak;
//! a pointwise relative error is undefined at the zero crossings). Both codes are sampled at
//! the same times: stepgauge by cubic Hermite interpolation from `(u, v)` at the ends of the step
//! that contains `t_k` (fourth order, so it adds nothing to a second-order scheme's error;
//! exact when a sample falls on a step); diffsol by its own dense output
//! (`interpolate_inplace`, which is what its `solve_dense` does), with the stop time set to
//! `T_1`.
//!
//! **stepgauge**: a uniform step `dt = T_1 / n`; for each target the smallest `n` found by
//! doubling from a small count and then bisection to 1 % (the error is not strictly monotone in
//! `dt` when unresolved modes are present). Average acceleration and generalised-alpha
//! (`rho_inf = 0.8`) on a `LinearModel` with the sparse Cholesky (the linear path factors once);
//! central difference (explicit) from its stable step down.
//!
//! **diffsol**: BDF (variable order) and the SDIRK methods TR-BDF2 and ESDIRK34 on the
//! first-order system `y = (u, v)` with its own equation struct and stated sparsity pattern
//! ([`ode`]), `FaerSparseMat` and `FaerSparseLU`. Tolerances are scanned: `rtol` from `1e-1`
//! down in half decades, `atol = c * rtol * scale` per state (scale: the exact peak free-end
//! displacement for `u`, velocity for `v`) with `c = 1` and `c = 0.01`; every setting whose
//! measured error meets a target is a candidate, the two fastest candidates are timed (median)
//! and the faster is reported (BDF's cost is not monotone in `rtol` on the oscillatory
//! problem, so the loosest passing setting is not always the cheapest).
//!
//! **Timing**: from building the model (stepgauge's `LinearModel`, diffsol's equation struct and
//! problem) and the integrator to the last sample, the median of repeats, single thread (stepgauge
//! with `Execution::serial()` and `Parallelism::serial()`, faer's default sequential context in diffsol).

// Numerical kernels index several vectors with one loop variable (as in the crate itself).
#![allow(clippy::needless_range_loop)]

mod chain;
mod ode;

use std::fmt::Write as _;
use std::time::Instant;

use sprs::CsMat;
use stepgauge::State;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::{Execution, Parallelism, SparseCholesky};
use stepgauge::model::{LinearModel, Load, TimeFunction};
use stepgauge::params::AlphaParams;

use crate::timing::median_secs;
use crate::{Section, Settings, Target};
use chain::{Case, Chain, Problem};
use ode::{Method, Tolerances};

/// Sizes and targets of one run of the section.
struct Config {
    n: usize,
    samples: usize,
    targets: Vec<f64>,
    /// Wall-time budget of one stepgauge or diffsol run during a search (seconds); longer runs
    /// end the search for that method (the cell is then reported as not reached).
    run_cap: f64,
}

impl Config {
    fn new(settings: Settings) -> Config {
        if settings.quick {
            Config {
                n: 40,
                samples: 100,
                targets: vec![1e-2],
                run_cap: 0.5,
            }
        } else {
            Config {
                n: 200,
                samples: 400,
                targets: vec![1e-2, 1e-3, 1e-4],
                run_cap: 3.0,
            }
        }
    }
}

/// stepgauge's schemes compared.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Scheme {
    AverageAcceleration,
    GeneralizedAlpha(f64),
    CentralDifference,
}

impl Scheme {
    fn name(self) -> String {
        match self {
            Scheme::AverageAcceleration => "average acceleration".to_string(),
            Scheme::GeneralizedAlpha(r) => format!("generalised-alpha rho_inf = {r}"),
            Scheme::CentralDifference => "central difference".to_string(),
        }
    }
}

/// The model of `problem`: serial, with its constant load.
fn model(problem: &Problem, k: &CsMat<f64>, mass: &CsMat<f64>) -> stepgauge::Result<LinearModel> {
    let mut model = LinearModel::new(mass, k)?.with_parallelism(Parallelism::serial());
    if problem.load.iter().any(|&f| f != 0.0) {
        model = model.with_load(Load::Pattern {
            pattern: problem.load.clone(),
            factor: TimeFunction::Constant(1.0),
        })?;
    }
    Ok(model)
}

/// Cubic Hermite interpolation on `[t0, t1]` from values and slopes at both ends.
fn hermite(t0: f64, t1: f64, u0: f64, v0: f64, u1: f64, v1: f64, t: f64) -> f64 {
    let h = t1 - t0;
    let s = (t - t0) / h;
    let (s2, s3) = (s * s, s * s * s);
    (2.0 * s3 - 3.0 * s2 + 1.0) * u0
        + (s3 - 2.0 * s2 + s) * h * v0
        + (3.0 * s2 - 2.0 * s3) * u1
        + (s3 - s2) * h * v1
}

/// Runs `scheme` with `nsteps` uniform steps over the horizon and writes the free end's
/// displacement at the sample times into `out`.
fn run_stepgauge(
    scheme: Scheme,
    problem: &Problem,
    k: &CsMat<f64>,
    mass: &CsMat<f64>,
    nsteps: usize,
    out: &mut [f64],
) -> stepgauge::Result<()> {
    let mut model = model(problem, k, mass)?;
    let mut state = State::new(0.0, problem.u0.clone(), problem.v0.clone())?;
    let dt = problem.horizon / nsteps as f64;
    match scheme {
        Scheme::CentralDifference => {
            let mut options = CentralDifferenceOptions::default();
            options.execution = Execution::serial();
            let mut cd = CentralDifference::new(&mut model, &mut state, options)?;
            sample_loop(problem, nsteps, &mut state, out, |st| {
                cd.step(&mut model, st, dt).map(|_| ())
            })
        }
        Scheme::AverageAcceleration | Scheme::GeneralizedAlpha(_) => {
            let params = match scheme {
                Scheme::GeneralizedAlpha(r) => AlphaParams::generalized_alpha(r)?,
                _ => AlphaParams::average_acceleration(),
            };
            let mut options = ImplicitOptions::default();
            options.execution = Execution::serial();
            let solver = Box::new(SparseCholesky::new());
            let mut it = AlphaIntegrator::new(&mut model, &mut state, params, solver, options)?;
            sample_loop(problem, nsteps, &mut state, out, |st| {
                it.step(&mut model, st, dt).map(|_| ())
            })
        }
    }
}

/// The time loop shared by the schemes: `nsteps` calls of `step`, sampling the free end.
fn sample_loop(
    problem: &Problem,
    nsteps: usize,
    state: &mut State,
    out: &mut [f64],
    mut step: impl FnMut(&mut State) -> stepgauge::Result<()>,
) -> stepgauge::Result<()> {
    let end = problem.chain.n - 1;
    let samples = &problem.samples;
    let (mut t0, mut u0, mut v0) = (0.0, state.u[end], state.v[end]);
    let mut next = 0;
    for i in 1..=nsteps {
        step(state)?;
        // The step's nominal end time (the state's own time carries the rounding of the sum).
        let t1 = if i == nsteps {
            problem.horizon
        } else {
            problem.horizon * i as f64 / nsteps as f64
        };
        let (u1, v1) = (state.u[end], state.v[end]);
        while next < samples.len() && samples[next] <= t1 {
            out[next] = hermite(t0, t1, u0, v0, u1, v1, samples[next]);
            next += 1;
        }
        (t0, u0, v0) = (t1, u1, v1);
    }
    Ok(())
}

/// One measured cell: the setting, its steps, its error and its median time.
#[derive(Debug, Clone)]
struct Cell {
    /// The setting, formatted (`dt 1.23` or `rtol 1e-4, c 1`).
    setting: String,
    steps: usize,
    error: f64,
    secs: f64,
    /// A remark (for example "stable limit").
    note: Option<&'static str>,
}

impl Cell {
    fn render(cell: &Option<Cell>) -> String {
        match cell {
            None => "not reached".to_string(),
            Some(c) => format!(
                "{}, {} steps, err {:.1e}, **{}**{}",
                c.setting,
                c.steps,
                c.error,
                fmt_secs(c.secs),
                c.note.map(|n| format!(" ({n})")).unwrap_or_default()
            ),
        }
    }
}

fn fmt_secs(s: f64) -> String {
    if s < 1e-3 {
        format!("{:.0} us", s * 1e6)
    } else if s < 1.0 {
        format!("{:.2} ms", s * 1e3)
    } else {
        format!("{s:.2} s")
    }
}

/// Median wall time of `f` with a number of repeats that keeps the measurement near `budget`
/// seconds (3 to 15 repeats).
fn time_median(budget: f64, mut f: impl FnMut()) -> f64 {
    let t = Instant::now();
    f();
    let once = t.elapsed().as_secs_f64().max(1e-9);
    let repeats = ((budget / once) as usize).clamp(3, 15);
    median_secs(repeats, f)
}

/// Per problem: the errors of stepgauge's runs by step count (shared by the targets).
struct StepSearch<'a> {
    scheme: Scheme,
    problem: &'a Problem,
    k: &'a CsMat<f64>,
    mass: &'a CsMat<f64>,
    tried: Vec<(usize, f64, f64)>,
    run_cap: f64,
    capped: bool,
    out: Vec<f64>,
}

impl StepSearch<'_> {
    /// Error (and single-run seconds) with `n` steps; infinite on failure.
    fn error(&mut self, n: usize) -> f64 {
        if let Some(&(_, e, _)) = self.tried.iter().find(|(m, _, _)| *m == n) {
            return e;
        }
        let t = Instant::now();
        let e = match run_stepgauge(
            self.scheme,
            self.problem,
            self.k,
            self.mass,
            n,
            &mut self.out,
        ) {
            Ok(()) => self.problem.error(&self.out),
            Err(_) => f64::INFINITY,
        };
        let secs = t.elapsed().as_secs_f64();
        if secs > self.run_cap {
            self.capped = true;
        }
        self.tried.push((n, e, secs));
        e
    }

    /// The smallest step count (to 1 %) from `start` up whose error meets `target`.
    fn smallest(&mut self, start: usize, target: f64) -> Option<usize> {
        let mut lo = start - 1; // fails or is below the allowed range
        let mut hi = start;
        if self.error(hi) > target {
            loop {
                if self.capped {
                    return None;
                }
                lo = hi;
                hi *= 2;
                if self.error(hi) <= target {
                    break;
                }
            }
        }
        while hi - lo > (hi / 100).max(1) && hi > start {
            let mid = lo + (hi - lo) / 2;
            if self.error(mid) <= target {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        Some(hi)
    }
}

/// stepgauge's cells for every target.
fn stepgauge_cells(
    scheme: Scheme,
    problem: &Problem,
    k: &CsMat<f64>,
    mass: &CsMat<f64>,
    cfg: &Config,
) -> Vec<Option<Cell>> {
    // Central difference cannot go above its stable step: start there.
    let (start, min_note) = match scheme {
        Scheme::CentralDifference => match stable_count(problem, k, mass) {
            Some(n) => (n, Some("stable limit")),
            None => return vec![None; cfg.targets.len()],
        },
        _ => (8, None),
    };
    let mut search = StepSearch {
        scheme,
        problem,
        k,
        mass,
        tried: Vec::new(),
        run_cap: cfg.run_cap,
        capped: false,
        out: vec![0.0; problem.samples.len()],
    };
    let mut cells = Vec::new();
    let mut from = start;
    for &target in &cfg.targets {
        let Some(n) = search.smallest(from, target) else {
            cells.push(None);
            continue;
        };
        from = n;
        let error = search.error(n);
        let mut out = vec![0.0; problem.samples.len()];
        let secs = time_median(0.5, || {
            run_stepgauge(scheme, problem, k, mass, n, &mut out).expect("run that passed before");
        });
        cells.push(Some(Cell {
            setting: format!("dt {:.3}", problem.horizon / n as f64),
            steps: n,
            error,
            secs,
            note: if n == start { min_note } else { None },
        }));
    }
    cells
}

/// The smallest step count central difference accepts over the horizon (its stable step as
/// estimated when the integrator is created).
fn stable_count(problem: &Problem, k: &CsMat<f64>, mass: &CsMat<f64>) -> Option<usize> {
    let mut model = model(problem, k, mass).ok()?;
    let mut state = State::new(0.0, problem.u0.clone(), problem.v0.clone()).ok()?;
    let cd = CentralDifference::new(&mut model, &mut state, Default::default()).ok()?;
    let limit = cd.stable_limit()?;
    Some((problem.horizon / limit).ceil() as usize)
}

/// The `rtol` values scanned: `1e-1` down to `1e-9` in half decades.
fn rtols() -> Vec<f64> {
    (0..=16)
        .map(|i| 10f64.powf(-1.0 - 0.5 * i as f64))
        .collect()
}

/// The absolute-tolerance factors scanned.
const ATOL_FACTORS: [f64; 2] = [1.0, 0.01];

/// diffsol's cells for every target (see the module documentation for the scan).
///
/// For each `c`, `rtol` goes from loose to tight; every setting whose error meets a target is a
/// candidate for that target. The scan of a `c` stops at the run cap, or once a run takes more
/// than twice the fastest run that met every target (tighter settings only cost more from
/// there). Per target, the two fastest candidates of the scan are timed (median of repeats) and
/// the faster is reported.
fn diffsol_cells(
    method: Method,
    problem: &Problem,
    k: &CsMat<f64>,
    cfg: &Config,
) -> Vec<Option<Cell>> {
    let mut out = vec![0.0; problem.samples.len()];
    // Per target: (tolerances, steps, error, single-run seconds).
    let mut candidates: Vec<Vec<(Tolerances, usize, f64, f64)>> =
        vec![Vec::new(); cfg.targets.len()];
    let tightest = cfg.targets.iter().copied().fold(f64::INFINITY, f64::min);
    for &atol_factor in &ATOL_FACTORS {
        let mut fastest_all = f64::INFINITY;
        for rtol in rtols() {
            let tol = Tolerances { rtol, atol_factor };
            let cap = cfg.run_cap.min(2.0 * fastest_all);
            let t = Instant::now();
            let deadline = t + std::time::Duration::from_secs_f64(cap);
            let result = ode::run(problem, k, method, tol, &mut out, Some(deadline));
            let secs = t.elapsed().as_secs_f64();
            if let Ok(Some(steps)) = result {
                let e = problem.error(&out);
                for (i, &target) in cfg.targets.iter().enumerate() {
                    if e <= target {
                        candidates[i].push((tol, steps, e, secs));
                    }
                }
                if e <= tightest {
                    fastest_all = fastest_all.min(secs);
                }
            }
            if secs > cap {
                break;
            }
        }
    }
    candidates
        .into_iter()
        .map(|mut cands| {
            cands.sort_by(|a, b| a.3.total_cmp(&b.3));
            cands
                .into_iter()
                .take(2)
                .map(|(tol, steps, error, _)| {
                    let secs = time_median(0.5, || {
                        ode::run(problem, k, method, tol, &mut out, None)
                            .expect("run that passed before");
                    });
                    Cell {
                        setting: format!("rtol {:.0e}, c {}", tol.rtol, tol.atol_factor),
                        steps,
                        error,
                        secs,
                        note: None,
                    }
                })
                .min_by(|a, b| a.secs.total_cmp(&b.secs))
        })
        .collect()
}

/// A named best time among some cells at one target: (name, seconds, steps).
type Best = Option<(String, f64, usize)>;

/// The measured cells of one case: per target, stepgauge's three schemes and diffsol's three
/// methods, and stepgauge's fixed costs.
struct CaseResult {
    case: Case,
    stepgauge: Vec<(Scheme, Vec<Option<Cell>>)>,
    diffsol: Vec<(Method, Vec<Option<Cell>>)>,
    /// Median time to build the model and the integrator (no step): average acceleration,
    /// central difference (with its stable-step estimate).
    construct: (f64, f64),
}

impl CaseResult {
    /// The fastest stepgauge cell at target `i` (implicit schemes only when `implicit_only`).
    fn best_stepgauge(&self, i: usize, implicit_only: bool) -> Best {
        self.stepgauge
            .iter()
            .filter(|(s, _)| !implicit_only || *s != Scheme::CentralDifference)
            .filter_map(|(s, cells)| cells[i].as_ref().map(|c| (s.name(), c.secs, c.steps)))
            .min_by(|a, b| a.1.total_cmp(&b.1))
    }

    /// The fastest diffsol cell at target `i`.
    fn best_diffsol(&self, i: usize) -> Best {
        self.diffsol
            .iter()
            .filter_map(|(m, cells)| {
                cells[i]
                    .as_ref()
                    .map(|c| (m.name().to_string(), c.secs, c.steps))
            })
            .min_by(|a, b| a.1.total_cmp(&b.1))
    }
}

/// `best diffsol time / stepgauge time`, formatted, and the ratio.
fn speedup(t: &Best, d: &Best) -> (String, Option<f64>) {
    match (t, d) {
        (Some((tn, ts, _)), Some((dn, ds, _))) => {
            let x = ds / ts;
            (format!("**{x:.1}x** ({dn} / {tn})"), Some(x))
        }
        (Some(_), None) => ("diffsol did not reach it".to_string(), None),
        (None, Some(_)) => ("stepgauge did not reach it".to_string(), None),
        (None, None) => ("-".to_string(), None),
    }
}

fn measure_case(case: Case, cfg: &Config) -> CaseResult {
    let chain = Chain {
        n: cfg.n,
        m: 1.0,
        k: 1.0,
    };
    let problem = Problem::new(chain, case, 1.0, cfg.samples);
    let k = chain.stiffness();
    let mass = chain.mass();
    let schemes = [
        Scheme::AverageAcceleration,
        Scheme::GeneralizedAlpha(0.8),
        Scheme::CentralDifference,
    ];
    let stepgauge = schemes
        .iter()
        .map(|&s| {
            let t = Instant::now();
            let cells = stepgauge_cells(s, &problem, &k, &mass, cfg);
            eprintln!(
                "   {} {}: {:.1} s",
                case.label(),
                s.name(),
                t.elapsed().as_secs_f64()
            );
            (s, cells)
        })
        .collect();
    let methods = [Method::Bdf, Method::TrBdf2, Method::Esdirk34];
    let diffsol = methods
        .iter()
        .map(|&m| {
            let t = Instant::now();
            let cells = diffsol_cells(m, &problem, &k, cfg);
            eprintln!(
                "   {} diffsol {}: {:.1} s",
                case.label(),
                m.name(),
                t.elapsed().as_secs_f64()
            );
            (m, cells)
        })
        .collect();
    // Zero steps: the model and the integrator only.
    let mut out = vec![0.0; problem.samples.len()];
    let mut construct = |s: Scheme| {
        time_median(0.2, || {
            run_stepgauge(s, &problem, &k, &mass, 0, &mut out).expect("construction");
        })
    };
    let construct = (
        construct(Scheme::AverageAcceleration),
        construct(Scheme::CentralDifference),
    );
    CaseResult {
        case,
        stepgauge,
        diffsol,
        construct,
    }
}

fn render_case(r: &CaseResult, cfg: &Config, body: &mut String) {
    let _ = writeln!(body, "### Case {}\n", r.case.label());
    let mut header = "| target |".to_string();
    let mut rule = "|---|".to_string();
    for (s, _) in &r.stepgauge {
        let _ = write!(header, " stepgauge {} |", s.name());
        rule.push_str("---|");
    }
    for (m, _) in &r.diffsol {
        let _ = write!(header, " diffsol {} |", m.name());
        rule.push_str("---|");
    }
    header.push_str(
        " speed-up: best diffsol / best stepgauge | speed-up: best diffsol / best stepgauge implicit |",
    );
    rule.push_str("---|---|");
    let _ = writeln!(body, "{header}\n{rule}");
    for (i, target) in cfg.targets.iter().enumerate() {
        let mut row = format!("| {target:.0e} |");
        for (_, cells) in &r.stepgauge {
            let _ = write!(row, " {} |", Cell::render(&cells[i]));
        }
        for (_, cells) in &r.diffsol {
            let _ = write!(row, " {} |", Cell::render(&cells[i]));
        }
        let d = r.best_diffsol(i);
        let (all, _) = speedup(&r.best_stepgauge(i, false), &d);
        let (implicit, _) = speedup(&r.best_stepgauge(i, true), &d);
        let _ = writeln!(row, " {all} | {implicit} |");
        body.push_str(&row);
    }
    let _ = writeln!(
        body,
        "\nFixed costs inside these times (building the model and the integrator, no step): \
         stepgauge average acceleration {}, central difference {} (with its stable-step \
         estimate).\n",
        fmt_secs(r.construct.0),
        fmt_secs(r.construct.1)
    );
}

/// Measures and renders the section.
pub fn section(settings: Settings) -> Section {
    let cfg = Config::new(settings);
    let results: Vec<CaseResult> = [Case::SingleMode, Case::StepLoad]
        .iter()
        .map(|&c| measure_case(c, &cfg))
        .collect();
    let chain = Chain {
        n: cfg.n,
        m: 1.0,
        k: 1.0,
    };
    let mut body = String::new();
    let _ = writeln!(
        body,
        "Wall time to reach a relative error on the free end's displacement, against the exact \
         modal solution, on a uniform fixed-free chain of N = {} unit masses and springs, \
         undamped (omega_1 = {:.5}, omega_max = {:.4}), over one lowest period T_1 = {:.1}, \
         sampled at {} equal intervals; both codes are sampled at the same times (stepgauge: \
         cubic Hermite between its steps; diffsol: its own interpolation, `interpolate_inplace`). \
         N = 200 (full run) makes the chain stiff in the sense that matters (omega_max / \
         omega_1 = 256: an explicit step is about T_1 / 800) with 200 modes excited by the step \
         load, while the step and tolerance searches fit the section's budget. \
         Case (a): released from the lowest mode shape, no load; case (b): at rest, a unit \
         load suddenly applied at the free end (every mode excited). Error = max |u - u_exact| \
         / max |u_exact| over the samples. Time = median wall time from building the model and \
         the integrator to the end, one thread. stepgauge: the largest uniform step meeting the \
         target (doubling, then bisection to 1 %), on a `LinearModel` with the sparse \
         Cholesky; central difference starts at its stable step. diffsol {} (features: faer; \
         `FaerSparseMat` and `FaerSparseLU`; first-order system y = (u, v) with its own \
         equation struct and the Jacobian's sparsity pattern stated, no probing): rtol scanned \
         from 1e-1 in half decades, atol = c * rtol * (peak displacement or velocity), c = 1 or \
         0.01; the fastest passing setting is shown. \"not reached\": no setting met the target \
         within the run cap of {} s. Each cell: setting, steps, measured error, **time**. \
         Source: bench-report/src/workprec.rs.\n",
        cfg.n,
        chain.omega(1),
        chain.omega(cfg.n),
        chain.lowest_period(),
        cfg.samples,
        DIFFSOL_VERSION,
        cfg.run_cap,
    );
    for r in &results {
        render_case(r, &cfg, &mut body);
    }
    let _ = writeln!(body, "{}", commentary(&results, &cfg));
    let _ = writeln!(
        body,
        "Reading the tables. stepgauge's implicit schemes take a uniform step set by the error of \
         the modes that carry the response (phase 2 atan(omega dt / 2) per step, a frequency \
         error of about (omega dt)^2 / 12), \
         and leave the unresolved high modes at full amplitude with a wrong phase. \
         Central difference is limited by its stable step (dt <= 2 / omega_max) but is second \
         order with half the frequency error of average acceleration (phase \
         2 asin(omega dt / 2) per step, about (omega dt)^2 / 24) and costs one matrix \
         product per step; its cells include the stable-step estimate at construction. diffsol \
         adapts its step and (BDF) its order: high order wins on smooth, low-mode responses \
         at tight tolerances; BDF orders above 2 are not A-stable (no A-stable linear \
         multistep method exceeds order 2: Dahlquist 1963, \"A special stability problem for \
         linear multistep methods\", BIT 3, 27-43, from memory), so undamped modes near the \
         imaginary axis hold its order and step down whatever rtol.\n"
    );
    let mut targets = Vec::new();
    if let Some(b) = results.iter().find(|r| r.case == Case::StepLoad) {
        for (i, &target) in cfg.targets.iter().enumerate() {
            if target < 0.999e-3 {
                continue;
            }
            let (measured, x) = speedup(&b.best_stepgauge(i, false), &b.best_diffsol(i));
            targets.push(Target {
                threads: "1".to_string(),
                what: format!(
                    "case (b) step load, error {target:.0e}: best diffsol time / best stepgauge time"
                ),
                measured: measured.replace("**", ""),
                target: ">= 5x".to_string(),
                met: x.is_some_and(|x| x >= 5.0),
            });
        }
    }
    Section {
        title: "Work-precision against diffsol".to_string(),
        body,
        targets,
    }
}

/// The diffsol version compiled in (kept in step with bench-report/Cargo.toml; a unit test
/// checks the lock file).
const DIFFSOL_VERSION: &str = "0.19.0";

/// Sentences reading the measured tables: every cell where diffsol is faster, with the step
/// counts and per-step costs that explain it.
fn commentary(results: &[CaseResult], cfg: &Config) -> String {
    let mut s = String::new();
    for r in results {
        for (i, target) in cfg.targets.iter().enumerate() {
            let (Some((tn, ts, tsteps)), Some((dn, ds, dsteps))) =
                (r.best_stepgauge(i, false), r.best_diffsol(i))
            else {
                continue;
            };
            if ds >= ts {
                continue;
            }
            let why = if dsteps < tsteps {
                format!(
                    "it needs {dsteps} steps against {tsteps}: its higher order (BDF up to 5, \
                     ESDIRK34 3) pays off where the response is smooth or dominated by the \
                     lowest modes and the target is tight, while a second-order scheme's phase \
                     error needs ever smaller steps"
                )
            } else {
                format!(
                    "with {dsteps} steps against {tsteps}, its steps are cheaper here ({} \
                     against {} per step, fixed costs included)",
                    fmt_secs(ds / dsteps as f64),
                    fmt_secs(ts / tsteps as f64)
                )
            };
            let _ = writeln!(
                s,
                "- Case {} at {target:.0e}: diffsol {dn} is faster than stepgauge {tn} ({:.1}x): \
                 {why}.",
                r.case.label(),
                ts / ds,
            );
        }
    }
    if s.is_empty() {
        s.push_str("- stepgauge is faster in every cell where both reached the target.\n");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn small(case: Case) -> (Problem, CsMat<f64>, CsMat<f64>) {
        let c = Chain {
            n: 20,
            m: 1.0,
            k: 1.0,
        };
        (Problem::new(c, case, 1.0, 50), c.stiffness(), c.mass())
    }

    /// Cubic Hermite interpolation is exact for cubics.
    #[test]
    fn hermite_is_exact_for_cubics() {
        let p = |t: f64| 1.0 - 2.0 * t + 0.5 * t * t - 0.25 * t * t * t;
        let dp = |t: f64| -2.0 + t - 0.75 * t * t;
        let (a, b) = (0.3, 1.7);
        for t in [0.3, 0.9, 1.2, 1.7] {
            let h = hermite(a, b, p(a), dp(a), p(b), dp(b), t);
            assert!((h - p(t)).abs() < 1e-14, "{t}: {h} vs {}", p(t));
        }
    }

    /// On the single-mode case average acceleration is exactly the scalar trapezoidal rule on
    /// mode 1: its amplification matrix has eigenvalues `(1 - W^2/4 +- i W) / (1 + W^2/4)`,
    /// `W = omega dt`, of modulus 1 and argument `2 atan(W/2)` (derived from the recurrences),
    /// and from `u = 1, v = 0` its first step gives `u_1 = (1 - W^2/4) / (1 + W^2/4) =
    /// cos(2 atan(W/2))`, so `u_n = cos(2 n atan(W/2))` exactly. The measured error (samples on
    /// steps) must equal that closed form to rounding, and fall by about 4 when `dt` halves.
    #[test]
    fn average_acceleration_error_is_the_closed_form_period_error() {
        let (p, k, m) = small(Case::SingleMode);
        let mut out = vec![0.0; p.samples.len()];
        let w = p.chain.omega(1);
        let mut last = f64::INFINITY;
        for n in [100usize, 200, 400] {
            run_stepgauge(Scheme::AverageAcceleration, &p, &k, &m, n, &mut out).unwrap();
            let e = p.error(&out);
            let dt = p.horizon / n as f64;
            let phase = 2.0 * (0.5 * w * dt).atan() / dt;
            let exact = p
                .samples
                .iter()
                .map(|&t| ((phase * t).cos() - (w * t).cos()).abs())
                .fold(0.0_f64, f64::max);
            assert!((e - exact).abs() < 1e-9, "n = {n}: {e} vs {exact}");
            assert!(e < last / 3.5);
            last = e;
        }
    }

    /// Each stepgauge scheme converges to the modal solution on the step-load case, and the
    /// step search finds a count whose error meets the target while 1 % fewer steps (the
    /// bisection's resolution) would not have been tried as passing.
    #[test]
    fn stepgauge_schemes_converge_and_the_search_meets_the_target() {
        let (p, k, m) = small(Case::StepLoad);
        let mut out = vec![0.0; p.samples.len()];
        for scheme in [
            Scheme::AverageAcceleration,
            Scheme::GeneralizedAlpha(0.8),
            Scheme::CentralDifference,
        ] {
            run_stepgauge(scheme, &p, &k, &m, 20_000, &mut out).unwrap();
            let e = p.error(&out);
            assert!(e < 1e-4, "{}: {e}", scheme.name());
        }
        let mut search = StepSearch {
            scheme: Scheme::AverageAcceleration,
            problem: &p,
            k: &k,
            mass: &m,
            tried: Vec::new(),
            run_cap: 60.0,
            capped: false,
            out: vec![0.0; p.samples.len()],
        };
        let n = search.smallest(8, 1e-2).unwrap();
        assert!(search.error(n) <= 1e-2);
        // Bisection bracket: some count below n (within 1 %, or n - 1) failed.
        assert!(
            search
                .tried
                .iter()
                .any(|&(c, e, _)| c < n && c + (n / 100).max(1) >= n && e > 1e-2),
            "{:?}",
            search.tried
        );
    }

    /// The version named on the page is the one locked.
    #[test]
    fn diffsol_version_matches_the_lock_file() {
        let lock = include_str!("../Cargo.lock");
        let want = format!("name = \"diffsol\"\nversion = \"{DIFFSOL_VERSION}\"");
        assert!(
            lock.contains(&want),
            "Cargo.lock does not lock diffsol {DIFFSOL_VERSION}"
        );
    }

    /// Central difference refuses steps above its stable limit: the search starts at the
    /// stable count, about `T omega_max / 2`.
    #[test]
    fn central_difference_starts_at_its_stable_count() {
        let (p, k, m) = small(Case::StepLoad);
        let n = stable_count(&p, &k, &m).unwrap();
        let ideal = p.horizon * p.chain.omega(p.chain.n) / 2.0;
        assert!(
            n as f64 >= ideal && (n as f64) < 1.1 * ideal + 2.0,
            "{n} vs {ideal}"
        );
    }
}
