//! The central-difference method in half-step velocity form on a lumped mass.

use std::fmt;

use crate::energy::EnergyLedger;
use crate::error::{Error, Result};
use crate::explicit::stable_step::{self, StableStep};
use crate::linalg::{CHUNK, chunk_count, for_chunks_read, for_chunks2, sum_partials};
use crate::model::{Model, Motion};
use crate::params::ForceVelocity;
use crate::run::{Integrator, StepReport};
use crate::setup::{DampingModel, Setup, model_err, setup};
use crate::state::State;
use crate::validate::{
    check_finite, check_growth_limit, check_len, check_lumped_mass, check_step_advances,
};

use super::kernels::{EndLoop, EndSums, first_non_finite, fused_stiffness, loop_a_chunk};
use super::options::{CentralDifferenceOptions, StableLimit};

/// Explicit central-difference integrator (half-step velocity form, lumped mass).
///
/// One step from `t_n` to `t_{n+1} = t_n + dt`, with `M` the lumped mass:
///
/// ```text
/// v_{n+1/2} = v_n + (dt/2) a_n
/// u_{n+1}   = u_n + dt v_{n+1/2}
/// a_{n+1}   = M^-1 ( f_ext(t_{n+1}) - f_int(t_{n+1}, u_{n+1}, v_{n+1/2})
///                    - C v_{n+1/2} - sum_k f_k(t_{n+1}, u_{n+1}, v_{n+1/2}) )
/// v_{n+1}   = v_{n+1/2} + (dt/2) a_{n+1}
/// ```
///
/// Eliminating the integer-step velocity gives the classical half-step form
/// `v_{n+1/2} = v_{n-1/2} + dt_avg a_n` with `dt_avg = (dt_{n-1/2} + dt_{n+1/2}) / 2`, so a varying
/// step is handled correctly. The start is consistent: `a_0 = M^-1 (f_ext - f_int(u_0, v_0) - C v_0 - ...)`.
///
/// **Velocity used by damping and rate-dependent forces.** The internal, damping and extra forces
/// at `t_{n+1}` receive, by default, the lagged half-step velocity `v_{n+1/2}` (at the start,
/// `v_0`); a single mode of damping ratio `xi` is then stable for
/// `omega dt <= 2 (sqrt(1 + xi^2) - xi)`, and the damping term is first-order accurate. With
/// [`ForceVelocity::Predicted`] they receive `v_{n+1/2} + (dt/2) a_n`, which keeps the scheme
/// second order, stable for `omega dt <= 2 (sqrt(1 + 4 xi^2) - 2 xi)` (see `docs/explicit.md`).
///
/// **Constraints.** Fixed DOFs keep their initial displacement and zero velocity. At a
/// prescribed-displacement DOF `u_{n+1} = g(t_{n+1})` and `v_{n+1/2} = (u_{n+1} - u_n)/dt`; at a
/// prescribed-velocity DOF `v_{n+1/2} = h(t_{n+1/2})`. Their integer-step velocity and acceleration
/// are centred on a look-ahead half step of the same size, and the reaction
/// `r = m a - (f_ext - f_int - C v - sum f_k)` is booked as constraint work. At the start the
/// integrator sets `u = g(t_0)`, `v = h(t_0)` or `v = 0` on those DOFs and takes their `a_0 = 0`.
///
/// **Transactions.** A step writes into the integrator's own buffers and swaps them into the state
/// only when every guard has passed, so a failed step leaves the state and the energy ledger as
/// they were. A step allocates nothing.
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, sec. 6.2
/// (the flowchart of explicit time integration and the energy balance); Hughes (1987), *The Finite
/// Element Method*, ch. 9.
pub struct CentralDifference {
    n: usize,
    options: CentralDifferenceOptions,
    mass: Vec<f64>,
    /// `1/m` on free DOFs, 0 on constrained ones.
    inv_mass: Vec<f64>,
    constraints: Vec<(usize, Motion)>,
    damping: DampingModel,
    u_next: Vec<f64>,
    v_half: Vec<f64>,
    /// Velocity given to velocity-dependent forces (used only with `ForceVelocity::Predicted`).
    v_force: Vec<f64>,
    v_next: Vec<f64>,
    a_next: Vec<f64>,
    /// Internal force; empty while the model gives its [`Linearity::Stiffness`](crate::model::Linearity::Stiffness) (the end-of-step
    /// loop then forms `K u` row by row).
    f_int: Vec<f64>,
    /// External force; empty while the model is unloaded ([`Hints::unloaded`](crate::model::Hints::unloaded)).
    f_ext: Vec<f64>,
    /// Damping force (`K v` for Rayleigh damping); empty without damping.
    f_damp: Vec<f64>,
    f_extra: Vec<Vec<f64>>,
    partials: Vec<EndSums>,
    partials3: Vec<[f64; 3]>,
    /// The reactions' power now and in flight, per chunk (nonzero only in chunks with
    /// constrained DOFs); empty when no process has a constrained DOF (decided once, through the
    /// reducer, so that every process makes the same reductions).
    partials2: Vec<[f64; 2]>,
    partials1: Vec<[f64; 1]>,
    reactions: Vec<f64>,
    /// The forces at the constrained DOFs at the end of this step (layout of
    /// `Pending::constrained`), moved into the trial ledger once it is formed.
    con_forces: Vec<f64>,
    /// The work in flight at the end of the last evaluated step (see
    /// [`EnergyLedger::reference`]): counted as put in by the growth guard.
    in_flight: f64,
    ledger: EnergyLedger,
    trial: EnergyLedger,
    stable: Option<StableStep>,
    dt_stable: Option<f64>,
}

