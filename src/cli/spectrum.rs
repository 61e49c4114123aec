//! `stepgauge spectrum`: spectral radius, algorithmic damping ratio and relative period error of
//! one or more schemes against `Omega = omega dt`.

use std::path::PathBuf;

use clap::Args;
use serde::Serialize;
use stepgauge::spectral::{Metrics, Parameters, log_space, sweep};

use super::Failure;
use super::output::{FormatArgs, csv_field, csv_num, print_stdout, table_num, write_plot};
use super::plot::{Series, spectrum_svg};
use super::scheme_args::{Labelled, SchemeArgs, standard_sets};

pub(super) const LONG_ABOUT: &str = "\
Spectral radius, algorithmic damping ratio and relative period error of a time-integration
scheme against Omega = omega dt, from the eigenvalues of its amplification matrix for one mode
with physical damping ratio xi.

  spectral radius  largest eigenvalue modulus, spurious roots included (> 1: unstable)
  damping ratio    algorithmic damping ratio of the principal pair, net of the physical
                   damping: with the pair z = exp(-xi Omega) exp(Omega_bar (-xi_bar +/- i)),
                   xi_bar = -(ln|z| + xi Omega) / Omega_bar, zero for the exact solution (for
                   xi = 0, the usual -ln|z| / Omega_bar)
  period error     against the damped exact period: Omega sqrt(1 - xi^2) / Omega_bar - 1
                   (positive: the computed period is too long)

  Both are '-' (null) where the principal roots are real, and for xi >= 1 (the exact mode
  does not oscillate). As xi approaches 1 the exact damped frequency goes to zero and both
  measures grow without bound (they compare with a period that becomes infinite): read them
  with care above xi = 0.9.

One scheme: choose it with the scheme options (as for `stepgauge check`). Several:
--standard-sets adds six standard sets, in this order: average acceleration, linear
acceleration, HHT alpha = -0.1, WBZ rho_inf = 0.8, generalised-alpha rho_inf = 0.8 and the
central difference (lagged damping velocity). If scheme options are given as well, that scheme
comes first. With --standard-sets, text output has one block per scheme, JSON is a list of
objects, and CSV has one table with a leading `scheme` column holding the label.

Omega values: --omega LIST (comma-separated, positive), or --omega-min/--omega-max/--points
(evenly spaced on a log axis; defaults 0.01, 10, 200).

Output: a text table (default), --json, --csv; --plot FILE.svg also writes a figure with three
panels (spectral radius, damping ratio, period error) against Omega on a log axis. Values far
outside the usual ranges are clipped in the figure, never in the numbers.

JSON (one scheme): {\"scheme\": str, \"label\": str, \"parameters\": {\"alpha_m\",
\"alpha_f\", \"beta\", \"gamma\"}, \"xi\": float, \"points\": [{\"omega\",
\"spectral_radius\", \"damping_ratio\" (float or null), \"period_error\" (float or null)},
...]}. `scheme` is the family member as the library names it (\"custom\" for raw
generalized-alpha parameters); `label` is how the command line chose it. Numbers carry full
round-trip precision.";

pub(super) const AFTER_HELP: &str = "\
Examples:
  stepgauge spectrum --scheme hht --alpha -0.1 --points 5
  stepgauge spectrum --scheme central-difference --omega 0.5,1,2,2.5 --json
  stepgauge spectrum --scheme generalized-alpha --rho-inf 0.6 --csv > ga.csv
  stepgauge spectrum --scheme hht --alpha -0.1 --plot hht.svg
  stepgauge spectrum --standard-sets --omega-max 100 --plot sets.svg
  stepgauge spectrum --standard-sets --scheme wbz --alpha-m -0.2 --plot mine.svg

Exit status: 0 on success, 1 when the plot or standard output cannot be written, 2 for bad
arguments (one line on standard error).";

