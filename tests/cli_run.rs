//! The `run` and `timestep` subcommands, through the binary.

use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;

/// A unique scratch directory under the system temp dir, removed when dropped.
struct Scratch(PathBuf);

impl Scratch {
    fn new(name: &str) -> Self {
        let dir = std::env::temp_dir().join(format!(
            "stepgauge-cli-run-{name}-{}-{:?}",
            std::process::id(),
            std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map(|d| d.as_nanos())
                .unwrap_or(0)
        ));
        std::fs::create_dir_all(&dir).expect("scratch directory");
        Scratch(dir)
    }

    fn file(&self, name: &str, text: &str) -> String {
        let p = self.0.join(name);
        std::fs::write(&p, text).expect("write test file");
        p.display().to_string()
    }

    fn path(&self, name: &str) -> String {
        self.0.join(name).display().to_string()
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

struct Out {
    code: i32,
    stdout: String,
    stderr: String,
}

fn stepgauge(args: &[&str]) -> Out {
    let out = Command::new(env!("CARGO_BIN_EXE_stepgauge"))
        .args(args)
        .output()
        .expect("run stepgauge");
    Out {
        code: out.status.code().expect("exit code"),
        stdout: String::from_utf8(out.stdout).expect("utf-8 stdout"),
        stderr: String::from_utf8(out.stderr).expect("utf-8 stderr"),
    }
}

/// Asserts a usage failure: exit 2, one line on stderr containing every `needle`, no panic.
fn assert_usage(args: &[&str], needles: &[&str]) {
    let r = stepgauge(args);
    assert_eq!(r.code, 2, "{args:?}: stderr {}", r.stderr);
    assert!(!r.stderr.contains("panicked"), "{}", r.stderr);
    assert_eq!(r.stderr.trim_end().lines().count(), 1, "{}", r.stderr);
    for n in needles {
        assert!(r.stderr.contains(n), "{args:?}: `{n}` not in {}", r.stderr);
    }
}

const M2: &str = "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 2\n2 2 1\n";
const K2: &str = "%%MatrixMarket matrix coordinate real symmetric\n2 2 3\n1 1 6\n2 1 -2\n2 2 4\n";
const LOAD2: &str = "time,1\n0,10\n100,10\n";

/// Writes the 2-DOF model; returns (M, K, LOAD) paths.
fn two_dof(s: &Scratch) -> (String, String, String) {
    (
        s.file("M.mtx", M2),
        s.file("K.mtx", K2),
        s.file("load.csv", LOAD2),
    )
}

/// Rows of a history CSV as numbers (header skipped).
fn rows(path: &str) -> Vec<Vec<f64>> {
    std::fs::read_to_string(path)
        .expect("history")
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(|x| x.parse().expect("number")).collect())
        .collect()
}

/// Exact response of the 2-DOF model to the step load [0, 10] from rest.
fn exact(t: f64) -> [f64; 2] {
    let s3 = 3f64.sqrt();
    let s15 = 1.5f64.sqrt();
    let phi1 = [1.0 / s3, 1.0 / s3];
    let phi2 = [0.5 / s15, -1.0 / s15];
    let f1 = 10.0 * phi1[1];
    let f2 = 10.0 * phi2[1];
    let (w1, w2) = (2f64.sqrt(), 5f64.sqrt());
    let q1 = f1 / 2.0 * (1.0 - (w1 * t).cos());
    let q2 = f2 / 5.0 * (1.0 - (w2 * t).cos());
    [phi1[0] * q1 + phi2[0] * q2, phi1[1] * q1 + phi2[1] * q2]
}

/// Runs average acceleration at `dt` to 2.8; returns (max error, amplitude).
fn two_dof_error(s: &Scratch, dt: &str) -> (f64, f64) {
    let (m, k, load) = two_dof(s);
    let out = s.path(&format!("u-{dt}.csv"));
    let r = stepgauge(&[
        "run",
        "--mass",
        &m,
        "--stiffness",
        &k,
        "--load",
        &load,
        "--scheme",
        "newmark",
        "--dt",
        dt,
        "--t-end",
        "2.8",
        "--output",
        &out,
        "--quiet",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stderr.is_empty(), "--quiet: {}", r.stderr);
    let rows = rows(&out);
    assert_eq!(rows[0], vec![0.0, 0.0, 0.0], "initial state first");
    assert_eq!(rows.last().unwrap()[0], 2.8, "ends at --t-end");
    let (mut err, mut amp) = (0.0f64, 0.0f64);
    for r in &rows {
        let e = exact(r[0]);
        for i in 0..2 {
            err = err.max((r[1 + i] - e[i]).abs());
            amp = amp.max(e[i].abs());
        }
    }
    (err, amp)
}

#[test]
fn two_dof_step_load_matches_modal_solution_to_second_order() {
    let s = Scratch::new("modal");
    let (e1, amp) = two_dof_error(&s, "0.028");
    assert!(e1 < 1e-2 * amp, "error {e1} vs amplitude {amp}");
    let (e2, _) = two_dof_error(&s, "0.014");
    let ratio = e1 / e2;
    assert!(
        (3.5..4.5).contains(&ratio),
        "halving dt reduced the error by {ratio} (errors {e1}, {e2}), expected ~4"
    );
}

/// A fixed-fixed chain of `n` unit masses and springs `k` (the supports are not DOFs).
fn chain(s: &Scratch, n: usize, k: f64) -> (String, String) {
    let mut m = format!("%%MatrixMarket matrix coordinate real symmetric\n{n} {n} {n}\n");
    for i in 1..=n {
        m.push_str(&format!("{i} {i} 1\n"));
    }
    let mut kk = format!(
        "%%MatrixMarket matrix coordinate real symmetric\n{n} {n} {}\n",
        2 * n - 1
    );
    for i in 1..=n {
        kk.push_str(&format!("{i} {i} {}\n", 2.0 * k));
        if i < n {
            kk.push_str(&format!("{} {i} {}\n", i + 1, -k));
        }
    }
    (s.file("chain-M.mtx", &m), s.file("chain-K.mtx", &kk))
}

#[test]
fn timestep_json_matches_closed_form_chain_frequencies() {
    let s = Scratch::new("chain");
    let (n, k) = (50usize, 100.0f64);
    let (m, kk) = chain(&s, n, k);
    let r = stepgauge(&[
        "timestep",
        "--mass",
        &m,
        "--stiffness",
        &kk,
        "--xi",
        "0.05",
        "--frequency-of-interest",
        "10",
        "--json",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
    let base = (4.0 * k).sqrt();
    let h = std::f64::consts::PI / (2.0 * (n as f64 + 1.0));
    let w_max = base * (n as f64 * h).sin();
    let w_min = base * h.sin();
    let got_max = v["omega_max"].as_f64().unwrap();
    let got_min = v["omega_min"].as_f64().unwrap();
    assert!((got_max / w_max - 1.0).abs() < 1e-6, "{got_max} vs {w_max}");
    assert!((got_min / w_min - 1.0).abs() < 1e-6, "{got_min} vs {w_min}");
    // 50 free DOFs: the dense path, named by what it computes.
    assert_eq!(
        v["omega_min_method"],
        "dense symmetric eigensolver on L^-1 K L^-T, M = L L^T"
    );
    let dt = v["dt_stable"].as_f64().unwrap();
    assert!((dt * got_max / 2.0 - 1.0).abs() < 1e-12);
    let damped = v["dt_stable_damped"].as_f64().unwrap();
    let expect = 2.0 / got_max * (1.0f64 + 0.05 * 0.05).sqrt() - 2.0 / got_max * 0.05;
    assert!(
        (damped / expect - 1.0).abs() < 1e-12,
        "{damped} vs {expect}"
    );
    assert!(v["dt_accuracy"].as_f64().unwrap() > 0.0);
    // Without --frequency-of-interest the accuracy step is null.
    let r = stepgauge(&["timestep", "--mass", &m, "--stiffness", &kk, "--json"]);
    let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
    assert!(v["dt_accuracy"].is_null());
}

/// `timestep` prints the limit `run` enforces beside the estimated critical step: the limit from
/// an upper bound on omega_max lies a little below the estimate (for this chain, Gershgorin's
/// bound `2 sqrt(k/m)`, 0.24 % above the exact `omega_max`), `run` accepts a step at the limit and
/// refuses one a rounding above it. Before, `timestep` printed only the estimate, and `run`
/// refused steps between the two with "the run would go unstable".
#[test]
fn timestep_prints_the_step_limit_run_enforces() {
    let s = Scratch::new("limit");
    let (m, kk) = chain(&s, 50, 100.0);
    let r = stepgauge(&["timestep", "--mass", &m, "--stiffness", &kk, "--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
    let estimate = v["dt_stable"].as_f64().unwrap();
    let limit = v["dt_limit_damped"].as_f64().unwrap();
    assert_eq!(v["dt_limit"].as_f64().unwrap(), limit, "undamped: the same");
    assert!(
        limit < estimate && limit > 0.97 * estimate,
        "{limit} vs {estimate}"
    );
    // Gershgorin on the chain: omega_upper = 2 sqrt(k / m) = 20, the limit 0.1.
    assert!((limit - 0.1).abs() <= 1e-12, "{limit}");
    let out = s.path("limit.csv");
    let run = |dt: f64| {
        stepgauge(&[
            "run",
            "--mass",
            &m,
            "--stiffness",
            &kk,
            "--scheme",
            "central-difference",
            "--dt",
            &format!("{dt}"),
            "--t-end",
            "1",
            "--output",
            &out,
        ])
    };
    let r = run(limit);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let r = run(limit * (1.0 + 1e-12));
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(r.stderr.contains("exceeds the step limit"), "{}", r.stderr);
    assert!(r.stderr.contains("estimated critical step"), "{}", r.stderr);
}

/// The damped stable step follows the central difference's damping velocity: with the damping
/// force at the lagged half-step velocity `(2/w)(sqrt(1 + xi^2) - xi)` (Belytschko, Liu & Moran
/// 2000, sec. 6.2, from memory), at the predicted one `(2/w)(sqrt(1 + 4 xi^2) - 2 xi)` (derived in
/// docs/explicit.md, a re-derivation in the project; cross-checked against the spectral radius by
/// the exact criterion in tests/spectral_verdicts.rs). Before, the lagged limit was reported for
/// both.
#[test]
fn timestep_damped_step_follows_the_damping_velocity() {
    let s = Scratch::new("dampvel");
    let (m, kk) = chain(&s, 20, 100.0);
    let mut got = Vec::new();
    for dv in ["lagged", "predicted"] {
        let r = stepgauge(&[
            "timestep",
            "--mass",
            &m,
            "--stiffness",
            &kk,
            "--xi",
            "0.1",
            "--scheme",
            "central-difference",
            "--damping-velocity",
            dv,
            "--json",
        ]);
        assert_eq!(r.code, 0, "{}", r.stderr);
        let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
        assert_eq!(v["damping_velocity"], dv);
        let w = v["omega_max"].as_f64().unwrap();
        got.push((v["dt_stable_damped"].as_f64().unwrap(), w));
    }
    let (lagged, w) = got[0];
    let (predicted, _) = got[1];
    let xi = 0.1f64;
    let want_lagged = 2.0 / w * ((1.0 + xi * xi).sqrt() - xi);
    let want_predicted = 2.0 / w * ((1.0 + 4.0 * xi * xi).sqrt() - 2.0 * xi);
    assert!(
        (lagged / want_lagged - 1.0).abs() < 1e-14,
        "{lagged} {want_lagged}"
    );
    assert!(
        (predicted / want_predicted - 1.0).abs() < 1e-14,
        "{predicted} {want_predicted}"
    );
}

#[test]
fn timestep_free_free_model_reports_zero_lowest_frequency_with_note() {
    let s = Scratch::new("freefree");
    let m = s.file("M.mtx", M2);
    let k = s.file(
        "K.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 3\n1 1 1\n2 1 -1\n2 2 1\n",
    );
    let r = stepgauge(&["timestep", "--mass", &m, "--stiffness", &k, "--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
    assert_eq!(v["omega_min"].as_f64(), Some(0.0));
    assert!(v["note"].as_str().unwrap().contains("singular"));
}

/// Runs to half time with a checkpoint, resumes to the end, and compares the joined history
/// with an uninterrupted run, text row by text row.
fn resume_is_bit_identical(scheme: &[&str], dt: &str, extra: &[&str]) {
    let s = Scratch::new("resume");
    let (m, k, load) = two_dof(&s);
    let base: Vec<&str> = [
        "run",
        "--mass",
        &m,
        "--stiffness",
        &k,
        "--load",
        &load,
        "--rayleigh",
        "0.1,0.01",
        "--dt",
        dt,
        "--quiet",
    ]
    .into_iter()
    .chain(scheme.iter().copied())
    .chain(extra.iter().copied())
    .collect();
    let (a, b, full, ck) = (
        s.path("a.csv"),
        s.path("b.csv"),
        s.path("full.csv"),
        s.path("run.ckpt"),
    );
    let go = |more: &[&str]| {
        let args: Vec<&str> = base.iter().copied().chain(more.iter().copied()).collect();
        let r = stepgauge(&args);
        assert_eq!(r.code, 0, "{args:?}: {}", r.stderr);
    };
    go(&[
        "--t-end",
        "1.2",
        "--output",
        &a,
        "--checkpoint",
        &ck,
        "--checkpoint-every",
        "7",
    ]);
    go(&["--t-end", "2.4", "--output", &b, "--resume", &ck]);
    go(&["--t-end", "2.4", "--output", &full]);
    let text = |p: &str| std::fs::read_to_string(p).expect("history");
    let (ta, tb, tf) = (text(&a), text(&b), text(&full));
    let mut joined: Vec<&str> = ta.lines().collect();
    let mut rest = tb.lines();
    assert_eq!(rest.next(), joined.first().copied(), "same header");
    let first = rest.next().expect("resumed first row");
    assert_eq!(
        Some(first),
        joined.last().copied(),
        "starts at the checkpoint"
    );
    joined.extend(rest);
    let full_rows: Vec<&str> = tf.lines().collect();
    assert_eq!(joined.len(), full_rows.len());
    for (i, (x, y)) in joined.iter().zip(&full_rows).enumerate() {
        assert_eq!(x, y, "row {i} differs");
    }
}

#[test]
fn resume_central_difference_is_bit_identical() {
    resume_is_bit_identical(
        &["--scheme", "central-difference"],
        "0.01",
        &["--record-velocity", "--every", "3"],
    );
}

#[test]
fn resume_hht_is_bit_identical() {
    resume_is_bit_identical(
        &["--scheme", "hht", "--alpha", "-0.1"],
        "0.03",
        &["--record-acceleration", "--record", "1"],
    );
}

/// Resume across an end time off the grid: a run to `--t-end 1.25` with `--dt 0.1` ends with a
/// shortened step on 1.25 exactly and checkpoints there; resumed to 2.4 it starts at that row,
/// keeps full steps from it (1.35, 1.45, ...; the library's bit-identity across such a resume is
/// `tests/resume.rs`) and lands on 2.4 exactly with one more shortened step.
#[test]
fn resume_across_an_end_time_off_the_grid() {
    let s = Scratch::new("offgrid");
    let (m, k, load) = two_dof(&s);
    let (a, b, ck) = (s.path("a.csv"), s.path("b.csv"), s.path("run.ckpt"));
    for scheme in [
        &["--scheme", "central-difference"][..],
        &["--scheme", "hht", "--alpha", "-0.1"],
    ] {
        let run = |more: &[&str]| {
            let mut args = vec![
                "run",
                "--mass",
                &m,
                "--stiffness",
                &k,
                "--load",
                &load,
                "--dt",
                "0.1",
                "--quiet",
            ];
            args.extend_from_slice(scheme);
            args.extend_from_slice(more);
            let r = stepgauge(&args);
            assert_eq!(r.code, 0, "{args:?}: {}", r.stderr);
        };
        run(&["--t-end", "1.25", "--output", &a, "--checkpoint", &ck]);
        run(&["--t-end", "2.4", "--output", &b, "--resume", &ck]);
        let (ra, rb) = (rows(&a), rows(&b));
        assert_eq!(
            ra.last().unwrap()[0],
            1.25,
            "{scheme:?}: first part ends on its end time"
        );
        assert_eq!(
            rb[0],
            *ra.last().unwrap(),
            "{scheme:?}: resumed from that row"
        );
        let times: Vec<f64> = rb.iter().map(|r| r[0]).collect();
        assert_eq!(
            *times.last().unwrap(),
            2.4,
            "{scheme:?}: lands on the end time"
        );
        for (i, w) in times.windows(2).enumerate() {
            let expected = if i + 2 == times.len() {
                2.4 - 2.35
            } else {
                0.1
            };
            assert!(
                ((w[1] - w[0]) - expected).abs() <= 1e-12,
                "{scheme:?}: step {i}: {} to {}",
                w[0],
                w[1]
            );
        }
        assert!(rb.iter().flatten().all(|x| x.is_finite()));
    }
}

#[test]
fn resume_with_another_step_or_a_truncated_checkpoint_is_refused() {
    let s = Scratch::new("badresume");
    let (m, k, load) = two_dof(&s);
    let (ck, out) = (s.path("run.ckpt"), s.path("o.csv"));
    let common = [
        "run",
        "--mass",
        &m,
        "--stiffness",
        &k,
        "--load",
        &load,
        "--output",
        &out,
        "--quiet",
    ];
    let with = |more: &[&str]| -> Vec<String> {
        common
            .iter()
            .chain(more)
            .map(|x| x.to_string())
            .collect::<Vec<_>>()
    };
    let r = stepgauge(
        &with(&["--dt", "0.02", "--t-end", "1", "--checkpoint", &ck])
            .iter()
            .map(String::as_str)
            .collect::<Vec<_>>(),
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    let args = with(&["--dt", "0.01", "--t-end", "2", "--resume", &ck]);
    assert_usage(
        &args.iter().map(String::as_str).collect::<Vec<_>>(),
        &["was written by a run with", "dt = 0.02", "dt = 0.01"],
    );
    let bytes = std::fs::read(&ck).unwrap();
    // The same content under another header word (a made-up one): refused, naming the header
    // expected, and the output file is not touched.
    let nl = bytes.iter().position(|&b| b == b'\n').unwrap();
    let header = std::str::from_utf8(&bytes[..nl]).unwrap();
    let mut renamed = header
        .replacen("stepgauge-checkpoint", "formerly-checkpoint", 1)
        .into_bytes();
    renamed.extend_from_slice(&bytes[nl..]);
    std::fs::write(&ck, &renamed).unwrap();
    let before = std::fs::read(&out).unwrap();
    let args = with(&["--dt", "0.02", "--t-end", "2", "--resume", &ck]);
    assert_usage(
        &args.iter().map(String::as_str).collect::<Vec<_>>(),
        &[
            "run.ckpt",
            "formerly-checkpoint",
            "expected the header `stepgauge-checkpoint v2 <length> <crc32>`",
        ],
    );
    assert_eq!(std::fs::read(&out).unwrap(), before, "output untouched");
    std::fs::write(&ck, &bytes[..bytes.len() / 2]).unwrap();
    let args = with(&["--dt", "0.02", "--t-end", "2", "--resume", &ck]);
    assert_usage(
        &args.iter().map(String::as_str).collect::<Vec<_>>(),
        &["run.ckpt", "truncated"],
    );
}

#[test]
fn dt_auto_runs_central_difference_and_is_refused_for_implicit() {
    let s = Scratch::new("auto");
    let (m, k, load) = two_dof(&s);
    let out = s.path("o.csv");
    let energy = s.path("e.csv");
    let r = stepgauge(&[
        "run",
        "--mass",
        &m,
        "--stiffness",
        &k,
        "--load",
        &load,
        "--scheme",
        "central-difference",
        "--dt",
        "auto",
        "--t-end",
        "10",
        "--output",
        &out,
        "--energy",
        &energy,
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stderr.contains("steps of dt ="), "summary: {}", r.stderr);
    let rows = rows(&out);
    // 0.9 * 2 / sqrt(5) = 0.805: 13 steps to t = 10 (the last one shortened).
    let dt = rows[1][0];
    assert!((dt - 0.9 * 2.0 / 5f64.sqrt()).abs() < 1e-9, "dt {dt}");
    assert_eq!(rows.last().unwrap()[0], 10.0);
    let e = std::fs::read_to_string(&energy).unwrap();
    assert!(e.starts_with("time,kinetic,internal"));
    assert_usage(
        &[
            "run",
            "--mass",
            &m,
            "--stiffness",
            &k,
            "--dt",
            "auto",
            "--t-end",
            "1",
            "--output",
            &out,
        ],
        &["--dt auto is for --scheme central-difference only"],
    );
}

#[test]
fn bad_inputs_are_one_line_with_exit_status_2() {
    let s = Scratch::new("errors");
    let (m, k, _) = two_dof(&s);
    let out = s.path("o.csv");
    let run = |mass: &str, stiff: &str, more: &[&str]| -> Vec<String> {
        [
            "run",
            "--mass",
            mass,
            "--stiffness",
            stiff,
            "--t-end",
            "1",
            "--output",
            &out,
        ]
        .iter()
        .chain(more)
        .map(|x| x.to_string())
        .collect()
    };
    let check = |args: Vec<String>, needles: &[&str]| {
        assert_usage(
            &args.iter().map(String::as_str).collect::<Vec<_>>(),
            needles,
        )
    };
    let bad = s.file(
        "bad.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 2\n2 2 x\n",
    );
    check(run(&bad, &k, &["--dt", "0.1"]), &["bad.mtx:4", "`x`"]);
    let wide = s.file(
        "wide.mtx",
        "%%MatrixMarket matrix coordinate real general\n2 3 1\n1 1 1\n",
    );
    check(
        run(&wide, &k, &["--dt", "0.1"]),
        &["2 x 3", "must be square"],
    );
    let m3 = s.file(
        "m3.mtx",
        "%%MatrixMarket matrix coordinate real general\n3 3 3\n1 1 1\n2 2 1\n3 3 1\n",
    );
    check(
        run(&m3, &k, &["--dt", "0.1"]),
        &["3 x 3", "2 x 2", "same size"],
    );
    check(
        run(&m, &k, &["--dt", "0.1", "--fix", "0,2"]),
        &["--fix", "DOF 2 is out of range", "2 DOFs"],
    );
    let far = s.file("far.csv", "time,5\n0,1\n1,1\n");
    check(
        run(&m, &k, &["--dt", "0.1", "--load", &far]),
        &["far.csv", "DOF 5 is out of range"],
    );
    check(
        run(&m, &k, &["--dt", "0.1", "--record", "0,9"]),
        &["--record", "DOF 9 is out of range"],
    );
    check(
        run(&m, &k, &["--dt", "-0.1"]),
        &["--dt = -0.1 is not valid", "positive"],
    );
    check(
        run(&m, &k, &["--dt", "0.1", "--scheme", "leapfrog"]),
        &["'leapfrog'", "--scheme"],
    );
    check(
        run(
            &m,
            &k,
            &["--dt", "0.1", "--scheme", "newmark", "--beta", "0"],
        ),
        &[
            "--beta 0 is explicit Newmark",
            "--scheme central-difference",
        ],
    );
    check(
        run(&m, &k, &["--dt", "0.1", "--rayleigh", "-1,0"]),
        &["--rayleigh", "a0"],
    );
    check(
        run(
            &m,
            &k,
            &["--dt", "0.1", "--rayleigh-modes", "1,0.02,1,0.05"],
        ),
        &["--rayleigh-modes"],
    );
    // Above the central-difference stable step 2/sqrt(5) = 0.894: refused before the run.
    check(
        run(&m, &k, &["--scheme", "central-difference", "--dt", "1"]),
        &["exceeds the step limit", "--dt auto"],
    );
    assert!(!Path::new(&out).exists(), "no output after a refusal");
}

#[test]
fn a_run_that_goes_unstable_writes_what_it_has_and_exits_1() {
    let s = Scratch::new("unstable");
    let (m, k, load) = two_dof(&s);
    // Heavy damping C = 10 M with the lagged damping velocity: the stable step shrinks far below
    // 2/omega_max, which the estimate (undamped for a damping matrix) allows.
    let c = s.file(
        "C.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 20\n2 2 10\n",
    );
    let (out, ck) = (s.path("f.csv"), s.path("f.ckpt"));
    let r = stepgauge(&[
        "run",
        "--mass",
        &m,
        "--stiffness",
        &k,
        "--damping",
        &c,
        "--load",
        &load,
        "--scheme",
        "central-difference",
        "--dt",
        "0.85",
        "--t-end",
        "100",
        "--output",
        &out,
        "--checkpoint",
        &ck,
        "--quiet",
    ]);
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(!r.stderr.contains("panicked"));
    assert_eq!(r.stderr.trim_end().lines().count(), 1, "{}", r.stderr);
    assert!(r.stderr.contains("the run failed at t = "), "{}", r.stderr);
    assert!(r.stderr.contains("instability"), "{}", r.stderr);
    let rows = rows(&out);
    assert!(rows.len() >= 2, "history up to the failure");
    assert!(rows.last().unwrap()[0] < 100.0);
    assert!(std::fs::metadata(&ck).map(|m| m.len() > 0).unwrap_or(false));
}

#[test]
fn timestep_large_chain_uses_inverse_iteration_for_omega_min() {
    let s = Scratch::new("bigchain");
    let (n, k) = (400usize, 100.0f64);
    let (m, kk) = chain(&s, n, k);
    let r = stepgauge(&["timestep", "--mass", &m, "--stiffness", &kk, "--json"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let v: Value = serde_json::from_str(&r.stdout).expect("JSON");
    assert!(
        v["omega_min_method"]
            .as_str()
            .unwrap()
            .contains("inverse iteration")
    );
    let h = std::f64::consts::PI / (2.0 * (n as f64 + 1.0));
    let w_min = (4.0 * k).sqrt() * h.sin();
    let got = v["omega_min"].as_f64().unwrap();
    assert!((got / w_min - 1.0).abs() < 1e-6, "{got} vs {w_min}");
}
