//! The time loop: advance a model to an end time, with a fixed or automatically re-estimated
//! step, recording chosen DOFs and energies, with a progress callback, stopping cleanly when a step
//! fails.

use serde::{Deserialize, Serialize};

use crate::energy::EnergyLedger;
use crate::error::{Error, Result};
use crate::model::Model;
use crate::state::State;

/// What one accepted step did.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct StepReport {
    /// Steps taken so far (this one included).
    pub step: u64,
    /// Time reached.
    pub t: f64,
    /// Step size used.
    pub dt: f64,
    /// Kinetic energy at `t`.
    pub kinetic: f64,
    /// Energy-balance error relative to the largest energy term.
    pub relative_balance_error: f64,
    /// Equilibrium iterations (0 for explicit schemes).
    pub iterations: u32,
}

/// A time-stepping scheme for models of type `M`, driven by [`run`].
///
/// Object-safe: `dyn Integrator<M>` holds any scheme for the same model type, so that a program
/// can choose the scheme at run time. The explicit scheme steps any [`Model`]; the implicit one
/// needs the model's [`Tangent`](crate::model::Tangent), a requirement checked at compile time.
pub trait Integrator<M: Model + ?Sized> {
    /// Advances `state` by one step of size `dt`; on error the state is that of the last accepted
    /// step.
    ///
    /// # Errors
    /// The scheme's step errors.
    fn step(&mut self, model: &mut M, state: &mut State, dt: f64) -> Result<StepReport>;

    /// The energy ledger after the last accepted step.
    fn energy(&self) -> &EnergyLedger;

    /// The largest step the scheme accepts (`None`: no limit known or enforced).
    fn stable_limit(&self) -> Option<f64>;

    /// Re-estimates the stable step of a conditionally stable scheme in the configuration `state`;
    /// `Ok(None)` for a scheme without a stability limit.
    ///
    /// # Errors
    /// The estimator's errors.
    fn reestimate_stable_step(&mut self, model: &mut M, state: &State) -> Result<Option<f64>>;
}

/// How the step size is chosen.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum StepControl {
    /// The same step throughout (the last step is shortened to land on the end time).
    Fixed(f64),
    /// `safety` times the scheme's stable limit, re-estimated every `reestimate_every` steps
    /// (0: only the estimate the integrator already holds).
    Auto {
        /// Fraction of the stable limit (0 < safety <= 1); see
        /// [`DEFAULT_SAFETY`](crate::explicit::stable_step::DEFAULT_SAFETY).
        safety: f64,
        /// Re-estimate period in steps.
        reestimate_every: u64,
    },
}

/// What to record during a run.
///
/// New fields may be added in later versions: start from `RecordOptions::default()` and set
/// fields.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct RecordOptions {
    /// DOFs to record (`None`: all).
    pub dofs: Option<Vec<usize>>,
    /// Record every `every`-th step (the initial and the final state are always recorded).
    pub every: u64,
    /// Also record velocities.
    pub velocity: bool,
    /// Also record accelerations.
    pub acceleration: bool,
    /// Also record the energy ledger.
    pub energy: bool,
}

impl Default for RecordOptions {
    fn default() -> Self {
        RecordOptions {
            dofs: None,
            every: 1,
            velocity: false,
            acceleration: false,
            energy: true,
        }
    }
}

/// One row of the energy history.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct EnergySample {
    /// Time.
    pub t: f64,
    /// Kinetic energy.
    pub kinetic: f64,
    /// Internal energy (stored at the start plus work against internal forces).
    pub internal: f64,
    /// External work.
    pub external: f64,
    /// Damping dissipation.
    pub damping: f64,
    /// Work of constraint reactions.
    pub constraint: f64,
    /// Total work against the extra force contributions.
    pub extra: f64,
    /// Balance error (absolute).
    pub balance_error: f64,
    /// Balance error relative to the largest term.
    pub relative_balance_error: f64,
}

impl EnergySample {
    /// A sample of `ledger` at time `t`.
    pub fn of(t: f64, ledger: &EnergyLedger) -> Self {
        EnergySample {
            t,
            kinetic: ledger.kinetic,
            internal: ledger.internal(),
            external: ledger.external_work,
            damping: ledger.damping_work,
            constraint: ledger.constraint_work,
            extra: ledger.extra_total(),
            balance_error: ledger.balance_error(),
            relative_balance_error: ledger.relative_balance_error(),
        }
    }
}

