//! One integrator for the whole generalised-alpha family.
//!
//! The integrator's state, its start, accessors and the step with its cut-back and regrowth live
//! here; the Newton iterations of a sub-step in [`newton_loop`], the linear path in [`linear`]
//! with its fused kernels in [`kernels`], the energy booking in [`ledger`] and the mass operator
//! in [`mass`].

mod kernels;
mod ledger;
mod linear;
mod mass;
mod newton_loop;
#[cfg(test)]
mod tests;

use std::fmt;

use self::kernels::FUSED_SWEEP_MIN_N;
use self::mass::Mass;
use super::newton::NewtonReport;
use super::options::ImplicitOptions;
use crate::energy::EnergyLedger;
use crate::error::{Error, ModelError, Result};
use crate::linalg::{CsrMatrix, Execution, LinearSolver, Parallelism, chunk_count};
use crate::model::{Motion, Tangent};
use crate::params::AlphaParams;
use crate::run::{Integrator, StepReport};
use crate::setup::{DampingModel, Setup, constrained_start, model_err, setup};
use crate::state::State;
use crate::validate::{check_finite, check_len, check_lumped_mass, check_step_advances};

/// Outcome of one attempt at a sub-step.
enum Attempt {
    Converged(usize),
    Failed(Error),
}

/// The generalised-alpha family with Newton-Raphson iterations.
///
/// With `x_{n+1-alpha} = (1 - alpha) x_{n+1} + alpha x_n`, each step solves for `u_{n+1}` the
/// alpha-weighted balance
///
/// ```text
/// R(u_{n+1}) = M a_{n+1-alpha_m} + (1 - alpha_f) g_{n+1} + alpha_f g_n
///              - (1 - alpha_f) f_ext(t_{n+1}) - alpha_f f_ext(t_n) = 0,
/// g = f_int(t, u, v) + C v + sum_k f_k,
/// a_{n+1} = (u_{n+1} - u_n - dt v_n - dt^2 (1/2 - beta) a_n) / (beta dt^2),
/// v_{n+1} = v_n + dt ((1 - gamma) a_n + gamma a_{n+1}),
/// ```
///
/// by Newton-Raphson with the iteration matrix
///
/// ```text
/// J = (1 - alpha_m)/(beta dt^2) M + (1 - alpha_f) (gamma/(beta dt) C + K_t),
/// ```
///
/// from the predictor `u_{n+1} = u_n + dt v_n + dt^2/2 a_n`, with the tangent `K_t` from the
/// model's [`Tangent`] (a requirement checked at compile time). For a linear model
/// ([`Model::hints`](crate::model::Model::hints), [`Linearity`](crate::model::Linearity)) one
/// solve per step is exact and `J` is factored once per step size (a new step size refactors
/// numerically and reuses the symbolic analysis). A constant damping matrix
/// ([`Damping::Matrix`](crate::model::Damping::Matrix)) is part of `J`; the tangents of extra
/// forces, and of the model's own damping force
/// ([`Damping::Force`](crate::model::Damping::Force)), are left out of it.
///
/// **Start.** `M a_0 = f_ext(t_0) - C v_0 - f_int(t_0, u_0, v_0) - sum f_k`, solved with the consistent
/// or lumped mass.
///
/// **Constraints** are enforced exactly: a constrained DOF's displacement is set from its motion
/// in the predictor, and its row and column of `J` are replaced by the identity with a zero
/// residual, so no correction ever moves it (no penalty). The reaction
/// `r = M a + C v + f_int + sum f_k - f_ext` at `t_{n+1}` is available from
/// [`reactions`](AlphaIntegrator::reactions) and its work is booked in the ledger.
///
/// **Failure and cut-back.** A sub-step whose iterations do not converge, diverge, or hit a
/// model or solver failure is retried at half the size, up to `max_cutbacks` times (not a
/// non-finite force at the predictor, which is reported at once with its DOF); after
/// `regrow_after` easy sub-steps the size doubles again. Converged sub-steps are accepted into the
/// state as they are reached; when the cut-backs run out the error is returned and the state is the
/// last converged one.
///
/// **Energy.** The ledger books works by the trapezoidal rule on the displacement increment, which
/// balances exactly for the trapezoidal rule (average acceleration); for every other member the
/// difference is booked as numerical dissipation (positive for a dissipative scheme).
///
/// # Reference
/// Chung & Hulbert (1993), "A time integration algorithm for structural dynamics with improved
/// numerical dissipation: the generalized-alpha method", *J. Appl. Mech.* 60, 371-375;
/// Hilber, Hughes & Taylor (1977); Newmark (1959); Hughes (1987), *The Finite Element Method*,
/// ch. 9.
pub struct AlphaIntegrator {
    n: usize,
    params: AlphaParams,
    options: ImplicitOptions,
    solver: Box<dyn LinearSolver>,
    mass: Mass,
    mass_map: Vec<usize>,
    damping: DampingModel,
    /// The tangent's values for the stiffness part of Rayleigh damping, when the model has no
    /// stiffness product (decided at creation by asking once).
    rayleigh_tangent: Option<CsrMatrix>,
    c_map: Vec<usize>,
    k_t: CsrMatrix,
    k_map: Vec<usize>,
    jac: CsrMatrix,
    con_zero: Vec<usize>,
    con_diag: Vec<usize>,
    mask: Vec<bool>,
    constraints: Vec<(usize, Motion)>,
    linear: bool,
    /// The linear path in its streamlined form (see [`AlphaIntegrator::linear_substep`]).
    fast_linear: bool,
    /// The fused form of the streamlined path (see [`AlphaIntegrator::linear_substep_fused`])
    /// where it applies; off only in tests that compare it with the unfused form.
    fuse_linear: bool,
    /// Fewest unknowns for which the fused path runs inside the sweeps of a simplicial factor
    /// ([`FUSED_SWEEP_MIN_N`]; lowered only in tests).
    sweep_min_n: usize,
    factored_for: Option<f64>,
    /// Per-chunk partial sums of the streamlined linear path.
    partials: Vec<[f64; 4]>,
    /// Chunk partials of the global sums outside the fused loops
    /// ([`SUM_WIDTH`](crate::linalg::SUM_WIDTH) values per chunk).
    scratch: Vec<f64>,

