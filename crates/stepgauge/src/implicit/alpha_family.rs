//! One integrator for the whole generalised-alpha family.

use std::fmt;
use std::sync::Arc;

use super::newton::{NewtonOptions, NewtonReport, NewtonVariant};
use crate::energy::EnergyLedger;
use crate::error::Criterion;
use crate::error::{Error, ModelError, Result};
use crate::linalg::{
    CsrMatrix, GlobalReduce, LinearSolver, Parallelism, Serial, SimplicialFactor, SparseCholesky,
};
use crate::model::{Damping, Model, Motion, TimeFunction};
use crate::params::AlphaParams;
use crate::run::{Integrator, StepReport};
use crate::setup::{
    Setup, check_growth_limit, check_lumped_mass, check_step_advances, constrained_start,
    model_err, setup,
};
use crate::state::{State, check_finite, check_len};

/// Settings of [`AlphaIntegrator`].
#[derive(Clone)]
pub struct ImplicitOptions {
    /// Newton iterations, cut-back and regrowth.
    pub newton: NewtonOptions,
    /// Reject a step whose kinetic energy exceeds this multiple of all the energy put into the
    /// model (see [`CentralDifferenceOptions::growth_limit`](crate::explicit::CentralDifferenceOptions::growth_limit)).
    /// Default 10.
    pub growth_limit: f64,
    /// The growth guard trips only when the kinetic energy, while above the limit, sets this many
    /// new highs: after a start with high-frequency content, dissipative members overshoot in
    /// velocity for a step and then decay (Hilber & Hughes 1978, "Collocation, dissipation and
    /// 'overshoot' for time integration schemes in structural dynamics", *Earthquake Eng. Struct.
    /// Dyn.* 6), which is not an instability, while an unstable mode keeps setting new highs.
    /// Default 3.
    pub growth_patience: u32,
    /// Linear path: refine each solution once with the residual of the assembled matrix (one
    /// more evaluation and solve per step). A factor reused for many steps carries the same
    /// rounding into every solve, which makes the trapezoidal rule drift in energy by about one
    /// ulp per step (about 7e-12 relative over 10^4 steps at `omega dt = 5` with the sparse
    /// Cholesky); one refinement makes the rounding vary from step to step again. Default: off.
    pub refine_linear: bool,
    /// When matrix products run in parallel.
    pub parallel: Parallelism,
    /// Completes global sums (the seam for distributed runs). Default: [`Serial`].
    pub reduce: Arc<dyn GlobalReduce>,
}

impl Default for ImplicitOptions {
    fn default() -> Self {
        ImplicitOptions {
            newton: NewtonOptions::default(),
            growth_limit: 10.0,
            growth_patience: 3,
            refine_linear: false,
            parallel: Parallelism::default(),
            reduce: Arc::new(Serial),
        }
    }
}

impl fmt::Debug for ImplicitOptions {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("ImplicitOptions")
            .field("newton", &self.newton)
            .field("growth_limit", &self.growth_limit)
            .field("growth_patience", &self.growth_patience)
            .field("refine_linear", &self.refine_linear)
            .field("parallel", &self.parallel)
            .finish_non_exhaustive()
    }
}

/// The mass operator: lumped diagonal or consistent sparse matrix (with its diagonal kept as a
/// vector when only diagonal entries are stored, so that products are element-wise).
#[derive(Debug, Clone)]
enum Mass {
    Lumped(Vec<f64>),
    Consistent {
        matrix: CsrMatrix,
        diagonal: Option<Vec<f64>>,
    },
}

impl Mass {
    fn consistent(matrix: CsrMatrix) -> Mass {
        let diagonal = matrix.is_diagonal().then(|| matrix.diagonal());
        Mass::Consistent { matrix, diagonal }
    }

    /// The mass as a diagonal, when it is one.
    fn diagonal(&self) -> Option<&[f64]> {
        match self {
            Mass::Lumped(m) => Some(m),
            Mass::Consistent { diagonal, .. } => diagonal.as_deref(),
        }
    }

    fn mul(&self, x: &[f64], y: &mut [f64], par: Parallelism) {
        match self {
            Mass::Lumped(m)
            | Mass::Consistent {
                diagonal: Some(m), ..
            } => {
                for ((yi, mi), xi) in y.iter_mut().zip(m).zip(x) {
                    *yi = mi * xi;
                }
            }
            Mass::Consistent { matrix, .. } => matrix.mul_vec(x, y, par),
        }
    }

    /// Row `i` of `M x`.
    fn row_dot(&self, i: usize, x: &[f64]) -> f64 {
        match self {
            Mass::Lumped(m)
            | Mass::Consistent {
                diagonal: Some(m), ..
            } => m[i] * x[i],
            Mass::Consistent { matrix, .. } => matrix.row(i).map(|(j, v)| v * x[j]).sum(),
        }
    }

    fn matrix(&self) -> CsrMatrix {
        match self {
            Mass::Lumped(m) => CsrMatrix::from_diagonal(m),
            Mass::Consistent { matrix, .. } => matrix.clone(),
        }
    }

