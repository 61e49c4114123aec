//! `stepgauge timestep`: the frequency range of a model and the steps it allows.
//!
//! * `omega_max` comes from [`stepgauge::explicit::stable_step::estimate`] on the
//!   [`LinearModel`]: the highest frequency of the lumped-mass model, the one the central
//!   difference steps (Lanczos on `M_lumped^-1 K` over the free DOFs). For a diagonal mass it is
//!   the model's highest frequency.
//! * `omega_min` is the smallest eigenvalue of `M^-1 K` on the free DOFs with the mass matrix as
//!   given, from the library's [`stepgauge::linalg::eigen::lowest_eigenvalue`] (a dense solve up
//!   to its `DENSE_LIMIT` free DOFs, inverse iteration above). A singular `K` (rigid-body motion,
//!   a free-free model) gives `omega_min = 0` with a note.

use std::path::PathBuf;

use clap::Args;
use serde_json::json;
use stepgauge::State;
use stepgauge::explicit::ForceVelocity;
use stepgauge::explicit::stable_step::{StableStepOptions, critical_step, estimate};
use stepgauge::linalg::eigen::{LowestStatus, lowest_eigenvalue};
use stepgauge::linalg::{CsrMatrix, Execution};
use stepgauge::model::{Constraints, LinearModel};
use stepgauge::spectral::{Scheme, largest_step_for_period_error};

use super::Failure;
use super::output::{print_stdout, table_num};
use super::run::{parse_dofs, read_mk};
use super::scheme_args::SchemeArgs;

/// Long help of `stepgauge timestep`.
pub const LONG_ABOUT: &str = "\
The frequency range of a model and the time steps it allows, from its mass and stiffness
matrices (Matrix Market files), with the DOFs of --fix removed:

  omega_max, omega_min   the highest and lowest natural circular frequencies (rad/s; also Hz).
                         omega_max is that of the lumped-mass model (what the central difference
                         steps; Lanczos); omega_min is from M^-1 K with M as given (dense
                         eigen-solve up to 300 free DOFs, inverse iteration with a sparse
                         Cholesky factor of K above). A singular K (free-free model) gives
                         omega_min = 0 with a note.
  dt_stable              central-difference stable step 2/omega_max, undamped;
  dt_stable_damped       the same with damping ratio --xi at omega_max: with the damping force
                         at the lagged half-step velocity (2/omega_max)(sqrt(1 + xi^2) - xi);
                         with --scheme central-difference --damping-velocity predicted
                         (2/omega_max)(sqrt(1 + 4 xi^2) - 2 xi);
  dt_limit, dt_limit_damped
                         the step limit the central difference enforces in `stepgauge run`
                         (undamped, and with --xi as above): 2/omega_upper with omega_upper an
                         upper bound on omega_max (Gershgorin's, or the Lanczos estimate's with
                         its convergence margin), so a little below dt_stable; a step between
                         the two is refused by `run` although it may well be stable.
  dt_accuracy            with --frequency-of-interest (rad/s): the largest step for which the
                         chosen scheme (the scheme options, default average acceleration) keeps
                         the relative period error at that frequency under --period-error.";

/// Examples of `stepgauge timestep`.
pub const AFTER_HELP: &str = "\
Examples:
  stepgauge timestep --mass M.mtx --stiffness K.mtx --fix 0,49
  stepgauge timestep --mass M.mtx --stiffness K.mtx --xi 0.05 --scheme hht --alpha -0.1 \\
                   --frequency-of-interest 62.8 --json

Exit status: 0 success; 1 standard output could not be written or an eigen-solve failed;
2 bad arguments or input files (one line on standard error).";

/// The options of `stepgauge timestep`.
#[derive(Debug, Clone, Args)]
pub struct TimestepArgs {
    /// Mass matrix (Matrix Market coordinate file).
    #[arg(long, value_name = "M.mtx")]
    pub mass: PathBuf,
    /// Stiffness matrix (Matrix Market coordinate file).
    #[arg(long, value_name = "K.mtx")]
    pub stiffness: PathBuf,
    /// Fixed DOFs, comma-separated, 0-based.
    #[arg(long, value_name = "LIST")]
    pub fix: Option<String>,
    #[command(flatten)]
    pub scheme: SchemeArgs,
    /// Circular frequency (rad/s, not Hz) whose period error bounds the accuracy step.
    #[arg(long, value_name = "OMEGA", allow_hyphen_values = true)]
    pub frequency_of_interest: Option<f64>,
    /// Largest relative period error at --frequency-of-interest (0.01, i.e. 1 %, is common
    /// practice).
    #[arg(
        long,
        value_name = "E",
        default_value_t = 0.01,
        allow_hyphen_values = true
    )]
    pub period_error: f64,
    /// Print JSON instead of text.
    #[arg(long)]
    pub json: bool,
}

