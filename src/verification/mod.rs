//! The verification suite: stepgauge's results against references, each labelled with what it is.
//!
//! Each [`Check`] compares one computed quantity with a reference and says which [`Kind`] of
//! reference it is: a value printed in a textbook or paper, a published closed form, an
//! independent computation with a general-purpose library (SciPy, NumPy) whose output is
//! committed under `tests/data/`, a re-derivation written in this project (a second
//! implementation by the same hands: it catches slips, not shared misunderstandings), or a
//! theoretical order of accuracy. Each says which source it rests on, what tolerance it must
//! meet, what it measured and whether it passed.
//!
//! [`run`] runs them all; `stepgauge verify` prints them and writes `docs/validation.md`
//! (`stepgauge verify --markdown docs/validation.md`); the test suite runs them and fails on any
//! that does not pass, and on a `docs/validation.md` that lists other checks than [`run`] makes.
//!
//! ```
//! let checks = stepgauge_cli::verification::run_kind(stepgauge_cli::verification::Kind::ClosedForm);
//! assert!(checks.iter().all(|c| c.passed), "{checks:#?}");
//! ```

mod closed_form;
mod convergence;
mod crosscheck;
mod published;

use std::fmt::Write as _;

use serde::Serialize;

/// What a check compares against.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Kind {
    /// A worked example printed in a textbook or paper.
    Published,
    /// A closed-form result (stability limits, spectral radii, period errors, exact solutions).
    ClosedForm,
    /// An independent computation with a general-purpose library (SciPy), committed as data.
    CrossCheck,
    /// A re-derivation written in this project: a textbook's recurrence written out in the
    /// check, a closed form derived here, or a library computation of equations taken from
    /// stepgauge's own documentation. Not an outside reference: it catches slips in one of two
    /// implementations, not a misunderstanding both share.
    Rederived,
    /// The measured order of accuracy against the theoretical one.
    Convergence,
}

impl Kind {
    /// Every kind, in the order of the report.
    pub const ALL: [Kind; 5] = [
        Kind::Published,
        Kind::ClosedForm,
        Kind::CrossCheck,
        Kind::Rederived,
        Kind::Convergence,
    ];

    /// The heading of the kind's table.
    pub fn title(self) -> &'static str {
        match self {
            Kind::Published => "Published worked examples",
            Kind::ClosedForm => "Closed-form results",
            Kind::CrossCheck => "Cross-checks with SciPy",
            Kind::Rederived => "Re-derivations in the project",
            Kind::Convergence => "Convergence orders",
        }
    }

    /// What the kind's checks compare with, and how much such a check proves: the paragraph
    /// under the kind's heading on the validation page.
    pub fn description(self) -> &'static str {
        match self {
            Kind::Published => {
                "Values printed in a textbook's worked example, compared with stepgauge's run of \
                 the same example. The printed values were recalled, not read from the books \
                 (every source says \"from memory\"); the tolerance is half a unit of the last \
                 printed digit plus the effect of the book's rounded inputs."
            }
            Kind::ClosedForm => {
                "Closed forms published in papers and textbooks (stability limits, spectral \
                 radii, period errors, parameter formulas, exact solutions), written out in the \
                 check and compared with stepgauge's spectral analysis or constructors."
            }
            Kind::CrossCheck => {
                "Independent computations with general-purpose libraries (SciPy's ODE solvers, \
                 LAPACK's eigenvalues through NumPy), run by the scripts under \
                 `tests/data/` from the schemes' and problems' published definitions; their \
                 output is committed with the script that made it (`tests/data/MANIFEST.md`)."
            }
            Kind::Rederived => {
                "Not outside references: a textbook's recurrence written out in the check, a \
                 closed form or series derived in this project, or a library computation of \
                 equations taken from stepgauge's own documentation. They compare two \
                 implementations by the same hands, so they catch slips in one of them, not a \
                 misunderstanding both share."
            }
            Kind::Convergence => {
                "Measured orders of accuracy (the slope of the error against the step on \
                 problems with an exact solution) against the order theory gives for each \
                 scheme."
            }
        }
    }

    /// The kind's name on the command line (`stepgauge verify --kind`).
    pub fn name(self) -> &'static str {
        match self {
            Kind::Published => "published",
            Kind::ClosedForm => "closed-form",
            Kind::CrossCheck => "cross-check",
            Kind::Rederived => "rederived",
            Kind::Convergence => "convergence",
        }
    }
}

