//! The verification suite (`stepgauge_cli::verification`): every check passes, and
//! `docs/validation.md` lists exactly the checks the suite makes (regenerate it with
//! `cargo run --release -- verify --markdown docs/validation.md`).

use std::collections::HashSet;
use std::path::Path;
use std::process::Command;

use stepgauge_cli::verification::{self, Check, Kind};

/// The same cell text as the page writes.
fn cell(text: &str) -> String {
    text.replace('|', "\\|").replace('\n', " ")
}

#[test]
fn every_check_passes_and_the_validation_page_is_current() {
    let checks = verification::run();

    // Every kind is represented: the suite is not empty by accident.
    for kind in Kind::ALL {
        let n = checks.iter().filter(|c| c.kind == kind).count();
        assert!(n >= 3, "only {n} checks of kind {kind:?}");
    }
    // Ids are unique; sources and tolerances are given.
    let mut ids = HashSet::new();
    for c in &checks {
        assert!(ids.insert(c.id.as_str()), "duplicate id {}", c.id);
        assert!(!c.source.trim().is_empty(), "{}: no source", c.id);
        assert!(!c.tolerance.trim().is_empty(), "{}: no tolerance", c.id);
    }
    let failed: Vec<&Check> = checks.iter().filter(|c| !c.passed).collect();
    assert!(failed.is_empty(), "failed checks: {failed:#?}");

    // The committed page lists the same checks, in the same order, with the same what, source
    // and tolerance (the result column may differ in its last digits between machines).
    let page_path = Path::new(env!("CARGO_MANIFEST_DIR")).join("docs/validation.md");
    let page = std::fs::read_to_string(&page_path).expect("docs/validation.md exists");
    let rows: Vec<&str> = page
        .lines()
        .filter(|l| l.starts_with("| ") && (l.ends_with("| pass |") || l.ends_with("| FAIL |")))
        .collect();
    let stale = "docs/validation.md is stale: regenerate it with \
                 `cargo run --release -- verify --markdown docs/validation.md`";
    assert_eq!(rows.len(), checks.len(), "{stale}");
    // Long sources cited by several rows are given once, under their label, after the tables.
    let heading = format!("## {}", verification::SHARED_SOURCES);
    let labelled: Vec<(String, String)> = page
        .lines()
        .skip_while(|l| *l != heading)
        .skip(1)
        .take_while(|l| !l.starts_with("## "))
        .filter_map(|l| l.strip_prefix("- **"))
        .filter_map(|l| l.split_once("**: "))
        .map(|(label, text)| (label.to_string(), text.to_string()))
        .collect();
    let source_cell = |source: &str| {
        labelled
            .iter()
            .find(|(_, text)| *text == cell(source))
            .map(|(label, _)| label.clone())
            .unwrap_or_else(|| cell(source))
    };
    for (row, c) in rows.iter().zip(&checks) {
        let id = row
            .trim_start_matches("| ")
            .split(" | ")
            .next()
            .unwrap_or("");
        let id = id.split(" [note").next().unwrap_or("");
        assert_eq!(id, c.id, "{stale}");
        let middle = format!(
            " | {} | {} | {} | ",
            cell(&c.what),
            source_cell(&c.source),
            cell(&c.tolerance)
        );
        assert!(row.contains(&middle), "{stale}: row of {} differs", c.id);
        assert!(
            row.ends_with("| pass |"),
            "{stale}: {} not shown as passing",
            c.id
        );
    }
    let passed = format!("**{} of {} checks pass.**", checks.len(), checks.len());
    assert!(page.contains(&passed), "{stale}");
}

fn stepgauge(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_stepgauge"))
        .args(args)
        .output()
        .expect("the stepgauge binary runs");
    (
        out.status.code().expect("exit status"),
        String::from_utf8(out.stdout).expect("UTF-8"),
        String::from_utf8(out.stderr).expect("UTF-8"),
    )
}

#[test]
fn verify_command_prints_json_and_writes_markdown() {
    let dir = std::env::temp_dir().join(format!("stepgauge-verify-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let md = dir.join("validation.md");
    let (code, out, err) = stepgauge(&[
        "verify",
        "--kind",
        "closed-form",
        "--json",
        "--markdown",
        md.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(err.is_empty(), "{err}");
    let v: serde_json::Value = serde_json::from_str(&out).expect("JSON");
    let list = v.as_array().expect("an array of checks");
    assert!(!list.is_empty());
    assert!(
        list.iter()
            .all(|c| c["kind"] == "closed-form" && c["passed"] == true)
    );
    let page = std::fs::read_to_string(&md).expect("markdown written");
    assert!(page.starts_with("# Validation"));
    assert!(page.contains("## Closed-form results"));
    assert!(!page.contains("## Convergence orders"));
    let _ = std::fs::remove_dir_all(&dir);

    let (code, out, _) = stepgauge(&["verify", "--kind", "published", "--csv"]);
    assert_eq!(code, 0);
    assert!(out.starts_with("id,kind,what,source,tolerance,result,passed,note\n"));
    assert!(out.lines().skip(1).all(|l| l.contains(",published,")));

    let (code, _, err) = stepgauge(&["verify", "--kind", "everything"]);
    assert_eq!(code, 2);
    assert_eq!(err.lines().count(), 1, "{err}");
    let (code, _, err) = stepgauge(&["verify", "--markdown", "/nonexistent-dir/x.md"]);
    assert_eq!(code, 1);
    assert!(err.contains("/nonexistent-dir/x.md"), "{err}");
}
