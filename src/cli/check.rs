//! `stepgauge check`: the verdict on one parameter set, against an optional model and step.

use std::path::PathBuf;

use clap::Args;
use serde::Serialize;
use stepgauge::spectral::{CheckContext, Parameters, Stability, Verdict, check, sweep};

use super::output::{FormatArgs, csv_field, csv_num, plain, print_stdout, write_plot};
use super::plot::{Series, spectrum_svg};
use super::scheme_args::{Labelled, SchemeArgs};
use super::spectrum::OmegaArgs;
use super::{EXIT_OK, EXIT_STEP_TOO_LARGE, EXIT_UNSTABLE, Failure};

pub(super) const LONG_ABOUT: &str = "\
Judge one time-integration parameter set before a run: is it stable for every step, for steps
up to a critical Omega = omega dt, or for none; its high-frequency spectral radius rho_inf
(numerical dissipation), its order of accuracy, and, for a given model and step, the largest
stable step and whether the planned step is within it. Every conclusion comes with its reason,
naming the published bound or the computation it rests on. Stability is decided exactly, for
every Omega, by the Routh-Hurwitz conditions on the characteristic polynomial in double-double
arithmetic (docs/spectral.md); published bounds are quoted beside it where their sources state
them (for xi = 0).

Schemes (--scheme, default newmark with beta 1/4, gamma 1/2: average acceleration):
  central-difference  the explicit engine's scheme; --damping-velocity lagged|predicted
                      (default lagged) says which velocity the damping force takes
  newmark             --beta (default 1/4) and --gamma (default 1/2); --beta 0 is explicit
                      Newmark, analysed as the family member with beta = 0 and the damping
                      force centred at v_{n+1}: with xi > 0 it differs from central-difference
  hht                 --alpha in [-1/3, 0] (original sign convention), or --rho-inf in [1/2, 1]
  wbz                 --alpha-m in [-1, 0], or --rho-inf in [0, 1]
  generalized-alpha   --rho-inf in [0, 1], or the raw set --alpha-m --alpha-f --beta --gamma
Options that do not belong to the chosen scheme are refused. Negative values are accepted as
written (--alpha -0.1).

Model and run (all optional): --max-frequency is the model's highest circular frequency
omega_max in rad/s (e.g. from an eigenvalue estimate); with it, a conditionally stable scheme
gets its largest stable step omega_crit / omega_max. --dt is the step you plan, in seconds.
--frequency-of-interest (rad/s) asks for the largest step keeping the period error at that
frequency within --period-error (default 0.01, common practice); with --dt it also reports the
period error there.

