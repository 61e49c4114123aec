//! `stepgauge report`, also what `stepgauge` with no arguments does: a self-contained HTML report
//! (inline SVG figures, no external resources) on the standard parameter sets, the reference
//! problems, the stable step of a demo structure and the demonstration's checks.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::time::Instant;

use clap::Args;
use sprs::TriMat;
use stepgauge::State;
use stepgauge::explicit::stable_step::{self, StableStepOptions};
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, StableLimit};
use stepgauge::linalg::Execution;
use stepgauge::model::LinearModel;
use stepgauge::spectral::{CheckContext, Stability, check, log_space, metrics, sweep};

use super::compare;
use super::output::{plain, table_num, write_atomically};
use super::plot::{Series, spectrum_svg};
use super::scheme_args::{Labelled, standard_sets};
use super::{EXIT_FAILURE, EXIT_OK, Failure};

/// Long help of `stepgauge report`.
pub const LONG_ABOUT: &str = "\
Writes report.html into a folder (--output, default stepgauge-report/): a self-contained page
(figures inline as SVG, no external resources or scripts) with the stability and accuracy of the
standard parameter sets, their spectra, the reference-problem comparison (errors and measured
orders), the stable step of a demo steel column, and the output of the demonstration.
Prints a short summary and the path of the report. Exit status 0 when every internal check
passes, 1 otherwise. This is what `stepgauge` with no arguments runs.";

/// The default output folder.
pub const DEFAULT_OUTPUT: &str = "stepgauge-report";

/// Halvings in the report's comparison (three: four steps, three measured orders).
const REPORT_HALVINGS: u32 = 3;

/// The options of `stepgauge report`.
#[derive(Debug, Clone, Args)]
pub struct ReportArgs {
    /// The folder to write report.html into (created when missing).
    #[arg(long, value_name = "DIR", default_value = DEFAULT_OUTPUT)]
    pub output: PathBuf,
}

/// `stepgauge` with no arguments.
pub fn run_default() -> ExitCode {
    let args = ReportArgs {
        output: PathBuf::from(DEFAULT_OUTPUT),
    };
    match run(&args) {
        Ok(code) => ExitCode::from(code),
        Err(f) => f.report(),
    }
}

/// One internal check of the report.
struct Check {
    what: String,
    ok: bool,
}

/// Runs `stepgauge report`; returns the exit status.
pub fn run(args: &ReportArgs) -> Result<u8, Failure> {
    let start = Instant::now();
    let mut checks: Vec<Check> = Vec::new();
    let mut body = String::new();

    let sets = standard_sets()?;
    section_sets(&mut body, &sets, &mut checks)?;
    section_spectra(&mut body, &sets)?;
    section_reference(&mut body, &mut checks)?;
    section_stable_step(&mut body, &mut checks)?;
    section_demo(&mut body, &mut checks)?;

    let passed = checks.iter().filter(|c| c.ok).count();
    let mut summary = String::new();
    let _ = writeln!(
        summary,
        "<h2 id=\"checks\">Checks</h2>\n<p>{passed} of {} internal checks passed.</p>\n<ul>",
        checks.len()
    );
    for c in &checks {
        let _ = writeln!(
            summary,
            "<li class=\"{}\">{}: {}</li>",
            if c.ok { "ok" } else { "failed" },
            if c.ok { "ok" } else { "FAILED" },
            esc(&c.what)
        );
    }
    summary.push_str("</ul>\n");

    let html = page(&summary, &body, start.elapsed().as_secs_f64());
    std::fs::create_dir_all(&args.output).map_err(|e| {
        Failure::Runtime(format!(
            "cannot create the folder `{}`: {e}",
            args.output.display()
        ))
    })?;
    let path = args.output.join("report.html");
    write_atomically(&path, html.as_bytes()).map_err(|e| {
        Failure::Runtime(format!("cannot write the report `{}`: {e}", path.display()))
    })?;

    println!("stepgauge report");
    for c in checks.iter().filter(|c| !c.ok) {
        println!("  FAILED: {}", c.what);
    }
    println!(
        "  {passed} of {} checks passed ({:.1} s)",
        checks.len(),
        start.elapsed().as_secs_f64()
    );
    println!("  report: {}", display_path(&path));
    Ok(if passed == checks.len() {
        EXIT_OK
    } else {
        EXIT_FAILURE
    })
}