    /// Per-chunk slots of its passes without sums.
    no_partials: Vec<()>,
    u1: Vec<f64>,
    v1: Vec<f64>,
    a1: Vec<f64>,
    du: Vec<f64>,
    /// Total correction of this sub-step from the predictor, `u1 - u_pred`.
    dtot: Vec<f64>,
    /// Copies of `u1` and `dtot` during a line search.
    usave: Vec<f64>,
    dsave: Vec<f64>,
    res: Vec<f64>,
    mw: Vec<f64>,
    tmp: Vec<f64>,
    f_int0: Vec<f64>,
    f_int1: Vec<f64>,
    f_ext0: Vec<f64>,
    f_ext1: Vec<f64>,
    f_d0: Vec<f64>,
    f_d1: Vec<f64>,
    f_x0: Vec<Vec<f64>>,
    f_x1: Vec<Vec<f64>>,
    reactions0: Vec<f64>,
    reactions1: Vec<f64>,
    /// The velocity and acceleration of each constrained DOF at the end of the current
    /// sub-step, from its motion (in the order of `constraints`).
    con_rates: Vec<(f64, f64)>,
    ledger: EnergyLedger,
    trial: EnergyLedger,
    report: NewtonReport,
    /// The largest force norm of the last evaluation (before the run's floor).
    f_step: f64,
    /// New highs of the kinetic energy while above the growth limit, and the current high.
    over_limit: (u32, f64),
}

impl fmt::Debug for AlphaIntegrator {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("AlphaIntegrator")
            .field("dofs", &self.n)
            .field("params", &self.params)
            .field("solver", &self.solver.name())
            .field("linear", &self.linear)
            .finish_non_exhaustive()
    }
}

