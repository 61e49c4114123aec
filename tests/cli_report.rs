//! `stepgauge report` (also `stepgauge` with no arguments) and `stepgauge compare`, run as a user runs
//! them: arguments in, files, standard output, standard error and exit status out.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

fn stepgauge_in(dir: Option<&Path>, args: &[&str]) -> Run {
    let mut cmd = Command::new(env!("CARGO_BIN_EXE_stepgauge"));
    cmd.args(args);
    if let Some(d) = dir {
        cmd.current_dir(d);
    }
    let out = cmd.output().expect("the stepgauge binary runs");
    Run {
        code: out
            .status
            .code()
            .expect("exit status (not killed by a signal)"),
        stdout: String::from_utf8(out.stdout).expect("UTF-8 standard output"),
        stderr: String::from_utf8(out.stderr).expect("UTF-8 standard error"),
    }
}

fn stepgauge(args: &[&str]) -> Run {
    stepgauge_in(None, args)
}

/// A fresh, empty scratch folder under the target directory.
fn scratch(name: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(format!("cli_report_{name}"));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// The report is self-contained: every section, inline SVG figures, no external resources.
fn assert_report(html: &str) {
    for heading in [
        "<h1>stepgauge report</h1>",
        "id=\"checks\"",
        "Stability and accuracy of the standard parameter sets",
        "Spectra of the standard parameter sets",
        "Reference problems",
        "Stable step of a demo structure",
        "Demonstration",
    ] {
        assert!(
            html.contains(heading),
            "`{heading}` missing from the report"
        );
    }
    // One spectra figure and one per reference problem (ten).
    let figures = html.matches("<svg").count();
    assert!(figures >= 11, "{figures} SVG figures");
    let stripped = html.replace("http://www.w3.org/2000/svg", "");
    assert!(
        !stripped.contains("http"),
        "an external address in the report"
    );
    assert!(
        !html.contains("<script src"),
        "an external script in the report"
    );
    assert!(!html.contains("FAILED"), "a failed check in the report");
    assert_sets_table(html);
}

/// The cells of the table row whose first cell starts with `label`.
fn row<'a>(html: &'a str, label: &str) -> Vec<&'a str> {
    let start = format!("<tr><td>{label}");
    let line = html
        .lines()
        .find(|l| l.starts_with(&start))
        .unwrap_or_else(|| panic!("no row `{label}` in the report"));
    line.trim_start_matches("<tr><td>")
        .trim_end_matches("</td></tr>")
        .split("</td><td>")
        .collect()
}

/// A printed number against its value: within half a unit of its last printed digit (the report
/// prints seven significant digits), and `-` for none.
fn printed_near(cell: &str, value: Option<f64>, what: &str) {
    match value {
        None => assert_eq!(cell, "-", "{what}"),
        Some(v) => {
            let x: f64 = cell.parse().unwrap_or_else(|_| panic!("{what}: `{cell}`"));
            let mantissa = cell.split(['e', 'E']).next().unwrap();
            let decimals = mantissa.split_once('.').map_or(0, |(_, d)| d.len()) as i32;
            let exponent: i32 = cell
                .split_once(['e', 'E'])
                .map_or(0, |(_, e)| e.parse().unwrap());
            let half_unit = 0.5 * 10f64.powi(exponent - decimals);
            assert!(
                (x - v).abs() <= half_unit * (1.0 + 1e-9),
                "{what}: printed {cell}, value {v}"
            );
        }
    }
}

