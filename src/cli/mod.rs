//! The command line: argument definitions (clap), dispatch, exit statuses and one-line errors.
//!
//! The library knows nothing of this module; everything here turns options into library calls
//! ([`stepgauge::spectral`], [`stepgauge::params`]) and their results into text, JSON, CSV or SVG.

mod check;
mod compare;
mod demo;
pub(crate) mod figure_style;
mod output;
mod plot;
mod report;
mod run;
mod scheme_args;
mod spectrum;
mod timestep;
mod verify;

use std::process::ExitCode;

use clap::error::ErrorKind;
use clap::{Parser, Subcommand};

/// Success; for `check`, a stable verdict.
pub const EXIT_OK: u8 = 0;
/// A demonstration, report or verification check failed, a run failed mid-way, or a file or standard output
/// could not be written.
pub const EXIT_FAILURE: u8 = 1;
/// Bad arguments: unknown or conflicting options, missing values, values out of range.
pub const EXIT_USAGE: u8 = 2;
/// `check`: conditionally stable and the requested step exceeds the stable limit.
pub const EXIT_STEP_TOO_LARGE: u8 = 3;
/// `check`: unstable for every step.
pub const EXIT_UNSTABLE: u8 = 4;

const LONG_ABOUT: &str = "\
stepgauge: time integration for structural dynamics.

With no arguments, stepgauge writes its report (stepgauge report: stepgauge-report/report.html).
`stepgauge demo` runs the demonstration; `stepgauge compare` runs schemes on the reference problems
against their exact solutions; `stepgauge run` integrates a model given as Matrix Market matrices
and CSV loads, and `stepgauge timestep` gives its frequency range, stable step and accuracy step.
`stepgauge verify` runs the verification suite against outside references.
The subcommands check and spectrum judge a time-integration
parameter set before a run, from the amplification matrix of one mode with circular frequency
omega, step dt and physical damping ratio xi, as a function of Omega = omega dt:

  check     stability verdict (unconditional, conditional with its critical Omega, unstable),
            high-frequency spectral radius rho_inf, order of accuracy, step limits for a model,
            and the reasons, each citing the bound or computation it rests on.
  spectrum  spectral radius, algorithmic damping ratio and relative period error against Omega,
            as a table, JSON, CSV or an SVG figure.

Results feed decisions that can be safety-relevant: have them checked by a qualified engineer.";

const AFTER_HELP: &str = "\
Examples:
  stepgauge                                       write stepgauge-report/report.html
  stepgauge compare --standard-sets --problem two-dof-step
  stepgauge timestep --mass M.mtx --stiffness K.mtx --frequency-of-interest 6.3
  stepgauge verify --markdown docs/validation.md  the verification suite; the validation page
  stepgauge run --mass M.mtx --stiffness K.mtx --load load.csv --dt 0.01 --t-end 5 --output u.csv
  stepgauge check --scheme hht --alpha -0.1       verdict on HHT-alpha with alpha = -0.1
  stepgauge check --scheme central-difference --max-frequency 2000 --dt 0.0012
  stepgauge spectrum --scheme generalized-alpha --rho-inf 0.8 --points 5
  stepgauge spectrum --standard-sets --plot sets.svg

Exit status:
  0  success; for check: stable (unconditionally, or conditionally with no step given or the
     step given within the stable limit)
  1  a demonstration, report or verification check failed, a run failed mid-way (what it had
     is written), or a file or standard output could not be written
  2  bad arguments: unknown scheme or option, conflicting or missing options, values out of
     range or not numbers (one line on standard error)
  3  check: conditionally stable, and --dt exceeds the stable limit for --max-frequency
  4  check: unstable for every step

Run `stepgauge check --help` or `stepgauge spectrum --help` for the options; docs/cli.md has a
session with real output.";

/// The `stepgauge` command line.
#[derive(Debug, Parser)]
#[command(
    name = "stepgauge",
    version,
    about = "Time integration for structural dynamics: demonstration, stability check and spectra",
    long_about = LONG_ABOUT,
    after_help = AFTER_HELP,
)]
pub struct Cli {
    /// What to do (nothing: write the report).
    #[command(subcommand)]
    pub command: Option<Command>,
}

/// The subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Judge one parameter set: stability, critical Omega, rho_inf, order, step limits, reasons.
    #[command(long_about = check::LONG_ABOUT, after_help = check::AFTER_HELP)]
    Check(check::CheckArgs),
    /// Spectral radius, damping ratio and period error against Omega = omega dt.
    #[command(long_about = spectrum::LONG_ABOUT, after_help = spectrum::AFTER_HELP)]
    Spectrum(spectrum::SpectrumArgs),
    /// Run the built-in demonstration (the explicit engine on problems with known answers).
    Demo,
    /// Schemes against the exact solutions of the reference problems over a sequence of steps.
    #[command(long_about = compare::LONG_ABOUT, after_help = compare::AFTER_HELP)]
    Compare(compare::CompareArgs),
    /// Write the HTML report (the same as `stepgauge` with no arguments).
    #[command(long_about = report::LONG_ABOUT)]
    Report(report::ReportArgs),
    /// Linear transient analysis of a model from Matrix Market and CSV files.
    #[command(long_about = run::LONG_ABOUT, after_help = run::AFTER_HELP)]
    Run(Box<run::RunArgs>),
    /// Natural-frequency range, stable step and accuracy step of a model.
    #[command(long_about = timestep::LONG_ABOUT, after_help = timestep::AFTER_HELP)]
    Timestep(timestep::TimestepArgs),
    /// Run the verification suite (checks against outside references); write docs/validation.md.
    #[command(long_about = verify::LONG_ABOUT, after_help = verify::AFTER_HELP)]
    Verify(verify::VerifyArgs),
}

