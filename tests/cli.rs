//! The `stepgauge` binary's `check` and `spectrum` subcommands and the demonstration, run as a user
//! runs them: arguments in, standard output, standard error and exit status out.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::{Scheme, metrics};

struct Run {
    code: i32,
    stdout: String,
    stderr: String,
}

fn stepgauge(args: &[&str]) -> Run {
    let out = Command::new(env!("CARGO_BIN_EXE_stepgauge"))
        .args(args)
        .output()
        .expect("the stepgauge binary runs");
    Run {
        code: out
            .status
            .code()
            .expect("exit status (not killed by a signal)"),
        stdout: String::from_utf8(out.stdout).expect("UTF-8 standard output"),
        stderr: String::from_utf8(out.stderr).expect("UTF-8 standard error"),
    }
}

fn json(args: &[&str]) -> (Value, i32) {
    let r = stepgauge(args);
    assert!(
        r.stderr.is_empty(),
        "{args:?}: unexpected standard error: {}",
        r.stderr
    );
    let v = serde_json::from_str(&r.stdout)
        .unwrap_or_else(|e| panic!("{args:?}: not JSON ({e}): {}", r.stdout));
    (v, r.code)
}

fn f(v: &Value, key: &str) -> f64 {
    v[key]
        .as_f64()
        .unwrap_or_else(|| panic!("`{key}` is not a number: {}", v[key]))
}

/// A fresh directory under the target directory for files a test writes.
fn scratch(name: &str) -> PathBuf {
    let dir = Path::new(env!("CARGO_TARGET_TMPDIR")).join(format!("cli-{name}"));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("scratch directory");
    dir
}

/// The contract's keys are all there, with their types.
fn assert_check_contract(v: &Value) {
    assert!(v["scheme"].is_string());
    for k in ["alpha_m", "alpha_f", "beta", "gamma"] {
        assert!(v["parameters"][k].is_f64(), "parameters.{k}");
    }
    assert!(v["xi"].is_f64());
    assert!(v["unconditionally_stable"].is_boolean());
    assert!(v["omega_crit"].is_f64() || v["omega_crit"].is_null());
    assert!(v["rho_inf"].is_f64() || v["rho_inf"].is_null());
    assert!(v["order"].is_u64());
    assert!(!v["reasons"].as_array().expect("reasons").is_empty());
    assert!(
        v["reasons"]
            .as_array()
            .unwrap()
            .iter()
            .all(Value::is_string)
    );
}

/// Central difference: conditionally stable with Omega_crit = 2, rho_inf unbounded (null).
#[test]
fn check_central_difference() {
    let (v, code) = json(&["check", "--scheme", "central-difference", "--json"]);
    assert_eq!(code, 0);
    assert_check_contract(&v);
    assert_eq!(v["scheme"], "central-difference");
    assert_eq!(v["unconditionally_stable"], false);
    assert_eq!(v["stability"], "conditional");
    assert!((f(&v, "omega_crit") - 2.0).abs() < 1e-9);
    assert!(v["rho_inf"].is_null());
    assert_eq!(v["explicit"], true);
}

/// The trapezoidal rule (the default newmark, beta 1/4, gamma 1/2): unconditionally stable, no
/// critical Omega, rho_inf = 1, second order.
#[test]
fn check_trapezoidal_rule() {
    for args in [
        &["check", "--json"][..],
        &[
            "check", "--scheme", "newmark", "--beta", "0.25", "--gamma", "0.5", "--json",
        ][..],
    ] {
        let (v, code) = json(args);
        assert_eq!(code, 0, "{args:?}");
        assert_check_contract(&v);
        assert_eq!(v["scheme"], "newmark");
        assert_eq!(v["unconditionally_stable"], true);
        assert!(v["omega_crit"].is_null());
        assert!((f(&v, "rho_inf") - 1.0).abs() < 1e-12);
        assert_eq!(v["order"], 2);
    }
}