    /// The stored values, in the order of [`matrix`](Self::matrix)'s pattern.
    fn values(&self) -> &[f64] {
        match self {
            Mass::Lumped(m) => m,
            Mass::Consistent { matrix, .. } => matrix.data(),
        }
    }
}

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
/// from the predictor `u_{n+1} = u_n + dt v_n + dt^2/2 a_n`. For a linear model
/// ([`Model::is_linear`]) one solve per step is exact and `J` is factored once per step size (a
/// new step size refactors numerically and reuses the symbolic analysis). The tangents of extra
/// forces, and of a damping force without [`Model::damping_matrix`], are left out of `J`.
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
/// model or solver failure is retried at half the size, up to `max_cutbacks` times; after
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
    damping: Damping,
    c_matrix: Option<CsrMatrix>,
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
    /// The free DOF with the largest residual at the last evaluation.
    worst_dof: usize,
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
    /// [`Error::NonPositiveMass`], constraint errors, [`Error::Model`] (also when the model has no
    /// [`tangent_pattern`](Model::tangent_pattern)), and the solver's errors. On error `state` is
    /// unchanged.
    pub fn new<M: Model + ?Sized>(
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
            m.mul_vec(&constrained_a, &mut coupling, it.options.parallel);
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
        it.mass.mul(&s.v, &mut it.tmp, it.options.parallel);
        let ke = 0.5
            * it.options
                .reduce
                .sum(s.v.iter().zip(&it.tmp).map(|(a, b)| a * b).sum());
        let l = &mut it.ledger;
        l.kinetic = ke;
        l.initial_kinetic = ke;
        l.initial_internal = model.stored_energy(&s.u).unwrap_or(0.0);
        // The guard's budget: the stored energy, or the work of getting to the start's shape.
        l.energy_in = ke + crate::setup::start_internal_energy(model, s.t, &s.u).abs();
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
    pub fn resume<M: Model + ?Sized>(
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

    fn prepare<M: Model + ?Sized>(
        model: &mut M,
        state: &State,
        params: AlphaParams,
        solver: Box<dyn LinearSolver>,
        options: ImplicitOptions,
    ) -> Result<Self> {
        params.validate_for_stepping()?;
        options.newton.validate()?;
        check_growth_limit(options.growth_limit)?;
        let Setup {
            n,
            mask,
            constraints,
            damping,
            extra_names: names,
        } = setup(model, state)?;
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
        let k_t = model.tangent_pattern().cloned().ok_or(Error::Model {
            step: state.step,
            t: state.t,
            source: ModelError::NotProvided("tangent_pattern"),
        })?;
        check_len("tangent rows", n, k_t.nrows())?;
        check_len("tangent columns", n, k_t.ncols())?;
        let c_matrix = match damping {
            Damping::Force => model.damping_matrix().cloned(),
            _ => None,
        };
        if let Some(c) = &c_matrix {
            check_len("damping matrix rows", n, c.nrows())?;
            check_len("damping matrix columns", n, c.ncols())?;
        }
        let m_mat = mass.matrix();
        let eye = CsrMatrix::from_diagonal(&vec![1.0; n]);
        let mut parts: Vec<&CsrMatrix> = vec![&m_mat, &k_t, &eye];
        if let Some(c) = &c_matrix {
            parts.push(c);
        }
        let jac = CsrMatrix::pattern_union(&parts)?;
        let mass_map = m_mat.positions_in(&jac)?;
        let k_map = k_t.positions_in(&jac)?;
        let c_map = match &c_matrix {
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
        let damping_in_matrix = match damping {
            Damping::None | Damping::Rayleigh { .. } => true,
            Damping::Force => c_matrix.is_some(),
        };
        let linear = model.is_linear() && k == 0 && damping_in_matrix;
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
            c_matrix,
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
            worst_dof: 0,
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
    fn forces_at<M: Model + ?Sized>(&mut self, model: &mut M, s: &State, step: u64) -> Result<()> {
        let err = model_err(step, s.t);
        model.external_force(s.t, &mut self.f_ext0).map_err(&err)?;
        model
            .internal_force(s.t, &s.u, &s.v, &mut self.f_int0)
            .map_err(&err)?;
        damping_force(
            model,
            self.damping,
            &self.mass,
            s.t,
            &s.u,
            &s.v,
            &mut self.f_d0,
            &mut self.tmp,
            self.options.parallel,
        )
        .map_err(&err)?;
        for (k, f) in self.f_x0.iter_mut().enumerate() {
            model.extra_force(k, s.t, &s.u, &s.v, f).map_err(&err)?;
        }
        for (what, x) in [
            ("external force", &self.f_ext0),
            ("internal force", &self.f_int0),
            ("damping force", &self.f_d0),
        ] {
            check_finite(what, x)?;
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

    fn sum_dot(&self, x: &[f64], y: &[f64]) -> f64 {
        let s = x.iter().zip(y).map(|(a, b)| a * b).sum::<f64>();
        self.options.reduce.sum(s)
    }

    /// Advances `state` by `dt`, in one or more sub-steps.
    ///
    /// # Errors
    /// [`Error::InvalidStep`], [`Error::DimensionMismatch`], [`Error::NonFiniteInput`] for a state
    /// time that is not finite, [`Error::InvalidParameter`] (`dt`) for a step or sub-step below the
    /// rounding of the state's time (`t + dt == t`), [`Error::NewtonNotConverged`],
    /// [`Error::NewtonDiverged`], [`Error::Unstable`], and model or solver errors that persist at
    /// the smallest sub-step. The state is then the last converged one.
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
    fn substep<M: Model + ?Sized>(&mut self, model: &mut M, state: &mut State, h: f64) -> Attempt {
        match self.try_substep(model, state, h) {
            Ok(iters) => Attempt::Converged(iters),
            Err(e) => Attempt::Failed(e),
        }
    }

    fn try_substep<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        h: f64,
    ) -> Result<usize> {
        if self.fast_linear {
            return self.linear_substep(model, state, h);
        }
        let (t0, t1) = (state.t, state.t + h);
        let step = state.step + 1;
        let p = self.params;
        let cm = (1.0 - p.alpha_m) / (p.beta * h * h);
        let cc = p.gamma / (p.beta * h);
        let nopt = self.options.newton;
        // Predictor: constant acceleration; constrained DOFs from their motion.
        for i in 0..self.n {
            self.u1[i] = state.u[i] + h * state.v[i] + 0.5 * h * h * state.a[i];
        }
        self.dtot.fill(0.0);
        // Rates of a prescribed displacement cost 61 evaluations of a plain function: DOFs that
        // share the function (a base motion on many nodes) reuse the rates of the one before.
        let mut shared: Option<(&TimeFunction, (f64, f64))> = None;
        for ((dof, motion), rates) in self.constraints.iter().zip(&mut self.con_rates) {
            let d = *dof;
            // The displacement at t1, and the velocity and acceleration there from the motion
            // itself (not from the scheme's relations, whose acceleration of a prescribed
            // displacement is only first order and, for the trapezoidal rule, drifts: its
            // error mode at z = -1 is marginal and driven at its own frequency).
            let target = match motion {
                Motion::Fixed => {
                    *rates = (0.0, 0.0);
                    state.u[d]
                }
                Motion::Displacement(g) => {
                    *rates = match shared {
                        Some((f, r)) if f.same_as(g) => r,
                        _ => g.rates(t1),
                    };
                    shared = Some((g, *rates));
                    g.value(t1)
                }
                Motion::Velocity(hv) => {
                    *rates = (hv.value(t1), hv.rates(t1).0);
                    state.u[d] + h * hv.value(t0 + 0.5 * h)
                }
            };
            self.dtot[d] = target - self.u1[d];
            self.u1[d] = target;
        }
        self.report.residuals.clear();
        let (mut r_norm, mut f_ref) = self.evaluate(model, state, t1, h, step)?;
        let mut r_first = r_norm;
        let mut e_first = f64::NAN;
        let mut du_norm = f64::INFINITY;
        let mut last_energy = f64::INFINITY;
        let mut iterations = 0usize;
        loop {
            let rel = r_norm / f_ref.max(f64::MIN_POSITIVE);
            if self.report.residuals.len() < self.report.residuals.capacity() {
                self.report.residuals.push(rel);
            }
            if !rel.is_finite() {
                return Err(self.diverged(t0, h, iterations, rel));
            }
            let (converged, failing) = if iterations == 0 {
                (r_norm == 0.0 || rel <= 1e-14, Criterion::Residual)
            } else if self.linear {
                (
                    iterations > usize::from(self.options.refine_linear),
                    Criterion::Residual,
                )
            } else {
                // The floors of the criteria (see NewtonOptions).
                let step_norm = self.diff_norm(state);
                let u_norm = self.sum_dot(&self.u1, &self.u1).sqrt();
                let u_ref = step_norm.max(u_norm).max(f64::MIN_POSITIVE);
                let e_ref = e_first.max(u_norm * f_ref);
                let residual_ok = rel <= nopt.residual_tolerance;
                let displacement_ok = du_norm <= nopt.displacement_tolerance * u_ref;
                let energy_ok = last_energy <= nopt.energy_tolerance * e_ref;
                // A stall at round-off (see NewtonOptions): the last three residuals within a
                // factor 2 of each other and below the square root of the tolerance.
                let stalled = iterations >= 3
                    && rel <= nopt.residual_tolerance.sqrt()
                    && plateau(&self.report.residuals);
                let failing = if !residual_ok {
                    Criterion::Residual
                } else if !displacement_ok {
                    Criterion::Displacement
                } else {
                    Criterion::Energy
                };
                (
                    (residual_ok && displacement_ok && energy_ok) || stalled,
                    failing,
                )
            };
            if converged {
                break;
            }
            if iterations >= nopt.max_iterations {
                return Err(Error::NewtonNotConverged {
                    t: t0,
                    dt: h,
                    iterations,
                    residual: rel,
                    cutbacks: 0,
                    criterion: failing,
                    history: self.history(),
                    dof: self.worst_dof,
                });
            }
            if iterations >= 1 && r_norm > nopt.divergence_factor * r_first {
                return Err(self.diverged(t0, h, iterations, rel));
            }
            // Iteration matrix.
            let rebuild = if self.linear {
                self.factored_for != Some(h)
            } else {
                match nopt.variant {
                    NewtonVariant::Full => true,
                    NewtonVariant::Modified { refresh_every } => {
                        iterations == 0
                            || (refresh_every > 0 && iterations.is_multiple_of(refresh_every))
                    }
                }
            };
            if rebuild {
                model
                    .tangent_stiffness(t1, &self.u1, &self.v1, &mut self.k_t)
                    .map_err(model_err(step, t1))?;
                check_finite("tangent stiffness", self.k_t.data())?;
                self.assemble(cm, cc);
                self.factored_for = None;
                self.solver.factor(&self.jac)?;
                if self.linear {
                    self.factored_for = Some(h);
                }
            }
            // Correction: J du = -R (zero at constrained DOFs).
            for i in 0..self.n {
                self.du[i] = -self.res[i];
            }
            self.solver.solve_in_place(&mut self.du)?;
            for (dof, _) in &self.constraints {
                self.du[*dof] = 0.0;
            }
            let energy = self.sum_dot(&self.du, &self.res).abs();
            if iterations == 0 {
                e_first = energy;
            }
            last_energy = energy;
            let mut s = 1.0;
            if nopt.line_search && !self.linear {
                self.usave.copy_from_slice(&self.u1);
                self.dsave.copy_from_slice(&self.dtot);
                let r_start = r_norm;
                for attempt in 0..5 {
                    for i in 0..self.n {
                        self.u1[i] = self.usave[i] + s * self.du[i];
                        self.dtot[i] = self.dsave[i] + s * self.du[i];
                    }
                    let (r, f) = self.evaluate(model, state, t1, h, step)?;
                    r_norm = r;
                    f_ref = f;
                    if r <= (1.0 - 1e-4 * s) * r_start || attempt == 4 {
                        break;
                    }
                    s *= 0.5;
                }
            } else {
                for i in 0..self.n {
                    self.u1[i] += self.du[i];
                    self.dtot[i] += self.du[i];
                }
                let (r, f) = self.evaluate(model, state, t1, h, step)?;
                r_norm = r;
                f_ref = f;
            }
            du_norm = s * self.sum_dot(&self.du, &self.du).sqrt();
            if iterations == 0 {
                r_first = r_first.max(r_norm);
            }
            iterations += 1;
        }
        self.accept(model, state, t1, step)?;
        Ok(iterations)
    }

    /// The linear path, streamlined: one sub-step of a linear model without constraints whose
    /// damping force is in the iteration matrix, in a few fused passes over the vectors.
    ///
    /// The balance `R(u) = M w + (1 - alpha_f) g(u) + alpha_f g_n - f_alpha` is affine in `u`
    /// with the derivative `J`, so one correction from the predictor solves it:
    ///
    /// 1. predictor `u_p = u_n + h v_n + h^2/2 a_n` (and `v_p = v_n + h a_n`); the model's
    ///    internal force `K u_p` (and damping force at `v_p`): the one product with `K`;
    /// 2. `R_p = M a_n + (1 - alpha_f) g(u_p) + alpha_f g_n - f_alpha`, `J d = -R_p`;
    /// 3. `u_{n+1} = u_p + d`, `a_{n+1} = a_n + d / (beta h^2)`,
    ///    `v_{n+1} = v_p + gamma d / (beta h)` (the Newmark relations on the correction, as in
    ///    the general path), and the new `g` from the balance that the solve has just satisfied,
    ///    `(1 - alpha_f) g_{n+1} = f_alpha - alpha_f g_n - M w`, instead of a second product
    ///    with `K` (the two differ by the solve's residual, at the level of its backward error);
    ///    the internal force is `g` less the damping force at `v_{n+1}` (one product with `C`
    ///    when damped);
    /// 4. the works and the kinetic energy of the ledger in the same pass.
    ///
    /// Without constraints `R = 0` holds at every DOF, which the balance form needs; a model with
    /// constraints takes the general path.
    // `x - x` is 0 for a finite `x` and NaN otherwise: the sums' fourth entry detects a
    // non-finite result in the same pass.
    #[allow(clippy::eq_op)]
    fn linear_substep<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        h: f64,
    ) -> Result<usize> {
        let t1 = state.t + h;
        let step = state.step + 1;
        let p = self.params;
        let cm = (1.0 - p.alpha_m) / (p.beta * h * h);
        let cc = p.gamma / (p.beta * h);
        let (af, bf) = (1.0 - p.alpha_f, p.alpha_f);
        let (am, bm) = (1.0 - p.alpha_m, p.alpha_m);
        let bh = p.beta * h;
        let bh2 = bh * h;
        let g = p.gamma;
        let n = self.n;
        let par = self.options.parallel.parallel_for(n);
        let damped = !matches!(self.damping, Damping::None);
        self.report.residuals.clear();
        let err = model_err(step, t1);
        if self.factored_for != Some(h) {
            self.factored_for = None;
            model
                .tangent_stiffness(t1, &state.u, &state.v, &mut self.k_t)
                .map_err(&err)?;
            check_finite("tangent stiffness", self.k_t.data())?;
            self.assemble(cm, cc);
            self.solver.factor(&self.jac)?;
            self.factored_for = Some(h);
        }
        let fused = self.fuse_linear
            && !damped
            && self.mass.diagonal().is_some()
            && [state.u.len(), state.v.len(), state.a.len()] == [n; 3]
            && model
                .linear_stiffness()
                .is_some_and(|k| k.nrows() == n && k.ncols() == n);
        if fused {
            return self.linear_substep_fused(model, state, h);
        }
        model.external_force(t1, &mut self.f_ext1).map_err(&err)?;
        // 1. Predictor (the velocity only where a damping force needs it: the internal force
        // of a linear model does not depend on it).
        let (u0, v0, a0) = (&state.u[..], &state.v[..], &state.a[..]);
        let predict = |i: usize| u0[i] + h * v0[i] + 0.5 * h * h * a0[i];
        if damped {
            crate::linalg::for_chunks2(
                par,
                &mut self.u1,
                &mut self.v1,
                &mut self.no_partials,
                |start, u1, v1, _| {
                    for k in 0..u1.len() {
                        let i = start + k;
                        u1[k] = predict(i);
                        v1[k] = v0[i] + h * a0[i];
                    }
                },
            );
        } else {
            crate::linalg::for_chunks1(par, &mut self.u1, &mut self.no_partials, |start, u1, _| {
                for (k, x) in u1.iter_mut().enumerate() {
                    *x = predict(start + k);
                }
            });
        }
        let v_force = if damped { &self.v1[..] } else { v0 };
        model
            .internal_force(t1, &self.u1, v_force, &mut self.f_int1)
            .map_err(&err)?;
        if damped {
            damping_force(
                model,
                self.damping,
                &self.mass,
                t1,
                &self.u1,
                &self.v1,
                &mut self.f_d1,
                &mut self.tmp,
                self.options.parallel,
            )
            .map_err(&err)?;
        }
        // 2. Right-hand side -R_p into du, with M a_n.
        let md = self.mass.diagonal();
        if md.is_none() {
            self.mass.mul(a0, &mut self.mw, self.options.parallel);
        }
        {
            let (mw, fi0, fi1, fd0, fd1) =
                (&self.mw, &self.f_int0, &self.f_int1, &self.f_d0, &self.f_d1);
            let (fe0, fe1) = (&self.f_ext0, &self.f_ext1);
            let rhs = |i: usize| {
                let ma = match md {
                    Some(m) => m[i] * a0[i],
                    None => mw[i],
                };
                let (g1, g0) = if damped {
                    (fi1[i] + fd1[i], fi0[i] + fd0[i])
                } else {
                    (fi1[i], fi0[i])
                };
                let fe = af * fe1[i] + bf * fe0[i];
                -(ma + (af * g1 + bf * g0) - fe)
            };
            match md {
                // Lumped, undamped, alpha_f = 0: the same value, without reading g_n and
                // f_ext(t_n) (multiplied by zero).
                Some(m) if !damped && bf == 0.0 => crate::linalg::for_chunks1(
                    par,
                    &mut self.du,
                    &mut self.no_partials,
                    |start, du, _| {
                        for (k, out) in du.iter_mut().enumerate() {
                            let i = start + k;
                            *out = -(m[i] * a0[i] + fi1[i] - fe1[i]);
                        }
                    },
                ),
                _ => crate::linalg::for_chunks1(
                    par,
                    &mut self.du,
                    &mut self.no_partials,
                    |start, du, _| {
                        for (k, out) in du.iter_mut().enumerate() {
                            *out = rhs(start + k);
                        }
                    },
                ),
            }
        }
        self.solver.solve_in_place(&mut self.du)?;
        // 3. Update, the new balance force, and the works. The predictor is formed again rather
        // than read back (one stream less).
        let lumped_undamped = md.is_some() && !damped;
        {
            let (du, fi0, fd0, fe0, fe1) = (
                &self.du,
                &self.f_int0,
                &self.f_d0,
                &self.f_ext0,
                &self.f_ext1,
            );
            let outs = [&mut self.u1, &mut self.v1, &mut self.a1, &mut self.f_int1];
            let outs = outs.map(|v| &mut v[..]);
            match md {
                Some(m) if !damped => crate::linalg::for_chunks4(
                    par,
                    outs,
                    &mut self.partials,
                    |start, [u1, v1, a1, f1], sums| {
                        let mut s = [0.0; 4];
                        for k in 0..u1.len() {
                            let i = start + k;
                            let d = du[i];
                            let un = predict(i) + d;
                            let an = a0[i] + d / bh2;
                            let vn = v0[i] + h * a0[i] + (g * d) / bh;
                            u1[k] = un;
                            a1[k] = an;
                            v1[k] = vn;
                            // (1 - alpha_f) g1 = f_alpha - alpha_f g0 - M w.
                            let w = am * an + bm * a0[i];
                            let fe = af * fe1[i] + bf * fe0[i];
                            let g1 = (fe - bf * fi0[i] - m[i] * w) / af;
                            f1[k] = g1;
                            let step_u = un - u0[i];
                            s[0] += step_u * (fi0[i] + g1);
                            s[1] += step_u * (fe0[i] + fe1[i]);
                            s[2] += m[i] * vn * vn;
                            s[3] += zero_if_finite(un)
                                + zero_if_finite(an)
                                + zero_if_finite(vn)
                                + zero_if_finite(g1);
                        }
                        *sums = s;
                    },
                ),
                _ => crate::linalg::for_chunks4(
                    par,
                    outs,
                    &mut self.partials,
                    |start, [u1, v1, a1, f1], sums| {
                        let mut s = [0.0; 4];
                        for k in 0..u1.len() {
                            let i = start + k;
                            let d = du[i];
                            let un = predict(i) + d;
                            let an = a0[i] + d / bh2;
                            let vn = v0[i] + h * a0[i] + (g * d) / bh;
                            u1[k] = un;
                            a1[k] = an;
                            v1[k] = vn;
                            let w = am * an + bm * a0[i];
                            let step_u = un - u0[i];
                            s[1] += step_u * (fe0[i] + fe1[i]);
                            s[3] += zero_if_finite(un) + zero_if_finite(an) + zero_if_finite(vn);
                            match md {
                                Some(m) => {
                                    let g0 = fi0[i] + fd0[i];
                                    let fe = af * fe1[i] + bf * fe0[i];
                                    let g1 = (fe - bf * g0 - m[i] * w) / af;
                                    f1[k] = g1;
                                    s[3] += zero_if_finite(g1);
                                    s[2] += m[i] * vn * vn;
                                }
                                // M w in the next pass.
                                None => f1[k] = w,
                            }
                        }
                        *sums = s;
                    },
                ),
            }
        }
        let mut sums = crate::linalg::sum_partials(&self.partials);
        if !sums[3].is_finite() {
            // Name the DOF.
            for (what, x) in [
                ("displacement", &self.u1),
                ("velocity", &self.v1),
                ("acceleration", &self.a1),
            ] {
                if let Some(dof) = x.iter().position(|v| !v.is_finite()) {
                    return Err(Error::NonFiniteState {
                        quantity: what,
                        dof,
                        step,
                        t: t1,
                    });
                }
            }
        }
        let (mut w_int, w_ext, mut ke, mut w_damp) = (sums[0], sums[1], sums[2], 0.0);
        if !lumped_undamped {
            if md.is_none() {
                // M w (w was left in f_int1) and M v_{n+1}.
                self.mass
                    .mul(&self.f_int1, &mut self.mw, self.options.parallel);
                self.mass
                    .mul(&self.v1, &mut self.res, self.options.parallel);
            }
            if damped {
                damping_force(
                    model,
                    self.damping,
                    &self.mass,
                    t1,
                    &self.u1,
                    &self.v1,
                    &mut self.f_d1,
                    &mut self.tmp,
                    self.options.parallel,
                )
                .map_err(&err)?;
            }
            let (mw, mv, fi0, fd0, fd1, fe0, fe1, u1, v1) = (
                &self.mw,
                &self.res,
                &self.f_int0,
                &self.f_d0,
                &self.f_d1,
                &self.f_ext0,
                &self.f_ext1,
                &self.u1,
                &self.v1,
            );
            crate::linalg::for_chunks1(
                par,
                &mut self.f_int1,
                &mut self.partials,
                |start, f1, sums| {
                    let mut s = [0.0; 4];
                    for k in 0..f1.len() {
                        let i = start + k;
                        let g0 = fi0[i] + fd0[i];
                        let g1 = match md {
                            Some(_) => f1[k],
                            None => {
                                let fe = af * fe1[i] + bf * fe0[i];
                                s[2] += v1[i] * mv[i];
                                (fe - bf * g0 - mw[i]) / af
                            }
                        };
                        let fi = g1 - fd1[i];
                        f1[k] = fi;
                        let step_u = u1[i] - u0[i];
                        s[0] += step_u * (fi0[i] + fi);
                        s[1] += step_u * (fd0[i] + fd1[i]);
                        s[3] += zero_if_finite(fi) + zero_if_finite(fd1[i]);
                    }
                    *sums = s;
                },
            );
            sums = crate::linalg::sum_partials(&self.partials);
            w_int = sums[0];
            w_damp = sums[1];
            if md.is_none() {
                ke = sums[2];
            }
        }
        if !sums[3].is_finite() {
            check_finite("internal force", &self.f_int1)?;
            check_finite("damping force", &self.f_d1)?;
        }
        let mut w = [w_int, w_ext, w_damp, 0.0];
        self.options.reduce.sum_in_place(&mut w);
        let ke = 0.5 * self.options.reduce.sum(ke);
        self.book(model, state, t1, step, w, ke)?;
        Ok(1)
    }

    /// The streamlined linear path of [`linear_substep`](Self::linear_substep) for a diagonal
    /// mass, no damping and a model that gives its stiffness ([`Model::linear_stiffness`]), in
    /// two passes around the solve instead of four, with the same arithmetic (bit for bit the
    /// same state, forces and ledger):
    ///
    /// 1. one pass over the rows of `K` forms `-R_p` directly: the predictor `u_p` is computed
    ///    on the fly for each entry of a row (`K u_p` summed in stored order, as `spmv` does), so
    ///    that neither `u_p` nor `K u_p` is stored and read back;
    /// 2. the solve;
    /// 3. one pass forms `u`, `v`, `a`, the balance force and the ledger's sums: per chunk, an
    ///    element-wise loop without sums (which the compiler vectorises: its three divisions
    ///    dominated the scalar loop) and then the sums in the same order as before, reading the
    ///    chunk back from cache.
    ///
    /// An unloaded model ([`Model::is_unloaded`]) is not asked for its external force, and its
    /// external-force vectors (zero) are not read.
    #[allow(clippy::eq_op)]
    fn linear_substep_fused<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        h: f64,
    ) -> Result<usize> {
        let t1 = state.t + h;
        let step = state.step + 1;
        let p = self.params;
        let (af, bf) = (1.0 - p.alpha_f, p.alpha_f);
        let (am, bm) = (1.0 - p.alpha_m, p.alpha_m);
        let bh = p.beta * h;
        let bh2 = bh * h;
        let g = p.gamma;
        let n = self.n;
        let par = self.options.parallel.parallel_for(n);
        let err = model_err(step, t1);
        let unloaded = model.is_unloaded();
        if !unloaded {
            model.external_force(t1, &mut self.f_ext1).map_err(&err)?;
        }
        let Some(m) = self.mass.diagonal() else {
            unreachable!("the fused linear path is taken for a diagonal mass only")
        };
        let (u0, v0, a0) = (&state.u[..], &state.v[..], &state.a[..]);
        let Some(k) = model.linear_stiffness() else {
            unreachable!("the fused linear path is taken for a model with a stiffness only")
        };
        let r = FusedRhs {
            k,
            h,
            af,
            bf,
            u0,
            v0,
            a0,
            m,
            fi0: &self.f_int0,
            fe0: &self.f_ext0,
            fe1: &self.f_ext1,
        };
        let mut c = FusedUpdate {
            h,
            bh,
            bh2,
            g,
            af,
            bf,
            am,
            bm,
            du: &[],
            u0,
            v0,
            a0,
            fi0: &self.f_int0,
            fe0: &self.f_ext0,
            fe1: &self.f_ext1,
            m,
        };
        let simplicial = self
            .solver
            .as_sparse_cholesky()
            .and_then(SparseCholesky::simplicial_factor)
            .filter(|f| f.n() == n && f.len() <= 2 * n && n >= self.sweep_min_n);
        if let Some(f) = simplicial {
            // 1-3 inside the sweeps of the factor, for a factor with at most two entries a
            // column on average (a chain's): its sweeps are chains of dependent operations with
            // little work beside them. With more entries the sweeps have work of their own and
            // the rows' work, scalar there, costs more than the chunked passes (2D stencil,
            // n = 1e4, about 20 entries a column: the step 1.4x slower, measured). Below
            // `FUSED_SWEEP_MIN_N` unknowns the chunked passes work in cache and are cheaper
            // (chain, n = 1e4: the step 1.15x slower in the sweeps, measured).
            let outs = [&mut self.u1, &mut self.v1, &mut self.a1, &mut self.f_int1];
            let outs = outs.map(|v| &mut v[..]);
            let (du, partials) = (&mut self.du[..], &mut self.partials[..]);
            match (bf == 0.0, unloaded) {
                (true, true) => fused_sweeps::<true, false>(&f, du, &r, &c, outs, partials),
                (true, false) => fused_sweeps::<true, true>(&f, du, &r, &c, outs, partials),
                (false, true) => fused_sweeps::<false, false>(&f, du, &r, &c, outs, partials),
                (false, false) => fused_sweeps::<false, true>(&f, du, &r, &c, outs, partials),
            }
        } else {
            // 1. -R_p, with K u_p formed row by row.
            crate::linalg::for_chunks1(par, &mut self.du, &mut self.no_partials, |start, du, _| {
                match (bf == 0.0, unloaded) {
                    (true, true) => r.chunk::<true, false>(start, du),
                    (true, false) => r.chunk::<true, true>(start, du),
                    (false, true) => r.chunk::<false, false>(start, du),
                    (false, false) => r.chunk::<false, true>(start, du),
                }
            });
            self.solver.solve_in_place(&mut self.du)?;
            // 3. Update, the new balance force and the works.
            c.du = &self.du;
            let outs = [&mut self.u1, &mut self.v1, &mut self.a1, &mut self.f_int1];
            let outs = outs.map(|v| &mut v[..]);
            crate::linalg::for_chunks4(par, outs, &mut self.partials, |start, o, sums| {
                *sums = if unloaded {
                    c.chunk::<false>(start, o)
                } else {
                    c.chunk::<true>(start, o)
                };
            });
        }
        let sums = crate::linalg::sum_partials(&self.partials);
        if !sums[3].is_finite() {
            for (what, x) in [
                ("displacement", &self.u1),
                ("velocity", &self.v1),
                ("acceleration", &self.a1),
            ] {
                if let Some(dof) = x.iter().position(|v| !v.is_finite()) {
                    return Err(Error::NonFiniteState {
                        quantity: what,
                        dof,
                        step,
                        t: t1,
                    });
                }
            }
            check_finite("internal force", &self.f_int1)?;
        }
        let mut w = [sums[0], sums[1], 0.0, 0.0];
        self.options.reduce.sum_in_place(&mut w);
        let ke = 0.5 * self.options.reduce.sum(sums[2]);
        self.book(model, state, t1, step, w, ke)?;
        Ok(1)
    }

    /// `||u1 - u||` over all DOFs.
    fn diff_norm(&self, state: &State) -> f64 {
        let s: f64 = self
            .u1
            .iter()
            .zip(&state.u)
            .map(|(a, b)| (a - b) * (a - b))
            .sum();
        self.options.reduce.sum(s).sqrt()
    }

    /// The relative residuals of the last attempt, for an error (at most the first 64).
    fn history(&self) -> Vec<f64> {
        self.report.residuals.iter().take(64).copied().collect()
    }

    /// A divergence of the attempt at `t0` with sub-step `h`.
    fn diverged(&self, t0: f64, h: f64, iterations: usize, rel: f64) -> Error {
        Error::NewtonDiverged {
            t: t0,
            dt: h,
            iterations,
            residual: rel,
            cutbacks: 0,
            history: self.history(),
            dof: self.worst_dof,
        }
    }

    /// Kinematics, forces and residual at the trial `u1`; returns `(||R||, F_ref)` on free DOFs.
    fn evaluate<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &State,
        t1: f64,
        h: f64,
        step: u64,
    ) -> Result<(f64, f64)> {
        let p = self.params;
        let (v0, a0) = (&state.v, &state.a);
        // With the predictor u_pred = u_n + h v_n + h^2/2 a_n and the correction d = u1 - u_pred,
        // a1 = a_n + d/(beta h^2) and v1 = v_n + h a_n + gamma d/(beta h): the Newmark relations
        // written on the correction, which rounds far less than forming them from u1.
        // Divide rather than multiply by rounded reciprocals: a reciprocal's rounding is the same
        // every step and biases the energy of the trapezoidal rule steadily (a drift of about one
        // ulp per step), while the rounding of a division varies and averages out.
        let bh = p.beta * h;
        let bh2 = bh * h;
        for i in 0..self.n {
            let d = self.dtot[i];
            self.a1[i] = a0[i] + d / bh2;
            self.v1[i] = v0[i] + h * a0[i] + (p.gamma * d) / bh;
        }
        for ((dof, _), &(v, a)) in self.constraints.iter().zip(&self.con_rates) {
            (self.v1[*dof], self.a1[*dof]) = (v, a);
        }
        let err = model_err(step, t1);
        model.external_force(t1, &mut self.f_ext1).map_err(&err)?;
        model
            .internal_force(t1, &self.u1, &self.v1, &mut self.f_int1)
            .map_err(&err)?;
        damping_force(
            model,
            self.damping,
            &self.mass,
            t1,
            &self.u1,
            &self.v1,
            &mut self.f_d1,
            &mut self.tmp,
            self.options.parallel,
        )
        .map_err(&err)?;
        for (k, f) in self.f_x1.iter_mut().enumerate() {
            model
                .extra_force(k, t1, &self.u1, &self.v1, f)
                .map_err(&err)?;
        }
        // M w with w = (1 - alpha_m) a1 + alpha_m a0.
        for i in 0..self.n {
            self.tmp[i] = (1.0 - p.alpha_m) * self.a1[i] + p.alpha_m * a0[i];
        }
        self.mass
            .mul(&self.tmp, &mut self.mw, self.options.parallel);
        let (af, bf) = (1.0 - p.alpha_f, p.alpha_f);
        let mut sums = [0.0; 5];
        let (mut worst, mut worst_dof) = (-1.0, 0usize);
        for i in 0..self.n {
            let mut g1 = self.f_int1[i] + self.f_d1[i];
            let mut g0 = self.f_int0[i] + self.f_d0[i];
            for (x1, x0) in self.f_x1.iter().zip(&self.f_x0) {
                g1 += x1[i];
                g0 += x0[i];
            }
            let fe = af * self.f_ext1[i] + bf * self.f_ext0[i];
            let g = af * g1 + bf * g0;
            let r = self.mw[i] + g - fe;
            if self.mask[i] {
                // The residual at a constrained DOF is its reaction.
                self.res[i] = 0.0;
                sums[4] += r * r;
            } else {
                self.res[i] = r;
                sums[0] += r * r;
                sums[1] += self.mw[i] * self.mw[i];
                sums[2] += g * g;
                sums[3] += fe * fe;
                // NaN compares false: the first non-finite residual is caught below.
                if r.abs() > worst {
                    (worst, worst_dof) = (r.abs(), i);
                }
            }
        }
        self.options.reduce.sum_in_place(&mut sums);
        if !sums.iter().all(|x| x.is_finite()) {
            return Err(self.non_finite_force(step, t1));
        }
        self.worst_dof = worst_dof;
        let f_step = sums[1]
            .sqrt()
            .max(sums[2].sqrt())
            .max(sums[3].sqrt())
            .max(sums[4].sqrt());
        self.f_step = f_step;
        let f_ref = f_step.max(self.ledger.force_peak);
        Ok((sums[0].sqrt(), f_ref))
    }

    /// The error for a non-finite force or residual found by [`evaluate`](Self::evaluate): the
    /// first force that is not finite and its DOF (a cut-back does not make a model's NaN go away,
    /// so it is reported at once).
    fn non_finite_force(&self, step: u64, t: f64) -> Error {
        let (quantity, dof) = [
            ("external force", &self.f_ext1),
            ("internal force", &self.f_int1),
            ("damping force", &self.f_d1),
            ("inertia force", &self.mw),
        ]
        .into_iter()
        .chain(self.f_x1.iter().map(|f| ("extra force", f)))
        .find_map(|(q, x)| x.iter().position(|v| !v.is_finite()).map(|d| (q, d)))
        .unwrap_or(("residual", self.worst_dof));
        Error::NonFiniteState {
            quantity,
            dof,
            step,
            t,
        }
    }

    /// Fills the iteration matrix `J` for coefficients `cm = (1-alpha_m)/(beta h^2)` and
    /// `cc = gamma/(beta h)`.
    fn assemble(&mut self, cm: f64, cc: f64) {
        let af = 1.0 - self.params.alpha_f;
        let (mut s_m, mut s_k) = (cm, af);
        if let Damping::Rayleigh { a0, a1 } = self.damping {
            s_m += af * cc * a0;
            s_k += af * cc * a1;
        }
        let data = self.jac.data_mut();
        data.fill(0.0);
        let m_vals = self.mass.values();
        for (k, pos) in self.mass_map.iter().enumerate() {
            data[*pos] += s_m * m_vals[k];
        }
        for (k, pos) in self.k_map.iter().enumerate() {
            data[*pos] += s_k * self.k_t.data()[k];
        }
        if let Some(c) = &self.c_matrix {
            for (k, pos) in self.c_map.iter().enumerate() {
                data[*pos] += af * cc * c.data()[k];
            }
        }
        for p in &self.con_zero {
            data[*p] = 0.0;
        }
        for p in &self.con_diag {
            data[*p] = 1.0;
        }
    }

    /// Books the converged sub-step in the ledger, checks the guards and accepts it.
    fn accept<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        t1: f64,
        step: u64,
    ) -> Result<()> {
        for (what, x) in [
            ("displacement", &self.u1),
            ("velocity", &self.v1),
            ("acceleration", &self.a1),
        ] {
            if let Some(dof) = x.iter().position(|v| !v.is_finite()) {
                return Err(Error::NonFiniteState {
                    quantity: what,
                    dof,
                    step,
                    t: t1,
                });
            }
        }
        let a1 = std::mem::take(&mut self.a1);
        self.reactions_into(&a1, false);
        self.a1 = a1;
        let mut w = [0.0; 4];
        for i in 0..self.n {
            let du = self.u1[i] - state.u[i];
            w[0] += du * (self.f_int0[i] + self.f_int1[i]);
            w[1] += du * (self.f_ext0[i] + self.f_ext1[i]);
            w[2] += du * (self.f_d0[i] + self.f_d1[i]);
        }
        for (j, (dof, _)) in self.constraints.iter().enumerate() {
            let du = self.u1[*dof] - state.u[*dof];
            w[3] += du * (self.reactions0[j] + self.reactions1[j]);
        }
        self.options.reduce.sum_in_place(&mut w);
        self.mass
            .mul(&self.v1, &mut self.tmp, self.options.parallel);
        let ke = 0.5 * self.sum_dot(&self.v1, &self.tmp);
        self.book(model, state, t1, step, w, ke)
    }

    /// Books a converged sub-step whose works `w` (internal, external, damping, constraint: sums
    /// of `du . (f_0 + f_1)`, already complete over all processes) and kinetic energy `ke` are
    /// known, checks the growth guard and accepts it. The extra forces' works are summed here.
    fn book<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        t1: f64,
        step: u64,
        w: [f64; 4],
        ke: f64,
    ) -> Result<()> {
        let l = &mut self.trial;
        l.copy_from(&self.ledger);
        let (d_int, d_ext, d_damp, d_con) = (0.5 * w[0], 0.5 * w[1], 0.5 * w[2], 0.5 * w[3]);
        let mut d_extra = 0.0;
        for k in 0..self.f_x0.len() {
            let s: f64 = (0..self.n)
                .map(|i| (self.u1[i] - state.u[i]) * (self.f_x0[k][i] + self.f_x1[k][i]))
                .sum();
            let s = 0.5 * self.options.reduce.sum(s);
            l.extra_work[k] += s;
            d_extra += s;
        }
        let d_kin = ke - l.kinetic;
        l.internal_work += d_int;
        l.external_work += d_ext;
        l.damping_work += d_damp;
        l.constraint_work += d_con;
        l.numerical_dissipation -= d_kin + d_int + d_damp + d_extra - d_ext - d_con;
        l.kinetic = ke;
        l.energy_in += d_ext.abs() + d_con.abs();
        // Each step's work is booked in full (no work in flight).
        l.update_reference(0.0);
        // The floor of the Newton residual's reference for the rest of the run.
        l.force_peak = l.force_peak.max(self.f_step);
        l.pending.reactions.copy_from_slice(&self.reactions1);
        let over = l.energy_in > 0.0 && ke > self.options.growth_limit * l.energy_in;
        let (mut highs, mut high) = self.over_limit;
        if over {
            if ke > high {
                highs += 1;
                high = ke;
            }
        } else {
            (highs, high) = (0, 0.0);
        }
        if highs >= self.options.growth_patience.max(1) {
            return Err(Error::Unstable {
                step,
                t: t1,
                kinetic: ke,
                energy_in: l.energy_in,
                limit: self.options.growth_limit,
            });
        }
        self.over_limit = (highs, high);
        // Accept the step.
        std::mem::swap(&mut state.u, &mut self.u1);
        std::mem::swap(&mut state.v, &mut self.v1);
        std::mem::swap(&mut state.a, &mut self.a1);
        std::mem::swap(&mut self.f_int0, &mut self.f_int1);
        std::mem::swap(&mut self.f_ext0, &mut self.f_ext1);
        std::mem::swap(&mut self.f_d0, &mut self.f_d1);
        std::mem::swap(&mut self.f_x0, &mut self.f_x1);
        std::mem::swap(&mut self.reactions0, &mut self.reactions1);
        std::mem::swap(&mut self.ledger, &mut self.trial);
        state.t = t1;
        state.step = step;
        model.accept_step(t1);
        Ok(())
    }
}