/// One check: what is compared, with what, how closely, and how it came out.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Check {
    /// A stable identifier, unique within [`run`] (for example `"published.chopra-5.3"`).
    pub id: String,
    /// What the check compares against.
    pub kind: Kind,
    /// What is computed and compared, in one sentence.
    pub what: String,
    /// The source of the reference: authors, year, title and where in it; "common practice" for
    /// a fact of the trade with no single source; "(from memory)" when the value was recalled.
    pub source: String,
    /// The tolerance the result must meet, in words and numbers.
    pub tolerance: String,
    /// The measured result (for example the largest difference), formatted.
    pub result: String,
    /// Whether the result meets the tolerance.
    pub passed: bool,
    /// Anything a reader must know: a disagreement with a remembered value, a caveat.
    pub note: Option<String>,
}

impl Check {
    /// A check whose measure must not exceed `limit`: passes when `measured` is finite and
    /// `measured <= limit`. `measured` and `limit` are shown in the result and tolerance
    /// columns with three significant digits, followed by `unit` (empty for none).
    #[allow(clippy::too_many_arguments)]
    pub fn at_most(
        id: impl Into<String>,
        kind: Kind,
        what: impl Into<String>,
        source: impl Into<String>,
        measure: &str,
        measured: f64,
        limit: f64,
        unit: &str,
    ) -> Check {
        let unit = if unit.is_empty() {
            String::new()
        } else {
            format!(" {unit}")
        };
        Check {
            id: id.into(),
            kind,
            what: what.into(),
            source: source.into(),
            tolerance: format!("{measure} <= {}{unit}", sci(limit)),
            result: format!("{measure} = {}{unit}", sci(measured)),
            passed: measured.is_finite() && measured <= limit,
            note: None,
        }
    }

    /// A check whose measured value must lie within `tol` of `expected`.
    #[allow(clippy::too_many_arguments)]
    pub fn near(
        id: impl Into<String>,
        kind: Kind,
        what: impl Into<String>,
        source: impl Into<String>,
        measure: &str,
        measured: f64,
        expected: f64,
        tol: f64,
    ) -> Check {
        Check {
            id: id.into(),
            kind,
            what: what.into(),
            source: source.into(),
            tolerance: format!("|{measure} - {}| <= {}", fixed(expected), sci(tol)),
            result: format!("{measure} = {}", fixed(measured)),
            passed: measured.is_finite() && (measured - expected).abs() <= tol,
            note: None,
        }
    }

    /// A check that could not be computed: it fails and says why in its result.
    pub fn failed_to_run(
        id: impl Into<String>,
        kind: Kind,
        what: impl Into<String>,
        source: impl Into<String>,
        why: impl std::fmt::Display,
    ) -> Check {
        Check {
            id: id.into(),
            kind,
            what: what.into(),
            source: source.into(),
            tolerance: "-".to_string(),
            result: format!("could not be computed: {why}"),
            passed: false,
            note: None,
        }
    }

    /// The same check with a note.
    pub fn with_note(mut self, note: impl Into<String>) -> Check {
        self.note = Some(note.into());
        self
    }
}

/// A number with three significant digits in scientific notation (`1.23e-4`); `0` for zero.
pub fn sci(x: f64) -> String {
    if x == 0.0 {
        "0".to_string()
    } else if x.is_finite() {
        format!("{x:.2e}")
    } else {
        format!("{x}")
    }
}

/// A number with four decimals (`2.0013`).
pub fn fixed(x: f64) -> String {
    format!("{x:.4}")
}

/// Runs every check of the suite, in the order of [`Kind::ALL`] (within a kind, in the order
/// the checks are made).
pub fn run() -> Vec<Check> {
    let mut all: Vec<Check> = [
        published::checks(),
        closed_form::checks(),
        crosscheck::checks(),
        convergence::checks(),
    ]
    .into_iter()
    .flatten()
    .collect();
    all.sort_by_key(|c| c.kind); // stable: keeps the order within a kind
    all
}

/// Runs the checks of one kind (the modules that make checks of that kind, filtered by kind:
/// a re-derivation sits beside the check it backs up).
pub fn run_kind(kind: Kind) -> Vec<Check> {
    let made = match kind {
        Kind::Published => published::checks(),
        Kind::ClosedForm => closed_form::checks(),
        Kind::CrossCheck => crosscheck::checks(),
        Kind::Rederived => [
            published::checks(),
            closed_form::checks(),
            crosscheck::checks(),
        ]
        .into_iter()
        .flatten()
        .collect(),
        Kind::Convergence => convergence::checks(),
    };
    made.into_iter().filter(|c| c.kind == kind).collect()
}

/// The command that regenerates `docs/validation.md`.
pub const REGENERATE: &str = "cargo run --release -- verify --markdown docs/validation.md";