impl fmt::Debug for CentralDifference {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("CentralDifference")
            .field("dofs", &self.n)
            .field("options", &self.options)
            .field("dt_stable", &self.dt_stable)
            .finish_non_exhaustive()
    }
}

impl CentralDifference {
    /// Creates the integrator for `model` and starts the run from `state`: checks sizes, masses and
    /// constraints, applies the constraints to the state, computes the consistent initial
    /// acceleration into `state.a`, opens the energy ledger and, with
    /// [`StableLimit::Estimate`], estimates the stable step.
    ///
    /// # Errors
    /// [`Error::EmptyModel`], [`Error::DimensionMismatch`], [`Error::NonFiniteInput`],
    /// [`Error::NonPositiveMass`], constraint errors, [`Error::InvalidParameter`] for bad options or
    /// Rayleigh coefficients, [`Error::Model`] when the model fails, and the stable-step estimator's
    /// errors. On error `state` is unchanged.
    pub fn new<M: Model + ?Sized>(
        model: &mut M,
        state: &mut State,
        options: CentralDifferenceOptions,
    ) -> Result<Self> {
        let mut cd = Self::prepare(model, state, options)?;
        // The constrained start is built in the integrator's own buffers (`u_next`, `v_half`,
        // `a_next`) and swapped into `state` only at the end, so that a failure leaves the
        // caller's state untouched without a copy of it.
        cd.u_next.copy_from_slice(&state.u);
        cd.v_half.copy_from_slice(&state.v);
        for (dof, motion) in &cd.constraints {
            match motion {
                Motion::Fixed => cd.v_half[*dof] = 0.0,
                Motion::Displacement(g) => {
                    cd.u_next[*dof] = g.value(state.t);
                    cd.v_half[*dof] = g.rates(state.t).0;
                }
                Motion::Velocity(h) => cd.v_half[*dof] = h.value(state.t),
            }
        }
        check_finite("constrained initial displacement", &cd.u_next)?;
        check_finite("constrained initial velocity", &cd.v_half)?;
        if cd.options.force_velocity == ForceVelocity::Predicted {
            cd.v_force.copy_from_slice(&cd.v_half);
        }
        cd.end_of_step(model, state.step, state.t, 0.0)?;
        // With dt = 0 the trial ledger holds the initial kinetic energy and the pending scalars.
        std::mem::swap(&mut cd.ledger, &mut cd.trial);
        let l = &mut cd.ledger;
        l.initial_kinetic = l.kinetic;
        l.initial_internal = model.stored_energy(&cd.u_next).unwrap_or(0.0);
        // The guard's budget: the stored energy, or the work of getting to the start's shape.
        l.energy_in = l.initial_kinetic
            + crate::setup::start_internal_energy(
                model,
                state.t,
                &cd.u_next,
                &cd.options.execution,
            )
            .abs();
        // The start state: u and v constrained, a consistent (`a_next` of the start).
        let mut s = State {
            t: state.t,
            step: state.step,
            u: std::mem::take(&mut cd.u_next),
            v: std::mem::take(&mut cd.v_half),
            a: std::mem::take(&mut cd.a_next),
        };
        if let StableLimit::Estimate = cd.options.stable_limit {
            cd.update_stable_step(model, &s)?;
        }
        // Accept: the caller's vectors become the integrator's work buffers.
        std::mem::swap(state, &mut s);
        cd.u_next = s.u;
        cd.v_half = s.v;
        cd.a_next = s.a;
        Ok(cd)
    }

