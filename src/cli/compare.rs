//! `stepgauge compare`: schemes against the exact solutions of the built-in reference problems
//! (`stepgauge::reference`), over a sequence of steps: the largest error of the observed DOF, the
//! measured order between successive steps and the cost.

use std::path::{Path, PathBuf};
use std::time::Instant;

use clap::Args;
use plotters::prelude::*;
use serde::Serialize;
use stepgauge::implicit::NewtonOptions;
use stepgauge::reference::ReferenceProblem;
use stepgauge::spectral::Scheme;
use stepgauge_cli::study;

use super::Failure;
use super::figure_style::{SeriesStyle, draw_series};
use super::output::{FormatArgs, csv_field, csv_num, print_stdout, table_num, write_plot};
use super::scheme_args::{Labelled, SchemeArgs, standard_sets};

/// Long help of `stepgauge compare`.
pub const LONG_ABOUT: &str = "\
Runs one scheme (the scheme options) or the six standard sets (--standard-sets) on the built-in
reference problems (all, or those named by --problem) for a sequence of steps, and prints for
each the largest error of the observed DOF against the exact solution, the measured order
log2(e(dt) / e(dt/2)) between successive steps, and the cost (steps, wall time).

By default the steps are dt0 and four halvings, dt0 = T_min / 20 with T_min the problem's shortest
natural period (0.02 s for the hardening oscillator, whose reference is a table), and the run
stops at t_end or 400 coarse steps, whichever comes first; a non-smooth problem (pulse, struck
bar) runs to t_end in at most 500 coarse steps, with a larger dt0 when needed. Errors are taken at the coarse-grid
times (for the hardening oscillator only at the rows of its table). Steps above an explicit
scheme's stable limit are skipped and marked so.";

/// Examples of `stepgauge compare`.
pub const AFTER_HELP: &str = "\
Examples:
  stepgauge compare                                       average acceleration, every problem
  stepgauge compare --standard-sets --problem two-dof-step
  stepgauge compare --scheme central-difference --problem sdof-free-undamped --json
  stepgauge compare --scheme hht --alpha -0.1 --dt 0.1,0.05,0.025 --csv
  stepgauge compare --standard-sets --plot figures/";

/// Coarse steps at most, per problem (keeps the default run fast).
pub const MAX_COARSE_STEPS: usize = 400;
/// Coarse steps at most for a non-smooth problem, which runs to its end time (for the struck
/// bar: Courant number 0.8 on the coarse step).
pub const MAX_COARSE_STEPS_NON_SMOOTH: usize = 500;
/// Halvings of the default step sequence.
pub const DEFAULT_HALVINGS: u32 = 4;

/// The options of `stepgauge compare`.
#[derive(Debug, Clone, Args)]
pub struct CompareArgs {
    #[command(flatten)]
    pub scheme: SchemeArgs,
    /// Compare the six standard parameter sets (instead of one scheme).
    #[arg(long)]
    pub standard_sets: bool,
    /// A reference problem by name (repeatable; default: all ten).
    #[arg(long = "problem", value_name = "NAME")]
    pub problems: Vec<String>,
    /// Steps to run, comma-separated (default: dt0 and --halvings halvings per problem).
    #[arg(
        long,
        value_name = "LIST",
        value_delimiter = ',',
        allow_hyphen_values = true
    )]
    pub dt: Option<Vec<f64>>,
    /// Halvings of the default step dt0 = T_min / 20.
    #[arg(long, value_name = "N", default_value_t = DEFAULT_HALVINGS)]
    pub halvings: u32,
    /// Write one SVG figure per problem into this folder (history and error against dt).
    #[arg(long, value_name = "DIR")]
    pub plot: Option<PathBuf>,
    #[command(flatten)]
    pub format: FormatArgs,
}