/// True when the last three values of `history` are finite and within a factor 2 of each other:
/// a residual that no longer falls (nor grows).
fn plateau(history: &[f64]) -> bool {
    match history {
        [.., a, b, c] => {
            let (lo, hi) = (a.min(*b).min(*c), a.max(*b).max(*c));
            hi.is_finite() && hi <= 2.0 * lo
        }
        _ => false,
    }
}

/// Fewest unknowns for which [`AlphaIntegrator::linear_substep_fused`] runs inside the sweeps of
/// a simplicial factor ([`fused_sweeps`]): chain of unit masses, average acceleration, medians
/// of alternated runs on a loaded 2-core machine, step / (solve + `M x` + `K x`): n = 1e4 1.43
/// in the sweeps against 1.23 in chunked passes (3 runs), n = 1e5 0.94 against 1.23, n = 1e6
/// 0.95 against 1.21 (5 runs; noisy figures; the crossing is somewhere between).
const FUSED_SWEEP_MIN_N: usize = 32_768;

/// The inputs of the right-hand side's pass of [`AlphaIntegrator::linear_substep_fused`].
struct FusedRhs<'a> {
    k: &'a CsrMatrix,
    h: f64,
    af: f64,
    bf: f64,
    u0: &'a [f64],
    v0: &'a [f64],
    a0: &'a [f64],
    m: &'a [f64],
    fi0: &'a [f64],
    fe0: &'a [f64],
    fe1: &'a [f64],
}

