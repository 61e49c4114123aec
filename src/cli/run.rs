//! `stepgauge run`: a linear transient analysis of a model read from Matrix Market and CSV files.
//!
//! The step loop is the command's own (not [`stepgauge::run::run`]) so that a run resumed from a
//! checkpoint takes exactly the steps of the uninterrupted run: a fixed step `dt`, the time
//! advanced by the integrator (`t += dt`), a step within a relative `1e-9` of the time left taken
//! in full (so an end time on the step grid is reached without a shortened step), and only a
//! genuinely shorter remainder taken as a last, shortened step that lands on `--t-end` exactly.
//! Rows are recorded when the global step number is a multiple of `--every`, plus the first and
//! the last state of the run, so a resumed run records the same rows as the uninterrupted one.

use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use clap::Args;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use sprs::CsMat;
use stepgauge::State;
use stepgauge::energy::EnergyLedger;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::io::{self, Checkpoint};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::{Constraints, Damping, LinearModel, Load};
use stepgauge::run::{EnergySample, Integrator, Record};
use stepgauge::spectral::Scheme;

use super::Failure;
use super::scheme_args::{Labelled, SchemeArgs};

/// Long help of `stepgauge run`.
pub const LONG_ABOUT: &str = "\
Linear transient analysis: M a + C v + K u = f(t), from matrices in Matrix Market files and a
load table in CSV, with the central difference (explicit, lumped mass) or a member of the
generalised-alpha family (implicit, sparse Cholesky).

The history (OUT.csv) has the header `time,u_<dof>,...`, then `v_<dof>,...` and `a_<dof>,...`
when asked, and one row per recorded step, the initial state first and the final state last.
A run resumed from a checkpoint (--resume) writes the rows from the checkpoint time on: its first
row repeats the last row of the run that wrote the checkpoint; drop it to join the two histories.
Checkpoints hold the state, the energy ledger and a description of the scheme and step; a resume
with another scheme or step is refused.

The step is fixed and the times of the steps are n dt (to 15 significant digits); the last step
is shortened to land on --t-end exactly when --t-end is not on the step grid. --t-end is an absolute time, also after --resume.";

/// Examples and exit statuses of `stepgauge run`.
pub const AFTER_HELP: &str = "\
Examples:
  stepgauge run --mass M.mtx --stiffness K.mtx --load F.csv --dt 0.01 --t-end 2 --output u.csv
  stepgauge run --mass M.mtx --stiffness K.mtx --scheme central-difference --dt auto --t-end 1 \\
              --rayleigh-modes 1,0.02,10,0.02 --record 3,7 --output u.csv --energy e.csv
  stepgauge run ... --t-end 1 --checkpoint run.ckpt --checkpoint-every 1000 --output a.csv
  stepgauge run ... --t-end 2 --resume run.ckpt --output b.csv

Exit status:
  0  the run reached --t-end
  1  the run failed mid-way (instability, Newton failure) or a file could not be written: the
     history up to the failure is written, and a checkpoint of the last good state when
     --checkpoint is given
  2  bad arguments or input files (one line on standard error)";