impl AlphaIntegrator {
    /// Creates the integrator and starts the run from `state`: checks the parameters, sizes,
    /// masses and constraints, applies the constraints to the state, computes the consistent
    /// initial acceleration into `state.a` and opens the energy ledger. `solver` solves the
    /// iteration matrix (and, once, the mass matrix for the initial acceleration): a sparse
    /// Cholesky suits symmetric positive definite problems, an LU unsymmetric tangents.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for parameters or options outside their range,
    /// [`Error::EmptyModel`], [`Error::DimensionMismatch`], [`Error::NonFiniteInput`],
    /// [`Error::NonPositiveMass`], constraint errors, [`Error::Model`], [`Error::HintMismatch`]
    /// (see [`check_hints`](crate::model::check_hints)), and the solver's errors.
    /// On error `state` is unchanged.
    pub fn new<M: Tangent + ?Sized>(
        model: &mut M,
        state: &mut State,
        params: AlphaParams,
        solver: Box<dyn LinearSolver>,
        options: ImplicitOptions,
    ) -> Result<Self> {
        let mut it = Self::prepare(model, state, params, solver, options)?;
        let mut s = constrained_start(&it.constraints, state)?;
        it.forces_at(model, &s, s.step)?;
        // M a0 = f_ext - f_int - f_d - sum f_k on the free DOFs, with the constrained DOFs'
        // accelerations (their motion's, from `constrained_start`) moved to the right-hand side
        // through a consistent mass's coupling; constrained DOFs keep their motion's.
        let constrained_a: Vec<f64> = (0..it.n)
            .map(|i| if it.mask[i] { s.a[i] } else { 0.0 })
            .collect();
        let mut coupling = vec![0.0; it.n];
        if let Mass::Consistent { matrix: m, .. } = &it.mass {
            m.mul_vec(
                &constrained_a,
                &mut coupling,
                it.options.execution.parallelism,
            );
        }
        let mut rhs = vec![0.0; it.n];
        for i in 0..it.n {
            if !it.mask[i] {
                let mut f = it.f_ext0[i] - it.f_int0[i] - it.f_d0[i] - coupling[i];
                for x in &it.f_x0 {
                    f -= x[i];
                }
                rhs[i] = f;
            }
        }
        match &it.mass {
            Mass::Lumped(m) => {
                for i in 0..it.n {
                    s.a[i] = if it.mask[i] {
                        constrained_a[i]
                    } else {
                        rhs[i] / m[i]
                    };
                }
            }
            Mass::Consistent { matrix: m, .. } => {
                let mut mm =
                    CsrMatrix::pattern_union(&[m, &CsrMatrix::from_diagonal(&vec![0.0; it.n])])?;
                let map = m.positions_in(&mm)?;
                for (k, pos) in map.iter().enumerate() {
                    mm.data_mut()[*pos] = m.data()[k];
                }
                let (zero, diag) = constrained_positions(&mm, &it.mask);
                for p in zero {
                    mm.data_mut()[p] = 0.0;
                }
                for p in diag {
                    mm.data_mut()[p] = 1.0;
                }
                it.solver.analyze(&mm)?;
                it.solver.factor(&mm)?;
                it.solver.solve_in_place(&mut rhs)?;
                for i in 0..it.n {
                    s.a[i] = if it.mask[i] { constrained_a[i] } else { rhs[i] };
                }
            }
        }
        check_finite("initial acceleration", &s.a)?;
        it.solver.analyze(&it.jac)?;
        it.reactions_into(&s.a, true);
        // Ledger at the start.
        it.mass
            .mul(&s.v, &mut it.tmp, it.options.execution.parallelism);
        let ke = 0.5 * sum_dot(&it.options.execution, &mut it.scratch, &s.v, &it.tmp);
        let l = &mut it.ledger;
        l.kinetic = ke;
        l.initial_kinetic = ke;
        l.initial_internal = model.stored_energy(&s.u).unwrap_or(0.0);
        // The guard's budget: the stored energy, or the work of getting to the start's shape.
        l.energy_in =
            ke + crate::setup::start_internal_energy(model, s.t, &s.u, &it.options.execution).abs();
        it.trial.copy_from(&it.ledger);
        *state = s;
        Ok(it)
    }