/// Linear acceleration (beta 1/6, gamma 1/2): Omega_crit = sqrt(12).
#[test]
fn check_linear_acceleration() {
    let beta = format!("{}", 1.0f64 / 6.0);
    let (v, code) = json(&["check", "--beta", &beta, "--json"]);
    assert_eq!(code, 0);
    assert_eq!(v["unconditionally_stable"], false);
    assert!((f(&v, "omega_crit") - 12f64.sqrt()).abs() < 1e-9);
    assert!((f(&v, "omega_crit_closed_form") - 12f64.sqrt()).abs() < 1e-12);
}

/// HHT-alpha with alpha = -0.1: unconditionally stable, rho_inf = (1 - 0.1)/(1 + 0.1).
#[test]
fn check_hht() {
    let (v, code) = json(&["check", "--scheme", "hht", "--alpha", "-0.1", "--json"]);
    assert_eq!(code, 0);
    assert_check_contract(&v);
    assert_eq!(v["scheme"], "hht");
    assert_eq!(v["unconditionally_stable"], true);
    assert!(v["omega_crit"].is_null());
    assert!((f(&v, "rho_inf") - 0.9 / 1.1).abs() < 1e-12);
    assert_eq!(v["dissipative"], true);
    assert!((f(&v["parameters"], "alpha_f") - 0.1).abs() < 1e-15);
}

/// Generalised-alpha with rho_inf = 0.6: rho_inf comes back as 0.6, second order.
#[test]
fn check_generalized_alpha() {
    let (v, code) = json(&[
        "check",
        "--scheme",
        "generalized-alpha",
        "--rho-inf",
        "0.6",
        "--json",
    ]);
    assert_eq!(code, 0);
    assert_check_contract(&v);
    assert_eq!(v["scheme"], "generalized-alpha");
    assert_eq!(v["unconditionally_stable"], true);
    assert!((f(&v, "rho_inf") - 0.6).abs() < 1e-12);
    assert_eq!(v["order"], 2);
}

/// A conditionally stable set with a step above its limit exits 3; within the limit, 0; the
/// JSON says why in either case.
#[test]
fn check_exit_3_when_the_step_exceeds_the_limit() {
    let base = [
        "check",
        "--scheme",
        "newmark",
        "--beta",
        "0.1",
        "--gamma",
        "0.5",
        "--max-frequency",
        "1000",
    ];
    let r = stepgauge(&[&base[..], &["--dt", "0.01"]].concat());
    assert_eq!(r.code, 3, "{}{}", r.stdout, r.stderr);
    assert!(
        r.stdout.contains("EXCEEDS the stable limit"),
        "{}",
        r.stdout
    );
    let (v, code) = json(&[&base[..], &["--dt", "0.01", "--json"]].concat());
    assert_eq!(code, 3);
    assert_eq!(v["step_stable"], false);
    // Omega_crit = 1/sqrt(gamma/2 - beta) = 1/sqrt(0.15); dt_stable = Omega_crit / omega_max.
    assert!((f(&v, "dt_stable") - 1.0 / 0.15f64.sqrt() / 1000.0).abs() < 1e-12);
    let (v, code) = json(&[&base[..], &["--dt", "0.002", "--json"]].concat());
    assert_eq!(code, 0);
    assert_eq!(v["step_stable"], true);
    // Conditionally stable without a step: 0.
    assert_eq!(stepgauge(&base).code, 0);
}

/// A step whose own Omega lies in a window where the set is stable again, while the modes below
/// it are not: exit 3, the reason says so (before: exit 0, "within the stable limit").
#[test]
fn check_exit_3_when_lower_modes_are_unstable() {
    let args = [
        "check",
        "--scheme",
        "generalized-alpha",
        "--alpha-m",
        "-0.039",
        "--alpha-f",
        "0.203",
        "--beta",
        "0.385",
        "--gamma",
        "0.595",
        "--xi",
        "0.02",
        "--max-frequency",
        "1000",
        "--dt",
        "0.01",
    ];
    let r = stepgauge(&args);
    assert_eq!(r.code, 3, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("stable again"), "{}", r.stdout);
    let (v, code) = json(&[&args[..], &["--json"]].concat());
    assert_eq!(code, 3);
    assert_eq!(v["step_stable"], false);
    // The printed limit pasted back as the step is accepted (before: the predicted central
    // difference at xi = 0.1 refused its own limit, exit 3).
    let base = [
        "check",
        "--scheme",
        "central-difference",
        "--damping-velocity",
        "predicted",
        "--xi",
        "0.1",
        "--max-frequency",
        "1",
    ];
    let (v, _) = json(&[&base[..], &["--json"]].concat());
    let dt = format!("{}", f(&v, "dt_stable"));
    let (v, code) = json(&[&base[..], &["--dt", dt.as_str(), "--json"]].concat());
    assert_eq!(
        (code, &v["step_stable"]),
        (0, &Value::Bool(true)),
        "dt {dt}"
    );
}