/// The recorded history of a run. Rows are recorded instants; `u`, `v`, `a` are row-major with
/// one column per recorded DOF.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Record {
    /// The recorded DOFs (column order).
    pub dofs: Vec<usize>,
    /// Step numbers of the rows.
    pub steps: Vec<u64>,
    /// Times of the rows.
    pub times: Vec<f64>,
    /// Displacements.
    pub u: Vec<f64>,
    /// Velocities (empty unless asked for).
    pub v: Vec<f64>,
    /// Accelerations (empty unless asked for).
    pub a: Vec<f64>,
    /// Energy history (empty unless asked for).
    pub energy: Vec<EnergySample>,
}

impl Record {
    /// Number of recorded rows.
    pub fn len(&self) -> usize {
        self.times.len()
    }

    /// True when nothing was recorded.
    pub fn is_empty(&self) -> bool {
        self.times.is_empty()
    }

    /// The displacement history of recorded column `col`.
    pub fn u_column(&self, col: usize) -> impl Iterator<Item = f64> + '_ {
        let w = self.dofs.len();
        self.u.iter().skip(col).step_by(w.max(1)).copied()
    }

    fn push(&mut self, state: &State, opts: &RecordOptions, ledger: &EnergyLedger) {
        self.steps.push(state.step);
        self.times.push(state.t);
        for &d in &self.dofs {
            self.u.push(state.u[d]);
            if opts.velocity {
                self.v.push(state.v[d]);
            }
            if opts.acceleration {
                self.a.push(state.a[d]);
            }
        }
        if opts.energy {
            self.energy.push(EnergySample::of(state.t, ledger));
        }
    }
}

/// Settings of [`run`].
///
/// New fields may be added in later versions: start from [`RunOptions::new`] and set fields.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub struct RunOptions {
    /// Absolute end time.
    pub t_end: f64,
    /// Step-size control.
    pub step: StepControl,
    /// What to record.
    pub record: RecordOptions,
    /// Stop after this many steps even if `t_end` is not reached (`None`: no limit).
    pub max_steps: Option<u64>,
}

impl RunOptions {
    /// Runs to `t_end` with step control `step`, recording every DOF and the energy at every step.
    pub fn new(t_end: f64, step: StepControl) -> Self {
        RunOptions {
            t_end,
            step,
            record: RecordOptions::default(),
            max_steps: None,
        }
    }
}

/// What the progress callback sees after every step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Progress {
    /// Steps taken so far.
    pub step: u64,
    /// Time reached.
    pub t: f64,
    /// Time at the start of the run.
    pub t_start: f64,
    /// End time.
    pub t_end: f64,
    /// Last step size.
    pub dt: f64,
    /// Current relative energy-balance error.
    pub relative_balance_error: f64,
}

impl Progress {
    /// Fraction of the time span done, in [0, 1].
    pub fn fraction(&self) -> f64 {
        let span = self.t_end - self.t_start;
        if span > 0.0 {
            ((self.t - self.t_start) / span).clamp(0.0, 1.0)
        } else {
            1.0
        }
    }
}

/// What the progress callback tells the loop.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Flow {
    /// Go on.
    Continue,
    /// Stop after this step.
    Stop,
}

/// Why a run stopped.
#[derive(Debug)]
pub enum StopReason {
    /// The end time was reached.
    EndTime,
    /// The progress callback asked to stop.
    Callback,
    /// `max_steps` was reached.
    MaxSteps,
    /// A step failed (instability, energy-balance breach, model failure, ...). The state passed
    /// to [`run`] is the last good one.
    Failed(Error),
}

/// The outcome of [`run`].
#[derive(Debug)]
pub struct RunOutcome {
    /// Why the run stopped.
    pub stop: StopReason,
    /// Steps taken in this run.
    pub steps: u64,
    /// Smallest step size used (infinity when no step was taken).
    pub dt_min: f64,
    /// Largest step size used (0 when no step was taken).
    pub dt_max: f64,
    /// Largest relative energy-balance error seen.
    pub max_relative_balance_error: f64,
    /// The recorded history.
    pub record: Record,
}

impl RunOutcome {
    /// The outcome, or the error that stopped the run.
    ///
    /// # Errors
    /// The step error when the run stopped on one.
    pub fn into_result(self) -> Result<RunOutcome> {
        match self.stop {
            StopReason::Failed(e) => Err(e),
            _ => Ok(self),
        }
    }
}