/// One run: a problem, a scheme, a step.
#[derive(Debug, Clone, Serialize)]
pub struct Row {
    /// The step (s).
    pub dt: f64,
    /// Steps taken (0 when skipped).
    pub steps: usize,
    /// Largest error of the observed DOF at the checked times (`None`: skipped, or no checked
    /// time on this step's grid).
    pub max_error: Option<f64>,
    /// `log2(e_prev / e)` against the previous (larger) step, when both errors exist.
    pub order: Option<f64>,
    /// Wall time of the run (s).
    pub wall_time_s: f64,
    /// Why the step was skipped, if it was.
    pub skipped: Option<String>,
}

/// One problem under one scheme, over the steps.
#[derive(Debug, Clone, Serialize)]
pub struct Study {
    /// Problem name.
    pub problem: String,
    /// Scheme label.
    pub scheme: String,
    /// Whether the problem's solution is smooth (full order expected).
    pub smooth: bool,
    /// The end time of the runs (s).
    pub horizon: f64,
    /// The explicit stable limit, when the scheme has one for this problem (s).
    pub stable_limit: Option<f64>,
    /// Rows, largest step first.
    pub rows: Vec<Row>,
    /// History of the observed DOF on the finest run that was made: `(t, u)`.
    #[serde(skip)]
    pub history: Vec<(f64, f64)>,
}

/// Runs `stepgauge compare`.
pub fn run(args: &CompareArgs) -> Result<(), Failure> {
    let schemes = chosen_schemes(args)?;
    let problems = chosen_problems(&args.problems)?;
    let dts = match &args.dt {
        Some(list) => Some(checked_dts(list)?),
        None => None,
    };
    if args.halvings > 12 {
        return Err(Failure::Usage(format!(
            "--halvings = {} is not valid: at most 12",
            args.halvings
        )));
    }
    let studies = compare(&problems, &schemes, dts.as_deref(), args.halvings)?;
    if let Some(dir) = &args.plot {
        write_plots(dir, &problems, &studies)?;
    }
    let text = if args.format.json {
        let mut s = serde_json::to_string_pretty(&studies)
            .map_err(|e| Failure::Runtime(format!("cannot encode JSON: {e}")))?;
        s.push('\n');
        s
    } else if args.format.csv {
        csv(&studies)
    } else {
        table(&studies)
    };
    print_stdout(&text)
}

/// The schemes the options select.
pub fn chosen_schemes(args: &CompareArgs) -> Result<Vec<Labelled>, Failure> {
    if args.standard_sets {
        if args.scheme.any_given() {
            return Err(Failure::Usage(
                "--standard-sets takes no scheme options (--scheme, --beta, ...)".to_string(),
            ));
        }
        standard_sets()
    } else {
        Ok(vec![args.scheme.resolve()?])
    }
}

/// The named problems (all when none is named); an unknown name is a usage failure.
pub fn chosen_problems(names: &[String]) -> Result<Vec<Box<dyn ReferenceProblem>>, Failure> {
    let all = stepgauge_cli::problems::all();
    if names.is_empty() {
        return Ok(all);
    }
    let known: Vec<&str> = all.iter().map(|p| p.name()).collect();
    for n in names {
        if !known.contains(&n.as_str()) {
            return Err(Failure::Usage(format!(
                "unknown problem `{n}`; the problems are {}",
                known.join(", ")
            )));
        }
    }
    Ok(stepgauge_cli::problems::all()
        .into_iter()
        .filter(|p| names.iter().any(|n| n == p.name()))
        .collect())
}

fn checked_dts(list: &[f64]) -> Result<Vec<f64>, Failure> {
    if list.is_empty() {
        return Err(Failure::Usage("--dt needs at least one step".to_string()));
    }
    for &dt in list {
        if !(dt.is_finite() && dt > 0.0) {
            return Err(Failure::Usage(format!(
                "--dt = {dt} is not valid: steps must be positive and finite"
            )));
        }
    }
    let mut v = list.to_vec();
    v.sort_by(|a, b| b.total_cmp(a));
    v.dedup();
    Ok(v)
}

