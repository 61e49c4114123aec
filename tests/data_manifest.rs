//! The reference data in `tests/data/` is attributed: `tests/data/MANIFEST.md` lists every file
//! with what it holds, what made it and its sources, and every numeric table says in its own
//! header which committed script made it (`# command: python3 tests/data/<script>.py ...`) or
//! which publication it was read from (`# source: ...`).

use std::fs;
use std::path::{Path, PathBuf};

fn data_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data")
}

fn data_files() -> Vec<String> {
    let mut names: Vec<String> = fs::read_dir(data_dir())
        .expect("tests/data exists")
        .map(|e| {
            e.expect("a directory entry")
                .file_name()
                .to_string_lossy()
                .into_owned()
        })
        .filter(|n| n != "MANIFEST.md" && !n.starts_with('.') && n != "__pycache__")
        .collect();
    names.sort();
    names
}

/// A line that is only numbers separated by commas, semicolons or white space (with at least two
/// numbers), optionally led by one text key (such as a problem name) in the first field.
fn is_numeric_row(line: &str) -> bool {
    let fields: Vec<&str> = line
        .split(|c: char| c == ',' || c == ';' || c.is_whitespace())
        .filter(|f| !f.is_empty())
        .collect();
    let numbers = fields.iter().filter(|f| f.parse::<f64>().is_ok()).count();
    numbers >= 2 && numbers + 1 >= fields.len()
}

/// True when the text holds three or more consecutive numeric rows: a numeric table.
fn has_numeric_table(text: &str) -> bool {
    let mut run = 0;
    for line in text.lines() {
        if is_numeric_row(line) {
            run += 1;
            if run >= 3 {
                return true;
            }
        } else {
            run = 0;
        }
    }
    false
}

/// The attribution in a table's header comment lines (`# ...` before the first data line), if any:
/// a command that runs a committed script, or a source.
fn attribution(text: &str) -> Option<String> {
    for line in text.lines().take_while(|l| l.starts_with('#')) {
        let body = line.trim_start_matches('#').trim();
        if let Some(cmd) = body.strip_prefix("command:") {
            let script = cmd
                .split_whitespace()
                .find(|w| w.starts_with("tests/data/") && w.ends_with(".py"))?;
            let path = Path::new(env!("CARGO_MANIFEST_DIR")).join(script);
            return path.is_file().then(|| script.to_string());
        }
        if let Some(src) = body.strip_prefix("source:") {
            return (!src.trim().is_empty()).then(|| src.trim().to_string());
        }
    }
    None
}

#[test]
fn the_detector_finds_tables_and_attributions() {
    assert!(has_numeric_table("t,u\n0,1\n0.1,2.5e-3\n0.2,-1\n"));
    assert!(has_numeric_table("a,0,1\nb,0.1,2\nc,0.2,3\n"));
    assert!(!has_numeric_table("# 1 2 3\nsome text, 1\n0,1\n"));
    assert_eq!(attribution("0,1\n"), None);
    assert_eq!(attribution("# source:  \n0,1\n"), None);
    assert_eq!(attribution("# command: python3 tests/data/none.py\n"), None);
    assert!(attribution("# source: Someone (1999), A Book, table 2\n").is_some());
}

#[test]
fn every_data_file_is_in_the_manifest_with_its_sources() {
    let manifest = fs::read_to_string(data_dir().join("MANIFEST.md"))
        .expect("tests/data/MANIFEST.md lists the reference data");
    for name in data_files() {
        let row = manifest
            .lines()
            .find(|l| {
                l.starts_with('|')
                    && l.split('|').nth(1).map(|c| c.trim().trim_matches('`')) == Some(&name)
            })
            .unwrap_or_else(|| panic!("tests/data/{name} is not listed in tests/data/MANIFEST.md"));
        let cells: Vec<&str> = row.split('|').map(str::trim).collect();
        // | file | holds | made by | sources |
        assert!(
            cells.len() >= 6 && cells[2..5].iter().all(|c| !c.is_empty() && *c != "-"),
            "tests/data/MANIFEST.md: the row of {name} must say what it holds, what made it and \
             its sources: {row}"
        );
    }
}

#[test]
fn no_numeric_table_in_tests_data_is_unattributed() {
    let mut tables = 0;
    for name in data_files() {
        let Ok(text) = fs::read_to_string(data_dir().join(&name)) else {
            continue; // not text: not a table
        };
        if name.ends_with(".py") || name.ends_with(".txt") || !has_numeric_table(&text) {
            continue;
        }
        tables += 1;
        assert!(
            attribution(&text).is_some(),
            "tests/data/{name} holds a numeric table without `# command: python3 \
             tests/data/<script>.py` (an existing script) or `# source: ...` in its header"
        );
    }
    assert!(
        tables >= 1,
        "no numeric table found: is the detector broken?"
    );
}