/// gamma < 1/2 is unstable for every step: exit 4.
#[test]
fn check_exit_4_when_unstable() {
    let r = stepgauge(&["check", "--gamma", "0.4"]);
    assert_eq!(r.code, 4, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.contains("UNSTABLE"));
    let (v, code) = json(&["check", "--gamma", "0.4", "--json"]);
    assert_eq!(code, 4);
    assert_eq!(v["stability"], "unstable");
    assert!(v["omega_crit"].is_null());
}

/// Bad arguments: exit 2, one line on standard error saying what is wrong, no panic, nothing on
/// standard output.
#[test]
fn bad_arguments_exit_2_with_one_line() {
    let cases: &[(&[&str], &[&str])] = &[
        (
            &["check", "--scheme", "implicit-magic"],
            &[
                "invalid value 'implicit-magic'",
                "--scheme",
                "generalized-alpha",
            ],
        ),
        (
            &["check", "--scheme", "hht", "--alpha", "0.5"],
            &["--alpha = 0.5", "[-1/3, 0]"],
        ),
        (
            &["check", "--scheme", "generalized-alpha", "--rho-inf", "2"],
            &["--rho-inf = 2", "[0, 1]"],
        ),
        (
            &["check", "--beta", "abc"],
            &["invalid value 'abc'", "--beta"],
        ),
        (
            &["spectrum", "--xi", "much"],
            &["invalid value 'much'", "--xi"],
        ),
        (
            &["check", "--alpha", "-0.1"],
            &["--alpha does not apply to --scheme newmark"],
        ),
        (
            &["check", "--scheme", "hht"],
            &["--scheme hht needs --alpha"],
        ),
        (
            &[
                "check",
                "--scheme",
                "hht",
                "--alpha",
                "-0.1",
                "--rho-inf",
                "0.9",
            ],
            &["not both"],
        ),
        (
            &["check", "--scheme", "generalized-alpha", "--alpha-m", "0.2"],
            &["missing --alpha-f --beta --gamma"],
        ),
        (&["check", "--xi", "-0.1"], &["--xi = -0.1"]),
        (
            &["check", "--scheme", "central-difference", "--dt", "0"],
            &["--dt = 0"],
        ),
        (&["check", "--json", "--csv"], &["--json", "--csv"]),
        (
            &["spectrum", "--omega", "1,0,2"],
            &["--omega value = 0", "positive"],
        ),
        (&["spectrum", "--points", "0"], &["--points"]),
        (
            &["spectrum", "--omega-min", "5", "--omega-max", "1"],
            &["--omega-min 5 must be below --omega-max 1"],
        ),
        (&["frobnicate"], &["unrecognized subcommand 'frobnicate'"]),
    ];
    for (args, needles) in cases {
        let r = stepgauge(args);
        assert_eq!(r.code, 2, "{args:?}: {}{}", r.stdout, r.stderr);
        assert!(!r.stderr.contains("panicked"), "{args:?}: {}", r.stderr);
        assert!(!r.stderr.contains("backtrace"), "{args:?}: {}", r.stderr);
        assert_eq!(r.stderr.lines().count(), 1, "{args:?}: {}", r.stderr);
        assert!(
            r.stderr.starts_with("stepgauge: "),
            "{args:?}: {}",
            r.stderr
        );
        for n in *needles {
            assert!(r.stderr.contains(n), "{args:?}: `{n}` not in {}", r.stderr);
        }
        assert!(r.stdout.is_empty(), "{args:?}: {}", r.stdout);
    }
}