impl FusedRhs<'_> {
    /// Row `i` of `-R_p`: the expressions of [`FusedRhs::chunk`].
    ///
    /// # Panics
    /// If `i >= n`.
    #[inline(always)]
    fn row<const BF0: bool, const LOADED: bool>(&self, i: usize) -> f64 {
        let (u0, v0, a0, h) = (self.u0, self.v0, self.a0, self.h);
        assert!(i < self.k.nrows());
        // SAFETY: `row_dot_by` passes column indices `c < ncols == n`, and `u0`, `v0`, `a0`
        // have `n` entries (checked by the caller); `i < nrows` (asserted).
        let predict = |c: usize| unsafe {
            *u0.get_unchecked(c) + h * *v0.get_unchecked(c) + 0.5 * h * h * *a0.get_unchecked(c)
        };
        let g1 = unsafe { self.k.row_dot_by(i, predict) };
        let ma = self.m[i] * a0[i];
        // Only what the variant reads is loaded (`BF0`, `LOADED` are constants).
        let fi0 = if BF0 { 0.0 } else { self.fi0[i] };
        let (fe0, fe1) = match (BF0, LOADED) {
            (_, false) => (0.0, 0.0),
            (true, true) => (0.0, self.fe1[i]),
            (false, true) => (self.fe0[i], self.fe1[i]),
        };
        self.value::<BF0, LOADED>(ma, g1, fi0, fe0, fe1)
    }

    /// Row value of `-R_p` from `M a_n` (`ma`), the row of `K u_p` (`g1`), the balance force
    /// `g_n` (`fi0`) and the external forces: the one expression of [`FusedRhs::row`] and
    /// [`FusedRhs::chunk`]. `BF0` does not use `fi0` or `fe0`, `LOADED = false` neither force.
    #[inline(always)]
    fn value<const BF0: bool, const LOADED: bool>(
        &self,
        ma: f64,
        g1: f64,
        fi0: f64,
        fe0: f64,
        fe1: f64,
    ) -> f64 {
        let (af, bf) = (self.af, self.bf);
        match (BF0, LOADED) {
            (true, false) => -(ma + g1),
            (true, true) => -(ma + g1 - fe1),
            (false, false) => -(ma + (af * g1 + bf * fi0)),
            (false, true) => {
                let fe = af * fe1 + bf * fe0;
                -(ma + (af * g1 + bf * fi0) - fe)
            }
        }
    }

    /// One chunk (from `start`) of `-R_p`, with `K u_p` formed row by row from the predictor
    /// computed on the fly. The expressions of [`AlphaIntegrator::linear_substep`]: `BF0` for
    /// `alpha_f = 0` (`(1 - alpha_f) = 1`, `g_n` not read), `LOADED = false` for `f_ext = +0`,
    /// not read (`x - 0.0 == x` for every `x`). The caller checked `K` is `n x n` and `u0`,
    /// `v0`, `a0` have `n` entries.
    #[inline(always)]
    fn chunk<const BF0: bool, const LOADED: bool>(&self, start: usize, du: &mut [f64]) {
        let (u0, v0, a0, h) = (self.u0, self.v0, self.a0, self.h);
        // SAFETY: `row_dot_by` passes column indices `c < ncols == n`, and `u0`, `v0`, `a0`
        // have `n` entries.
        let predict = |c: usize| unsafe {
            *u0.get_unchecked(c) + h * *v0.get_unchecked(c) + 0.5 * h * h * *a0.get_unchecked(c)
        };
        let len = du.len();
        let r = start..start + len;
        let (m, a0c, fi0) = (&self.m[r.clone()], &a0[r.clone()], &self.fi0[r.clone()]);
        let (fe0, fe1) = if LOADED {
            (&self.fe0[r.clone()], &self.fe1[r])
        } else {
            (&[][..], &[][..])
        };
        for (kk, out) in du.iter_mut().enumerate() {
            // SAFETY: `start + kk < n == nrows`.
            let g1 = unsafe { self.k.row_dot_by(start + kk, predict) };
            let ma = m[kk] * a0c[kk];
            let fi = if BF0 { 0.0 } else { fi0[kk] };
            let (e0, e1) = match (BF0, LOADED) {
                (_, false) => (0.0, 0.0),
                (true, true) => (0.0, fe1[kk]),
                (false, true) => (fe0[kk], fe1[kk]),
            };
            *out = self.value::<BF0, LOADED>(ma, g1, fi, e0, e1);
        }
    }
}

