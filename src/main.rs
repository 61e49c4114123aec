//! The `tempora` command-line tool.
//!
//! With no arguments it writes the HTML report `tempora-report/report.html` (`tempora report`);
//! `tempora demo` runs the built-in demonstration, `tempora compare` runs schemes on the reference
//! problems. The subcommands `check` and `spectrum` judge time-integration parameters before a
//! run (see `docs/cli.md` and `tempora --help`).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    cli::main()
}
