//! The `tempora` command-line tool.
//!
//! With no arguments it runs the built-in demonstration: the explicit engine on reference problems
//! of our own with known answers, and the stable-step estimate of a demo model. The subcommands
//! `check` and `spectrum` judge time-integration parameters before a run (see `docs/cli.md` and
//! `tempora --help`).

mod cli;

use std::process::ExitCode;

fn main() -> ExitCode {
    cli::main()
}