/// Negative values are taken as values, with a space or an equals sign.
#[test]
fn negative_values_are_accepted() {
    for args in [
        &["check", "--scheme", "hht", "--alpha", "-0.1", "--json"][..],
        &["check", "--scheme", "hht", "--alpha=-0.1", "--json"][..],
        &["check", "--scheme", "wbz", "--alpha-m", "-0.2", "--json"][..],
        // With an exponent (before: "unexpected argument '-1'").
        &["check", "--scheme", "wbz", "--alpha-m", "-1e-3", "--json"][..],
        &["check", "--scheme", "wbz", "--alpha-m", "-2E-1", "--json"][..],
    ] {
        let (v, code) = json(args);
        assert_eq!(code, 0, "{args:?}");
        assert_eq!(v["unconditionally_stable"], true, "{args:?}");
    }
    let (v, _) = json(&[
        "spectrum", "--scheme", "hht", "--alpha", "-0.3", "--omega", "1", "--json",
    ]);
    assert!((f(&v["parameters"], "alpha_f") - 0.3).abs() < 1e-15);
    // Raw generalised-alpha with a negative alpha_m.
    let (v, code) = json(&[
        "check",
        "--scheme",
        "generalized-alpha",
        "--alpha-m",
        "-0.25",
        "--alpha-f",
        "0.25",
        "--beta",
        "0.5625",
        "--gamma",
        "1",
        "--json",
    ]);
    assert_eq!(code, 0);
    assert_eq!(v["unconditionally_stable"], true);
    assert_eq!(v["scheme"], "custom");
}

/// `--scheme newmark --beta 0` is explicit Newmark (damping centred): Omega_crit stays 2 with
/// damping, unlike the central difference with the lagged damping velocity, whose limit is
/// 2 (sqrt(1 + xi^2) - xi).
#[test]
fn explicit_newmark_is_not_the_central_difference() {
    let (n0, code) = json(&["check", "--scheme", "newmark", "--beta", "0", "--json"]);
    assert_eq!(code, 0);
    assert_eq!(n0["scheme"], "newmark");
    assert!((f(&n0, "omega_crit") - 2.0).abs() < 1e-9);
    assert!(n0["rho_inf"].is_null());
    assert!(n0["label"].as_str().unwrap().contains("explicit newmark"));

    let (n, _) = json(&[
        "check", "--scheme", "newmark", "--beta", "0", "--xi", "0.1", "--json",
    ]);
    let (cd, _) = json(&[
        "check",
        "--scheme",
        "central-difference",
        "--xi",
        "0.1",
        "--json",
    ]);
    assert_eq!(cd["scheme"], "central-difference");
    assert_ne!(n["scheme"], cd["scheme"]);
    let lagged = 2.0 * (1.01f64.sqrt() - 0.1);
    assert!((f(&n, "omega_crit_closed_form") - 2.0).abs() < 1e-12);
    assert!((f(&n, "omega_crit") - 2.0).abs() < 1e-8);
    assert!((f(&cd, "omega_crit_closed_form") - lagged).abs() < 1e-12);
    assert!((f(&cd, "omega_crit") - lagged).abs() < 1e-8);
    assert!(f(&n, "omega_crit") - f(&cd, "omega_crit") > 0.1);
}

/// `spectrum --json`: one point per `--points`, the end points exact, and the contract's keys.
#[test]
fn spectrum_json_points() {
    let (v, code) = json(&[
        "spectrum", "--scheme", "hht", "--alpha", "-0.1", "--points", "37", "--json",
    ]);
    assert_eq!(code, 0);
    assert_eq!(v["scheme"], "hht");
    assert!(v["xi"].is_f64());
    for k in ["alpha_m", "alpha_f", "beta", "gamma"] {
        assert!(v["parameters"][k].is_f64());
    }
    let pts = v["points"].as_array().unwrap();
    assert_eq!(pts.len(), 37);
    assert_eq!(f(&pts[0], "omega"), 0.01);
    assert_eq!(f(&pts[36], "omega"), 10.0);
    for p in pts {
        assert!(p["spectral_radius"].is_f64());
        assert!(p["damping_ratio"].is_f64() || p["damping_ratio"].is_null());
        assert!(p["period_error"].is_f64() || p["period_error"].is_null());
    }
    // The default range has 200 points.
    let (v, _) = json(&["spectrum", "--json"]);
    assert_eq!(v["points"].as_array().unwrap().len(), 200);
}