/// Advances `state` with `integrator` to `options.t_end`.
///
/// Records the initial state, every `record.every`-th step and the final state; calls `progress`
/// after every step. A failed step does not raise an error: the run stops with
/// [`StopReason::Failed`], `state` holds the last good state, and the record holds everything up to
/// it.
///
/// # Errors
/// Only for unusable options: a non-finite end time, a bad fixed step, a safety fraction outside
/// (0, 1], `record.every == 0`, a recorded DOF out of range, or automatic steps with a scheme that
/// has no stable limit.
pub fn run<I, M, P>(
    integrator: &mut I,
    model: &mut M,
    state: &mut State,
    options: &RunOptions,
    mut progress: P,
) -> Result<RunOutcome>
where
    I: Integrator<M> + ?Sized,
    M: Model + ?Sized,
    P: FnMut(&Progress) -> Flow,
{
    let n = state.dofs();
    // The state's fields are public: a NaN or infinite time would never reach the end time.
    crate::validate::check_finite("state time", &[state.t])?;
    if !options.t_end.is_finite() {
        return Err(Error::InvalidParameter {
            name: "t_end",
            value: options.t_end,
            expected: "a finite end time",
        });
    }
    match options.step {
        StepControl::Fixed(dt) if !(dt.is_finite() && dt > 0.0) => {
            return Err(Error::InvalidStep { dt });
        }
        StepControl::Auto { safety, .. } => crate::validate::check_safety(safety)?,
        _ => {}
    }
    if options.record.every == 0 {
        return Err(Error::InvalidParameter {
            name: "record.every",
            value: 0.0,
            expected: "a recording period of at least 1 step",
        });
    }
    let dofs: Vec<usize> = match &options.record.dofs {
        Some(d) => {
            if let Some(&dof) = d.iter().find(|&&x| x >= n) {
                return Err(Error::DofOutOfRange {
                    what: "recorded DOF",
                    dof,
                    n,
                });
            }
            d.clone()
        }
        None => (0..n).collect(),
    };
    let mut outcome = RunOutcome {
        stop: StopReason::EndTime,
        steps: 0,
        dt_min: f64::INFINITY,
        dt_max: 0.0,
        max_relative_balance_error: integrator.energy().relative_balance_error(),
        record: Record {
            dofs,
            ..Record::default()
        },
    };
    let rec = &options.record;
    outcome.record.push(state, rec, integrator.energy());
    let t_start = state.t;
    let mut limit = integrator.stable_limit();
    if let StepControl::Auto { .. } = options.step {
        if limit.is_none() {
            limit = integrator.reestimate_stable_step(model, state)?;
        }
        if limit.is_none() {
            return Err(Error::InvalidParameter {
                name: "step",
                value: f64::NAN,
                expected: "a fixed step: automatic steps need a scheme with a stable limit",
            });
        }
    }
    let mut since_record = 0u64;
    let mut last_recorded = state.step;
    loop {
        let remaining = options.t_end - state.t;
        if remaining <= 0.0 {
            outcome.stop = StopReason::EndTime;
            break;
        }
        if options.max_steps.is_some_and(|m| outcome.steps >= m) {
            outcome.stop = StopReason::MaxSteps;
            break;
        }
        let mut dt = match options.step {
            StepControl::Fixed(dt) => dt,
            StepControl::Auto {
                safety,
                reestimate_every,
            } => {
                if reestimate_every > 0
                    && outcome.steps > 0
                    && outcome.steps.is_multiple_of(reestimate_every)
                {
                    match integrator.reestimate_stable_step(model, state) {
                        Ok(l) => limit = l.or(limit),
                        Err(e) => {
                            outcome.stop = StopReason::Failed(e);
                            break;
                        }
                    }
                }
                safety * limit.unwrap_or(f64::NAN)
            }
        };
        // Land exactly on t_end; a remainder within a hair of dt is taken as the last step.
        let cap = integrator.stable_limit().unwrap_or(f64::INFINITY);
        let last = remaining <= dt || (remaining <= dt * (1.0 + 1e-9) && remaining <= cap);
        if last {
            dt = remaining;
        }
        match integrator.step(model, state, dt) {
            Ok(report) => {
                outcome.steps += 1;
                outcome.dt_min = outcome.dt_min.min(dt);
                outcome.dt_max = outcome.dt_max.max(dt);
                outcome.max_relative_balance_error = outcome
                    .max_relative_balance_error
                    .max(report.relative_balance_error);
                if last {
                    // Snap the rounding of t + dt onto the end time.
                    state.t = options.t_end;
                }
                since_record += 1;
                if since_record == rec.every {
                    outcome.record.push(state, rec, integrator.energy());
                    since_record = 0;
                    last_recorded = state.step;
                }
                let p = Progress {
                    step: state.step,
                    t: state.t,
                    t_start,
                    t_end: options.t_end,
                    dt,
                    relative_balance_error: report.relative_balance_error,
                };
                if progress(&p) == Flow::Stop {
                    outcome.stop = StopReason::Callback;
                    break;
                }
                if last {
                    outcome.stop = StopReason::EndTime;
                    break;
                }
            }
            Err(e) => {
                outcome.stop = StopReason::Failed(e);
                break;
            }
        }
    }
    if state.step != last_recorded {
        outcome.record.push(state, rec, integrator.energy());
    }
    Ok(outcome)
}