    /// Continues a run from a saved state and energy ledger (for example from a checkpoint): the
    /// state's acceleration is taken as it is, so the continued run is bit-identical to an
    /// uninterrupted one.
    ///
    /// # Errors
    /// As for [`CentralDifference::new`], and [`Error::DimensionMismatch`] when the ledger does not
    /// match the model's extra forces or constraints.
    pub fn resume<M: Model + ?Sized>(
        model: &mut M,
        state: &State,
        ledger: EnergyLedger,
        options: CentralDifferenceOptions,
    ) -> Result<Self> {
        let mut cd = Self::prepare(model, state, options)?;
        check_finite("acceleration", &state.a)?;
        check_len(
            "energy ledger extra forces",
            cd.ledger.extra_work.len(),
            ledger.extra_work.len(),
        )?;
        check_len(
            "energy ledger extra forces",
            cd.ledger.extra_work.len(),
            ledger.extra_names.len(),
        )?;
        check_len(
            "energy ledger extra forces",
            cd.ledger.extra_work.len(),
            ledger.pending.extra.len(),
        )?;
        check_len(
            "energy ledger reactions",
            cd.constraints.len(),
            ledger.pending.reactions.len(),
        )?;
        check_len(
            "energy ledger constrained forces",
            cd.con_forces.len(),
            ledger.pending.constrained.len(),
        )?;
        cd.ledger = ledger;
        cd.trial = cd.ledger.clone();
        if let StableLimit::Estimate = cd.options.stable_limit {
            cd.update_stable_step(model, state)?;
        }
        Ok(cd)
    }

    /// Checks the model and state and allocates every work vector.
    fn prepare<M: Model + ?Sized>(
        model: &mut M,
        state: &State,
        options: CentralDifferenceOptions,
    ) -> Result<Self> {
        let setup = setup(model, state)?;
        // The hints change paths and results: check them against the forces first.
        crate::model::check_hints(model, state.t)?;
        let n = setup.n;
        if let StableLimit::Given(dt) = options.stable_limit
            && !(dt.is_finite() && dt > 0.0)
        {
            return Err(Error::InvalidParameter {
                name: "stable_limit",
                value: dt,
                expected: "a positive, finite step",
            });
        }
        check_balance_tolerance(options.balance_tolerance)?;
        check_growth_limit(options.growth_limit)?;
        let mut mass = vec![0.0; n];
        model.lumped_mass(&mut mass);
        check_lumped_mass(&mass, &setup.mask)?;
        let inv_mass: Vec<f64> = mass
            .iter()
            .zip(&setup.mask)
            .map(|(m, fixed)| if *fixed { 0.0 } else { 1.0 / m })
            .collect();
        let Setup {
            constraints,
            damping,
            extra_names: names,
            ..
        } = setup;
        let k = names.len();
        let ledger = EnergyLedger::new(names, constraints.len());
        let local = if constraints.is_empty() { 0.0 } else { 1.0 };
        let any_constraints = options.execution.reduce.max(local) > 0.0;
        let chunks = chunk_count(n);
        let damped = damping.is_damped();
        let dt_stable = match options.stable_limit {
            StableLimit::Given(dt) => Some(dt),
            _ => None,
        };
        Ok(CentralDifference {
            n,
            mass,
            inv_mass,
            reactions: vec![0.0; constraints.len()],
            con_forces: vec![0.0; constraints.len() * (3 + k)],
            in_flight: 0.0,
            constraints,
            damping,
            u_next: vec![0.0; n],
            v_half: vec![0.0; n],
            v_force: if options.force_velocity == ForceVelocity::Predicted {
                vec![0.0; n]
            } else {
                Vec::new()
            },
            v_next: vec![0.0; n],
            a_next: vec![0.0; n],
            f_int: if fused_stiffness(model, n).is_some() {
                Vec::new()
            } else {
                vec![0.0; n]
            },
            f_ext: if model.hints().unloaded {
                Vec::new()
            } else {
                vec![0.0; n]
            },
            f_damp: if !damped { Vec::new() } else { vec![0.0; n] },
            f_extra: (0..k).map(|_| vec![0.0; n]).collect(),
            partials: vec![[0.0; 10]; chunks],
            partials3: vec![[0.0; 3]; chunks],
            partials2: if any_constraints {
                vec![[0.0; 2]; chunks]
            } else {
                Vec::new()
            },
            partials1: vec![[0.0; 1]; chunks],
            trial: ledger.clone(),
            ledger,
            stable: None,
            dt_stable,
            options,
        })
    }