/// `--omega LIST` gives exactly those values; where the principal roots are real (central
/// difference beyond Omega = 2) the damping ratio and period error are null and the spectral
/// radius exceeds 1.
#[test]
fn spectrum_omega_list_and_real_roots() {
    let (v, code) = json(&[
        "spectrum",
        "--scheme",
        "central-difference",
        "--omega",
        "0.5,1,2.5",
        "--json",
    ]);
    assert_eq!(code, 0);
    let pts = v["points"].as_array().unwrap();
    let omegas: Vec<f64> = pts.iter().map(|p| f(p, "omega")).collect();
    assert_eq!(omegas, [0.5, 1.0, 2.5]);
    assert!(pts[0]["period_error"].is_f64());
    assert!(pts[1]["damping_ratio"].is_f64());
    let real = &pts[2];
    assert!(f(real, "spectral_radius") > 1.0);
    assert!(real["period_error"].is_null());
    assert!(real["damping_ratio"].is_null());
    // The text table shows '-' there.
    let r = stepgauge(&[
        "spectrum",
        "--scheme",
        "central-difference",
        "--omega",
        "2.5",
    ]);
    assert_eq!(r.code, 0);
    let last = r.stdout.lines().last().unwrap();
    assert_eq!(last.split_whitespace().filter(|w| *w == "-").count(), 2);
}

/// `spectrum --csv` reads back to exactly the doubles the library computes, with empty fields
/// for null.
#[test]
fn spectrum_csv_round_trips() {
    let omegas = [0.1, 0.7, 1.9, 2.5, 3.0];
    let list = omegas.map(|o| o.to_string()).join(",");
    for (args, scheme) in [
        (
            vec!["--scheme", "hht", "--alpha", "-0.1"],
            Scheme::Alpha(AlphaParams::hht(-0.1).unwrap()),
        ),
        (
            vec!["--scheme", "central-difference", "--xi", "0.05"],
            Scheme::CentralDifference(stepgauge::explicit::ForceVelocity::Lagged),
        ),
    ] {
        let xi = if args.contains(&"--xi") { 0.05 } else { 0.0 };
        let r = stepgauge(&[&["spectrum"][..], &args, &["--omega", &list, "--csv"]].concat());
        assert_eq!(r.code, 0, "{}", r.stderr);
        let mut lines = r.stdout.lines();
        assert_eq!(
            lines.next(),
            Some("omega,spectral_radius,damping_ratio,period_error")
        );
        let rows: Vec<&str> = lines.collect();
        assert_eq!(rows.len(), omegas.len());
        let opt = |s: &str| (!s.is_empty()).then(|| s.parse::<f64>().unwrap().to_bits());
        for (row, &o) in rows.iter().zip(&omegas) {
            let cells: Vec<&str> = row.split(',').collect();
            assert_eq!(cells.len(), 4);
            let m = metrics(&scheme, o, xi);
            assert_eq!(cells[0].parse::<f64>().unwrap().to_bits(), o.to_bits());
            assert_eq!(
                cells[1].parse::<f64>().unwrap().to_bits(),
                m.spectral_radius.to_bits(),
                "{row}"
            );
            assert_eq!(opt(cells[2]), m.damping_ratio().map(f64::to_bits), "{row}");
            assert_eq!(opt(cells[3]), m.period_error().map(f64::to_bits), "{row}");
        }
    }
}

