//! `stepgauge verify`: runs the verification suite ([`stepgauge_cli::verification`]) and prints its
//! checks, or writes them as `docs/validation.md`.

use std::path::PathBuf;

use clap::{Args, ValueEnum};
use stepgauge_cli::verification::{self, Check, Kind};

use super::Failure;
use super::output::{FormatArgs, csv_field, print_stdout, write_atomically};

/// Long help of `stepgauge verify`.
pub const LONG_ABOUT: &str = "\
Runs the verification suite: stepgauge's results against references, each labelled with its
kind: values printed in worked examples, closed forms from papers and textbooks, independent SciPy
computations committed under tests/data/, re-derivations written in this project (not outside
references: a second implementation by the same hands), and theoretical orders of accuracy. Prints
each check with its source, tolerance, result and status. --markdown writes the same as the page docs/validation.md.

Exit status 0 when every check passes, 1 when one fails (or a file cannot be written).";

/// Examples of `stepgauge verify`.
pub const AFTER_HELP: &str = "\
Examples:
  stepgauge verify                                   every check, as a table
  stepgauge verify --kind published --kind closed-form
  stepgauge verify --json
  stepgauge verify --markdown docs/validation.md     regenerate the validation page";

/// A kind of check on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum KindArg {
    /// Published worked examples.
    Published,
    /// Closed-form results.
    ClosedForm,
    /// Cross-checks with SciPy.
    CrossCheck,
    /// Re-derivations in the project (not outside references).
    Rederived,
    /// Convergence orders.
    Convergence,
}

impl From<KindArg> for Kind {
    fn from(k: KindArg) -> Self {
        match k {
            KindArg::Published => Kind::Published,
            KindArg::ClosedForm => Kind::ClosedForm,
            KindArg::CrossCheck => Kind::CrossCheck,
            KindArg::Rederived => Kind::Rederived,
            KindArg::Convergence => Kind::Convergence,
        }
    }
}

/// The options of `stepgauge verify`.
#[derive(Debug, Clone, Args)]
pub struct VerifyArgs {
    /// Run only checks of this kind (repeatable; default: all).
    #[arg(long = "kind", value_enum, value_name = "KIND")]
    pub kinds: Vec<KindArg>,
    /// Also write the checks as a Markdown page to this file (docs/validation.md).
    #[arg(long, value_name = "FILE")]
    pub markdown: Option<PathBuf>,
    #[command(flatten)]
    pub format: FormatArgs,
}

/// Runs the suite; `Ok(true)` when every check passed.
pub fn run(args: &VerifyArgs) -> Result<bool, Failure> {
    // Refuse an impossible output path before the suite runs, not after.
    if let Some(path) = &args.markdown {
        let dir = path.parent().filter(|d| !d.as_os_str().is_empty());
        if let Some(dir) = dir.filter(|d| !d.is_dir()) {
            return Err(Failure::Runtime(format!(
                "cannot write `{}`: the folder `{}` does not exist",
                path.display(),
                dir.display()
            )));
        }
    }
    let checks: Vec<Check> = if args.kinds.is_empty() {
        verification::run()
    } else {
        Kind::ALL
            .iter()
            .filter(|k| args.kinds.iter().any(|a| Kind::from(*a) == **k))
            .flat_map(|&k| verification::run_kind(k))
            .collect()
    };
    if let Some(path) = &args.markdown {
        write_atomically(path, verification::markdown(&checks).as_bytes())
            .map_err(|e| Failure::Runtime(format!("cannot write `{}`: {e}", path.display())))?;
    }
    let text = if args.format.json {
        let mut s = serde_json::to_string_pretty(&checks)
            .map_err(|e| Failure::Runtime(format!("cannot encode JSON: {e}")))?;
        s.push('\n');
        s
    } else if args.format.csv {
        csv(&checks)
    } else {
        table(&checks)
    };
    print_stdout(&text)?;
    Ok(checks.iter().all(|c| c.passed))
}

fn csv(checks: &[Check]) -> String {
    let mut s = String::from("id,kind,what,source,tolerance,result,passed,note\n");
    for c in checks {
        let fields = [
            csv_field(&c.id),
            c.kind.name().to_string(),
            csv_field(&c.what),
            csv_field(&c.source),
            csv_field(&c.tolerance),
            csv_field(&c.result),
            c.passed.to_string(),
            csv_field(c.note.as_deref().unwrap_or("")),
        ];
        s.push_str(&fields.join(","));
        s.push('\n');
    }
    s
}

fn table(checks: &[Check]) -> String {
    let width = checks.iter().map(|c| c.id.len()).max().unwrap_or(2);
    let mut s = String::new();
    for kind in Kind::ALL {
        let rows: Vec<&Check> = checks.iter().filter(|c| c.kind == kind).collect();
        if rows.is_empty() {
            continue;
        }
        s.push_str(&format!("{}\n", kind.title()));
        for c in rows {
            let status = if c.passed { "pass" } else { "FAIL" };
            s.push_str(&format!(
                "  {status}  {:width$}  {}  (tolerance {})\n",
                c.id, c.result, c.tolerance
            ));
        }
    }
    let passed = checks.iter().filter(|c| c.passed).count();
    s.push_str(&format!("{passed} of {} checks pass\n", checks.len()));
    s
}