/// The default coarse step of a problem: `T_min / 20`, or 0.02 s without known frequencies
/// (the hardening oscillator: 0.02 divides its table's 0.1 s).
pub fn default_dt0(p: &dyn ReferenceProblem) -> f64 {
    study::default_dt0(p)
}

/// The coarse grid of a problem: `(horizon, n0, dt0)` with `horizon = n0 dt0`.
///
/// Smooth problems: `dt0` about [`default_dt0`], the run cut at [`MAX_COARSE_STEPS`] steps.
/// Non-smooth problems run to `t_end` (the kink or the front must be reached) in at most
/// [`MAX_COARSE_STEPS_NON_SMOOTH`] coarse steps, which may make `dt0` larger than the default.
pub fn coarse_grid(p: &dyn ReferenceProblem) -> (f64, usize, f64) {
    if p.is_smooth() {
        let g = study::smooth_grid(p, MAX_COARSE_STEPS);
        return (g.horizon, g.n0, g.dt0);
    }
    let t_end = p.t_end();
    let n = ((t_end / default_dt0(p)) - 1e-9).ceil().max(1.0) as usize;
    let n0 = n.min(MAX_COARSE_STEPS_NON_SMOOTH);
    (t_end, n0, t_end / n0 as f64)
}

/// Runs every problem under every scheme; `dts` overrides the default halving sequence.
pub fn compare(
    problems: &[Box<dyn ReferenceProblem>],
    schemes: &[Labelled],
    dts: Option<&[f64]>,
    halvings: u32,
) -> Result<Vec<Study>, Failure> {
    let mut out = Vec::new();
    for p in problems {
        let p = p.as_ref();
        // The coarse grid: n0 steps of dt0 up to the horizon; errors are taken at its times.
        let (horizon, n0, dt0) = coarse_grid(p);
        let steps: Vec<f64> = match dts {
            Some(d) => d.to_vec(),
            None => (0..=halvings).map(|l| dt0 / f64::from(1u32 << l)).collect(),
        };
        for s in schemes {
            let limit = stable_limit(p, &s.scheme)?;
            let mut rows: Vec<Row> = Vec::new();
            let mut history = Vec::new();
            for &dt in &steps {
                if let Some(lim) = limit
                    && dt > lim
                {
                    rows.push(Row {
                        dt,
                        steps: 0,
                        max_error: None,
                        order: None,
                        wall_time_s: 0.0,
                        skipped: Some(format!("above the stable limit {lim:.4e} s")),
                    });
                    continue;
                }
                // On the default sequence, check at the coarse times; otherwise at every step.
                let stride = if dts.is_none() {
                    (dt0 / dt).round().max(1.0) as usize
                } else {
                    1
                };
                let n = if dts.is_none() {
                    n0 * stride
                } else {
                    (horizon / dt + 1e-9).floor() as usize
                };
                let start = Instant::now();
                let (err, hist) = run_one(p, &s.scheme, dt, n, stride)?;
                let wall = start.elapsed().as_secs_f64();
                let order = match (rows.last().and_then(|r| r.max_error), err) {
                    (Some(a), Some(b)) if a > 0.0 && b > 0.0 => Some((a / b).log2()),
                    _ => None,
                };
                history = hist;
                rows.push(Row {
                    dt,
                    steps: n,
                    max_error: err,
                    order,
                    wall_time_s: wall,
                    skipped: None,
                });
            }
            out.push(Study {
                problem: p.name().to_string(),
                scheme: s.label.clone(),
                smooth: p.is_smooth(),
                horizon,
                stable_limit: limit,
                rows,
                history,
            });
        }
    }
    Ok(out)
}

/// The largest stable step of an explicit or conditionally stable scheme on a problem.
fn stable_limit(p: &dyn ReferenceProblem, scheme: &Scheme) -> Result<Option<f64>, Failure> {
    study::stable_limit(p, scheme).map_err(|e| Failure::Runtime(format!("{}: {e}", p.name())))
}