/// `--standard-sets`: six schemes (plus the user's, first, when given); JSON is a list, CSV one
/// table with a quoted scheme column.
#[test]
fn spectrum_standard_sets() {
    let (v, code) = json(&["spectrum", "--standard-sets", "--points", "4", "--json"]);
    assert_eq!(code, 0);
    let list = v.as_array().expect("a JSON list");
    assert_eq!(list.len(), 6);
    let names: Vec<&str> = list.iter().map(|s| s["scheme"].as_str().unwrap()).collect();
    assert_eq!(
        names,
        [
            "newmark",
            "newmark",
            "hht",
            "wbz",
            "generalized-alpha",
            "central-difference"
        ]
    );
    assert!(
        list.iter()
            .all(|s| s["points"].as_array().unwrap().len() == 4)
    );
    let (v, _) = json(&[
        "spectrum",
        "--standard-sets",
        "--scheme",
        "wbz",
        "--alpha-m",
        "-0.2",
        "--omega",
        "1",
        "--json",
    ]);
    let list = v.as_array().unwrap();
    assert_eq!(list.len(), 7);
    assert_eq!(list[0]["label"], "wbz alpha_m = -0.2");
    let r = stepgauge(&["spectrum", "--standard-sets", "--points", "3", "--csv"]);
    assert_eq!(r.code, 0);
    let lines: Vec<&str> = r.stdout.lines().collect();
    assert_eq!(
        lines[0],
        "scheme,omega,spectral_radius,damping_ratio,period_error"
    );
    assert_eq!(lines.len(), 1 + 6 * 3);
    assert!(lines[1].starts_with("\"average acceleration (newmark beta = 1/4, gamma = 1/2)\","));
}

