//! The `stepgauge` command-line tool.
//!
//! With no arguments it writes the HTML report `stepgauge-report/report.html` (`stepgauge report`);
//! `stepgauge demo` runs the built-in demonstration, `stepgauge compare` runs schemes on the reference
//! problems. The subcommands `check` and `spectrum` judge time-integration parameters before a
//! run (see `docs/cli.md` and `stepgauge --help`).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    cli::main()
}