/// The table of the standard sets shows the values published for them, not only its headings:
/// columns verdict, Omega_crit, rho_inf, order, dissipative, period error and damping at Omega =
/// 0.1 and 1 (undamped). Sources: the trapezoidal rule's `omega_bar dt = 2 atan(Omega/2)` and
/// the central difference's `2 asin(Omega/2)` with `Omega_crit = 2` (Hughes 1987, sec. 9.3, from
/// memory); linear acceleration's `Omega_crit = 2 sqrt(3)` (Newmark 1959); HHT's `rho_inf = (1 +
/// alpha)/(1 - alpha)` (Hilber, Hughes & Taylor 1977); WBZ and generalised-alpha made with their
/// `rho_inf` (Chung & Hulbert 1993). Linear acceleration's `rho_inf = 2 + sqrt(3)` is the larger
/// root of `z^2 + 4 z + 1`, the limit of Newmark's characteristic polynomial `z^2 - (2 - (gamma
/// + 1/2)/beta) z + 1 - (gamma - 1/2)/beta` (a re-derivation in the project).
fn assert_sets_table(html: &str) {
    let trap = row(html, "average acceleration");
    assert_eq!(trap[1], "unconditional");
    printed_near(trap[2], None, "trapezoidal Omega_crit");
    printed_near(trap[3], Some(1.0), "trapezoidal rho_inf");
    assert_eq!((trap[4], trap[5]), ("2", "no"));
    let t = |o: f64| o / (2.0 * (o / 2.0).atan()) - 1.0;
    printed_near(trap[6], Some(t(0.1)), "trapezoidal period error at 0.1");
    printed_near(trap[7], Some(0.0), "trapezoidal damping at 0.1");
    printed_near(trap[8], Some(t(1.0)), "trapezoidal period error at 1");
    let lin = row(html, "linear acceleration");
    assert_eq!(lin[1], "conditional");
    printed_near(lin[2], Some(12f64.sqrt()), "linear acceleration Omega_crit");
    printed_near(
        lin[3],
        Some(2.0 + 3f64.sqrt()),
        "linear acceleration rho_inf",
    );
    let hht = row(html, "hht alpha = -0.1");
    assert_eq!((hht[1], hht[5]), ("unconditional", "yes"));
    printed_near(hht[3], Some(0.9 / 1.1), "HHT rho_inf");
    for label in ["wbz rho_inf = 0.8", "generalized-alpha rho_inf = 0.8"] {
        let r = row(html, label);
        assert_eq!((r[1], r[4], r[5]), ("unconditional", "2", "yes"), "{label}");
        printed_near(r[3], Some(0.8), label);
    }
    let cd = row(html, "central difference");
    assert_eq!(cd[1], "conditional");
    printed_near(cd[2], Some(2.0), "central difference Omega_crit");
    printed_near(cd[3], None, "central difference rho_inf");
    let c = |o: f64| o / (2.0 * (o / 2.0).asin()) - 1.0;
    printed_near(
        cd[6],
        Some(c(0.1)),
        "central difference period error at 0.1",
    );
    printed_near(cd[8], Some(c(1.0)), "central difference period error at 1");
}