/// The largest error of a run (`None`: no checked time) and its history `(t, u)`.
type Outcome = (Option<f64>, Vec<(f64, f64)>);

/// Steps `n` times with `dt`; the largest error at every `stride`-th step where the reference
/// is exact, and the history at those steps (default Newton settings).
fn run_one(
    p: &dyn ReferenceProblem,
    scheme: &Scheme,
    dt: f64,
    n: usize,
    stride: usize,
) -> Result<Outcome, Failure> {
    let o = study::run_scheme(p, scheme, dt, n, stride, &NewtonOptions::default())
        .map_err(|e| Failure::Runtime(format!("{}: {e}", p.name())))?;
    Ok((o.max_error, o.history))
}

/// The text table.
pub fn table(studies: &[Study]) -> String {
    let w = studies
        .iter()
        .map(|s| s.scheme.len())
        .max()
        .unwrap_or(6)
        .max(6);
    let mut s = format!(
        "{:<24} {:<w$} {:>11} {:>14} {:>7} {:>7} {:>9}\n",
        "problem", "scheme", "dt (s)", "max error", "order", "steps", "wall (s)"
    );
    for st in studies {
        for r in &st.rows {
            let (err, order) = match &r.skipped {
                Some(why) => (format!("skipped: {why}"), String::new()),
                None => (
                    table_num(r.max_error),
                    r.order.map_or("-".to_string(), |o| format!("{o:.3}")),
                ),
            };
            s.push_str(&format!(
                "{:<24} {:<w$} {:>11} {:>14} {:>7} {:>7} {:>9.4}\n",
                st.problem,
                st.scheme,
                format!("{:.4e}", r.dt),
                err,
                order,
                r.steps,
                r.wall_time_s
            ));
        }
    }
    s
}

fn csv(studies: &[Study]) -> String {
    let mut s =
        String::from("problem,scheme,smooth,dt,steps,max_error,order,wall_time_s,skipped\n");
    for st in studies {
        for r in &st.rows {
            s.push_str(&format!(
                "{},{},{},{},{},{},{},{},{}\n",
                csv_field(&st.problem),
                csv_field(&st.scheme),
                st.smooth,
                r.dt,
                r.steps,
                csv_num(r.max_error),
                csv_num(r.order),
                r.wall_time_s,
                csv_field(r.skipped.as_deref().unwrap_or(""))
            ));
        }
    }
    s
}

/// Writes `DIR/<problem>.svg` for every problem.
fn write_plots(
    dir: &Path,
    problems: &[Box<dyn ReferenceProblem>],
    studies: &[Study],
) -> Result<(), Failure> {
    std::fs::create_dir_all(dir).map_err(|e| {
        Failure::Runtime(format!("cannot create the folder `{}`: {e}", dir.display()))
    })?;
    for p in problems {
        let svg = problem_svg(p.as_ref(), studies)?;
        write_plot(&dir.join(format!("{}.svg", p.name())), &svg)?;
    }
    Ok(())
}