/// The options of `stepgauge run`.
#[derive(Debug, Clone, Args)]
pub struct RunArgs {
    /// Mass matrix (Matrix Market coordinate file).
    #[arg(long, value_name = "M.mtx")]
    pub mass: PathBuf,
    /// Stiffness matrix (Matrix Market coordinate file).
    #[arg(long, value_name = "K.mtx")]
    pub stiffness: PathBuf,
    /// Damping matrix (Matrix Market coordinate file).
    #[arg(long, value_name = "C.mtx", group = "damping_model")]
    pub damping: Option<PathBuf>,
    /// Rayleigh damping C = a0 M + a1 K, given as `a0,a1`.
    #[arg(
        long,
        value_name = "A0,A1",
        group = "damping_model",
        allow_hyphen_values = true
    )]
    pub rayleigh: Option<String>,
    /// Rayleigh damping from two modes: `f1,xi1,f2,xi2` with frequencies f in Hz (converted to
    /// rad/s with 2 pi) and damping ratios xi.
    #[arg(
        long,
        value_name = "F1,XI1,F2,XI2",
        group = "damping_model",
        allow_hyphen_values = true
    )]
    pub rayleigh_modes: Option<String>,
    /// Load table (CSV: header `time,<dof>,...`, one row per time, linear in between).
    #[arg(long, value_name = "LOAD.csv")]
    pub load: Option<PathBuf>,
    /// Initial conditions (CSV: header `dof,u,v`; DOFs not listed start at rest).
    #[arg(long, value_name = "INIT.csv")]
    pub initial: Option<PathBuf>,
    /// Fixed DOFs, comma-separated, 0-based.
    #[arg(long, value_name = "LIST")]
    pub fix: Option<String>,
    #[command(flatten)]
    pub scheme: SchemeArgs,
    /// Time step, or `auto` (central difference only: 0.9 times the estimated stable step).
    #[arg(long, value_name = "DT", allow_hyphen_values = true)]
    pub dt: String,
    /// End time (absolute, also after --resume).
    #[arg(long, value_name = "T", allow_hyphen_values = true)]
    pub t_end: f64,
    /// Recorded DOFs, comma-separated, 0-based [default: all].
    #[arg(long, value_name = "LIST")]
    pub record: Option<String>,
    /// Also record velocities.
    #[arg(long)]
    pub record_velocity: bool,
    /// Also record accelerations.
    #[arg(long)]
    pub record_acceleration: bool,
    /// Record every K-th step (counted from step 0, also across a resume).
    #[arg(long, value_name = "K", default_value_t = 1)]
    pub every: u64,
    /// The history (CSV).
    #[arg(long, value_name = "OUT.csv")]
    pub output: PathBuf,
    /// The energy history (CSV), at the recorded steps.
    #[arg(long, value_name = "ENERGY.csv")]
    pub energy: Option<PathBuf>,
    /// Write a checkpoint to FILE every --checkpoint-every steps and at the end of the run.
    #[arg(long, value_name = "FILE")]
    pub checkpoint: Option<PathBuf>,
    /// Steps between checkpoints [default: only at the end].
    #[arg(long, value_name = "N", requires = "checkpoint")]
    pub checkpoint_every: Option<u64>,
    /// Continue from a checkpoint written by `stepgauge run --checkpoint` with the same model,
    /// scheme and step.
    #[arg(long, value_name = "FILE")]
    pub resume: Option<PathBuf>,
    /// No progress bar and no summary.
    #[arg(long)]
    pub quiet: bool,
}

/// A usage failure from a library error (input files, sizes, parameters).
fn usage(e: stepgauge::Error) -> Failure {
    match Failure::from(e) {
        Failure::Runtime(m) | Failure::Usage(m) => Failure::Usage(m),
    }
}

/// Parses a comma-separated list of numbers for `option`.
pub(super) fn parse_list<T: std::str::FromStr>(option: &str, s: &str) -> Result<Vec<T>, Failure> {
    s.split(',')
        .map(|w| {
            let w = w.trim();
            w.parse::<T>().map_err(|_| {
                Failure::Usage(format!("{option}: `{w}` is not valid in the list `{s}`"))
            })
        })
        .collect()
}

/// Parses `--fix` and checks the DOFs against the model size `n`.
pub(super) fn parse_dofs(option: &str, s: &str, n: usize) -> Result<Vec<usize>, Failure> {
    let dofs: Vec<usize> = parse_list(option, s).map_err(|_| {
        Failure::Usage(format!(
            "{option}: `{s}` is not a comma-separated list of 0-based DOF numbers"
        ))
    })?;
    if let Some(d) = dofs.iter().find(|&&d| d >= n) {
        return Err(Failure::Usage(format!(
            "{option}: DOF {d} is out of range for a model with {n} DOFs (valid: 0..{n})"
        )));
    }
    Ok(dofs)
}