/// `stepgauge report --output DIR` writes DIR/report.html, prints its path, exits 0.
#[test]
fn report_writes_a_self_contained_page() {
    let dir = scratch("report");
    let out = dir.join("out");
    let r = stepgauge(&["report", "--output", out.to_str().unwrap()]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    let path = out.join("report.html");
    assert!(r.stdout.contains(path.to_str().unwrap()), "{}", r.stdout);
    assert!(r.stdout.contains("checks passed"), "{}", r.stdout);
    assert_report(&std::fs::read_to_string(&path).unwrap());
}

/// `stepgauge` with no arguments writes stepgauge-report/report.html in the current folder.
#[test]
fn no_arguments_writes_the_report_in_the_current_folder() {
    let dir = scratch("default");
    let r = stepgauge_in(Some(&dir), &[]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stderr.is_empty(), "{}", r.stderr);
    assert!(
        r.stdout.contains("stepgauge-report/report.html"),
        "{}",
        r.stdout
    );
    let html = std::fs::read_to_string(dir.join("stepgauge-report").join("report.html")).unwrap();
    assert_report(&html);
}

fn compare_json(args: &[&str]) -> Value {
    let mut all = vec!["compare", "--json"];
    all.extend_from_slice(args);
    let r = stepgauge(&all);
    assert_eq!(r.code, 0, "{all:?}: {}", r.stderr);
    assert!(r.stderr.is_empty(), "{all:?}: {}", r.stderr);
    serde_json::from_str(&r.stdout).unwrap_or_else(|e| panic!("not JSON ({e}): {}", r.stdout))
}

/// The measured order at the finest pair of steps.
fn finest_order(study: &Value) -> f64 {
    let rows = study["rows"].as_array().unwrap();
    rows.last().unwrap()["order"]
        .as_f64()
        .unwrap_or_else(|| panic!("no order: {study}"))
}

/// Average acceleration (the default scheme) shows second order on every smooth problem.
#[test]
fn compare_average_acceleration_is_second_order_on_smooth_problems() {
    let v = compare_json(&[]);
    let studies = v.as_array().unwrap();
    assert_eq!(studies.len(), 10);
    let mut smooth = 0;
    for s in studies.iter().filter(|s| s["smooth"] == Value::Bool(true)) {
        smooth += 1;
        let o = finest_order(s);
        assert!((o - 2.0).abs() <= 0.2, "{}: order {o}", s["problem"]);
        let rows = s["rows"].as_array().unwrap();
        assert_eq!(rows.len(), 5, "dt0 and four halvings");
        let dts: Vec<f64> = rows.iter().map(|r| r["dt"].as_f64().unwrap()).collect();
        assert!(dts.windows(2).all(|w| (w[0] / w[1] - 2.0).abs() < 1e-12));
        assert!(rows.iter().all(|r| r["steps"].as_u64().unwrap() > 0));
    }
    assert!(smooth >= 6, "{smooth} smooth problems");
}

/// Central difference on the undamped free oscillator: second order, and the steps of a list
/// above the stable limit 2 / omega are skipped.
#[test]
fn compare_central_difference_on_the_free_undamped_oscillator() {
    let v = compare_json(&[
        "--scheme",
        "central-difference",
        "--problem",
        "sdof-free-undamped",
    ]);
    let s = &v.as_array().unwrap()[0];
    assert_eq!(s["problem"], "sdof-free-undamped");
    let o = finest_order(s);
    assert!((o - 2.0).abs() <= 0.2, "order {o}");

    // omega = 10 rad/s here: the stable limit 2 / omega is 0.2 s.
    let v = compare_json(&[
        "--scheme",
        "central-difference",
        "--problem",
        "sdof-free-undamped",
        "--dt",
        "0.5,0.01,0.005",
    ]);
    let rows = v[0]["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 3);
    assert!(rows[0]["skipped"].is_string(), "{}", rows[0]);
    assert_eq!(rows[0]["steps"], 0);
    assert!(rows[1]["max_error"].as_f64().unwrap() > 0.0);
    let o = rows[2]["order"].as_f64().unwrap();
    assert!((o - 2.0).abs() <= 0.2, "order {o}");
}

/// Text and CSV: one line per run, with a header.
#[test]
fn compare_text_and_csv() {
    let r = stepgauge(&["compare", "--problem", "two-dof-step"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.starts_with("problem"));
    assert_eq!(r.stdout.lines().count(), 6);
    let r = stepgauge(&[
        "compare",
        "--csv",
        "--standard-sets",
        "--problem",
        "two-dof-step",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r.stdout.lines().collect();
    assert!(lines[0].starts_with("problem,scheme,smooth,dt,steps,max_error,order"));
    assert_eq!(lines.len(), 1 + 6 * 5);
}

/// `--plot DIR` writes one SVG figure per problem.
#[test]
fn compare_plot_writes_svg_files() {
    let dir = scratch("plot");
    let figs = dir.join("figs");
    let r = stepgauge(&[
        "compare",
        "--standard-sets",
        "--problem",
        "sdof-free-damped",
        "--problem",
        "hardening",
        "--plot",
        figs.to_str().unwrap(),
    ]);
    // sdof-free-damped is not a name: the damped free problem is underdamped.
    assert_eq!(r.code, 2);
    let r = stepgauge(&[
        "compare",
        "--standard-sets",
        "--problem",
        "sdof-free-underdamped",
        "--problem",
        "hardening",
        "--halvings",
        "2",
        "--plot",
        figs.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    for name in ["sdof-free-underdamped", "hardening"] {
        let svg = std::fs::read_to_string(figs.join(format!("{name}.svg"))).unwrap();
        assert!(svg.contains("<svg"), "{name}");
        assert!(svg.trim_end().ends_with("</svg>"), "{name}");
        assert!(svg.contains(name), "{name}: title");
    }
}

/// Bad arguments: exit status 2 and one line on standard error.
#[test]
fn compare_bad_arguments_exit_2_with_one_line() {
    for args in [
        &["compare", "--problem", "no-such-problem"][..],
        &["compare", "--dt", "0"],
        &["compare", "--dt", "-0.01"],
        &["compare", "--dt", "0.1,abc"],
        &[
            "compare",
            "--standard-sets",
            "--scheme",
            "hht",
            "--alpha",
            "-0.1",
        ],
        &["compare", "--scheme", "hht"],
        &["report", "--no-such-option"],
    ] {
        let r = stepgauge(args);
        assert_eq!(r.code, 2, "{args:?}: {}{}", r.stdout, r.stderr);
        assert_eq!(r.stderr.lines().count(), 1, "{args:?}: {}", r.stderr);
        assert!(
            r.stderr.starts_with("stepgauge: "),
            "{args:?}: {}",
            r.stderr
        );
        assert!(r.stdout.is_empty(), "{args:?}: {}", r.stdout);
    }
    let r = stepgauge(&["compare", "--problem", "no-such-problem"]);
    assert!(r.stderr.contains("sdof-free-undamped"), "{}", r.stderr);
}