/// `docs/validation.md`: an introduction, a summary and one table per kind, each row a check
/// with its source, tolerance, result and status; notes follow the tables.
pub fn markdown(checks: &[Check]) -> String {
    let passed = checks.iter().filter(|c| c.passed).count();
    let mut s = String::new();
    let _ = writeln!(s, "# Validation\n");
    let _ = writeln!(
        s,
        "Generated by `{REGENERATE}`; do not edit by hand. The test suite runs the same checks \
         (`tests/verification.rs`) and fails when one does not pass or when this page lists \
         other checks than the suite makes.\n"
    );
    let _ = writeln!(
        s,
        "Each check compares a result of stepgauge with a reference and says what kind of \
         reference it is: a value printed in a worked example, a published closed form, an \
         independent computation with a general-purpose library committed under `tests/data/` \
         (see `tests/data/MANIFEST.md`), a re-derivation written in this project (not an \
         outside reference), or a theoretical order of accuracy. A value marked \"from \
         memory\" was recalled, not read from the source; where it disagrees with two \
         independent calculations, the note says so and the calculations are trusted.\n"
    );
    let _ = writeln!(s, "**{passed} of {} checks pass.**\n", checks.len());
    let _ = writeln!(s, "| kind | checks | passing |");
    let _ = writeln!(s, "|---|---|---|");
    for kind in Kind::ALL {
        let n = checks.iter().filter(|c| c.kind == kind).count();
        let p = checks.iter().filter(|c| c.kind == kind && c.passed).count();
        let _ = writeln!(s, "| {} | {n} | {p} |", kind.title());
    }
    let _ = writeln!(s);
    let labels = shared_sources(checks);
    if !labels.is_empty() {
        let _ = writeln!(
            s,
            "A long source that several rows cite is given once, under \"{SHARED_SOURCES}\" \
             after the tables, and the rows cite it by its label (S1, S2, ...).\n"
        );
    }
    let mut notes = Vec::new();
    for kind in Kind::ALL {
        let rows: Vec<&Check> = checks.iter().filter(|c| c.kind == kind).collect();
        if rows.is_empty() {
            continue;
        }
        let _ = writeln!(s, "## {}\n", kind.title());
        let _ = writeln!(s, "{}\n", kind.description());
        let _ = writeln!(s, "| id | what | source | tolerance | result | status |");
        let _ = writeln!(s, "|---|---|---|---|---|---|");
        for c in rows {
            let status = if c.passed { "pass" } else { "FAIL" };
            let mut id = cell(&c.id);
            if let Some(n) = &c.note {
                notes.push((c.id.clone(), n.clone()));
                id = format!("{id} [note {}]", notes.len());
            }
            let source = match labels.iter().position(|l| *l == c.source) {
                Some(i) => source_label(i),
                None => cell(&c.source),
            };
            let _ = writeln!(
                s,
                "| {id} | {} | {source} | {} | {} | {status} |",
                cell(&c.what),
                cell(&c.tolerance),
                cell(&c.result)
            );
        }
        let _ = writeln!(s);
        if kind == Kind::Convergence {
            s.push_str(&order_matrix(checks));
        }
    }
    if !labels.is_empty() {
        let _ = writeln!(s, "## {SHARED_SOURCES}\n");
        for (i, text) in labels.iter().enumerate() {
            let _ = writeln!(s, "- **{}**: {}", source_label(i), cell(text));
        }
        let _ = writeln!(s);
    }
    if !notes.is_empty() {
        let _ = writeln!(s, "## Notes\n");
        for (i, (id, n)) in notes.iter().enumerate() {
            let _ = writeln!(s, "{}. `{id}`: {}", i + 1, n.replace('\n', " "));
        }
        let _ = writeln!(s);
    }
    s
}

/// The convergence checks at a glance: one row per scheme, one column per problem, the measured
/// order in each cell (from ids `convergence.<scheme>.<problem>` and results `order = ...`).
fn order_matrix(checks: &[Check]) -> String {
    let mut schemes: Vec<&str> = Vec::new();
    let mut problems: Vec<&str> = Vec::new();
    let mut cells = Vec::new();
    for c in checks.iter().filter(|c| c.kind == Kind::Convergence) {
        let mut parts = c.id.splitn(3, '.');
        let (Some(_), Some(scheme), Some(problem)) = (parts.next(), parts.next(), parts.next())
        else {
            continue;
        };
        let order = c
            .result
            .strip_prefix("order = ")
            .and_then(|r| r.split_whitespace().next())
            .unwrap_or("?");
        if !schemes.contains(&scheme) {
            schemes.push(scheme);
        }
        if !problems.contains(&problem) {
            problems.push(problem);
        }
        let mark = if c.passed { "" } else { " (FAIL)" };
        cells.push((scheme, problem, format!("{order}{mark}")));
    }
    if cells.is_empty() {
        return String::new();
    }
    let mut s = String::from("Measured orders at a glance (rows: schemes, columns: problems):\n\n");
    let _ = writeln!(s, "| scheme | {} |", problems.join(" | "));
    let _ = writeln!(s, "|---|{}", "---|".repeat(problems.len()));
    for scheme in &schemes {
        let row: Vec<String> = problems
            .iter()
            .map(|p| {
                cells
                    .iter()
                    .find(|(sc, pr, _)| sc == scheme && pr == p)
                    .map_or_else(|| "-".to_string(), |(_, _, o)| o.clone())
            })
            .collect();
        let _ = writeln!(s, "| {scheme} | {} |", row.join(" | "));
    }
    s.push('\n');
    s
}