/// Reads the mass and stiffness matrices and checks they are square and of the same size.
pub(super) fn read_mk(mass: &Path, stiffness: &Path) -> Result<(CsMat<f64>, CsMat<f64>), Failure> {
    let m = io::read_matrix_market(mass).map_err(usage)?;
    let k = io::read_matrix_market(stiffness).map_err(usage)?;
    for (what, path, a) in [("mass", mass, &m), ("stiffness", stiffness, &k)] {
        if a.rows() != a.cols() {
            return Err(Failure::Usage(format!(
                "the {what} matrix {} is {} x {}: it must be square",
                path.display(),
                a.rows(),
                a.cols()
            )));
        }
    }
    if m.rows() != k.rows() {
        return Err(Failure::Usage(format!(
            "the mass matrix {} is {n} x {n} but the stiffness matrix {} is {p} x {p}: they must \
             have the same size",
            mass.display(),
            stiffness.display(),
            n = m.rows(),
            p = k.rows()
        )));
    }
    Ok((m, k))
}

/// How the step is chosen.
#[derive(Debug, Clone, Copy)]
enum StepChoice {
    Fixed(f64),
    Auto,
}

fn step_choice(s: &str) -> Result<StepChoice, Failure> {
    if s.trim() == "auto" {
        return Ok(StepChoice::Auto);
    }
    match s.trim().parse::<f64>() {
        Ok(dt) if dt.is_finite() && dt > 0.0 => Ok(StepChoice::Fixed(dt)),
        Ok(dt) => Err(Failure::Usage(format!(
            "--dt = {dt} is not valid: the step must be positive and finite (or `auto`)"
        ))),
        Err(_) => Err(Failure::Usage(format!(
            "--dt `{s}` is not a number (give a positive step or `auto`)"
        ))),
    }
}

/// Either integrator, through the library's object-safe trait.
type Engine = Box<dyn Integrator<LinearModel>>;

fn build_model(args: &RunArgs) -> Result<LinearModel, Failure> {
    let (m, k) = read_mk(&args.mass, &args.stiffness)?;
    let n = m.rows();
    let mut model = LinearModel::new(&m, &k).map_err(usage)?;
    if let Some(path) = &args.damping {
        let c = io::read_matrix_market(path).map_err(usage)?;
        if c.rows() != n || c.cols() != n {
            return Err(Failure::Usage(format!(
                "the damping matrix {} is {} x {}, expected {n} x {n} like the mass matrix",
                path.display(),
                c.rows(),
                c.cols()
            )));
        }
        model = model.with_damping_matrix(&c).map_err(usage)?;
    }
    if let Some(s) = &args.rayleigh {
        let v: Vec<f64> = parse_list("--rayleigh", s)?;
        let [a0, a1] = v[..] else {
            return Err(Failure::Usage(format!(
                "--rayleigh takes two numbers `a0,a1`, got `{s}`"
            )));
        };
        model = model.with_rayleigh(a0, a1).map_err(|e| {
            Failure::Usage(format!(
                "--rayleigh {s}: {}",
                super::one_line(&e.to_string())
            ))
        })?;
    }
    if let Some(s) = &args.rayleigh_modes {
        let v: Vec<f64> = parse_list("--rayleigh-modes", s)?;
        let [f1, xi1, f2, xi2] = v[..] else {
            return Err(Failure::Usage(format!(
                "--rayleigh-modes takes four numbers `f1,xi1,f2,xi2` (f in Hz), got `{s}`"
            )));
        };
        let two_pi = 2.0 * std::f64::consts::PI;
        let damping = Damping::rayleigh_from_modes(two_pi * f1, xi1, two_pi * f2, xi2)
            .map_err(|e| Failure::Usage(format!("--rayleigh-modes {s}: {e}")))?;
        let Damping::Rayleigh { a0, a1 } = damping else {
            return Err(Failure::Usage(format!(
                "--rayleigh-modes {s}: no Rayleigh coefficients"
            )));
        };
        model = model
            .with_rayleigh(a0, a1)
            .map_err(|e| Failure::Usage(format!("--rayleigh-modes {s}: {e}")))?;
    }
    if let Some(path) = &args.load {
        let table = io::read_load_table(path).map_err(usage)?;
        io::csv::validate_dofs(&table, n)
            .map_err(|e| Failure::Usage(format!("{}: {e}", path.display())))?;
        model = model.with_load(Load::Table(table)).map_err(usage)?;
    }
    if let Some(s) = &args.fix {
        let dofs = parse_dofs("--fix", s, n)?;
        let mut c = Constraints::new();
        for d in dofs {
            c = c.fix(d);
        }
        model = model
            .with_constraints(c)
            .map_err(|e| Failure::Usage(format!("--fix {s}: {e}")))?;
    }
    Ok(model)
}