Output: text by default; --json prints one object with at least {\"scheme\": str,
\"parameters\": {\"alpha_m\", \"alpha_f\", \"beta\", \"gamma\"}, \"xi\": float,
\"unconditionally_stable\": bool, \"omega_crit\": float or null, \"rho_inf\": float or null
(null: unbounded, explicit schemes), \"order\": int, \"reasons\": [str, ...]}, followed by
\"label\", \"stability\" (\"unconditional\", \"conditional\" or \"unstable\"),
\"stable_at_omega_crit\" (conditional sets: whether omega dt = omega_crit itself is stable),
\"stable_again\" ([from, to] intervals of Omega above omega_crit that are stable again; to is
null for no end), \"omega_crit_closed_form\", \"dissipative\", \"explicit\", \"max_frequency\", \"dt\",
\"dt_stable\", \"step_stable\", \"frequency_of_interest\", \"period_error_target\",
\"dt_accuracy\" and \"period_error_at_interest\" (null where not asked or none). --csv prints
a header row and one data row with the same fields (reasons joined by \" | \"). --plot
FILE.svg also writes the scheme's spectral radius, damping ratio and period error against
Omega (range options as for `stepgauge spectrum`).";

pub(super) const AFTER_HELP: &str = "\
Examples:
  stepgauge check                                    average acceleration (the default)
  stepgauge check --scheme hht --alpha -0.1 --json
  stepgauge check --scheme central-difference --xi 0.05 --max-frequency 2000 --dt 0.001
  stepgauge check --scheme newmark --beta 0 --xi 0.1
  stepgauge check --scheme generalized-alpha --rho-inf 0.8 --frequency-of-interest 60 --dt 0.002
  stepgauge check --scheme wbz --rho-inf 0.8 --plot wbz.svg

Exit status:
  0  stable: unconditionally, or conditionally with no --dt/--max-frequency given, or with
     --dt within the stable limit for --max-frequency
  1  the plot or standard output could not be written
  2  bad arguments (one line on standard error)
  3  conditionally stable, and --dt exceeds the stable limit for --max-frequency
  4  unstable for every step";

/// Options of `stepgauge check`.
#[derive(Debug, Clone, Args)]
pub struct CheckArgs {
    #[command(flatten, next_help_heading = "Scheme")]
    pub scheme: SchemeArgs,
    /// The model's highest circular frequency omega_max (rad/s).
    #[arg(
        long,
        value_name = "RAD_PER_S",
        allow_hyphen_values = true,
        help_heading = "Model and run"
    )]
    pub max_frequency: Option<f64>,
    /// The step you plan (s).
    #[arg(
        long,
        value_name = "SECONDS",
        allow_hyphen_values = true,
        help_heading = "Model and run"
    )]
    pub dt: Option<f64>,
    /// A circular frequency whose period must be accurate (rad/s).
    #[arg(
        long,
        value_name = "RAD_PER_S",
        allow_hyphen_values = true,
        help_heading = "Model and run"
    )]
    pub frequency_of_interest: Option<f64>,
    /// Period-error target at --frequency-of-interest [default: 0.01].
    #[arg(
        long,
        value_name = "FRACTION",
        allow_hyphen_values = true,
        requires = "frequency_of_interest",
        help_heading = "Model and run"
    )]
    pub period_error: Option<f64>,
    #[command(flatten, next_help_heading = "Output")]
    pub format: FormatArgs,
    /// Also write an SVG figure of spectral radius, damping ratio and period error to FILE.
    #[arg(long, value_name = "FILE.svg", help_heading = "Output")]
    pub plot: Option<PathBuf>,
    #[command(flatten, next_help_heading = "Omega values of the plot")]
    pub omegas: OmegaArgs,
}

/// The JSON object: the contract's keys first, then the rest.
#[derive(Debug, Serialize)]
struct CheckJson<'a> {
    scheme: &'static str,
    parameters: Parameters,
    xi: f64,
    unconditionally_stable: bool,
    omega_crit: Option<f64>,
    rho_inf: Option<f64>,
    order: u32,
    reasons: &'a [String],
    label: &'a str,
    stability: &'static str,
    stable_at_omega_crit: Option<bool>,
    stable_again: &'a [(f64, f64)],
    omega_crit_closed_form: Option<f64>,
    dissipative: bool,
    explicit: bool,
    max_frequency: Option<f64>,
    dt: Option<f64>,
    dt_stable: Option<f64>,
    step_stable: Option<bool>,
    frequency_of_interest: Option<f64>,
    period_error_target: Option<f64>,
    dt_accuracy: Option<f64>,
    period_error_at_interest: Option<f64>,
}

fn stability_name(s: Stability) -> &'static str {
    match s {
        Stability::Unconditional => "unconditional",
        Stability::Conditional { .. } => "conditional",
        Stability::Unstable => "unstable",
    }
}

fn omega_crit(s: Stability) -> Option<f64> {
    match s {
        Stability::Conditional { omega_crit, .. } => Some(omega_crit),
        _ => None,
    }
}