fn usage(e: stepgauge::Error) -> Failure {
    match Failure::from(e) {
        Failure::Runtime(m) | Failure::Usage(m) => Failure::Usage(m),
    }
}

/// The note that goes with a lowest eigenvalue that is not a plain positive one.
fn lowest_note(status: LowestStatus) -> Option<String> {
    match status {
        LowestStatus::Positive => None,
        LowestStatus::Singular => Some(
            "K is singular on the free DOFs (rigid-body motion, a free-free model): omega_min \
             is 0; fix DOFs with --fix to remove it"
                .to_string(),
        ),
        LowestStatus::Negative { lowest } => Some(format!(
            "K has a negative eigenvalue ({lowest:e}): the model is not stable statically; \
             omega_min is reported as 0"
        )),
        LowestStatus::SingularOrIndefinite => Some(
            "K is singular or indefinite on the free DOFs (its sparse Cholesky factor met a \
             pivot that is not positive): omega_min is reported as 0; fix DOFs with --fix if the \
             model has rigid-body motion"
                .to_string(),
        ),
        LowestStatus::NotConverged => Some(
            "inverse iteration did not converge to 1e-13 in 10000 iterations (close lowest \
             frequencies): omega_min is approximate"
                .to_string(),
        ),
    }
}

/// Runs `stepgauge timestep`.
pub fn run(args: &TimestepArgs) -> Result<(), Failure> {
    let scheme = args.scheme.resolve()?;
    let xi = args.scheme.xi()?;
    let (m, k) = read_mk(&args.mass, &args.stiffness)?;
    let n = m.rows();
    let fixed = match &args.fix {
        Some(s) => parse_dofs("--fix", s, n)?,
        None => Vec::new(),
    };
    let mut model = LinearModel::new(&m, &k).map_err(usage)?;
    let mut c = Constraints::new();
    for &d in &fixed {
        c = c.fix(d);
    }
    model = model
        .with_constraints(c)
        .map_err(|e| Failure::Usage(format!("--fix: {e}")))?;
    let state = State::at_rest(n, 0.0);
    // The highest frequency is reported: Lanczos to its tolerance, not the Gershgorin bound.
    let mut options = StableStepOptions::default();
    options.prefer_elements = false;
    options.accept_gershgorin = false;
    let stable = estimate(&mut model, &state, &options, &Execution::default()).map_err(usage)?;
    let omega_max = stable.omega_max.ok_or_else(|| {
        Failure::Runtime("the highest frequency could not be estimated".to_string())
    })?;
    let dt_stable = critical_step(omega_max, 0.0).ok();
    // The damped limit of the central difference as it will step: the damping force at the
    // lagged half-step velocity unless --scheme central-difference --damping-velocity predicted.
    let force_velocity = match scheme.scheme {
        Scheme::CentralDifference(fv) => fv,
        Scheme::Alpha(_) => ForceVelocity::Lagged,
    };
    let dt_stable_damped =
        (omega_max > 0.0).then(|| force_velocity.critical_omega_dt(xi) / omega_max);
    // The limit `run` enforces: from the upper bound of the same estimate `run` makes (its
    // default options).
    let enforced = estimate(
        &mut model,
        &state,
        &StableStepOptions::default(),
        &Execution::default(),
    )
    .map_err(usage)?;
    let dt_limit = enforced.dt_limit.is_finite().then_some(enforced.dt_limit);
    let omega_upper = enforced
        .omega_max_upper
        .or_else(|| dt_limit.map(|dt| 2.0 / dt));
    let dt_limit_damped = omega_upper
        .filter(|w| *w > 0.0 && w.is_finite())
        .map(|w| force_velocity.critical_omega_dt(xi) / w);

    // omega_min on the free DOFs.
    let free: Vec<bool> = (0..n).map(|i| !fixed.contains(&i)).collect();
    let nf = free.iter().filter(|f| **f).count();
    if nf == 0 {
        return Err(Failure::Usage(
            "--fix fixes every DOF: no free DOF is left".to_string(),
        ));
    }
    let (mc, kc) = (
        CsrMatrix::from_sprs("mass", &m).map_err(usage)?,
        CsrMatrix::from_sprs("stiffness", &k).map_err(usage)?,
    );
    let low = lowest_eigenvalue(&mc, &kc, &free).map_err(usage)?;
    let low_note = lowest_note(low.status);
    let omega_min = low.lambda.max(0.0).sqrt();

    let dt_accuracy = match args.frequency_of_interest {
        Some(w) => largest_step_for_period_error(&scheme.scheme, w, xi, args.period_error)
            .map_err(Failure::from)?,
        None => {
            if (args.period_error - 0.01).abs() > 0.0 {
                return Err(Failure::Usage(
                    "--period-error needs --frequency-of-interest (rad/s)".to_string(),
                ));
            }
            None
        }
    };
    let hz = |w: f64| w / (2.0 * std::f64::consts::PI);
    if args.json {
        let v = json!({
            "omega_max": omega_max,
            "omega_min": omega_min,
            "f_max_hz": hz(omega_max),
            "f_min_hz": hz(omega_min),
            "dt_stable": dt_stable,
            "dt_stable_damped": dt_stable_damped,
            "omega_max_upper": omega_upper,
            "dt_limit": dt_limit,
            "dt_limit_damped": dt_limit_damped,
            "damping_velocity": force_velocity_name(force_velocity),
            "xi": xi,
            "dt_accuracy": dt_accuracy,
            "scheme": scheme.label,
            "frequency_of_interest": args.frequency_of_interest,
            "period_error": args.frequency_of_interest.map(|_| args.period_error),
            "free_dofs": nf,
            "omega_min_method": low.method.description(),
            "note": low_note,
        });
        let text = serde_json::to_string_pretty(&v)
            .map_err(|e| Failure::Runtime(format!("cannot encode JSON: {e}")))?;
        return print_stdout(&format!("{text}\n"));
    }
    let mut out = String::new();
    out.push_str(&format!("model: {n} DOFs, {nf} free\n"));
    out.push_str(&format!(
        "highest frequency  omega_max = {} rad/s  ({} Hz)  [lumped mass, Lanczos]\n",
        table_num(Some(omega_max)),
        table_num(Some(hz(omega_max)))
    ));
    out.push_str(&format!(
        "lowest frequency   omega_min = {} rad/s  ({} Hz)  [{}]\n",
        table_num(Some(omega_min)),
        table_num(Some(hz(omega_min))),
        low.method.description()
    ));
    if let Some(note) = &low_note {
        out.push_str(&format!("  note: {note}\n"));
    }
    out.push_str(&format!(
        "central difference stable step  dt_stable = {}  (2/omega_max, undamped)\n",
        table_num(dt_stable)
    ));
    out.push_str(&format!(
        "                                damped    = {}  (xi = {xi} at omega_max, {} damping velocity)\n",
        table_num(dt_stable_damped),
        force_velocity_name(force_velocity)
    ));
    out.push_str(&format!(
        "step limit of `run`             dt_limit  = {}  (2/omega_upper, omega_upper = {} rad/s: \
         an upper bound on omega_max)\n",
        table_num(dt_limit),
        table_num(omega_upper)
    ));
    out.push_str(&format!(
        "                                damped    = {}  (xi = {xi} at omega_upper; `run --scheme \
         central-difference` refuses larger steps)\n",
        table_num(dt_limit_damped)
    ));
    match (args.frequency_of_interest, dt_accuracy) {
        (Some(w), Some(dt)) => out.push_str(&format!(
            "accuracy step  dt_accuracy = {}  ({}: period error <= {} at omega = {w} rad/s)\n",
            table_num(Some(dt)),
            scheme.label,
            args.period_error
        )),
        (Some(w), None) => out.push_str(&format!(
            "accuracy step  dt_accuracy: not defined at omega = {w} rad/s: with xi = {xi} >= 1 the \
             exact mode does not oscillate (no period to keep)\n"
        )),
        (None, _) => out.push_str(
            "accuracy step: give --frequency-of-interest (rad/s) and a scheme for the largest \
             step keeping the period error under --period-error (default 0.01)\n",
        ),
    }
    print_stdout(&out)
}

fn force_velocity_name(fv: ForceVelocity) -> &'static str {
    match fv {
        ForceVelocity::Lagged => "lagged",
        ForceVelocity::Predicted => "predicted",
    }
}