/// The inputs of the update pass of [`AlphaIntegrator::linear_substep_fused`].
struct FusedUpdate<'a> {
    h: f64,
    bh: f64,
    bh2: f64,
    g: f64,
    af: f64,
    bf: f64,
    am: f64,
    bm: f64,
    du: &'a [f64],
    u0: &'a [f64],
    v0: &'a [f64],
    a0: &'a [f64],
    fi0: &'a [f64],
    fe0: &'a [f64],
    fe1: &'a [f64],
    m: &'a [f64],
}

impl FusedUpdate<'_> {
    /// One chunk (from `start`) of the update: `u`, `v`, `a` and the balance force `g` into the
    /// outputs, and the sums `[u_step . (g_n + g), u_step . (f_ext,n + f_ext), v . M v, NaN
    /// check]` of the chunk. `LOADED = false` treats the external forces as `+0` without reading
    /// them. The same expressions, and the sums in the same order, as the lumped, undamped
    /// branch of [`AlphaIntegrator::linear_substep`].
    #[inline(always)]
    fn chunk<const LOADED: bool>(
        &self,
        start: usize,
        [u1, v1, a1, f1]: Chunks4Mut<'_>,
    ) -> [f64; 4] {
        let len = u1.len();
        let r = start..start + len;
        let (du, u0, v0, a0) = (
            &self.du[r.clone()],
            &self.u0[r.clone()],
            &self.v0[r.clone()],
            &self.a0[r.clone()],
        );
        let (fi0, m) = (&self.fi0[r.clone()], &self.m[r.clone()]);
        let (fe0, fe1) = if LOADED {
            (&self.fe0[r.clone()], &self.fe1[r])
        } else {
            (&[][..], &[][..])
        };
        let (v1, a1, f1) = (&mut v1[..len], &mut a1[..len], &mut f1[..len]);
        let fe = |k: usize| if LOADED { (fe0[k], fe1[k]) } else { (0.0, 0.0) };
        // Element-wise, no sums: vectorised.
        for k in 0..len {
            let [un, vn, an, g1] =
                self.values::<LOADED>(du[k], u0[k], v0[k], a0[k], fi0[k], m[k], fe(k));
            u1[k] = un;
            a1[k] = an;
            v1[k] = vn;
            f1[k] = g1;
        }
        // The sums, from the chunk just written (in cache), in order.
        let mut s = [0.0; 4];
        for k in 0..len {
            Self::add_sums::<LOADED>(
                &mut s,
                [u1[k], v1[k], a1[k], f1[k]],
                u0[k],
                fi0[k],
                m[k],
                fe(k),
            );
        }
        s
    }

    /// `[u, v, a, g]` of one row from its correction `d` and the row's values at `t_n`: the
    /// one expression of [`FusedUpdate::chunk`] and [`FusedUpdate::row`]. `fe = (f_ext,n,
    /// f_ext,n+1)`, not used when `LOADED = false`.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn values<const LOADED: bool>(
        &self,
        d: f64,
        u0: f64,
        v0: f64,
        a0: f64,
        fi0: f64,
        m: f64,
        (fe0, fe1): (f64, f64),
    ) -> [f64; 4] {
        let (h, bh, bh2, g) = (self.h, self.bh, self.bh2, self.g);
        let (af, bf, am, bm) = (self.af, self.bf, self.am, self.bm);
        let un = u0 + h * v0 + 0.5 * h * h * a0 + d;
        let an = a0 + d / bh2;
        let vn = v0 + h * a0 + (g * d) / bh;
        // (1 - alpha_f) g1 = f_alpha - alpha_f g0 - M w.
        let w = am * an + bm * a0;
        let fe = if LOADED { af * fe1 + bf * fe0 } else { 0.0 };
        let g1 = (fe - bf * fi0 - m * w) / af;
        [un, vn, an, g1]
    }

    /// Adds one row's terms to the sums `[u_step . (g_n + g), u_step . (f_ext,n + f_ext),
    /// v . M v, NaN check]`, from its new `[u, v, a, g]`: the one expression of both passes.
    #[inline(always)]
    fn add_sums<const LOADED: bool>(
        s: &mut [f64; 4],
        [un, vn, an, g1]: [f64; 4],
        u0: f64,
        fi0: f64,
        m: f64,
        (fe0, fe1): (f64, f64),
    ) {
        let step_u = un - u0;
        s[0] += step_u * (fi0 + g1);
        if LOADED {
            s[1] += step_u * (fe0 + fe1);
        }
        s[2] += m * vn * vn;
        s[3] += zero_if_finite(un) + zero_if_finite(an) + zero_if_finite(vn) + zero_if_finite(g1);
    }
}