/// `check --csv`: one header row and one data row with as many fields.
#[test]
fn check_csv_one_row() {
    let r = stepgauge(&[
        "check",
        "--scheme",
        "central-difference",
        "--max-frequency",
        "100",
        "--dt",
        "0.01",
        "--csv",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r.stdout.lines().collect();
    assert_eq!(lines.len(), 2);
    assert!(lines[0].starts_with(
        "scheme,alpha_m,alpha_f,beta,gamma,xi,unconditionally_stable,omega_crit,rho_inf,order,"
    ));
    let header: Vec<&str> = lines[0].split(',').collect();
    // The data row's fields, with quoted fields kept whole.
    let mut fields = Vec::new();
    let (mut cur, mut quoted) = (String::new(), false);
    for c in lines[1].chars() {
        match c {
            '"' => quoted = !quoted,
            ',' if !quoted => fields.push(std::mem::take(&mut cur)),
            c => cur.push(c),
        }
    }
    fields.push(cur);
    assert_eq!(fields.len(), header.len());
    let col = |k: &str| fields[header.iter().position(|h| *h == k).unwrap()].as_str();
    assert_eq!(col("scheme"), "central-difference");
    assert_eq!(col("rho_inf"), "");
    assert_eq!(col("step_stable"), "true");
    // omega_crit = 2 (Hughes 1987, sec. 9.1) found by bisection on the computed spectral radius,
    // which meets a double root at -1 there: a few ulps either way are round-off.
    let dt_stable = col("dt_stable").parse::<f64>().unwrap();
    assert!((dt_stable - 0.02).abs() < 1e-15, "{dt_stable}");
}

/// The text verdict has every section, reasons as a list.
#[test]
fn check_text_output() {
    let r = stepgauge(&[
        "check",
        "--scheme",
        "generalized-alpha",
        "--rho-inf",
        "0.8",
        "--frequency-of-interest",
        "60",
        "--dt",
        "0.002",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    for k in [
        "scheme",
        "parameters",
        "xi",
        "verdict",
        "omega_crit",
        "rho_inf",
        "order",
        "dissipative",
        "stable step",
        "accuracy step",
        "period error",
        "reasons",
        "  - ",
    ] {
        assert!(r.stdout.contains(k), "`{k}` missing:\n{}", r.stdout);
    }
}

fn assert_svg(path: &Path) {
    let svg = std::fs::read_to_string(path).expect("the plot file");
    assert!(svg.contains("<svg"));
    for label in [
        "Omega = omega dt (log scale)",
        "spectral radius",
        "damping ratio",
        "period error",
    ] {
        assert!(svg.contains(label), "`{label}` not in the SVG");
    }
    let http: Vec<_> = svg.match_indices("http").collect();
    assert_eq!(
        http.len(),
        1,
        "only the SVG namespace may name a web address"
    );
    assert!(svg.contains("xmlns=\"http://www.w3.org/2000/svg\""));
}

/// `--plot` writes an SVG with the axis labels and no web address other than the SVG
/// namespace, and leaves no scratch file behind.
#[test]
fn plots_are_svg() {
    let dir = scratch("plots");
    let one = dir.join("hht.svg");
    let r = stepgauge(&[
        "spectrum",
        "--scheme",
        "hht",
        "--alpha",
        "-0.1",
        "--plot",
        one.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_svg(&one);
    let all = dir.join("all.svg");
    let r = stepgauge(&[
        "spectrum",
        "--standard-sets",
        "--omega-max",
        "100",
        "--plot",
        all.to_str().unwrap(),
        "--json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_svg(&all);
    let svg = std::fs::read_to_string(&all).unwrap();
    assert!(svg.contains("generalized-alpha rho_inf = 0.8"));
    assert!(svg.contains("central difference, lagged damping velocity"));
    // Standard output is unaffected by --plot.
    assert!(serde_json::from_str::<Value>(&r.stdout).is_ok());
    let checked = dir.join("check.svg");
    let r = stepgauge(&[
        "check",
        "--scheme",
        "central-difference",
        "--plot",
        checked.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert_svg(&checked);
    // Overwriting keeps a complete file; no scratch files remain.
    let r = stepgauge(&[
        "spectrum",
        "--scheme",
        "wbz",
        "--rho-inf",
        "0.5",
        "--plot",
        one.to_str().unwrap(),
    ]);
    assert_eq!(r.code, 0);
    assert!(
        std::fs::read_to_string(&one)
            .unwrap()
            .contains("wbz rho_inf = 0.5")
    );
    let mut names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["all.svg", "check.svg", "hht.svg"]);
}

/// A plot that cannot be written: exit 1, one line naming the file.
#[test]
fn unwritable_plot_exits_1() {
    let dir = scratch("unwritable");
    let path = dir.join("no-such-dir").join("x.svg");
    let r = stepgauge(&["spectrum", "--plot", path.to_str().unwrap()]);
    assert_eq!(r.code, 1);
    assert_eq!(r.stderr.lines().count(), 1);
    assert!(r.stderr.contains("cannot write the plot"), "{}", r.stderr);
    assert!(!r.stderr.contains("panicked"));
}

/// The help reads like a manual: exit statuses at the top, examples in each subcommand.
#[test]
fn help_documents_exit_statuses_and_examples() {
    let r = stepgauge(&["--help"]);
    assert_eq!(r.code, 0);
    for k in [
        "Exit status",
        "  3  check",
        "  4  check",
        "Examples",
        "spectrum",
    ] {
        assert!(
            r.stdout.contains(k),
            "`{k}` missing from the top-level help"
        );
    }
    for sub in ["check", "spectrum"] {
        let r = stepgauge(&[sub, "--help"]);
        assert_eq!(r.code, 0);
        assert!(r.stdout.contains("Examples:"), "{sub}");
        assert!(
            r.stdout.contains(&format!("stepgauge {sub} --scheme")),
            "{sub}"
        );
        assert!(r.stdout.contains("--standard-sets") || sub == "check");
        assert!(r.stdout.contains("--max-frequency") || sub == "spectrum");
    }
}

/// `stepgauge demo` runs the demonstration, and it passes (no arguments now writes the report:
/// tests/cli_report.rs).
#[test]
fn demo_runs_the_demonstration() {
    let r = stepgauge(&["demo"]);
    assert_eq!(r.code, 0, "{}{}", r.stdout, r.stderr);
    assert!(r.stdout.starts_with("stepgauge demonstration"));
    assert!(r.stdout.contains("all demonstration checks passed"));
}