/// A table cell: pipes escaped, on one line.
/// Heading of the page's list of sources that several checks cite.
pub const SHARED_SOURCES: &str = "Sources cited by several checks";

/// Sources of at least [`SHARED_SOURCE_MIN_LEN`] characters that two or more checks cite, in the
/// order of their first citation: the page gives each once, under [`SHARED_SOURCES`], and its rows
/// cite it by label ([`source_label`]) instead of repeating a long text on every row.
fn shared_sources(checks: &[Check]) -> Vec<&str> {
    let mut labels: Vec<&str> = Vec::new();
    for c in checks {
        let text = c.source.as_str();
        if text.len() >= SHARED_SOURCE_MIN_LEN
            && !labels.contains(&text)
            && checks.iter().filter(|d| d.source == text).count() >= 2
        {
            labels.push(text);
        }
    }
    labels
}

/// Length from which a source repeated on several rows is given once, by label.
const SHARED_SOURCE_MIN_LEN: usize = 80;

/// The label of shared source number `i` (from 0): "S1", "S2", ...
pub fn source_label(i: usize) -> String {
    format!("S{}", i + 1)
}

fn cell(text: &str) -> String {
    text.replace('|', "\\|").replace('\n', " ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn at_most_and_near_decide_and_format() {
        let c = Check::at_most("a", Kind::ClosedForm, "w", "s", "e", 1e-9, 1e-8, "m");
        assert!(c.passed);
        assert_eq!(c.result, "e = 1.00e-9 m");
        assert!(!Check::at_most("a", Kind::ClosedForm, "w", "s", "e", f64::NAN, 1.0, "").passed);
        assert!(!Check::at_most("a", Kind::ClosedForm, "w", "s", "e", 2.0, 1.0, "").passed);
        let n = Check::near("b", Kind::Convergence, "w", "s", "order", 2.05, 2.0, 0.1);
        assert!(n.passed);
        assert!(!Check::near("b", Kind::Convergence, "w", "s", "order", 2.15, 2.0, 0.1).passed);
    }

    #[test]
    fn markdown_has_one_row_per_check_and_numbers_notes() {
        let checks = vec![
            Check::at_most("x.1", Kind::Published, "a|b", "S", "e", 1.0, 2.0, "")
                .with_note("remembered value differs"),
            Check::failed_to_run("x.2", Kind::CrossCheck, "c", "S", "no data"),
        ];
        let md = markdown(&checks);
        assert!(md.contains("**1 of 2 checks pass.**"));
        // Counts per kind, every kind listed.
        assert!(md.contains("| Published worked examples | 1 | 1 |"), "{md}");
        assert!(md.contains("| Cross-checks with SciPy | 1 | 0 |"), "{md}");
        assert!(
            md.contains("| Re-derivations in the project | 0 | 0 |"),
            "{md}"
        );
        assert!(md.contains("| x.1 [note 1] | a\\|b |"));
        assert!(md.contains("FAIL"));
        assert!(md.contains("1. `x.1`: remembered value differs"));
    }

    #[test]
    fn long_sources_cited_twice_are_given_once_by_label() {
        let long = "A. Author (2000), A long title of a book that many checks of this page cite, ch. 9, eq. 12";
        assert!(long.len() >= SHARED_SOURCE_MIN_LEN);
        let checks = vec![
            Check::at_most("y.1", Kind::Convergence, "w", long, "e", 1.0, 2.0, ""),
            Check::at_most("y.2", Kind::Convergence, "w", "short", "e", 1.0, 2.0, ""),
            Check::at_most("y.3", Kind::Convergence, "w", long, "e", 1.0, 2.0, ""),
            Check::at_most("y.4", Kind::Convergence, "w", "short", "e", 1.0, 2.0, ""),
        ];
        let md = markdown(&checks);
        assert_eq!(md.matches(long).count(), 1, "{md}");
        assert!(md.contains("| y.1 | w | S1 |") && md.contains("| y.3 | w | S1 |"));
        assert!(
            md.contains("| y.2 | w | short |"),
            "short sources stay in the row"
        );
        assert!(md.contains(&format!("## {SHARED_SOURCES}\n\n- **S1**: {long}\n")));
        // A long source cited once stays in its row.
        assert!(!markdown(&checks[..2]).contains(SHARED_SOURCES));
    }
}