    /// Continues a run from a saved state and energy ledger: the state's acceleration is taken
    /// as it is, the forces are evaluated at the state, so the continued run is bit-identical to
    /// an uninterrupted one.
    ///
    /// # Errors
    /// As for [`AlphaIntegrator::new`], and [`Error::DimensionMismatch`] when the ledger does not
    /// match the model's extra forces or constraints.
    pub fn resume<M: Tangent + ?Sized>(
        model: &mut M,
        state: &State,
        ledger: EnergyLedger,
        params: AlphaParams,
        solver: Box<dyn LinearSolver>,
        options: ImplicitOptions,
    ) -> Result<Self> {
        let mut it = Self::prepare(model, state, params, solver, options)?;
        check_finite("acceleration", &state.a)?;
        for found in [
            ledger.extra_work.len(),
            ledger.extra_names.len(),
            ledger.pending.extra.len(),
        ] {
            check_len("energy ledger extra forces", it.f_x0.len(), found)?;
        }
        check_len(
            "energy ledger reactions",
            it.constraints.len(),
            ledger.pending.reactions.len(),
        )?;
        check_len(
            "energy ledger constrained forces",
            it.ledger.pending.constrained.len(),
            ledger.pending.constrained.len(),
        )?;
        it.forces_at(model, state, state.step)?;
        it.solver.analyze(&it.jac)?;
        it.reactions0.copy_from_slice(&ledger.pending.reactions);
        it.ledger = ledger;
        it.trial = it.ledger.clone();
        Ok(it)
    }

    fn prepare<M: Tangent + ?Sized>(
        model: &mut M,
        state: &State,
        params: AlphaParams,
        mut solver: Box<dyn LinearSolver>,
        options: ImplicitOptions,
    ) -> Result<Self> {
        params.validate_for_stepping()?;
        options.validate()?;
        solver.set_execution(&options.execution);
        let Setup {
            n,
            mask,
            constraints,
            damping,
            extra_names: names,
        } = setup(model, state)?;
        // The hints change paths and results: check them against the forces first.
        crate::model::check_hints(model, state.t)?;
        let mass = match model.mass_matrix() {
            Some(m) => {
                check_len("mass matrix rows", n, m.nrows())?;
                check_len("mass matrix columns", n, m.ncols())?;
                Mass::consistent(m.clone())
            }
            None => {
                let mut m = vec![0.0; n];
                model.lumped_mass(&mut m);
                check_lumped_mass(&m, &mask)?;
                Mass::Lumped(m)
            }
        };
        let k_t = model.tangent_pattern().clone();
        check_len("tangent rows", n, k_t.nrows())?;
        check_len("tangent columns", n, k_t.ncols())?;
        // Rayleigh's stiffness part: from the stiffness product when the model gives one (asked
        // once, here), from the tangent otherwise.
        let rayleigh_tangent = match damping {
            DampingModel::Rayleigh { a1, .. } if a1 != 0.0 => {
                let mut out = vec![0.0; n];
                match model.stiffness_product(state.t, &state.u, &vec![0.0; n], &mut out) {
                    Err(ModelError::NotProvided(_)) => Some(k_t.clone()),
                    _ => None,
                }
            }
            _ => None,
        };
        let c_matrix = damping.matrix();
        let m_mat = mass.matrix();
        let eye = CsrMatrix::from_diagonal(&vec![1.0; n]);
        let mut parts: Vec<&CsrMatrix> = vec![&m_mat, &k_t, &eye];
        if let Some(c) = c_matrix {
            parts.push(c);
        }
        let jac = CsrMatrix::pattern_union(&parts)?;
        let mass_map = m_mat.positions_in(&jac)?;
        let k_map = k_t.positions_in(&jac)?;
        let c_map = match c_matrix {
            Some(c) => c.positions_in(&jac)?,
            None => Vec::new(),
        };
        let (con_zero, con_diag) = constrained_positions(&jac, &mask);
        let k = names.len();
        let ledger = EnergyLedger::new(names, constraints.len());
        let nc = constraints.len();
        // Every term of the residual must be in the iteration matrix for one correction to
        // solve a step exactly: a damping force without its matrix is not (its Newton iterations
        // then converge linearly, with the residual checked as for a nonlinear model).
        let damping_in_matrix = !matches!(damping, DampingModel::Force);
        let linear = model.hints().linearity.is_linear() && k == 0 && damping_in_matrix;
        // The streamlined linear path needs no constraints (the general path handles them).
        let fast_linear = linear && !options.refine_linear && nc == 0;
        let chunks = crate::linalg::chunk_count(n);
        Ok(AlphaIntegrator {
            n,
            params,
            options,
            solver,
            mass,
            mass_map,
            damping,
            rayleigh_tangent,
            c_map,
            k_t,
            k_map,
            jac,
            con_zero,
            con_diag,
            mask,
            constraints,
            linear,
            fast_linear,
            fuse_linear: true,
            sweep_min_n: FUSED_SWEEP_MIN_N,
            factored_for: None,
            partials: vec![[0.0; 4]; if fast_linear { chunks } else { 0 }],
            no_partials: vec![(); chunks],
            scratch: vec![0.0; crate::linalg::SUM_WIDTH * chunks],
            u1: vec![0.0; n],
            v1: vec![0.0; n],
            a1: vec![0.0; n],
            du: vec![0.0; n],
            dtot: vec![0.0; n],
            usave: vec![0.0; n],
            dsave: vec![0.0; n],
            res: vec![0.0; n],
            mw: vec![0.0; n],
            tmp: vec![0.0; n],
            f_int0: vec![0.0; n],
            f_int1: vec![0.0; n],
            f_ext0: vec![0.0; n],
            f_ext1: vec![0.0; n],
            f_d0: vec![0.0; n],
            f_d1: vec![0.0; n],
            f_x0: vec![vec![0.0; n]; k],
            f_x1: vec![vec![0.0; n]; k],
            reactions0: vec![0.0; nc],
            reactions1: vec![0.0; nc],
            con_rates: vec![(0.0, 0.0); nc],
            trial: ledger.clone(),
            ledger,
            report: NewtonReport {
                residuals: Vec::with_capacity(options_capacity()),
                ..NewtonReport::default()
            },
            over_limit: (0, 0.0),
            f_step: 0.0,
        })
    }