/// Runs `stepgauge check`; returns the exit status.
pub fn run(args: &CheckArgs) -> Result<u8, Failure> {
    let xi = args.scheme.xi()?;
    let chosen = args.scheme.resolve()?;
    let mut ctx = CheckContext::default();
    ctx.omega_max = args.max_frequency;
    ctx.dt = args.dt;
    ctx.omega_interest = args.frequency_of_interest;
    ctx.period_error_target = args
        .frequency_of_interest
        .map(|_| args.period_error.unwrap_or(0.01));
    let verdict = check(&chosen.scheme, xi, &ctx)?;

    if let Some(path) = &args.plot {
        let omegas = args.omegas.values()?;
        let results = sweep(&[chosen.scheme], &omegas, xi);
        let series = [Series {
            label: &chosen.label,
            points: &results[0],
        }];
        let title = format!("{}, xi = {xi}", chosen.label);
        write_plot(path, &spectrum_svg(&title, &series)?)?;
    }

    let json = CheckJson {
        scheme: chosen.scheme.name(),
        parameters: chosen.scheme.parameters(),
        xi,
        unconditionally_stable: verdict.stability == Stability::Unconditional,
        omega_crit: omega_crit(verdict.stability),
        rho_inf: verdict.rho_inf,
        order: verdict.order,
        reasons: &verdict.reasons,
        label: &chosen.label,
        stability: stability_name(verdict.stability),
        stable_at_omega_crit: verdict.stability.stable_at_omega_crit(),
        stable_again: &verdict.stable_again,
        omega_crit_closed_form: verdict.omega_crit_closed_form,
        dissipative: verdict.dissipative,
        explicit: chosen.scheme.is_explicit(),
        max_frequency: ctx.omega_max,
        dt: ctx.dt,
        dt_stable: verdict.dt_stable,
        step_stable: verdict.step_stable,
        frequency_of_interest: ctx.omega_interest,
        period_error_target: ctx.period_error_target,
        dt_accuracy: verdict.dt_accuracy,
        period_error_at_interest: verdict.period_error_at_interest,
    };
    let text = if args.format.json {
        serde_json::to_string_pretty(&json)
            .map_err(|e| Failure::Runtime(format!("cannot write JSON: {e}")))?
            + "\n"
    } else if args.format.csv {
        csv(&json)
    } else {
        human(&chosen, xi, &ctx, &verdict)
    };
    print_stdout(&text)?;

    Ok(match verdict.stability {
        Stability::Unstable => EXIT_UNSTABLE,
        Stability::Conditional { .. } if verdict.step_stable == Some(false) => EXIT_STEP_TOO_LARGE,
        _ => EXIT_OK,
    })
}

fn csv(j: &CheckJson) -> String {
    let b = |x: Option<bool>| x.map(|v| v.to_string()).unwrap_or_default();
    let p = &j.parameters;
    let fields: Vec<(&str, String)> = vec![
        ("scheme", csv_field(j.scheme)),
        ("alpha_m", csv_num(Some(p.alpha_m))),
        ("alpha_f", csv_num(Some(p.alpha_f))),
        ("beta", csv_num(Some(p.beta))),
        ("gamma", csv_num(Some(p.gamma))),
        ("xi", csv_num(Some(j.xi))),
        ("unconditionally_stable", b(Some(j.unconditionally_stable))),
        ("omega_crit", csv_num(j.omega_crit)),
        ("rho_inf", csv_num(j.rho_inf)),
        ("order", j.order.to_string()),
        ("label", csv_field(j.label)),
        ("stability", j.stability.to_string()),
        ("stable_at_omega_crit", b(j.stable_at_omega_crit)),
        (
            "stable_again",
            csv_field(
                &j.stable_again
                    .iter()
                    .map(|(a, b)| format!("{a}..{b}"))
                    .collect::<Vec<_>>()
                    .join(" "),
            ),
        ),
        ("omega_crit_closed_form", csv_num(j.omega_crit_closed_form)),
        ("dissipative", b(Some(j.dissipative))),
        ("explicit", b(Some(j.explicit))),
        ("max_frequency", csv_num(j.max_frequency)),
        ("dt", csv_num(j.dt)),
        ("dt_stable", csv_num(j.dt_stable)),
        ("step_stable", b(j.step_stable)),
        ("frequency_of_interest", csv_num(j.frequency_of_interest)),
        ("period_error_target", csv_num(j.period_error_target)),
        ("dt_accuracy", csv_num(j.dt_accuracy)),
        (
            "period_error_at_interest",
            csv_num(j.period_error_at_interest),
        ),
        ("reasons", csv_field(&j.reasons.join(" | "))),
    ];
    let header: Vec<&str> = fields.iter().map(|(k, _)| *k).collect();
    let row: Vec<&str> = fields.iter().map(|(_, v)| v.as_str()).collect();
    format!("{}\n{}\n", header.join(","), row.join(","))
}