    /// The energy ledger after the last accepted step.
    pub fn energy(&self) -> &EnergyLedger {
        &self.ledger
    }

    /// Reaction forces at the constrained DOFs (in the order of the model's constraints) at the
    /// last accepted state (the start's before the first step):
    /// `r = m a_c - (f_ext - f_int - f_damp - sum_k f_k)`, with the constrained DOF's centred
    /// acceleration `a_c` (the motion's own at the start) and the damping force of the velocity
    /// the forces see (see docs/explicit.md). A step that fails leaves these at the last accepted
    /// state.
    pub fn reactions(&self) -> &[f64] {
        &self.ledger.pending.reactions
    }

    /// The lumped mass the integrator uses.
    pub fn lumped_mass(&self) -> &[f64] {
        &self.mass
    }

    /// The last stable-step estimate, if one was made.
    pub fn stable_step(&self) -> Option<&StableStep> {
        self.stable.as_ref()
    }

    /// The step above which [`step`](Self::step) refuses to go (`None`: unchecked or not known).
    pub fn stable_limit(&self) -> Option<f64> {
        match self.options.stable_limit {
            StableLimit::Unchecked => None,
            _ => self.dt_stable,
        }
    }

    /// Sets the relative energy-balance error above which a step is rejected (`None`: reported,
    /// not enforced); see [`CentralDifferenceOptions::balance_tolerance`].
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for a tolerance that is not positive and finite.
    pub fn set_balance_tolerance(&mut self, tolerance: Option<f64>) -> Result<()> {
        check_balance_tolerance(tolerance)?;
        self.options.balance_tolerance = tolerance;
        Ok(())
    }

    /// Changes how steps are checked against the stable limit.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for a `Given` limit that is not positive and finite.
    pub fn set_stable_limit(&mut self, limit: StableLimit) -> Result<()> {
        match limit {
            StableLimit::Given(dt) if !(dt.is_finite() && dt > 0.0) => {
                return Err(Error::InvalidParameter {
                    name: "stable_limit",
                    value: dt,
                    expected: "a positive, finite step",
                });
            }
            StableLimit::Given(dt) => self.dt_stable = Some(dt),
            _ => {}
        }
        self.options.stable_limit = limit;
        Ok(())
    }