/// A failure of a subcommand, with the exit status it maps to.
#[derive(Debug)]
pub enum Failure {
    /// Bad arguments (exit status 2).
    Usage(String),
    /// Anything else that went wrong, e.g. a file that could not be written (exit status 1).
    Runtime(String),
}

impl Failure {
    fn report(&self) -> ExitCode {
        let (msg, code) = match self {
            Failure::Usage(m) => (m, EXIT_USAGE),
            Failure::Runtime(m) => (m, EXIT_FAILURE),
        };
        eprintln!("stepgauge: {}", one_line(msg));
        ExitCode::from(code)
    }
}

impl From<stepgauge::Error> for Failure {
    /// Parameter errors of the library come from the user's options: bad arguments.
    ///
    /// A parameter the command line sets through an option is named by that option
    /// (`omega_max` is `--max-frequency`); other messages are the library's own.
    fn from(e: stepgauge::Error) -> Self {
        match e {
            stepgauge::Error::InvalidParameter {
                name,
                value,
                expected,
            } => match option_of(name) {
                Some(option) => {
                    Failure::Usage(format!("{option} = {value} is not valid: {expected}"))
                }
                None => Failure::Usage(e.to_string()),
            },
            stepgauge::Error::InvalidStep { .. } => Failure::Usage(e.to_string()),
            other => Failure::Runtime(other.to_string()),
        }
    }
}

/// The command-line option that sets the library parameter `name`.
fn option_of(name: &str) -> Option<&'static str> {
    Some(match name {
        "beta" => "--beta",
        "gamma" => "--gamma",
        "alpha" => "--alpha",
        "alpha_m" => "--alpha-m",
        "alpha_f" => "--alpha-f",
        "rho_inf" => "--rho-inf",
        "xi" => "--xi",
        "omega_max" => "--max-frequency",
        "dt" => "--dt",
        "omega_interest" | "omega" => "--frequency-of-interest",
        "period_error_target" | "target" => "--period-error",
        _ => return None,
    })
}

/// Parses the command line and runs it; every error is one line on standard error.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(e) => return clap_failure(&e),
    };
    match cli.command {
        None => report::run_default(),
        Some(Command::Demo) => run_demo(),
        Some(Command::Compare(args)) => match compare::run(&args) {
            Ok(()) => ExitCode::from(EXIT_OK),
            Err(f) => f.report(),
        },
        Some(Command::Report(args)) => match report::run(&args) {
            Ok(code) => ExitCode::from(code),
            Err(f) => f.report(),
        },
        Some(Command::Check(args)) => match check::run(&args) {
            Ok(code) => ExitCode::from(code),
            Err(f) => f.report(),
        },
        Some(Command::Spectrum(args)) => match spectrum::run(&args) {
            Ok(()) => ExitCode::from(EXIT_OK),
            Err(f) => f.report(),
        },
        Some(Command::Run(args)) => match run::run(&args) {
            Ok(true) => ExitCode::from(EXIT_OK),
            Ok(false) => ExitCode::from(EXIT_FAILURE),
            Err(f) => f.report(),
        },
        Some(Command::Timestep(args)) => match timestep::run(&args) {
            Ok(()) => ExitCode::from(EXIT_OK),
            Err(f) => f.report(),
        },
        Some(Command::Verify(args)) => match verify::run(&args) {
            Ok(true) => ExitCode::from(EXIT_OK),
            Ok(false) => ExitCode::from(EXIT_FAILURE),
            Err(f) => f.report(),
        },
    }
}

fn run_demo() -> ExitCode {
    match demo::demo() {
        Ok(true) => ExitCode::from(EXIT_OK),
        Ok(false) => ExitCode::from(EXIT_FAILURE),
        Err(e) => {
            eprintln!("stepgauge: {e}");
            ExitCode::from(EXIT_FAILURE)
        }
    }
}

/// Help and version go to standard output as clap renders them; every other parse error becomes
/// one line on standard error with exit status 2.
fn clap_failure(e: &clap::Error) -> ExitCode {
    match e.kind() {
        ErrorKind::DisplayHelp | ErrorKind::DisplayVersion => {
            // Printing help can only fail on a closed pipe; nothing useful to add then.
            let _ = e.print();
            ExitCode::from(EXIT_OK)
        }
        _ => {
            let text = e.render().to_string();
            let mut msg = String::new();
            for line in text.lines() {
                let line = line.trim();
                if line.starts_with("Usage:") || line.starts_with("For more information") {
                    break;
                }
                if line.is_empty() {
                    continue;
                }
                let line = line.strip_prefix("error: ").unwrap_or(line);
                if !msg.is_empty() {
                    // Continuation lines (lists, possible values) join with a space, new
                    // statements (tips) with a semicolon.
                    let continues = msg.ends_with(':') || line.starts_with('[');
                    msg.push_str(if continues { " " } else { "; " });
                }
                msg.push_str(line);
            }
            eprintln!(
                "stepgauge: {} (see --help)",
                one_line(&msg).trim_end_matches('.')
            );
            ExitCode::from(EXIT_USAGE)
        }
    }
}

/// Folds a message onto one line.
fn one_line(msg: &str) -> String {
    msg.split_whitespace().collect::<Vec<_>>().join(" ")
}