fn human(chosen: &Labelled, xi: f64, ctx: &CheckContext, v: &Verdict) -> String {
    let p = chosen.scheme.parameters();
    let mut lines: Vec<(&str, String)> = vec![
        (
            "scheme",
            format!("{} ({})", chosen.scheme.name(), chosen.label),
        ),
        (
            "parameters",
            format!(
                "alpha_m = {}, alpha_f = {}, beta = {}, gamma = {}",
                p.alpha_m, p.alpha_f, p.beta, p.gamma
            ),
        ),
        ("xi", format!("{xi}")),
    ];
    let (verdict, crit) = match v.stability {
        Stability::Unconditional => (
            "unconditionally stable".to_string(),
            "none: stable for every step".to_string(),
        ),
        Stability::Conditional { omega_crit, .. } => (
            format!(
                "conditionally stable: stable for omega dt {} omega_crit",
                if v.stability.stable_at_omega_crit() == Some(false) {
                    "<"
                } else {
                    "<="
                }
            ),
            format!(
                "{omega_crit} (exact criterion, see the reasons); closed form {}",
                v.omega_crit_closed_form
                    .map_or_else(|| "none published".to_string(), |c| c.to_string())
            ),
        ),
        Stability::Unstable => (
            "UNSTABLE for every step".to_string(),
            "none: unstable for every step".to_string(),
        ),
    };
    lines.push(("verdict", verdict));
    lines.push(("omega_crit", crit));
    lines.push((
        "rho_inf",
        v.rho_inf.map_or_else(
            || "unbounded (explicit: the spectral radius grows with Omega)".to_string(),
            |r| r.to_string(),
        ),
    ));
    lines.push(("order", v.order.to_string()));
    lines.push((
        "dissipative",
        if v.dissipative {
            "yes: high frequencies are damped (rho_inf < 1)".to_string()
        } else {
            "no".to_string()
        },
    ));
    let stable_step = match (v.stability, ctx.omega_max) {
        (Stability::Unconditional, _) => "no limit".to_string(),
        (Stability::Unstable, _) => "none: no step is stable".to_string(),
        (Stability::Conditional { .. }, Some(w)) => format!(
            "dt <= {} s for --max-frequency {w} rad/s",
            plain(v.dt_stable)
        ),
        (Stability::Conditional { omega_crit, .. }, None) => {
            format!("dt <= {omega_crit} / omega_max (give --max-frequency for a number)")
        }
    };
    lines.push(("stable step", stable_step));
    if let Some(dt) = ctx.dt {
        let judged = match (v.step_stable, v.stability) {
            (_, Stability::Unconditional) => "stable (every step is)".to_string(),
            (_, Stability::Unstable) => "unstable (no step is stable)".to_string(),
            (Some(true), _) => "within the stable limit".to_string(),
            (Some(false), _) => format!("EXCEEDS the stable limit {} s", plain(v.dt_stable)),
            (None, _) => "not judged (give --max-frequency)".to_string(),
        };
        lines.push(("planned step", format!("dt = {dt} s: {judged}")));
    }
    if let (Some(w), Some(target)) = (ctx.omega_interest, ctx.period_error_target) {
        lines.push((
            "accuracy step",
            match v.dt_accuracy {
                Some(d) => format!(
                    "dt <= {} s keeps the period error at {w} rad/s within {target}",
                    plain(Some(d))
                ),
                None => "not defined: with xi >= 1 the exact mode does not oscillate (no period \
                         to keep)"
                    .to_string(),
            },
        ));
        if let Some(dt) = ctx.dt {
            lines.push((
                "period error",
                format!(
                    "{} at {w} rad/s with dt = {dt} s",
                    v.period_error_at_interest.map_or_else(
                        || {
                            if v.dt_accuracy.is_none() {
                                "not defined (xi >= 1: no exact oscillation)".to_string()
                            } else {
                                "not defined (the scheme's principal roots are real at this \
                                 step: no discrete oscillation)"
                                    .to_string()
                            }
                        },
                        |e| e.to_string()
                    )
                ),
            ));
        }
    }
    let mut out = String::new();
    for (k, val) in &lines {
        out.push_str(&format!("{k:<15}{val}\n"));
    }
    out.push_str("reasons\n");
    for r in &v.reasons {
        out.push_str(&format!("  - {r}\n"));
    }
    out
}