/// The `Omega` values to evaluate.
#[derive(Debug, Clone, Args)]
pub struct OmegaArgs {
    /// Comma-separated Omega = omega dt values (positive), e.g. 0.5,1,2.
    #[arg(
        long,
        value_name = "LIST",
        value_delimiter = ',',
        allow_hyphen_values = true,
        conflicts_with_all = ["omega_min", "omega_max", "points"]
    )]
    pub omega: Option<Vec<f64>>,
    /// Smallest Omega of the log-spaced range.
    #[arg(
        long,
        value_name = "OMEGA",
        default_value_t = 0.01,
        allow_hyphen_values = true
    )]
    pub omega_min: f64,
    /// Largest Omega of the log-spaced range.
    #[arg(
        long,
        value_name = "OMEGA",
        default_value_t = 10.0,
        allow_hyphen_values = true
    )]
    pub omega_max: f64,
    /// Number of Omega values in the range.
    #[arg(long, value_name = "N", default_value_t = 200)]
    pub points: usize,
}

impl OmegaArgs {
    /// The values, checked: positive and finite; a range needs `0 < min < max` (or `min = max`
    /// with one point) and at least one point.
    pub fn values(&self) -> Result<Vec<f64>, Failure> {
        let bad = |name: &str, v: f64| {
            Failure::Usage(format!(
                "{name} = {v} is not valid: Omega values must be positive and finite"
            ))
        };
        if let Some(list) = &self.omega {
            if list.is_empty() {
                return Err(Failure::Usage("--omega needs at least one value".into()));
            }
            if let Some(&v) = list.iter().find(|v| !(v.is_finite() && **v > 0.0)) {
                return Err(bad("--omega value", v));
            }
            return Ok(list.clone());
        }
        let (lo, hi, n) = (self.omega_min, self.omega_max, self.points);
        if !(lo.is_finite() && lo > 0.0) {
            return Err(bad("--omega-min", lo));
        }
        if !(hi.is_finite() && hi > 0.0) {
            return Err(bad("--omega-max", hi));
        }
        if n == 0 {
            return Err(Failure::Usage("--points must be at least 1".into()));
        }
        if lo > hi || (lo == hi && n > 1) {
            return Err(Failure::Usage(format!(
                "--omega-min {lo} must be below --omega-max {hi}"
            )));
        }
        // exp(ln x) can miss the end points by an ulp: put them back exactly.
        let mut values = log_space(lo, hi, n);
        if let Some(first) = values.first_mut() {
            *first = lo;
        }
        if n > 1
            && let Some(last) = values.last_mut()
        {
            *last = hi;
        }
        Ok(values)
    }
}

/// Options of `stepgauge spectrum`.
#[derive(Debug, Clone, Args)]
pub struct SpectrumArgs {
    #[command(flatten, next_help_heading = "Scheme")]
    pub scheme: SchemeArgs,
    /// Add the six standard sets (listed in --help); scheme options given too come first.
    #[arg(long, alias = "compare", help_heading = "Scheme")]
    pub standard_sets: bool,
    #[command(flatten, next_help_heading = "Omega values")]
    pub omegas: OmegaArgs,
    #[command(flatten, next_help_heading = "Output")]
    pub format: FormatArgs,
    /// Also write an SVG figure of the three quantities against Omega to FILE.
    #[arg(long, value_name = "FILE.svg", help_heading = "Output")]
    pub plot: Option<PathBuf>,
}

/// One point of the JSON output.
#[derive(Debug, Serialize)]
struct PointJson {
    omega: f64,
    spectral_radius: f64,
    damping_ratio: Option<f64>,
    period_error: Option<f64>,
}

/// One scheme of the JSON output.
#[derive(Debug, Serialize)]
struct SpectrumJson<'a> {
    scheme: &'static str,
    label: &'a str,
    parameters: Parameters,
    xi: f64,
    points: Vec<PointJson>,
}

fn to_json<'a>(s: &'a Labelled, xi: f64, points: &[Metrics]) -> SpectrumJson<'a> {
    SpectrumJson {
        scheme: s.scheme.name(),
        label: &s.label,
        parameters: s.scheme.parameters(),
        xi,
        points: points
            .iter()
            .map(|m| PointJson {
                omega: m.omega,
                spectral_radius: m.spectral_radius,
                damping_ratio: m.damping_ratio(),
                period_error: m.period_error(),
            })
            .collect(),
    }
}