    /// The parameters stepped.
    pub fn params(&self) -> &AlphaParams {
        &self.params
    }

    /// The energy ledger after the last accepted step.
    pub fn energy(&self) -> &EnergyLedger {
        &self.ledger
    }

    /// Reaction forces at the constrained DOFs (in the order of the model's constraints) at the
    /// last accepted state: `r = M a + C v + f_int + sum f_k - f_ext`.
    pub fn reactions(&self) -> &[f64] {
        &self.reactions0
    }

    /// What the Newton iterations of the last step did.
    pub fn last_report(&self) -> &NewtonReport {
        &self.report
    }

    /// True when the model is stepped on the linear path (one solve per step).
    pub fn is_linear(&self) -> bool {
        self.linear
    }

    /// Evaluates external, internal, damping and extra forces at `state` into the `*0` buffers.
    fn forces_at<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        s: &State,
        step: u64,
    ) -> Result<()> {
        let err = model_err(step, s.t);
        model.external_force(s.t, &mut self.f_ext0).map_err(&err)?;
        model
            .internal_force(s.t, &s.u, &s.v, &mut self.f_int0)
            .map_err(&err)?;
        damping_force(
            model,
            &self.damping,
            &self.mass,
            s.t,
            &s.u,
            &s.v,
            &mut self.f_d0,
            &mut self.tmp,
            self.rayleigh_tangent.as_mut(),
            self.options.execution.parallelism,
        )
        .map_err(&err)?;
        for (k, f) in self.f_x0.iter_mut().enumerate() {
            model.extra_force(k, s.t, &s.u, &s.v, f).map_err(&err)?;
        }
        // As the explicit scheme reports it: the quantity, its DOF, the step and the time.
        for (quantity, x) in [
            ("external force", &self.f_ext0),
            ("internal force", &self.f_int0),
            ("damping force", &self.f_d0),
        ] {
            if let Some(dof) = x.iter().position(|v| !v.is_finite()) {
                return Err(Error::NonFiniteState {
                    quantity,
                    dof,
                    step,
                    t: s.t,
                });
            }
        }
        Ok(())
    }

    /// Reactions at the constrained DOFs from the `*0` (`start`) or `*1` forces and `acc`.
    fn reactions_into(&mut self, acc: &[f64], start: bool) {
        for (j, (dof, _)) in self.constraints.iter().enumerate() {
            let d = *dof;
            let (fi, fe, fd, fx) = if start {
                (&self.f_int0, &self.f_ext0, &self.f_d0, &self.f_x0)
            } else {
                (&self.f_int1, &self.f_ext1, &self.f_d1, &self.f_x1)
            };
            let mut r = self.mass.row_dot(d, acc) + fi[d] + fd[d] - fe[d];
            for x in fx {
                r += x[d];
            }
            if start {
                self.reactions0[j] = r;
            } else {
                self.reactions1[j] = r;
            }
        }
    }

    /// Advances `state` by `dt`, in one or more sub-steps.
    ///
    /// # Errors
    /// [`Error::InvalidStep`], [`Error::DimensionMismatch`], [`Error::NonFiniteInput`] for a state
    /// time that is not finite, [`Error::InvalidParameter`] (`dt`) for a step or sub-step below the
    /// rounding of the state's time (`t + dt == t`), [`Error::NewtonNotConverged`],
    /// [`Error::NewtonDiverged`], [`Error::Unstable`], and model or solver errors that persist at
    /// the smallest sub-step. The state is then the last converged one.
    pub fn step<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        dt: f64,
    ) -> Result<StepReport> {
        if !(dt.is_finite() && dt > 0.0) {
            return Err(Error::InvalidStep { dt });
        }
        check_step_advances(state.t, dt)?;
        check_len("model DOFs", self.n, model.dofs())?;
        check_len("state displacement", self.n, state.u.len())?;
        check_len("state velocity", self.n, state.v.len())?;
        check_len("state acceleration", self.n, state.a.len())?;
        let t_end = state.t + dt;
        let nopt = self.options.newton;
        let mut h = dt;
        let mut easy = 0u32;
        self.report.substeps = 0;
        self.report.cutbacks = 0;
        self.report.iterations = 0;
        loop {
            let remaining = t_end - state.t;
            if remaining <= 1e-12 * dt {
                break;
            }
            // The last sub-step lands on t_end; when it is the whole step, keep dt itself rather
            // than (t + dt) - t, which carries the rounding of t.
            if h >= remaining * (1.0 - 1e-9) {
                h = if self.report.substeps == 0 && self.report.cutbacks == 0 {
                    dt
                } else {
                    remaining
                };
            }
            // A sub-step cut back below the rounding of t would not advance the time (and this
            // loop would not end).
            check_step_advances(state.t, h)?;
            match self.substep(model, state, h) {
                Attempt::Converged(iters) => {
                    self.report.substeps += 1;
                    self.report.iterations += iters;
                    if iters <= nopt.easy_iterations {
                        easy += 1;
                        if easy >= nopt.regrow_after && h < dt {
                            h = (2.0 * h).min(dt);
                            easy = 0;
                        }
                    } else {
                        easy = 0;
                    }
                }
                Attempt::Failed(e) => {
                    // A cut-back cannot help an instability, a wrong size or parameter, or a
                    // non-finite force (reported at once with its DOF).
                    let non_finite_force = matches!(
                        e,
                        Error::NonFiniteState { quantity, .. } if quantity.ends_with("force")
                    );
                    let recoverable = !non_finite_force
                        && !matches!(
                            e,
                            Error::Unstable { .. }
                                | Error::DimensionMismatch { .. }
                                | Error::InvalidParameter { .. }
                        );
                    if recoverable && !self.linear && self.report.cutbacks < nopt.max_cutbacks {
                        self.report.cutbacks += 1;
                        h *= 0.5;
                        easy = 0;
                        continue;
                    }
                    let cutbacks = self.report.cutbacks;
                    return Err(match e {
                        Error::NewtonNotConverged {
                            iterations,
                            residual,
                            criterion,
                            history,
                            dof,
                            ..
                        } => Error::NewtonNotConverged {
                            t: state.t,
                            dt: h,
                            iterations,
                            residual,
                            cutbacks,
                            criterion,
                            history,
                            dof,
                        },
                        Error::NewtonDiverged {
                            iterations,
                            residual,
                            history,
                            dof,
                            ..
                        } => Error::NewtonDiverged {
                            t: state.t,
                            dt: h,
                            iterations,
                            residual,
                            cutbacks,
                            history,
                            dof,
                        },
                        other => other,
                    });
                }
            }
        }
        state.t = t_end;
        Ok(StepReport {
            step: state.step,
            t: state.t,
            dt,
            kinetic: self.ledger.kinetic,
            relative_balance_error: self.ledger.relative_balance_error(),
            iterations: u32::try_from(self.report.iterations).unwrap_or(u32::MAX),
        })
    }

    /// One attempt at a sub-step of size `h` from `state`; accepts it on convergence.
    fn substep<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        h: f64,
    ) -> Attempt {
        match self.try_substep(model, state, h) {
            Ok(iters) => Attempt::Converged(iters),
            Err(e) => Attempt::Failed(e),
        }
    }
}