impl FusedUpdate<'_> {
    /// Row `i` of the update from its correction `d`: the expressions of
    /// [`FusedUpdate::chunk`], the outputs written and the row's terms added to the sums `s`
    /// in the same order.
    #[inline(always)]
    fn row<const LOADED: bool>(
        &self,
        i: usize,
        d: f64,
        [u1, v1, a1, f1]: &mut Chunks4Mut<'_>,
        s: &mut [f64; 4],
    ) {
        let (u0, fi0, m) = (self.u0[i], self.fi0[i], self.m[i]);
        let fe = if LOADED {
            (self.fe0[i], self.fe1[i])
        } else {
            (0.0, 0.0)
        };
        let x = self.values::<LOADED>(d, u0, self.v0[i], self.a0[i], fi0, m, fe);
        [u1[i], v1[i], a1[i], f1[i]] = x;
        Self::add_sums::<LOADED>(s, x, u0, fi0, m, fe);
    }
}

/// Steps 1-3 of [`AlphaIntegrator::linear_substep_fused`] inside the sweeps of a simplicial
/// factor ([`SimplicialFactor::solve_fused`]): row `i` of `-R_p` is formed when the forward sweep
/// first needs it, and row `i` of the update as soon as the backward sweep has its correction, so
/// that this work overlaps the sweeps' chains of dependent operations, and neither the
/// right-hand side nor the correction goes through memory in the caller's order. The correction
/// is the one [`LinearSolver::solve_in_place`] gives, bit for bit, so are `u`, `v`, `a` and the
/// balance force. The sums of the rows of chunk `i / CHUNK` go to `partials[i / CHUNK]` in the
/// backward sweep's order: the order of the chunked pass when that sweep visits the rows in
/// increasing order (for the chain, whose elimination order is the reverse one), otherwise
/// another fixed order (the results differ from the chunked pass's at round-off, and do not
/// depend on the thread count).
fn fused_sweeps<const BF0: bool, const LOADED: bool>(
    f: &SimplicialFactor<'_>,
    work: &mut [f64],
    r: &FusedRhs<'_>,
    c: &FusedUpdate<'_>,
    mut outs: Chunks4Mut<'_>,
    partials: &mut [[f64; 4]],
) {
    let n = f.n();
    assert!(outs.iter().all(|o| o.len() == n));
    assert_eq!(partials.len(), crate::linalg::chunk_count(n));
    partials.fill([0.0; 4]);
    let mut cur = usize::MAX;
    let mut s = [0.0; 4];
    f.solve_fused(
        work,
        |i| r.row::<BF0, LOADED>(i),
        |i, d| {
            let chunk = i / crate::linalg::CHUNK;
            if chunk != cur {
                if let Some(p) = partials.get_mut(cur) {
                    for (p, x) in p.iter_mut().zip(s) {
                        *p += x;
                    }
                }
                s = [0.0; 4];
                cur = chunk;
            }
            c.row::<LOADED>(i, d, &mut outs, &mut s);
        },
    );
    if let Some(p) = partials.get_mut(cur) {
        for (p, x) in p.iter_mut().zip(s) {
            *p += x;
        }
    }
}