/// The integrator, fresh or resumed, and the step.
fn build_engine(
    scheme: &Labelled,
    model: &mut LinearModel,
    state: &mut State,
    resumed: Option<EnergyLedger>,
    step: StepChoice,
) -> Result<(Engine, f64), Failure> {
    match scheme.scheme {
        Scheme::CentralDifference(fv) => {
            let mut options = CentralDifferenceOptions::default();
            options.force_velocity = fv;
            let cd = match resumed {
                None => CentralDifference::new(model, state, options),
                Some(l) => CentralDifference::resume(model, state, l, options),
            }
            .map_err(usage)?;
            let limit = cd.stable_limit();
            let dt = match step {
                StepChoice::Fixed(dt) => {
                    if let Some(lim) = limit
                        && dt > lim
                    {
                        return Err(Failure::Usage(format!(
                            "--dt {dt} exceeds the step limit of the central difference for \
                             this model ({lim:e}: from an upper bound on its highest frequency, \
                             with its damping; the largest step stepgauge can vouch for, which \
                             may lie a little below the estimated critical step{}); use --dt {:e} \
                             or smaller, or --dt auto",
                            cd.stable_step()
                                .map_or(String::new(), |s| format!(" {:e}", s.dt_critical_damped)),
                            0.9 * lim
                        )));
                    }
                    dt
                }
                StepChoice::Auto => match cd.stable_step() {
                    Some(s) => 0.9 * s.dt_critical_damped.min(limit.unwrap_or(f64::INFINITY)),
                    None => {
                        return Err(Failure::Usage(
                            "--dt auto: the stable step of this model could not be estimated; \
                             give --dt"
                                .to_string(),
                        ));
                    }
                },
            };
            Ok((Box::new(cd), dt))
        }
        Scheme::Alpha(p) => {
            let dt = match step {
                StepChoice::Fixed(dt) => dt,
                StepChoice::Auto => {
                    return Err(Failure::Usage(format!(
                        "--dt auto is for --scheme central-difference only; {} is implicit \
                         (unconditionally stable or not, its step is an accuracy choice): give \
                         --dt, e.g. from `stepgauge timestep --frequency-of-interest`",
                        scheme.label
                    )));
                }
            };
            let it = match resumed {
                None => AlphaIntegrator::new(
                    model,
                    state,
                    p,
                    Box::new(SparseCholesky::new()),
                    ImplicitOptions::default(),
                ),
                Some(l) => AlphaIntegrator::resume(
                    model,
                    state,
                    l,
                    p,
                    Box::new(SparseCholesky::new()),
                    ImplicitOptions::default(),
                ),
            }
            .map_err(usage)?;
            Ok((Box::new(it), dt))
        }
    }
}

/// The scheme description stored in checkpoints: the scheme with its parameters, and the step.
fn checkpoint_scheme(label: &str, dt: f64) -> String {
    format!("{label}{STEP_SEPARATOR}{dt}")
}

/// What separates the scheme's label from the step in [`checkpoint_scheme`].
const STEP_SEPARATOR: &str = "; dt = ";

/// The scheme's label in a checkpoint's description (all of it when no step follows).
fn checkpoint_label(description: &str) -> &str {
    description
        .split_once(STEP_SEPARATOR)
        .map_or(description, |(label, _)| label)
}

/// What the recording keeps.
struct Recorder {
    record: Record,
    velocity: bool,
    acceleration: bool,
    every: u64,
}

impl Recorder {
    fn push(&mut self, state: &State, ledger: &EnergyLedger) {
        let r = &mut self.record;
        if r.steps.last() == Some(&state.step) && !r.steps.is_empty() {
            return;
        }
        r.steps.push(state.step);
        r.times.push(state.t);
        for &d in &r.dofs {
            r.u.push(state.u[d]);
            if self.velocity {
                r.v.push(state.v[d]);
            }
            if self.acceleration {
                r.a.push(state.a[d]);
            }
        }
        r.energy.push(EnergySample::of(state.t, ledger));
    }
}