/// The figure of one problem: history of the observed DOF on the finest step against the exact
/// solution (top), largest error against dt on log-log axes (bottom), one line per scheme.
pub fn problem_svg(p: &dyn ReferenceProblem, studies: &[Study]) -> Result<String, Failure> {
    let fail = |e: String| Failure::Runtime(format!("cannot draw the plot: {e}"));
    let mine: Vec<&Study> = studies.iter().filter(|s| s.problem == p.name()).collect();
    let horizon = mine.first().map_or(p.t_end(), |s| s.horizon);
    let exact: Vec<(f64, f64)> = (0..=800)
        .map(|i| {
            let t = horizon * f64::from(i) / 800.0;
            (t, p.exact(t))
        })
        .filter(|(_, u)| u.is_finite())
        .collect();
    let (mut u_lo, mut u_hi) = exact
        .iter()
        .chain(mine.iter().flat_map(|s| s.history.iter()))
        .filter(|(_, u)| u.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), (_, u)| {
            (a.min(*u), b.max(*u))
        });
    if !(u_lo.is_finite() && u_hi.is_finite()) {
        (u_lo, u_hi) = (-1.0, 1.0);
    }
    let pad = 0.05 * (u_hi - u_lo).max(1e-12);
    let errs: Vec<(f64, f64)> = mine
        .iter()
        .flat_map(|s| s.rows.iter())
        .filter_map(|r| r.max_error.filter(|e| *e > 0.0).map(|e| (r.dt, e)))
        .collect();
    let (dt_lo, dt_hi, e_lo, e_hi) = if errs.is_empty() {
        (1e-3, 1.0, 1e-6, 1.0)
    } else {
        let f = |g: fn(f64, f64) -> f64, init: f64, pick: fn(&(f64, f64)) -> f64| {
            errs.iter().map(pick).fold(init, g)
        };
        (
            f(f64::min, f64::INFINITY, |x| x.0) / 1.5,
            f(f64::max, 0.0, |x| x.0) * 1.5,
            f(f64::min, f64::INFINITY, |x| x.1) / 3.0,
            f(f64::max, 0.0, |x| x.1) * 3.0,
        )
    };
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (960, 800)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(e.to_string()))?;
        let root = root
            .titled(p.name(), ("sans-serif", 22))
            .map_err(|e| fail(e.to_string()))?;
        let areas = root.split_evenly((2, 1));
        let mut top = ChartBuilder::on(&areas[0])
            .caption(
                "Observed DOF on the finest step against the exact solution",
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(80)
            .build_cartesian_2d(0.0..horizon, (u_lo - pad)..(u_hi + pad))
            .map_err(|e| fail(e.to_string()))?;
        top.configure_mesh()
            .x_desc("t (s)")
            .y_desc("displacement")
            .draw()
            .map_err(|e| fail(e.to_string()))?;
        top.draw_series(LineSeries::new(exact, BLACK.mix(0.4).stroke_width(5)))
            .map_err(|e| fail(e.to_string()))?
            .label("exact")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLACK.mix(0.4)));
        for (i, s) in mine.iter().enumerate() {
            let style = SeriesStyle::nth(i).width(1);
            draw_series(&mut top, &[&s.history], style, Some(s.scheme.as_str()))
                .map_err(|e| fail(e.to_string()))?;
        }
        top.configure_series_labels()
            .position(SeriesLabelPosition::LowerLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(BLACK)
            .draw()
            .map_err(|e| fail(e.to_string()))?;
        let mut bottom = ChartBuilder::on(&areas[1])
            .caption("Largest error against the step", ("sans-serif", 18))
            .margin(12)
            .x_label_area_size(45)
            .y_label_area_size(80)
            .build_cartesian_2d((dt_lo..dt_hi).log_scale(), (e_lo..e_hi).log_scale())
            .map_err(|e| fail(e.to_string()))?;
        bottom
            .configure_mesh()
            .x_desc("dt (s, log scale)")
            .y_desc("max error (log scale)")
            .x_label_formatter(&|x| format!("{x:.1e}"))
            .y_label_formatter(&|y| format!("{y:.0e}"))
            .draw()
            .map_err(|e| fail(e.to_string()))?;
        for (i, s) in mine.iter().enumerate() {
            // Few points: the markers fall on every one.
            let pts: Vec<(f64, f64)> = s
                .rows
                .iter()
                .filter_map(|r| r.max_error.filter(|e| *e > 0.0).map(|e| (r.dt, e)))
                .collect();
            draw_series(&mut bottom, &[pts], SeriesStyle::nth(i), None)
                .map_err(|e| fail(e.to_string()))?;
        }
        root.present().map_err(|e| fail(e.to_string()))?;
    }
    Ok(svg)
}