/// The four output chunks of [`FusedUpdate::chunk`].
type Chunks4Mut<'a> = [&'a mut [f64]; 4];

/// `0` for a finite `x`, NaN otherwise: summed over a vector, a finiteness check without a
/// branch in the loop.
#[inline]
fn zero_if_finite(x: f64) -> f64 {
    x * 0.0
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

/// The damping force `C v` of the model into `out` (`tmp` is scratch).
#[allow(clippy::too_many_arguments)]
fn damping_force<M: Model + ?Sized>(
    model: &mut M,
    damping: Damping,
    mass: &Mass,
    t: f64,
    u: &[f64],
    v: &[f64],
    out: &mut [f64],
    tmp: &mut [f64],
    par: Parallelism,
) -> std::result::Result<(), ModelError> {
    match damping {
        Damping::None => {
            out.fill(0.0);
            Ok(())
        }
        Damping::Rayleigh { a0, a1 } => {
            if a1 != 0.0 {
                model.stiffness_product(t, u, v, out)?;
            } else {
                out.fill(0.0);
            }
            mass.mul(v, tmp, par);
            for (o, mv) in out.iter_mut().zip(tmp.iter()) {
                *o = a1 * *o + a0 * mv;
            }
            Ok(())
        }
        Damping::Force => model.damping_force(t, u, v, out),
    }
}

impl Integrator for AlphaIntegrator {
    fn step<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        dt: f64,
    ) -> Result<StepReport> {
        AlphaIntegrator::step(self, model, state, dt)
    }

    fn energy(&self) -> &EnergyLedger {
        &self.ledger
    }

    fn stable_limit(&self) -> Option<f64> {
        None
    }

    fn reestimate_stable_step<M: Model + ?Sized>(
        &mut self,
        _model: &mut M,
        _state: &State,
    ) -> Result<Option<f64>> {
        Ok(None)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::linalg::SparseCholesky;
    use crate::model::{LinearModel, Load};
    use sprs::{CsMat, TriMat};

    fn chain(n: usize, consistent: bool) -> (CsMat<f64>, CsMat<f64>) {
        let (mut m, mut k) = (TriMat::new((n, n)), TriMat::new((n, n)));
        for i in 0..n {
            k.add_triplet(i, i, 2.0 + 0.1 * (i % 3) as f64);
            if i + 1 < n {
                k.add_triplet(i, i + 1, -1.0);
                k.add_triplet(i + 1, i, -1.0);
            }
            if consistent {
                m.add_triplet(i, i, 2.0 / 3.0);
                if i + 1 < n {
                    m.add_triplet(i, i + 1, 1.0 / 6.0);
                    m.add_triplet(i + 1, i, 1.0 / 6.0);
                }
            } else {
                m.add_triplet(i, i, 1.0 + 0.5 * (i % 2) as f64);
            }
        }
        (m.to_csr(), k.to_csr())
    }

    /// Runs `steps` steps on the streamlined or the general linear path.
    fn history(
        model: &mut LinearModel,
        p: AlphaParams,
        fast: bool,
        steps: usize,
    ) -> (State, EnergyLedger) {
        let n = model.dofs();
        let u0: Vec<f64> = (0..n).map(|i| (0.3 * i as f64).sin()).collect();
        let v0: Vec<f64> = (0..n).map(|i| 0.1 * (0.7 * i as f64).cos()).collect();
        let mut state = State::new(0.0, u0, v0).unwrap();
        let mut it = AlphaIntegrator::new(
            model,
            &mut state,
            p,
            Box::new(SparseCholesky::new()),
            ImplicitOptions::default(),
        )
        .unwrap();
        assert!(it.fast_linear);
        it.fast_linear = fast;
        for k in 0..steps {
            // A change of step size on the way refactors.
            let dt = if k < steps / 2 { 0.3 } else { 0.45 };
            it.step(model, &mut state, dt).unwrap();
        }
        (state, it.energy().clone())
    }

    /// The fused streamlined path (diagonal mass, no damping, the model's `K` formed inside the
    /// right-hand side's pass, no external force read for an unloaded model) gives bit for bit
    /// the state and ledger of the unfused streamlined path: loaded and unloaded, `alpha_f`
    /// zero and not, serial and parallel passes (several chunks).
    #[test]
    fn fused_linear_path_is_bit_identical() {
        let n = 3 * crate::linalg::CHUNK + 17;
        let params = [
            AlphaParams::average_acceleration(),
            AlphaParams::hht(-0.1).unwrap(),
            AlphaParams::generalized_alpha(0.6).unwrap(),
        ];
        for loaded in [false, true] {
            for p in params {
                for threshold in [usize::MAX, 1] {
                    let (m, k) = chain(n, false);
                    let mut model = LinearModel::new(&m, &k).unwrap();
                    if loaded {
                        let mut pattern = vec![0.0; n];
                        pattern[n - 1] = 1.0;
                        pattern[3] = -0.5;
                        model = model
                            .with_load(Load::Pattern {
                                pattern,
                                factor: TimeFunction::function(|t| (1.3 * t).sin()),
                            })
                            .unwrap();
                    }
                    assert_eq!(model.is_unloaded(), !loaded);
                    assert!(model.linear_stiffness().is_some());
                    let run = |fuse: bool, model: &mut LinearModel| {
                        let u0: Vec<f64> = (0..n).map(|i| (0.3 * i as f64).sin()).collect();
                        let v0: Vec<f64> = (0..n).map(|i| 0.1 * (0.7 * i as f64).cos()).collect();
                        let mut state = State::new(0.0, u0, v0).unwrap();
                        let options = ImplicitOptions {
                            parallel: Parallelism { threshold },
                            ..ImplicitOptions::default()
                        };
                        let mut it = AlphaIntegrator::new(
                            model,
                            &mut state,
                            p,
                            Box::new(SparseCholesky::new()),
                            options,
                        )
                        .unwrap();
                        assert!(it.fast_linear);
                        it.fuse_linear = fuse;
                        it.sweep_min_n = 0;
                        for k in 0..12 {
                            let dt = if k < 6 { 0.3 } else { 0.45 };
                            it.step(model, &mut state, dt).unwrap();
                        }
                        // The chain's factor is simplicial, with (AMD) the reverse elimination
                        // order but for the last two rows: the fused form runs inside its
                        // sweeps, whose backward sweep visits rows 1, 0, 2, 3, ..., n - 1.
                        // The chunked pass's sums add the rows in increasing order; the first
                        // two terms added to 0 in either order give the same sum (addition is
                        // commutative), so the ledger is bit for bit the same as well.
                        let f = it.solver.as_sparse_cholesky().unwrap();
                        let f = f.simplicial_factor().unwrap();
                        let order: Vec<usize> = f.perm.unwrap().iter().rev().copied().collect();
                        assert!(order[..2] == [1, 0] || order[..2] == [0, 1]);
                        assert!(order[2..].windows(2).all(|w| w[0] < w[1]));
                        (state, it.energy().clone(), it.f_int0.clone())
                    };
                    let (sf, lf, ff) = run(true, &mut model.clone());
                    let (ss, ls, fs) = run(false, &mut model);
                    let bits = |x: &[f64]| x.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
                    let what = format!("loaded {loaded}, {p:?}, threshold {threshold}");
                    assert_eq!(bits(&sf.u), bits(&ss.u), "u: {what}");
                    assert_eq!(bits(&sf.v), bits(&ss.v), "v: {what}");
                    assert_eq!(bits(&sf.a), bits(&ss.a), "a: {what}");
                    assert_eq!(bits(&ff), bits(&fs), "internal force: {what}");
                    for (x, y) in [
                        (lf.kinetic, ls.kinetic),
                        (lf.internal_work, ls.internal_work),
                        (lf.external_work, ls.external_work),
                        (lf.numerical_dissipation, ls.numerical_dissipation),
                        (lf.energy_in, ls.energy_in),
                    ] {
                        assert_eq!(x.to_bits(), y.to_bits(), "ledger: {what}");
                    }
                    assert!(lf.kinetic > 0.0 && lf.internal_work != 0.0);
                }
            }
        }
    }

    /// On a chain whose DOFs are numbered in a scrambled order (`q(i) = 7919 i mod n`; simplicial
    /// factor with two entries a column, an elimination order that is not monotone in the DOF
    /// numbers) the fused form inside the factor's sweeps gives bit for bit the state and
    /// internal force of the unfused form (the same correction, the same element-wise
    /// expressions), and its ledger to round-off: the sums over the rows are taken in the
    /// backward sweep's order instead of the rows' order. A reordered sum of `n` terms differs
    /// by at most `2 (n - 1) eps` times the sum of the terms' magnitudes (Higham 2002, eq. 4.4,
    /// both orders against the exact sum); each ledger entry's terms sum in magnitude to a few
    /// times the energy scale, so `1e-11` of it covers `n = 400` (`2 n eps = 1.8e-13`) with
    /// margin and still fails on any error in a single row's term.
    #[test]
    fn fused_sweeps_agree_on_a_scrambled_chain() {
        let n = 400;
        let q = |i: usize| (7919 * i) % n;
        let mut kt = TriMat::new((n, n));
        let mut mt = TriMat::new((n, n));
        for i in 0..n {
            kt.add_triplet(q(i), q(i), 2.0);
            mt.add_triplet(i, i, 1.0 + 0.1 * (i % 7) as f64);
            if i + 1 < n {
                kt.add_triplet(q(i), q(i + 1), -1.0);
                kt.add_triplet(q(i + 1), q(i), -1.0);
            }
        }
        let (k, mass): (CsMat<f64>, CsMat<f64>) = (kt.to_csr(), mt.to_csr());
        for p in [
            AlphaParams::average_acceleration(),
            AlphaParams::generalized_alpha(0.6).unwrap(),
        ] {
            let mut pattern = vec![0.0; n];
            pattern[q(n / 2 + 3)] = 1.0;
            let model = LinearModel::new(&mass, &k)
                .unwrap()
                .with_load(Load::Pattern {
                    pattern,
                    factor: TimeFunction::function(|t| (0.9 * t).cos()),
                })
                .unwrap();
            let run = |fuse: bool, model: &mut LinearModel| {
                let u0: Vec<f64> = (0..n).map(|i| (0.37 * i as f64).sin()).collect();
                let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
                let mut it = AlphaIntegrator::new(
                    model,
                    &mut state,
                    p,
                    Box::new(SparseCholesky::new()),
                    ImplicitOptions::default(),
                )
                .unwrap();
                it.fuse_linear = fuse;
                it.sweep_min_n = 0;
                for _ in 0..10 {
                    it.step(model, &mut state, 0.7).unwrap();
                }
                if fuse {
                    let s = it.solver.as_sparse_cholesky().unwrap();
                    let f = s.simplicial_factor().expect("a simplicial factor");
                    assert!(f.len() <= 2 * n, "the fused sweeps are taken");
                    assert!(!f.is_identity());
                    let order = f.perm.unwrap();
                    assert!(order.windows(2).any(|w| w[0] < w[1]));
                    assert!(order.windows(2).any(|w| w[0] > w[1]));
                }
                (state, it.energy().clone(), it.f_int0.clone())
            };
            let (sf, lf, ff) = run(true, &mut model.clone());
            let (ss, ls, fs) = run(false, &mut model.clone());
            let bits = |x: &[f64]| x.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&sf.u), bits(&ss.u), "u: {p:?}");
            assert_eq!(bits(&sf.v), bits(&ss.v), "v: {p:?}");
            assert_eq!(bits(&sf.a), bits(&ss.a), "a: {p:?}");
            assert_eq!(bits(&ff), bits(&fs), "internal force: {p:?}");
            let e = ls.energy_in.abs().max(ls.kinetic.abs());
            assert!(e > 0.0);
            for (x, y) in [
                (lf.kinetic, ls.kinetic),
                (lf.internal_work, ls.internal_work),
                (lf.external_work, ls.external_work),
                (lf.numerical_dissipation, ls.numerical_dissipation),
                (lf.energy_in, ls.energy_in),
            ] {
                assert!((x - y).abs() <= 1e-11 * e, "ledger {p:?}: {x} vs {y}");
            }
        }
    }

    /// The streamlined linear path solves the same balance as the general path (Newton's first
    /// iteration on an affine residual is exact), so the two histories agree to round-off: for
    /// lumped, diagonal-consistent and banded consistent masses, no damping, Rayleigh damping
    /// and a damping matrix, a load, and members with `alpha_f`, `alpha_m` not zero.
    #[test]
    fn streamlined_and_general_linear_paths_agree() {
        let n = 40;
        let mut pattern = vec![0.0; n];
        pattern[n - 1] = 1.0;
        pattern[3] = -0.5;
        let params = [
            AlphaParams::average_acceleration(),
            AlphaParams::hht(-0.1).unwrap(),
            AlphaParams::generalized_alpha(0.6).unwrap(),
        ];
        for consistent in [false, true] {
            for damping in 0..3 {
                for p in params {
                    let (m, k) = chain(n, consistent);
                    let mut model = LinearModel::new(&m, &k)
                        .unwrap()
                        .with_load(Load::Pattern {
                            pattern: pattern.clone(),
                            factor: TimeFunction::function(|t| (1.3 * t).sin()),
                        })
                        .unwrap();
                    model = match damping {
                        0 => model,
                        1 => model.with_rayleigh(0.05, 0.02).unwrap(),
                        _ => model.with_damping_matrix(&(&k * 0.03)).unwrap(),
                    };
                    let (fast, lf) = history(&mut model.clone(), p, true, 60);
                    let (slow, ls) = history(&mut model, p, false, 60);
                    let scale = slow.u.iter().fold(0.0f64, |m, x| m.max(x.abs()));
                    for (what, a, b) in [
                        ("u", &fast.u, &slow.u),
                        ("v", &fast.v, &slow.v),
                        ("a", &fast.a, &slow.a),
                    ] {
                        let s = b.iter().fold(scale, |m, x| m.max(x.abs()));
                        for (x, y) in a.iter().zip(b) {
                            assert!(
                                (x - y).abs() <= 1e-11 * s,
                                "{consistent} {damping} {p:?} {what}: {x} vs {y}"
                            );
                        }
                    }
                    let e = ls.energy_in.max(1e-300);
                    for (x, y) in [
                        (lf.kinetic, ls.kinetic),
                        (lf.internal_work, ls.internal_work),
                        (lf.external_work, ls.external_work),
                        (lf.damping_work, ls.damping_work),
                        (lf.numerical_dissipation, ls.numerical_dissipation),
                    ] {
                        assert!(
                            (x - y).abs() <= 1e-10 * e,
                            "{consistent} {damping} {p:?}: ledger {x} vs {y}"
                        );
                    }
                }
            }
        }
    }
}