/// Runs `stepgauge run`; `Ok(true)` when the run reached the end time, `Ok(false)` when it failed
/// mid-way (history written, error printed).
pub fn run(args: &RunArgs) -> Result<bool, Failure> {
    let wall = Instant::now();
    let scheme = args.scheme.resolve()?;
    if let Scheme::Alpha(p) = &scheme.scheme
        && p.beta() == 0.0
    {
        return Err(Failure::Usage(
            "--scheme newmark --beta 0 is explicit Newmark, which the implicit integrator \
             cannot run; use --scheme central-difference for an explicit run"
                .to_string(),
        ));
    }
    if args.scheme.xi != 0.0 {
        return Err(Failure::Usage(
            "--xi does not apply to run: damping comes from --damping, --rayleigh or \
             --rayleigh-modes"
                .to_string(),
        ));
    }
    let step = step_choice(&args.dt)?;
    if !args.t_end.is_finite() {
        return Err(Failure::Usage(format!(
            "--t-end = {} is not valid: it must be finite",
            args.t_end
        )));
    }
    if args.every == 0 {
        return Err(Failure::Usage(
            "--every = 0 is not valid: record every K >= 1 steps".to_string(),
        ));
    }
    if args.checkpoint_every == Some(0) {
        return Err(Failure::Usage(
            "--checkpoint-every = 0 is not valid: give N >= 1 steps".to_string(),
        ));
    }
    let mut model = build_model(args)?;
    let n = stepgauge::model::Model::dofs(&model);
    let dofs = match &args.record {
        Some(s) => parse_dofs("--record", s, n)?,
        None => (0..n).collect(),
    };

    // Start or resume.
    let (mut state, ledger, expected_scheme) = match &args.resume {
        Some(path) => {
            let c = io::read_checkpoint(path).map_err(usage)?;
            if c.state.dofs() != n {
                return Err(Failure::Usage(format!(
                    "checkpoint {} holds {} DOFs but the model has {n}: it belongs to another \
                     model",
                    path.display(),
                    c.state.dofs()
                )));
            }
            if c.state.t >= args.t_end {
                return Err(Failure::Usage(format!(
                    "--t-end {} is not after the checkpoint time {}: --t-end is absolute",
                    args.t_end, c.state.t
                )));
            }
            (c.state, Some(c.ledger), Some((path.clone(), c.scheme)))
        }
        None => {
            let mut s = State::at_rest(n, 0.0);
            if let Some(path) = &args.initial {
                let (u, v) = io::read_initial(path, n).map_err(usage)?;
                s = State::new(0.0, u, v).map_err(usage)?;
            }
            if args.t_end <= 0.0 {
                return Err(Failure::Usage(format!(
                    "--t-end = {} is not valid: it must be after the start time 0",
                    args.t_end
                )));
            }
            (s, None, None)
        }
    };
    let mismatch = |path: &std::path::Path, found: &str, description: &str| {
        Failure::Usage(format!(
            "checkpoint {} was written by a run with `{found}`, this run has `{description}`: \
             resume with the same scheme and step",
            path.display()
        ))
    };
    // The scheme first (before the engine reads the checkpoint's ledger, whose shape is the
    // scheme's), then, once the engine has chosen it, the step.
    if let Some((path, found)) = &expected_scheme
        && checkpoint_label(found) != scheme.label
    {
        return Err(mismatch(path, found, &scheme.label));
    }
    let implicit = matches!(scheme.scheme, Scheme::Alpha(_));
    let (mut engine, dt) = build_engine(&scheme, &mut model, &mut state, ledger, step)?;
    let description = checkpoint_scheme(&scheme.label, dt);
    if let Some((path, found)) = &expected_scheme
        && *found != description
    {
        return Err(mismatch(path, found, &description));
    }

    // Progress bar: only on a terminal, after about a second.
    let show = !args.quiet && std::io::stderr().is_terminal();
    let bar = ProgressBar::with_draw_target(Some(1000), ProgressDrawTarget::hidden());
    bar.set_style(
        ProgressStyle::with_template("{bar:40} {percent:>3}% t = {msg} eta {eta}")
            .unwrap_or_else(|_| ProgressStyle::default_bar()),
    );
    let (t_start, t_end) = (state.t, args.t_end);

    let mut rec = Recorder {
        record: Record {
            dofs,
            ..Record::default()
        },
        velocity: args.record_velocity,
        acceleration: args.record_acceleration,
        every: args.every,
    };
    rec.push(&state, engine.energy());
    let mut steps = 0u64;
    let mut iterations = 0usize;
    let mut max_balance = engine.energy().relative_balance_error();
    let mut failure: Option<stepgauge::Error> = None;
    let mut last_drawn = Instant::now();
    let mut bar_on = false;
    // Times on the step grid are `step * dt` rounded to 15 significant digits (not a running
    // sum), so that a run resumed from a checkpoint sees the same times, bit for bit, as the
    // uninterrupted run, and a grid time prints as the decimal it stands for (2.772, not
    // 2.7720000000000002).
    let grid = |step: u64| {
        let t = step as f64 * dt;
        format!("{t:.14e}").parse::<f64>().unwrap_or(t)
    };
    let mut on_grid = (state.t - grid(state.step)).abs() <= 1e-9 * dt;
    loop {
        if on_grid {
            state.t = grid(state.step);
        }
        let remaining = t_end - state.t;
        if remaining <= 1e-9 * dt {
            break;
        }
        let last_short = remaining < dt * (1.0 - 1e-9);
        let h = if last_short { remaining } else { dt };
        match engine.step(&mut model, &mut state, h) {
            Ok(report) => iterations += report.iterations as usize,
            Err(e) => {
                failure = Some(e);
                break;
            }
        }
        if last_short {
            state.t = t_end;
            on_grid = false;
        } else if on_grid {
            state.t = grid(state.step);
        }
        steps += 1;
        max_balance = max_balance.max(engine.energy().relative_balance_error());
        if state.step.is_multiple_of(rec.every) {
            rec.push(&state, engine.energy());
        }
        if let (Some(path), Some(every)) = (&args.checkpoint, args.checkpoint_every)
            && state.step.is_multiple_of(every)
        {
            write_checkpoint(path, &description, &state, engine.energy())?;
        }
        if show && last_drawn.elapsed() > Duration::from_millis(100) {
            if !bar_on && wall.elapsed() > Duration::from_secs(1) {
                bar.set_draw_target(ProgressDrawTarget::stderr());
                bar_on = true;
            }
            let frac = ((state.t - t_start) / (t_end - t_start)).clamp(0.0, 1.0);
            bar.set_position((frac * 1000.0) as u64);
            bar.set_message(format!("{:.6e}", state.t));
            last_drawn = Instant::now();
        }
    }
    bar.finish_and_clear();
    rec.push(&state, engine.energy());

    // Outputs: what the run has, also after a failure.
    io::write_record_csv(&args.output, &rec.record, rec.velocity, rec.acceleration)
        .map_err(|e| Failure::Runtime(e.to_string()))?;
    if let Some(path) = &args.energy {
        io::write_energy_csv(path, &rec.record.energy)
            .map_err(|e| Failure::Runtime(e.to_string()))?;
    }
    if let Some(path) = &args.checkpoint {
        write_checkpoint(path, &description, &state, engine.energy())?;
    }
    if !args.quiet {
        let mut summary = format!(
            "stepgauge run: {} from t = {t_start} to {} in {steps} steps of dt = {dt:e}, wall time \
             {:.3} s, max relative energy-balance error {max_balance:.3e}",
            scheme.label,
            state.t,
            wall.elapsed().as_secs_f64()
        );
        if implicit {
            summary.push_str(&format!(", {iterations} Newton iterations"));
        }
        eprintln!("{summary}");
    }
    match failure {
        None => Ok(true),
        Some(e) => {
            eprintln!(
                "stepgauge: the run failed at t = {} after step {}: {}; the history up to the \
                 failure is in {}",
                state.t,
                state.step,
                super::one_line(&e.to_string()),
                args.output.display()
            );
            Ok(false)
        }
    }
}

fn write_checkpoint(
    path: &Path,
    description: &str,
    state: &State,
    ledger: &EnergyLedger,
) -> Result<(), Failure> {
    let c = Checkpoint::new(
        description,
        state.clone(),
        ledger.clone(),
        serde_json::Value::Null,
    );
    io::write_checkpoint(path, &c).map_err(|e| Failure::Runtime(e.to_string()))
}