/// Runs `stepgauge spectrum`.
pub fn run(args: &SpectrumArgs) -> Result<(), Failure> {
    let xi = args.scheme.xi()?;
    let mut schemes = Vec::new();
    if !args.standard_sets || args.scheme.any_given() {
        schemes.push(args.scheme.resolve()?);
    }
    if args.standard_sets {
        schemes.extend(standard_sets()?);
    }
    let omegas = args.omegas.values()?;
    let plain: Vec<_> = schemes.iter().map(|s| s.scheme).collect();
    let results = sweep(&plain, &omegas, xi);

    if let Some(path) = &args.plot {
        let series: Vec<Series> = schemes
            .iter()
            .zip(&results)
            .map(|(s, r)| Series {
                label: &s.label,
                points: r,
            })
            .collect();
        let title = if schemes.len() == 1 {
            format!("{}, xi = {xi}", schemes[0].label)
        } else {
            format!("{} schemes, xi = {xi}", schemes.len())
        };
        write_plot(path, &spectrum_svg(&title, &series)?)?;
    }

    let text = if args.format.json {
        let list: Vec<_> = schemes
            .iter()
            .zip(&results)
            .map(|(s, r)| to_json(s, xi, r))
            .collect();
        let json = if args.standard_sets {
            serde_json::to_string_pretty(&list)
        } else {
            serde_json::to_string_pretty(&list[0])
        };
        json.map_err(|e| Failure::Runtime(format!("cannot write JSON: {e}")))? + "\n"
    } else if args.format.csv {
        csv(&schemes, &results, args.standard_sets)
    } else {
        table(&schemes, &results, xi)
    };
    print_stdout(&text)
}

fn csv(schemes: &[Labelled], results: &[Vec<Metrics>], with_scheme: bool) -> String {
    let mut out = String::new();
    if with_scheme {
        out.push_str("scheme,");
    }
    out.push_str("omega,spectral_radius,damping_ratio,period_error\n");
    for (s, points) in schemes.iter().zip(results) {
        for m in points {
            if with_scheme {
                out.push_str(&csv_field(&s.label));
                out.push(',');
            }
            out.push_str(&format!(
                "{},{},{},{}\n",
                csv_num(Some(m.omega)),
                csv_num(Some(m.spectral_radius)),
                csv_num(m.damping_ratio()),
                csv_num(m.period_error())
            ));
        }
    }
    out
}

fn table(schemes: &[Labelled], results: &[Vec<Metrics>], xi: f64) -> String {
    let mut out = String::new();
    for (i, (s, points)) in schemes.iter().zip(results).enumerate() {
        if i > 0 {
            out.push('\n');
        }
        let p = s.scheme.parameters();
        out.push_str(&format!(
            "# {} ({})\n# alpha_m = {}, alpha_f = {}, beta = {}, gamma = {}, xi = {xi}\n",
            s.label,
            s.scheme.name(),
            p.alpha_m,
            p.alpha_f,
            p.beta,
            p.gamma
        ));
        if xi > 0.9 && xi < 1.0 {
            out.push_str(
                "# note: xi is close to 1: the damping ratio and period error compare with a \
                 damped exact period that grows without bound as xi -> 1; read them with care\n",
            );
        } else if xi >= 1.0 {
            out.push_str(
                "# note: xi >= 1: the exact mode does not oscillate, so the damping ratio and \
                 period error are not defined ('-')\n",
            );
        }
        out.push_str(&format!(
            "{:>14}  {:>15}  {:>15}  {:>15}\n",
            "Omega", "spectral radius", "damping ratio", "period error"
        ));
        for m in points {
            out.push_str(&format!(
                "{:>14}  {:>15}  {:>15}  {:>15}\n",
                table_num(Some(m.omega)),
                table_num(Some(m.spectral_radius)),
                table_num(m.damping_ratio()),
                table_num(m.period_error())
            ));
        }
    }
    out
}