/// Residual-history capacity (one entry per evaluation of a sub-step).
fn options_capacity() -> usize {
    256
}

/// Positions in `a` of the entries in constrained rows or columns: off-diagonal ones (to zero)
/// and diagonal ones (to set to 1).
fn constrained_positions(a: &CsrMatrix, mask: &[bool]) -> (Vec<usize>, Vec<usize>) {
    let (mut zero, mut diag) = (Vec::new(), Vec::new());
    for i in 0..a.nrows() {
        for k in a.indptr()[i]..a.indptr()[i + 1] {
            let j = a.indices()[k] as usize;
            if mask[i] || mask[j] {
                if i == j {
                    diag.push(k);
                } else {
                    zero.push(k);
                }
            }
        }
    }
    (zero, diag)
}

impl AlphaIntegrator {
    /// The damping force at the new state `(t1, u1, v1)` into `f_d1`.
    pub(super) fn damping_at_new<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        t1: f64,
    ) -> std::result::Result<(), ModelError> {
        damping_force(
            model,
            &self.damping,
            &self.mass,
            t1,
            &self.u1,
            &self.v1,
            &mut self.f_d1,
            &mut self.tmp,
            self.rayleigh_tangent.as_mut(),
            self.options.execution.parallelism,
        )
    }
}