fn display_path(p: &Path) -> String {
    p.display().to_string()
}

/// HTML escaping of text.
fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// An SVG document from plotters, made fit to inline (no XML declaration).
fn inline_svg(svg: &str) -> String {
    match svg.find("<svg") {
        Some(i) => svg[i..].to_string(),
        None => svg.to_string(),
    }
}

fn page(summary: &str, body: &str, seconds: f64) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n\
         <title>stepgauge report</title>\n<style>\n\
         body {{ font-family: sans-serif; max-width: 1100px; margin: 2em auto; padding: 0 1em; }}\n\
         table {{ border-collapse: collapse; margin: 1em 0; font-size: 0.9em; }}\n\
         th, td {{ border: 1px solid #bbb; padding: 0.2em 0.5em; text-align: right; }}\n\
         th:first-child, td:first-child {{ text-align: left; }}\n\
         li.failed, td.failed {{ color: #b00; font-weight: bold; }}\n\
         pre {{ background: #f4f4f4; padding: 0.8em; overflow-x: auto; font-size: 0.85em; }}\n\
         figure {{ margin: 1em 0; }} svg {{ max-width: 100%; height: auto; }}\n\
         </style>\n</head>\n<body>\n<h1>stepgauge report</h1>\n\
         <p>stepgauge {}: time integration for structural dynamics. Written by <code>stepgauge \
         report</code> in {seconds:.1} s. Results feed decisions that can be safety-relevant: \
         have them checked by a qualified engineer.</p>\n\
         <nav><a href=\"#checks\">Checks</a> | <a href=\"#sets\">Standard sets</a> | \
         <a href=\"#spectra\">Spectra</a> | <a href=\"#reference\">Reference problems</a> | \
         <a href=\"#stable-step\">Stable step</a> | <a href=\"#demo\">Demonstration</a></nav>\n\
         {summary}{body}</body>\n</html>\n",
        env!("CARGO_PKG_VERSION")
    )
}

fn stability_name(s: Stability) -> &'static str {
    match s {
        Stability::Unconditional => "unconditional",
        Stability::Conditional { .. } => "conditional",
        Stability::Unstable => "unstable",
    }
}

/// The stability and accuracy table of the standard sets (xi = 0).
fn section_sets(
    body: &mut String,
    sets: &[Labelled],
    checks: &mut Vec<Check>,
) -> Result<(), Failure> {
    body.push_str(
        "<h2 id=\"sets\">Stability and accuracy of the standard parameter sets</h2>\n\
         <p>Undamped mode (xi = 0); Omega = omega dt. Period error is the relative error of the \
         numerical period, damping the algorithmic damping ratio (stepgauge check).</p>\n<table>\n\
         <tr><th>parameter set</th><th>verdict</th><th>Omega_crit</th><th>rho_inf</th>\
         <th>order</th><th>dissipative</th><th>period error at 0.1</th><th>damping at 0.1</th>\
         <th>period error at 1</th><th>damping at 1</th></tr>\n",
    );
    for s in sets {
        let v = check(&s.scheme, 0.0, &CheckContext::default())?;
        let crit = match v.stability {
            Stability::Conditional { omega_crit, .. } => Some(omega_crit),
            _ => None,
        };
        let m01 = metrics(&s.scheme, 0.1, 0.0);
        let m1 = metrics(&s.scheme, 1.0, 0.0);
        let _ = writeln!(
            body,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td>\
             <td>{}</td><td>{}</td><td>{}</td></tr>",
            esc(&s.label),
            stability_name(v.stability),
            table_num(crit),
            table_num(v.rho_inf),
            v.order,
            if v.dissipative { "yes" } else { "no" },
            table_num(m01.period_error()),
            table_num(m01.damping_ratio()),
            table_num(m1.period_error()),
            table_num(m1.damping_ratio()),
        );
        checks.push(Check {
            what: format!("{}: stable (not unstable for every step)", s.label),
            ok: v.stability != Stability::Unstable,
        });
        checks.push(Check {
            what: format!("{}: second-order accurate without damping", s.label),
            ok: v.order == 2,
        });
    }
    body.push_str("</table>\n");
    Ok(())
}

/// Spectral radius, damping ratio and period error against Omega for the standard sets.
fn section_spectra(body: &mut String, sets: &[Labelled]) -> Result<(), Failure> {
    let omegas = log_space(0.01, 10.0, 200);
    let schemes: Vec<_> = sets.iter().map(|s| s.scheme).collect();
    let curves = sweep(&schemes, &omegas, 0.0);
    let series: Vec<Series> = sets
        .iter()
        .zip(&curves)
        .map(|(s, c)| Series {
            label: &s.label,
            points: c,
        })
        .collect();
    let svg = spectrum_svg("Standard parameter sets, xi = 0", &series)?;
    let _ = writeln!(
        body,
        "<h2 id=\"spectra\">Spectra of the standard parameter sets</h2>\n\
         <p>Spectral radius, algorithmic damping ratio and relative period error against Omega \
         (200 points from 0.01 to 10, xi = 0; stepgauge spectrum --standard-sets).</p>\n\
         <figure>{}</figure>",
        inline_svg(&svg)
    );
    Ok(())
}

/// The reference-problem comparison: errors and measured orders, figures of every problem.
fn section_reference(body: &mut String, checks: &mut Vec<Check>) -> Result<(), Failure> {
    let sets = standard_sets()?;
    // Average acceleration, generalized-alpha and central difference: an implicit
    // non-dissipative, an implicit dissipative and the explicit set.
    let chosen: Vec<Labelled> = sets
        .into_iter()
        .enumerate()
        .filter(|(i, _)| [0, 4, 5].contains(i))
        .map(|(_, s)| s)
        .collect();
    let problems = stepgauge_cli::problems::all();
    let studies = compare::compare(&problems, &chosen, None, REPORT_HALVINGS)?;
    let _ = writeln!(
        body,
        "<h2 id=\"reference\">Reference problems</h2>\n\
         <p>Largest error of the observed DOF against the exact solution over the run, for dt0 = \
         T_min / 20 (0.02 s for the hardening oscillator) and {REPORT_HALVINGS} halvings; \
         measured order log2(e(dt) / e(dt/2)) between successive steps (stepgauge compare). \
         Smooth problems stop at t_end or {} coarse steps; non-smooth ones (pulse kink, impact \
         front) run to t_end in at most {} coarse steps and cannot show the full order.</p>\n<table>\n<tr><th>problem</th><th>scheme</th>\
         <th>smooth</th><th>dt0 (s)</th><th>error at dt0</th><th>error at finest</th>\
         <th>measured orders</th><th>steps</th><th>wall (s)</th></tr>",
        compare::MAX_COARSE_STEPS,
        compare::MAX_COARSE_STEPS_NON_SMOOTH
    );
    for st in &studies {
        let first = st.rows.first();
        let last = st.rows.iter().rev().find(|r| r.max_error.is_some());
        let orders: Vec<String> = st
            .rows
            .iter()
            .map(|r| match (&r.skipped, r.order) {
                (Some(_), _) => "skipped".to_string(),
                (None, Some(o)) => format!("{o:.2}"),
                (None, None) => "-".to_string(),
            })
            .skip(1)
            .collect();
        let steps: usize = st.rows.iter().map(|r| r.steps).sum();
        let wall: f64 = st.rows.iter().map(|r| r.wall_time_s).sum();
        let _ = writeln!(
            body,
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td>\
             <td>{steps}</td><td>{wall:.3}</td></tr>",
            esc(&st.problem),
            esc(&st.scheme),
            if st.smooth { "yes" } else { "no" },
            first.map_or("-".to_string(), |r| format!("{:.3e}", r.dt)),
            first.map_or("-".to_string(), |r| match &r.skipped {
                Some(why) => format!("skipped: {}", esc(why)),
                None => table_num(r.max_error),
            }),
            table_num(last.and_then(|r| r.max_error)),
            orders.join(", "),
        );
        // Second order at the finest pair, within 0.2 of 2, where it is expected: smooth
        // problems, the implicit sets, and central difference on undamped problems.
        let expect = st.smooth
            && (!st.scheme.starts_with("central difference")
                || st.problem.contains("undamped")
                || st.problem == "two-dof-step"
                || st.problem == "stiff-soft");
        if expect {
            let o = st.rows.last().and_then(|r| r.order);
            checks.push(Check {
                what: format!(
                    "{} on {}: measured order at the finest pair {} (expected 2 +- 0.2)",
                    st.scheme,
                    st.problem,
                    plain(o.map(|x| (x * 1000.0).round() / 1000.0))
                ),
                ok: o.is_some_and(|x| (x - 2.0).abs() <= 0.2),
            });
        }
    }
    body.push_str("</table>\n");
    for p in &problems {
        let svg = compare::problem_svg(p.as_ref(), &studies)?;
        let _ = writeln!(
            body,
            "<h3>{}</h3>\n<p>{} Source: {}.</p>\n<figure>{}</figure>",
            esc(p.name()),
            esc(p.description()),
            esc(p.source()),
            inline_svg(&svg)
        );
    }
    Ok(())
}

/// Properties of the demo column (our own invented values).
struct Column {
    /// Element lengths from the base up (m).
    lengths: Vec<f64>,
    /// Cross-section area of each element (m^2).
    areas: Vec<f64>,
    /// Young's modulus (Pa) and density (kg/m^3) of steel.
    e: f64,
    rho: f64,
    /// A mass on top (kg).
    top_mass: f64,
}

impl Column {
    /// A 9 m steel column in axial vibration, fixed at its base, in three storeys of 3 m with
    /// sections stepping down (120, 90, 60 cm^2), meshed unevenly (0.25 m to 0.5 m elements),
    /// with 800 kg on top. Invented for the report.
    fn demo() -> Self {
        let mut lengths = Vec::new();
        let mut areas = Vec::new();
        for (storey, area) in [120e-4, 90e-4, 60e-4].into_iter().enumerate() {
            // Storey meshes: 6 x 0.5 m, 8 x 0.375 m, 12 x 0.25 m.
            let n = [6, 8, 12][storey];
            for _ in 0..n {
                lengths.push(3.0 / f64::from(n));
                areas.push(area);
            }
        }
        Column {
            lengths,
            areas,
            e: 210e9,
            rho: 7850.0,
            top_mass: 800.0,
        }
    }

    /// Lumped-mass linear model; DOF i is node i + 1 (node 0 is the fixed base).
    fn model(&self) -> Result<LinearModel, stepgauge::Error> {
        let n = self.lengths.len();
        let mut m = vec![0.0; n + 1];
        let mut k = TriMat::new((n, n));
        for (el, (&l, &a)) in self.lengths.iter().zip(&self.areas).enumerate() {
            let half = 0.5 * self.rho * a * l;
            m[el] += half;
            m[el + 1] += half;
            let ke = self.e * a / l;
            // Element between nodes el and el + 1, i.e. DOFs el - 1 and el.
            k.add_triplet(el, el, ke);
            if el > 0 {
                k.add_triplet(el - 1, el - 1, ke);
                k.add_triplet(el - 1, el, -ke);
                k.add_triplet(el, el - 1, -ke);
            }
        }
        m[n] += self.top_mass;
        let mut mm = TriMat::new((n, n));
        for (i, &mi) in m[1..].iter().enumerate() {
            mm.add_triplet(i, i, mi);
        }
        LinearModel::new(&mm.to_csr(), &k.to_csr())
    }
}

/// The stable step of the demo column: Lanczos, Gershgorin, element bound, and a run.
fn section_stable_step(body: &mut String, checks: &mut Vec<Check>) -> Result<(), Failure> {
    let col = Column::demo();
    let n = col.lengths.len();
    let mut model = col.model()?;
    let state = State::at_rest(n, 0.0);
    let est = stable_step::estimate(
        &mut model,
        &state,
        &StableStepOptions::default(),
        &Execution::default(),
    )?;
    let omega_max = est.omega_max.unwrap_or(f64::NAN);
    let gersh = stable_step::omega_max_gershgorin(model.stiffness_matrix(), model.lumped(), None)?;
    let c = (col.e / col.rho).sqrt();
    let speeds = vec![c; n];
    let dt_elem = stable_step::element_stable_step(&col.lengths, &speeds)?;
    let dt_crit = est.dt_critical;

    // A run at the recommended step from a velocity kick at the top: it stays bounded.
    let mut state = State::at_rest(n, 0.0);
    state.v[n - 1] = 1.0;
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Given(dt_crit);
    let mut cd = CentralDifference::new(&mut model, &mut state, opts)?;
    let dt = est.recommended(stable_step::DEFAULT_SAFETY)?;
    let mut peak: f64 = 0.0;
    for _ in 0..2000 {
        cd.step(&mut model, &mut state, dt)?;
        peak = peak.max(state.u.iter().fold(0.0f64, |a, u| a.max(u.abs())));
    }
    // Energy bound: the top mass with 1 m/s cannot move more than v sqrt(M_total / K_min)-ish;
    // the run only has to stay finite and small (well under a metre).
    let bounded = peak.is_finite() && peak < 0.1;

    let total_mass: f64 = model.lumped().iter().sum();
    let _ = writeln!(
        body,
        "<h2 id=\"stable-step\">Stable step of a demo structure</h2>\n\
         <p>A 9 m steel column (E = 210 GPa, rho = 7850 kg/m^3, wave speed c = {c:.1} m/s) in \
         axial vibration, fixed at its base: three 3 m storeys with sections of 120, 90 and 60 \
         cm^2, meshed with 6, 8 and 12 two-node bar elements (0.5, 0.375 and 0.25 m), lumped \
         masses, 800 kg on top ({n} DOFs, total mass {total_mass:.1} kg). Invented dimensions, \
         built in the code.</p>\n<table>\n<tr><th>quantity</th><th>value</th><th>note</th></tr>\n\
         <tr><td>omega_max by Lanczos (rad/s)</td><td>{}</td><td>{} stiffness products</td></tr>\n\
         <tr><td>Gershgorin upper bound on omega_max (rad/s)</td><td>{}</td>\
         <td>never below the true value</td></tr>\n\
         <tr><td>element bound min L_e / c (s)</td><td>{}</td>\
         <td>Courant condition; never above 2 / omega_max</td></tr>\n\
         <tr><td>critical step 2 / omega_max (s)</td><td>{}</td><td></td></tr>\n\
         <tr><td>step from the Gershgorin bound (s)</td><td>{}</td><td>conservative</td></tr>\n\
         <tr><td>recommended step (x {}) (s)</td><td>{}</td><td>central difference</td></tr>\n\
         <tr><td>largest |u| in 2000 steps at the recommended step, 1 m/s kick on top (m)</td>\
         <td>{}</td><td>bounded</td></tr>\n</table>",
        table_num(Some(omega_max)),
        est_products(&est),
        table_num(Some(gersh)),
        table_num(Some(dt_elem)),
        table_num(Some(dt_crit)),
        table_num(Some(2.0 / gersh)),
        stable_step::DEFAULT_SAFETY,
        table_num(Some(dt)),
        table_num(Some(peak)),
    );
    let tol = 1e-9;
    checks.push(Check {
        what: format!(
            "demo column: Gershgorin bound {gersh:.6e} >= Lanczos omega_max {omega_max:.6e}"
        ),
        ok: gersh >= omega_max * (1.0 - tol),
    });
    checks.push(Check {
        what: format!(
            "demo column: element bound {dt_elem:.6e} s <= critical step {dt_crit:.6e} s"
        ),
        ok: dt_elem <= dt_crit * (1.0 + tol),
    });
    checks.push(Check {
        what: format!("demo column: bounded run at the recommended step (peak {peak:.3e} m)"),
        ok: bounded,
    });
    Ok(())
}

fn est_products(est: &stable_step::StableStep) -> String {
    format!("{:?}", est.method)
}

/// The demonstration (`stepgauge demo`), run as a child process so that its output is captured.
fn section_demo(body: &mut String, checks: &mut Vec<Check>) -> Result<(), Failure> {
    let exe = std::env::current_exe()
        .map_err(|e| Failure::Runtime(format!("cannot find the stepgauge executable: {e}")))?;
    let out = std::process::Command::new(exe)
        .arg("demo")
        .output()
        .map_err(|e| Failure::Runtime(format!("cannot run the demonstration: {e}")))?;
    let text = String::from_utf8_lossy(&out.stdout);
    let err = String::from_utf8_lossy(&out.stderr);
    let _ = writeln!(
        body,
        "<h2 id=\"demo\">Demonstration</h2>\n<p>The output of <code>stepgauge demo</code> (exit \
         status {}): the explicit and implicit engines on problems with known answers.</p>\n\
         <pre>{}{}</pre>",
        out.status
            .code()
            .map_or("none".to_string(), |c| c.to_string()),
        esc(&text),
        esc(&err)
    );
    let failed = text.lines().filter(|l| l.contains("FAILED")).count();
    checks.push(Check {
        what: format!(
            "demonstration: every check passed ({} checks failed, exit status {})",
            failed,
            out.status
                .code()
                .map_or("none".to_string(), |c| c.to_string())
        ),
        ok: out.status.success(),
    });
    Ok(())
}