    /// Estimates the model's stable step in configuration `state` (see [`stable_step::estimate`])
    /// and makes its damped critical step the limit that [`step`](Self::step) enforces.
    ///
    /// # Errors
    /// The estimator's errors.
    ///
    /// (Named apart from [`Integrator::reestimate_stable_step`], which returns the limit only.)
    pub fn update_stable_step<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &State,
    ) -> Result<&StableStep> {
        let mut s = stable_step::estimate(
            model,
            state,
            &self.options.stable_step,
            &self.options.execution,
        )?;
        // The damped limits of this integrator's treatment of velocity-dependent forces, at the
        // estimate and at its upper bound; for an element estimate, at the frequency 2 / dt it
        // implies (exact for two-node bars).
        let implied = |dt: f64| (dt.is_finite() && dt > 0.0).then(|| 2.0 / dt);
        let omega = s.omega_max.or_else(|| implied(s.dt_critical));
        let upper = s.omega_max_upper.or_else(|| implied(s.dt_limit));
        let ratio = |w: f64| {
            self.damping
                .ratio_at(w)
                .filter(|x| x.is_finite() && *x >= 0.0)
        };
        if let Some(w) = omega.filter(|w| *w > 0.0)
            && let Some(xi) = ratio(w)
        {
            s.xi = Some(xi);
            s.dt_critical_damped = self.options.force_velocity.critical_omega_dt(xi) / w;
        }
        if let Some(w) = upper.filter(|w| *w > 0.0 && w.is_finite())
            && let Some(xi) = ratio(w)
        {
            s.dt_limit_damped = self.options.force_velocity.critical_omega_dt(xi) / w;
        }
        // Steps are refused above the limit from the upper bound, not above the estimate (which a
        // Lanczos estimate approaches from the unsafe side).
        self.dt_stable = Some(s.dt_limit_damped);
        Ok(self.stable.insert(s))
    }

    /// Advances `state` by one step of size `dt`.
    ///
    /// # Errors
    /// [`Error::InvalidStep`], [`Error::StepAboveStableLimit`], [`Error::DimensionMismatch`] (a
    /// state or model of another size), [`Error::NonFiniteInput`] for a state time that is not
    /// finite, [`Error::InvalidParameter`] (`dt`) for a step below the rounding of the state's
    /// time (`t + dt == t`), [`Error::Model`], [`Error::NonFiniteState`],
    /// [`Error::Unstable`] and [`Error::EnergyBalance`]. On any error the state and the energy
    /// ledger are those of the last accepted step.
    pub fn step<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        dt: f64,
    ) -> Result<StepReport> {
        if !(dt.is_finite() && dt > 0.0) {
            return Err(Error::InvalidStep { dt });
        }
        check_step_advances(state.t, dt)?;
        if let (Some(dt_stable), false) = (
            self.dt_stable,
            matches!(self.options.stable_limit, StableLimit::Unchecked),
        ) && dt > dt_stable
        {
            return Err(Error::StepAboveStableLimit { dt, dt_stable });
        }
        check_len("model DOFs", self.n, model.dofs())?;
        check_len("state displacement", self.n, state.u.len())?;
        check_len("state velocity", self.n, state.v.len())?;
        check_len("state acceleration", self.n, state.a.len())?;
        let step = state.step + 1;
        let t_new = state.t + dt;
        let half = 0.5 * dt;

        // Loop A: half-step velocity and new displacement.
        {
            let (u, v, a) = (&state.u, &state.v, &state.a);
            let par = self.options.execution.parallelism.parallel_for(self.n);
            for_chunks2(
                par,
                &mut self.u_next,
                &mut self.v_half,
                &mut self.partials1,
                |start, un, vh, p| {
                    let end = start + un.len();
                    let (u, v, a) = (&u[start..end], &v[start..end], &a[start..end]);
                    p[0] = loop_a_chunk(u, v, a, un, vh, dt, half);
                },
            );
        }
        let usum = sum_partials(&self.options.execution, &self.partials1);
        for (dof, motion) in &self.constraints {
            let d = *dof;
            match motion {
                Motion::Fixed => {
                    self.u_next[d] = state.u[d];
                    self.v_half[d] = 0.0;
                }
                Motion::Displacement(g) => {
                    self.u_next[d] = g.value(t_new);
                    self.v_half[d] = (self.u_next[d] - state.u[d]) / dt;
                }
                Motion::Velocity(h) => {
                    self.v_half[d] = h.value(state.t + half);
                    self.u_next[d] = state.u[d] + dt * self.v_half[d];
                }
            }
        }
        if self.options.force_velocity == ForceVelocity::Predicted {
            for ((vf, vh), a) in self.v_force.iter_mut().zip(&self.v_half).zip(&state.a) {
                *vf = vh + half * a;
            }
        }
        if !usum[0].is_finite() {
            let dof = first_non_finite(&self.u_next).unwrap_or(0);
            return Err(Error::NonFiniteState {
                quantity: "displacement",
                dof,
                step,
                t: t_new,
            });
        }

        // Forces at t_{n+1} and loop B.
        self.end_of_step(model, step, t_new, dt)?;

        // Guards. The kinetic energy at an integer step runs ahead of the booked work by
        // dt^2/8 a.M a, which the next step books: the guard counts the next half-trapezoid of
        // the external forces and reactions (the work in flight, at least that lag) as put in.
        // From rest under a ramp step 1 has booked almost nothing; a round-off residual of the
        // model's force made that "almost" trip the guard.
        let l = &self.trial;
        let put_in = l.energy_in + self.in_flight;
        if put_in > 0.0 && l.kinetic > self.options.growth_limit * put_in {
            return Err(Error::Unstable {
                step,
                t: t_new,
                kinetic: l.kinetic,
                energy_in: put_in,
                limit: self.options.growth_limit,
            });
        }
        let rel = l.relative_balance_error();
        if let Some(tol) = self.options.balance_tolerance
            && rel > tol
        {
            return Err(Error::EnergyBalance {
                step,
                t: t_new,
                relative_error: rel,
                threshold: tol,
            });
        }

        // Accept the step.
        std::mem::swap(&mut state.u, &mut self.u_next);
        std::mem::swap(&mut state.v, &mut self.v_next);
        std::mem::swap(&mut state.a, &mut self.a_next);
        state.t = t_new;
        state.step = step;
        std::mem::swap(&mut self.ledger, &mut self.trial);
        model.accept_step(t_new);
        Ok(StepReport {
            step,
            t: t_new,
            dt,
            kinetic: self.ledger.kinetic,
            relative_balance_error: rel,
            iterations: 0,
        })
    }

    /// Evaluates the forces at `t` on `u_next` (with velocity `v_half`), computes `a_next`,
    /// `v_next`, the reactions and the trial energy ledger for a step of size `dt` (0 at the start).
    fn end_of_step<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        step: u64,
        t: f64,
        dt: f64,
    ) -> Result<()> {
        let n = self.n;
        let err = model_err(step, t);
        let fused = fused_stiffness(model, n).is_some();
        let loaded = !model.hints().unloaded;
        // Buffers left out at creation for a model that did not need them (allocated once, on
        // the first step that does).
        if !fused && self.f_int.len() != n {
            self.f_int = vec![0.0; n];
        }
        if loaded && self.f_ext.len() != n {
            self.f_ext = vec![0.0; n];
        }
        let (u, vh) = (&self.u_next, &self.v_half);
        // The velocity the forces see.
        let vf: &[f64] = match self.options.force_velocity {
            ForceVelocity::Lagged => vh,
            ForceVelocity::Predicted => &self.v_force,
        };
        if loaded {
            model.external_force(t, &mut self.f_ext).map_err(&err)?;
        }
        if !fused {
            model
                .internal_force(t, u, vf, &mut self.f_int)
                .map_err(&err)?;
        }
        let (d0, d1, damped) = match &self.damping {
            DampingModel::None => (0.0, 0.0, false),
            &DampingModel::Rayleigh { a0, a1 } => {
                if a1 != 0.0 {
                    model
                        .stiffness_product(t, u, vf, &mut self.f_damp)
                        .map_err(&err)?;
                } else {
                    self.f_damp.fill(0.0);
                }
                (a0, a1, true)
            }
            DampingModel::Matrix(c) => {
                c.mul_vec(vf, &mut self.f_damp, self.options.execution.parallelism);
                (0.0, 1.0, true)
            }
            DampingModel::Force => {
                model
                    .damping_force(t, u, vf, &mut self.f_damp)
                    .map_err(&err)?;
                (0.0, 1.0, true)
            }
        };
        for (k, f) in self.f_extra.iter_mut().enumerate() {
            model.extra_force(k, t, u, vf, f).map_err(&err)?;
        }
        // Every mutable call of the model is done: borrow its stiffness for the fused loop.
        let stiffness = fused_stiffness(model, n);

        let half = 0.5 * dt;
        {
            let body = EndLoop {
                stiffness,
                u,
                fi: &self.f_int,
                fe: if loaded { &self.f_ext } else { &[] },
                fd: &self.f_damp,
                fx: &self.f_extra,
                m: &self.mass,
                minv: &self.inv_mass,
                vh,
                vf,
                damped,
                d0,
                d1,
                half,
            };
            let par = self.options.execution.parallelism.parallel_for(n);
            body.dispatch(par, &mut self.a_next, &mut self.v_next, &mut self.partials);
        }
        // The internal and external force at one DOF, wherever they are.
        let f_int_at = |d: usize| match stiffness {
            Some(k) => k.row_dot(d, u),
            None => self.f_int[d],
        };
        let f_ext_at = |d: usize| if loaded { self.f_ext[d] } else { 0.0 };

        // Prescribed motions: centred velocity and acceleration, reactions. Their corrections
        // go into the partial sums of the chunk that holds the DOF, so that every sum is
        // finished by the reducer in global chunk order. Per chunk: the reactions' power over
        // this step, and their power now, `r . v_c` (their half of the next step's work, in
        // flight).
        self.partials2.fill([0.0; 2]);
        for (j, (dof, motion)) in self.constraints.iter().enumerate() {
            let d = *dof;
            let (fi, fe) = (f_int_at(d), f_ext_at(d));
            let fdj = if damped {
                d0 * self.mass[d] * vf[d] + d1 * self.f_damp[d]
            } else {
                0.0
            };
            let mut f = fe - fi - fdj;
            for x in &self.f_extra {
                f -= x[d];
            }
            let (v_c, a_c) = match motion {
                Motion::Fixed => (0.0, 0.0),
                // The start: the motion's own velocity and acceleration.
                Motion::Displacement(g) if dt == 0.0 => (vh[d], g.rates(t).1),
                Motion::Velocity(h) if dt == 0.0 => (vh[d], h.rates(t).0),
                Motion::Displacement(g) => {
                    let ahead = (g.value(t + dt) - self.u_next[d]) / dt;
                    (0.5 * (vh[d] + ahead), (ahead - vh[d]) / dt)
                }
                Motion::Velocity(h) => {
                    let ahead = h.value(t + half);
                    (0.5 * (vh[d] + ahead), (ahead - vh[d]) / dt)
                }
            };
            // The loop counted this DOF with a = 0 and v = vh (inverse mass 0). Its half of the
            // next trapezoid cannot come from `v + dt/2 a`: the next half-step velocity is set
            // by the prescribed motion over a step not yet known. Take the DOF out of the
            // pending scalars, keep its forces, and finish its trapezoid of this step from the
            // forces kept at the last one and this step's increment `dt vh`.
            let sums = &mut self.partials[d / CHUNK];
            sums[3] -= vh[d] * fi;
            sums[4] -= vh[d] * fe;
            sums[5] -= vh[d] * fdj;
            let stride = 3 + self.f_extra.len();
            let prev = &self.ledger.pending.constrained[j * stride..j * stride + 3];
            sums[0] += vh[d] * prev[0];
            sums[1] += vh[d] * prev[1];
            sums[2] += vh[d] * prev[2];
            self.con_forces[j * stride..j * stride + 3].copy_from_slice(&[fi, fe, fdj]);
            sums[9] += self.mass[d] * (v_c * v_c - vh[d] * vh[d]);
            self.a_next[d] = a_c;
            self.v_next[d] = v_c;
            let r = self.mass[d] * a_c - f;
            let cp = &mut self.partials2[d / CHUNK];
            cp[0] += vh[d] * (self.ledger.pending.reactions[j] + r);
            cp[1] += r * v_c;
            self.reactions[j] = r;
        }

        let sums = sum_partials(&self.options.execution, &self.partials);
        let [constraint_power, constraint_flight] = if self.partials2.is_empty() {
            [0.0; 2]
        } else {
            sum_partials(&self.options.execution, &self.partials2)
        };

        let l = &mut self.trial;
        l.copy_from(&self.ledger);
        let p = &self.ledger.pending;
        let d_int = half * (p.internal[0] + half * p.internal[1] + sums[0]);
        let d_ext = half * (p.external[0] + half * p.external[1] + sums[1]);
        let d_damp = half * (p.damping[0] + half * p.damping[1] + sums[2]);
        let d_con = half * constraint_power;
        l.internal_work += d_int;
        l.external_work += d_ext;
        l.damping_work += d_damp;
        l.constraint_work += d_con;
        l.energy_in += d_ext.abs() + d_con.abs();
        l.kinetic = 0.5 * sums[9];
        l.pending.internal = [sums[3], sums[6]];
        l.pending.external = [sums[4], sums[7]];
        l.pending.damping = [sums[5], sums[8]];
        l.pending.reactions.copy_from_slice(&self.reactions);
        // The work in flight (see the energy module, "The relative error's reference"): the
        // external forces' and the reactions' half of the next trapezoid, already determined.
        self.in_flight =
            (half * (sums[4] + half * sums[7])).abs() + (half * constraint_flight).abs();
        l.update_reference(self.in_flight);

        // Extra forces: their own dot products, one pass each.
        let par = self.options.execution.parallelism.parallel_for(n);
        for k in 0..self.f_extra.len() {
            let (fx, an, vn) = (&self.f_extra[k], &self.a_next, &self.v_next);
            for_chunks_read(par, n, &mut self.partials3, |r, p| {
                let mut s = [0.0; 3];
                for i in r {
                    s[0] += vh[i] * fx[i];
                    s[1] += vn[i] * fx[i];
                    s[2] += an[i] * fx[i];
                }
                *p = s;
            });
            // Constrained DOFs, as for the other forces: out of the pending scalars, their
            // trapezoid finished from the force kept at the last step (in their chunk's partial
            // sums).
            let stride = 3 + self.f_extra.len();
            for (j, (dof, _)) in self.constraints.iter().enumerate() {
                let d = *dof;
                let at = j * stride + 3 + k;
                let s = &mut self.partials3[d / CHUNK];
                s[0] += vh[d] * self.ledger.pending.constrained[at];
                s[1] -= vn[d] * fx[d];
                s[2] -= an[d] * fx[d];
                self.con_forces[at] = fx[d];
            }
            let s = sum_partials(&self.options.execution, &self.partials3);
            let pk = self.ledger.pending.extra[k];
            l.extra_work[k] += half * (pk[0] + half * pk[1] + s[0]);
            l.pending.extra[k] = [s[1], s[2]];
        }
        l.pending.constrained.copy_from_slice(&self.con_forces);

        let all_finite = sums.iter().all(|x| x.is_finite())
            && l.extra_work.iter().all(|x| x.is_finite())
            && l.pending.extra.iter().flatten().all(|x| x.is_finite())
            && self.reactions.iter().all(|x| x.is_finite());
        if !all_finite {
            let first_int = || match stiffness {
                Some(k) => (0..n).position(|i| !k.row_dot(i, u).is_finite()),
                None => first_non_finite(&self.f_int),
            };
            let (quantity, dof) = [
                ("external force", &self.f_ext),
                ("internal force", &self.f_int),
                ("damping force", &self.f_damp),
                ("acceleration", &self.a_next),
                ("velocity", &self.v_next),
            ]
            .into_iter()
            .chain(self.f_extra.iter().map(|f| ("extra force", f)))
            .find_map(|(q, x)| {
                if q == "internal force" {
                    first_int().map(|d| (q, d))
                } else {
                    first_non_finite(x).map(|d| (q, d))
                }
            })
            .unwrap_or(("energy", 0));
            return Err(Error::NonFiniteState {
                quantity,
                dof,
                step,
                t,
            });
        }
        Ok(())
    }
}

/// A balance tolerance is positive and finite when given.
fn check_balance_tolerance(tolerance: Option<f64>) -> Result<()> {
    match tolerance {
        Some(tol) if !(tol.is_finite() && tol > 0.0) => Err(Error::InvalidParameter {
            name: "balance_tolerance",
            value: tol,
            expected: "a positive, finite relative tolerance",
        }),
        _ => Ok(()),
    }
}

impl<M: Model + ?Sized> Integrator<M> for CentralDifference {
    fn step(&mut self, model: &mut M, state: &mut State, dt: f64) -> Result<StepReport> {
        CentralDifference::step(self, model, state, dt)
    }

    fn energy(&self) -> &EnergyLedger {
        &self.ledger
    }

    fn stable_limit(&self) -> Option<f64> {
        CentralDifference::stable_limit(self)
    }

    fn reestimate_stable_step(&mut self, model: &mut M, state: &State) -> Result<Option<f64>> {
        CentralDifference::update_stable_step(self, model, state).map(|s| Some(s.dt_limit_damped))
    }
}