/// The global dot product `x . y`, through the reducer, with the integrator's `scratch` for the
/// chunk partials.
pub(super) fn sum_dot(execution: &Execution, scratch: &mut [f64], x: &[f64], y: &[f64]) -> f64 {
    crate::linalg::dot_with(x, y, execution, &mut scratch[..chunk_count(x.len())])
}

/// The damping force `C v` of the model into `out` (`tmp` is scratch). For Rayleigh damping
/// `K v` comes from the model's stiffness product, or, when `rayleigh_tangent` is given (the
/// model has no stiffness product), from its tangent at `(t, u, v)` evaluated into it.
#[allow(clippy::too_many_arguments)]
fn damping_force<M: Tangent + ?Sized>(
    model: &mut M,
    damping: &DampingModel,
    mass: &Mass,
    t: f64,
    u: &[f64],
    v: &[f64],
    out: &mut [f64],
    tmp: &mut [f64],
    rayleigh_tangent: Option<&mut CsrMatrix>,
    par: Parallelism,
) -> std::result::Result<(), ModelError> {
    match *damping {
        DampingModel::None => {
            out.fill(0.0);
            Ok(())
        }
        DampingModel::Rayleigh { a0, a1 } => {
            if a1 != 0.0 {
                match rayleigh_tangent {
                    Some(k) => {
                        model.tangent_stiffness(t, u, v, k)?;
                        k.mul_vec(v, out, par);
                    }
                    None => model.stiffness_product(t, u, v, out)?,
                }
            } else {
                out.fill(0.0);
            }
            mass.mul(v, tmp, par);
            for (o, mv) in out.iter_mut().zip(tmp.iter()) {
                *o = a1 * *o + a0 * mv;
            }
            Ok(())
        }
        DampingModel::Matrix(ref c) => {
            c.mul_vec(v, out, par);
            Ok(())
        }
        DampingModel::Force => model.damping_force(t, u, v, out),
    }
}

impl<M: Tangent + ?Sized> Integrator<M> for AlphaIntegrator {
    fn step(&mut self, model: &mut M, state: &mut State, dt: f64) -> Result<StepReport> {
        AlphaIntegrator::step(self, model, state, dt)
    }

    fn energy(&self) -> &EnergyLedger {
        &self.ledger
    }

    fn stable_limit(&self) -> Option<f64> {
        None
    }

    fn reestimate_stable_step(&mut self, _model: &mut M, _state: &State) -> Result<Option<f64>> {
        Ok(None)
    }
}
