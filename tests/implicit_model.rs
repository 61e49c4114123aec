//! The implicit family with constraints, consistent mass, damping matrices, the run loop and the
//! energy ledger, and bad input.

mod common;

use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::model::{Constraints, Damping, LinearModel, Load, TimeFunction};
use stepgauge::params::AlphaParams;
use stepgauge::run::{Flow, RunOptions, StepControl, StopReason, run};
use stepgauge::{Error, State};

fn new(model: &mut LinearModel, state: &mut State, p: AlphaParams) -> AlphaIntegrator {
    AlphaIntegrator::new(
        model,
        state,
        p,
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap()
}

/// Consistent start: M a0 = f_ext(0) - C v0 - K u0 with a consistent (non-diagonal) mass matrix
/// (the force balance at t0; checked here by multiplying back).
#[test]
fn initial_acceleration_balances_forces_with_a_consistent_mass() {
    let m = common::dense(&[&[2.0, 1.0, 0.0], &[1.0, 4.0, 1.0], &[0.0, 1.0, 2.0]]);
    let k = common::dense(&[&[3.0, -1.0, 0.0], &[-1.0, 2.0, -1.0], &[0.0, -1.0, 1.0]]);
    let c = common::dense(&[&[0.2, 0.0, 0.0], &[0.0, 0.1, 0.0], &[0.0, 0.0, 0.3]]);
    let f = vec![1.0, -2.0, 0.5];
    let mut model = LinearModel::new(&m, &k)
        .unwrap()
        .with_damping_matrix(&c)
        .unwrap()
        .with_load(Load::Pattern {
            pattern: f.clone(),
            factor: TimeFunction::Constant(1.0),
        })
        .unwrap();
    let (u0, v0) = (vec![0.1, 0.2, -0.1], vec![1.0, 0.0, -1.0]);
    let mut state = State::new(0.0, u0.clone(), v0.clone()).unwrap();
    let _ = new(&mut model, &mut state, AlphaParams::average_acceleration());
    let md = [[2.0, 1.0, 0.0], [1.0, 4.0, 1.0], [0.0, 1.0, 2.0]];
    let kd = [[3.0, -1.0, 0.0], [-1.0, 2.0, -1.0], [0.0, -1.0, 1.0]];
    let cd = [0.2, 0.1, 0.3];
    for i in 0..3 {
        let lhs: f64 = (0..3).map(|j| md[i][j] * state.a[j]).sum::<f64>()
            + cd[i] * v0[i]
            + (0..3).map(|j| kd[i][j] * u0[j]).sum::<f64>();
        assert!((lhs - f[i]).abs() < 1e-13, "row {i}: {lhs} vs {}", f[i]);
    }
}

/// Fixed and prescribed DOFs are enforced exactly (no penalty): a chain of three springs
/// k = 100 between a fixed wall (DOF 0) and a slowly pulled end (DOF 3, u = 0.01 t). The
/// constrained displacements are exact at every step, and in the slow (quasi-static) regime the
/// reactions approach the series-spring force k/3 * u_end at both ends (statics of springs in
/// series; any mechanics text).
#[test]
fn constraints_are_exact_and_reactions_are_available() {
    let k = 100.0;
    let mut model = LinearModel::new(
        &common::diag(&[1.0, 1e-2, 1e-2, 1.0]),
        &common::chain_stiffness(4, k, false, false),
    )
    .unwrap()
    .with_rayleigh(2.0, 0.0)
    .unwrap()
    .with_constraints(
        Constraints::new()
            .fix(0)
            .prescribe_displacement(3, TimeFunction::function(|t| 0.01 * t)),
    )
    .unwrap();
    let mut state = State::at_rest(4, 0.0);
    let mut it = new(&mut model, &mut state, AlphaParams::hht(-0.1).unwrap());
    for _ in 0..200 {
        it.step(&mut model, &mut state, 0.05).unwrap();
        assert_eq!(state.u[0], 0.0);
        assert!((state.u[3] - 0.01 * state.t).abs() < 1e-15);
    }
    let u_end = 0.01 * state.t;
    let r = it.reactions();
    // Reaction at the wall pulls back (negative work sign convention: r = M a + C v + K u - f).
    assert!((r[0] + k / 3.0 * u_end).abs() < 1e-3 * k * u_end, "{r:?}");
    assert!((r[1] - k / 3.0 * u_end).abs() < 1e-2 * k * u_end, "{r:?}");
    // The puller put the energy in.
    assert!(it.energy().constraint_work > 0.0);
}

/// Rayleigh damping from two (frequency, ratio) pairs (Chopra, *Dynamics of Structures*,
/// eq. 11.4.9) gives the requested decay: a single mode at w1 decays like exp(-xi1 w1 t), measured
/// from successive peaks with average acceleration at a fine step.
#[test]
fn rayleigh_damping_from_two_modes_gives_the_requested_decay() {
    let (w1, w2, xi1, xi2) = (2.0f64, 10.0f64, 0.05f64, 0.02f64);
    let Damping::Rayleigh { a0, a1 } = Damping::rayleigh_from_modes(w1, xi1, w2, xi2).unwrap()
    else {
        unreachable!()
    };
    let mut model = common::sdof(1.0, w1 * w1).with_rayleigh(a0, a1).unwrap();
    let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
    let mut it = new(&mut model, &mut state, AlphaParams::average_acceleration());
    let dt = 1e-3;
    let mut peaks = Vec::new();
    let mut prev = (state.u[0], state.v[0]);
    while state.t < 10.0 {
        it.step(&mut model, &mut state, dt).unwrap();
        if prev.1 > 0.0 && state.v[0] <= 0.0 {
            peaks.push((state.t, state.u[0]));
        }
        prev = (state.u[0], state.v[0]);
    }
    let (t0, p0) = peaks[0];
    let (t1, p1) = *peaks.last().unwrap();
    // Peaks decay like exp(-xi w t): xi = ln(p0 / p1) / (w (t1 - t0)).
    let measured = (p0 / p1).ln() / (w1 * (t1 - t0));
    assert!((measured - xi1).abs() < 2e-3 * xi1 + 1e-4, "{measured}");
}

/// The run loop drives the implicit scheme; the ledger books the numerical dissipation of a
/// dissipative member separately, it is positive, and with it the balance closes.
#[test]
fn run_loop_and_ledger_with_numerical_dissipation() {
    let mut model = LinearModel::new(
        &common::diag(&[1.0; 5]),
        &common::chain_stiffness(5, 400.0, true, false),
    )
    .unwrap()
    .with_load(Load::Pattern {
        pattern: vec![0.0, 0.0, 0.0, 0.0, 1.0],
        factor: TimeFunction::table(vec![0.0, 0.1, 0.2], vec![0.0, 5.0, 0.0]).unwrap(),
    })
    .unwrap();
    for (p, dissipative) in [
        (AlphaParams::average_acceleration(), false),
        (AlphaParams::generalized_alpha(0.5).unwrap(), true),
    ] {
        let mut state = State::at_rest(5, 0.0);
        let mut it = new(&mut model, &mut state, p);
        let mut opts = RunOptions::new(3.0, StepControl::Fixed(0.02));
        opts.record.dofs = Some(vec![4]);
        let out = run(&mut it, &mut model, &mut state, &opts, |_| Flow::Continue).unwrap();
        assert!(matches!(out.stop, StopReason::EndTime));
        assert_eq!(out.steps, 150);
        let l = it.energy();
        assert!(l.external_work > 0.0);
        assert!(
            l.relative_balance_error() < 1e-12,
            "{}",
            l.relative_balance_error()
        );
        if dissipative {
            assert!(l.numerical_dissipation > 1e-3 * l.external_work, "{l:?}");
        } else {
            assert!(
                l.numerical_dissipation.abs() < 1e-12 * l.external_work,
                "{l:?}"
            );
        }
        assert_eq!(out.record.energy.len(), out.record.len());
    }
}

#[test]
fn bad_parameters_and_steps_are_typed_errors() {
    let mut model = common::sdof(1.0, 1.0);
    let mut state = State::at_rest(1, 0.0);
    // Sets the constructors refuse cannot reach the integrator.
    assert!(AlphaParams::raw(0.0, 1.0, 0.25, 0.5).is_err());
    assert!(AlphaParams::raw(0.0, 0.0, 0.25, f64::NAN).is_err());
    // beta = 0 is the explicit member: refused for implicit stepping.
    let p = AlphaParams::newmark(0.0, 0.5).unwrap();
    let e = AlphaIntegrator::new(
        &mut model,
        &mut state,
        p,
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap_err();
    assert!(matches!(e, Error::InvalidParameter { .. }), "{e}");
    let mut it = new(&mut model, &mut state, AlphaParams::average_acceleration());
    for dt in [0.0, -1.0, f64::NAN] {
        assert!(matches!(
            it.step(&mut model, &mut state, dt),
            Err(Error::InvalidStep { .. })
        ));
    }
    let mut wrong = State::at_rest(2, 0.0);
    assert!(matches!(
        it.step(&mut model, &mut wrong, 0.1),
        Err(Error::DimensionMismatch { .. })
    ));
}

/// An indefinite iteration matrix (a negative-stiffness spring stepped with a long step:
/// J = 4 m / dt^2 + k < 0) given to the sparse Cholesky solver is a typed error naming the
/// problem, and the state is kept; the sparse LU solver takes it. A singular consistent mass is
/// refused at the start.
#[test]
fn indefinite_or_singular_matrices_are_typed_errors() {
    use stepgauge::linalg::{SparseCholesky, SparseLu};
    let make = || LinearModel::new(&common::diag(&[1.0]), &common::diag(&[-100.0])).unwrap();
    let mut model = make();
    let mut state = State::new(0.0, vec![0.01], vec![0.0]).unwrap();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap();
    let before = state.clone();
    let e = it.step(&mut model, &mut state, 0.5).unwrap_err();
    assert!(matches!(e, Error::NotPositiveDefinite { .. }), "{e}");
    assert!(
        e.to_string().contains("not symmetric positive definite"),
        "{e}"
    );
    assert_eq!(state, before);
    // A short step keeps J = 4/dt^2 - 100 positive.
    it.step(&mut model, &mut state, 0.05).unwrap();

    let mut model = make();
    let mut state = State::new(0.0, vec![0.01], vec![0.0]).unwrap();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(SparseLu::new()),
        ImplicitOptions::default(),
    )
    .unwrap();
    it.step(&mut model, &mut state, 0.5).unwrap();

    let mut model = LinearModel::new(
        &common::dense(&[&[1.0, 0.0], &[0.0, 0.0]]),
        &common::diag(&[1.0, 1.0]),
    )
    .unwrap();
    let mut state = State::at_rest(2, 0.0);
    let e = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap_err();
    assert!(
        matches!(
            e,
            Error::NotPositiveDefinite { .. } | Error::SingularMatrix { .. }
        ),
        "{e}"
    );
}

/// The sparse solvers drive the integrator to the same history as a dense solve (2-DOF example
/// of Bathe, *Finite Element Procedures*, 1996, with HHT).
#[test]
fn sparse_solvers_give_the_dense_history() {
    use stepgauge::linalg::{CgOptions, ConjugateGradient, LinearSolver, SparseCholesky, SparseLu};
    let history = |solver: Box<dyn LinearSolver>| {
        let mut model = LinearModel::new(
            &common::diag(&[2.0, 1.0]),
            &common::dense(&[&[6.0, -2.0], &[-2.0, 4.0]]),
        )
        .unwrap()
        .with_load(Load::Pattern {
            pattern: vec![0.0, 10.0],
            factor: TimeFunction::Constant(1.0),
        })
        .unwrap();
        let mut state = State::at_rest(2, 0.0);
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::hht(-0.05).unwrap(),
            solver,
            ImplicitOptions::default(),
        )
        .unwrap();
        let mut h = Vec::new();
        for _ in 0..20 {
            it.step(&mut model, &mut state, 0.28).unwrap();
            h.push(state.u.clone());
        }
        h
    };
    let dense = history(common::DenseLu::boxed());
    let cg = ConjugateGradient::new({
        let mut o = CgOptions::default();
        o.relative_tolerance = 1e-14;
        o
    })
    .unwrap();
    for other in [
        history(Box::new(SparseCholesky::new())),
        history(Box::new(SparseLu::new())),
        history(Box::new(cg)),
    ] {
        for (a, b) in dense.iter().zip(&other) {
            for (x, y) in a.iter().zip(b) {
                assert!((x - y).abs() < 1e-10, "{x} vs {y}");
            }
        }
    }
}

/// A change of step size refactors the iteration matrix (numerically, on the symbolic analysis
/// done once): a history with varying steps on the sparse Cholesky path equals the dense solve.
#[test]
fn changing_the_step_refactors_correctly() {
    use stepgauge::linalg::{LinearSolver, SparseCholesky};
    let steps = [0.1, 0.2, 0.2, 0.05, 0.1, 0.3, 0.3, 0.1];
    let history = |solver: Box<dyn LinearSolver>| {
        let mut model = LinearModel::new(
            &common::dense_band_mass(6),
            &common::chain_stiffness(6, 30.0, true, true),
        )
        .unwrap()
        .with_rayleigh(0.1, 0.01)
        .unwrap();
        let mut state =
            State::new(0.0, vec![0.1, 0.0, -0.1, 0.2, 0.0, 0.05], vec![0.0; 6]).unwrap();
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::wbz(-0.1).unwrap(),
            solver,
            ImplicitOptions::default(),
        )
        .unwrap();
        assert!(it.is_linear());
        steps
            .iter()
            .map(|&dt| {
                it.step(&mut model, &mut state, dt).unwrap();
                state.u.clone()
            })
            .collect::<Vec<_>>()
    };
    let a = history(Box::new(SparseCholesky::new()));
    let b = history(common::DenseLu::boxed());
    for (x, y) in a.iter().flatten().zip(b.iter().flatten()) {
        assert!((x - y).abs() < 1e-12, "{x} vs {y}");
    }
}

/// A linear model whose damping force `C v` is given as the model's own force
/// (`Damping::Force`), without its matrix: every other method forwards to the `LinearModel`.
struct HiddenDamping(LinearModel);

impl stepgauge::model::Model for HiddenDamping {
    fn dofs(&self) -> usize {
        self.0.dofs()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.0.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), stepgauge::ModelError> {
        self.0.internal_force(t, u, v, out)
    }
    fn damping(&self) -> Damping<'_> {
        Damping::Force
    }
    fn damping_force(
        &mut self,
        _t: f64,
        _u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), stepgauge::ModelError> {
        match self.0.damping() {
            Damping::Matrix(c) => {
                c.mul_vec(v, out, stepgauge::linalg::Parallelism::serial());
                Ok(())
            }
            _ => Err(stepgauge::ModelError::NotProvided("damping_force")),
        }
    }
    fn mass_matrix(&self) -> Option<&stepgauge::linalg::CsrMatrix> {
        stepgauge::model::Model::mass_matrix(&self.0)
    }

    fn hints(&self) -> stepgauge::model::Hints<'_> {
        stepgauge::model::Hints::default().linear()
    }
    fn stored_energy(&self, u: &[f64]) -> Option<f64> {
        self.0.stored_energy(u)
    }
}

forward_tangent!(HiddenDamping);

/// A damping force with and without its matrix gives the same solution and damping work: the
/// model without the matrix is stepped with Newton iterations checked against the residual (the
/// iteration matrix lacks `C`), not as a linear model taking one correction. Both against the
/// exact damped free vibration `u = e^(-xi w t) (cos w_d t + xi w / w_d sin w_d t)` (exact
/// solution) on a two-DOF diagonal model with `xi = 0.05` and `0.2` in its two modes. Before, the
/// model without the matrix took one correction per step and was off by about `xi dt w` a step.
#[test]
fn a_damping_force_without_its_matrix_is_not_treated_as_linear() {
    let (w1, w2) = (2.0f64, 5.0f64);
    let (x1, x2) = (0.05f64, 0.2f64);
    let m = common::diag(&[1.0, 1.0]);
    let k = common::diag(&[w1 * w1, w2 * w2]);
    let c = common::diag(&[2.0 * x1 * w1, 2.0 * x2 * w2]);
    let make = || {
        LinearModel::new(&m, &k)
            .unwrap()
            .with_damping_matrix(&c)
            .unwrap()
    };
    let exact = |w: f64, xi: f64, t: f64| {
        let wd = w * (1.0 - xi * xi).sqrt();
        (-xi * w * t).exp() * ((wd * t).cos() + xi * w / wd * (wd * t).sin())
    };
    let dt = 0.01;
    let steps = 400;
    let p = AlphaParams::average_acceleration();
    let opts = ImplicitOptions::default();
    let mut with = make();
    let mut s1 = State::new(0.0, vec![1.0, 1.0], vec![0.0, 0.0]).unwrap();
    let mut it1 = AlphaIntegrator::new(
        &mut with,
        &mut s1,
        p,
        common::DenseLu::boxed(),
        opts.clone(),
    )
    .unwrap();
    let mut without = HiddenDamping(make());
    let mut s2 = s1.clone();
    let mut it2 =
        AlphaIntegrator::new(&mut without, &mut s2, p, common::DenseLu::boxed(), opts).unwrap();
    assert!(it1.is_linear());
    assert!(
        !it2.is_linear(),
        "a damping force without its matrix is not linear"
    );
    let (mut diff, mut err) = (0.0f64, 0.0f64);
    for n in 1..=steps {
        it1.step(&mut with, &mut s1, dt).unwrap();
        it2.step(&mut without, &mut s2, dt).unwrap();
        let t = n as f64 * dt;
        for i in 0..2 {
            diff = diff.max((s1.u[i] - s2.u[i]).abs());
        }
        err = err
            .max((s2.u[0] - exact(w1, x1, t)).abs())
            .max((s2.u[1] - exact(w2, x2, t)).abs());
    }
    // The Newton iterations stop at the default residual tolerance (1e-8 of the force scale):
    // the two solutions agree to about that, relative to the unit amplitude.
    assert!(
        diff <= 1e-7,
        "with and without the matrix differ by {diff:e}"
    );
    // Second order: (w dt)^2 / 12 relative phase error over 4 s, about 1e-3 of the amplitude.
    assert!(err <= 5e-3, "error against the exact solution {err:e}");
    let (d1, d2) = (it1.energy().damping_work, it2.energy().damping_work);
    assert!((d1 - d2).abs() <= 1e-7 * d1, "damping work {d1} vs {d2}");
}

/// The implicit growth guard on a spring released from a deformed shape without
/// `stored_energy`, with no load and a tiny one: the trapezoidal rule is stable at any step, so
/// 500 steps at `Omega = 3` must pass the guard (its budget is the work of getting to the start's
/// shape, not the load's 1e-12 alone).
#[test]
fn implicit_growth_guard_for_a_deformed_release_without_stored_energy() {
    for load in [0.0, 1e-12] {
        let mut model = common::BareSpring::new(1.0, load);
        let mut state = State::new(0.0, vec![1.0], vec![0.0]).unwrap();
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::average_acceleration(),
            common::DenseLu::boxed(),
            ImplicitOptions::default(),
        )
        .unwrap();
        for n in 0..500 {
            it.step(&mut model, &mut state, 3.0)
                .unwrap_or_else(|e| panic!("load {load}: step {n}: {e}"));
        }
        assert!(state.u[0].abs() <= 1.0 + 1e-9);
    }
}

/// A linear model whose load fails after a time (a table read beyond its end, say), on the
/// implicit linear path with a consistent mass (the model says it is linear and gives its
/// stiffness): the error is the
/// model's, names the step and the time being computed, and the state is the last accepted one;
/// a load that turns NaN is reported as a non-finite state at that step and time.
/// With `nan`, the load turns NaN at DOF 1 instead of failing.
struct LoadFailsAfter(LinearModel, f64, bool);

impl stepgauge::model::Model for LoadFailsAfter {
    fn dofs(&self) -> usize {
        self.0.dofs()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.0.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), stepgauge::ModelError> {
        self.0.internal_force(t, u, v, out)
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), stepgauge::ModelError> {
        if t > self.1 {
            if self.2 {
                out.fill(0.0);
                out[1] = f64::NAN;
                return Ok(());
            }
            return Err(stepgauge::ModelError::failed("load table ends"));
        }
        self.0.external_force(t, out)
    }
    fn mass_matrix(&self) -> Option<&stepgauge::linalg::CsrMatrix> {
        stepgauge::model::Model::mass_matrix(&self.0)
    }

    fn hints(&self) -> stepgauge::model::Hints<'_> {
        // The stiffness, but not the wrapped model's `unloaded`.
        stepgauge::model::Hints::default().stiffness(self.0.stiffness_matrix())
    }
}

forward_tangent!(LoadFailsAfter);

#[test]
fn a_failing_load_on_the_linear_path_names_its_step_and_time() {
    // A consistent mass (the general linear path) and a lumped one (the fused path).
    for mass in [
        common::dense(&[&[2.0, 1.0], &[1.0, 2.0]]),
        common::diag(&[1.0, 2.0]),
    ] {
        for nan in [false, true] {
            failing_load(&mass, nan);
        }
    }
}

fn failing_load(mass: &sprs::CsMat<f64>, nan: bool) {
    let mut model = LoadFailsAfter(
        LinearModel::new(mass, &common::dense(&[&[3.0, -1.0], &[-1.0, 2.0]]))
            .unwrap()
            .with_load(Load::Pattern {
                pattern: vec![1.0, 0.0],
                factor: TimeFunction::Constant(1.0),
            })
            .unwrap(),
        0.35,
        nan,
    );
    let mut state = State::at_rest(2, 0.0);
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap();
    for _ in 0..3 {
        it.step(&mut model, &mut state, 0.1).unwrap();
    }
    let good = state.clone();
    // The linear path: one solve a step.
    assert_eq!(it.last_report().iterations, 1);
    let e = it.step(&mut model, &mut state, 0.1).unwrap_err();
    match e {
        Error::Model { step: 4, t, .. } if !nan => assert!((t - 0.4).abs() < 1e-12, "{t}"),
        // A NaN load: the non-finite result is reported at once with the step and time.
        Error::NonFiniteState { step: 4, t, .. } if nan => {
            assert!((t - 0.4).abs() < 1e-12, "{t}")
        }
        other => panic!("nan {nan}: {other}"),
    }
    assert_eq!(state, good);
}

/// Rayleigh damping's stiffness part comes from the model's tangent when the model gives no
/// stiffness product: the same model with and without the product steps bit for bit alike
/// (both products are the same matrix times the same vector, in the same order). A check of the
/// integrator's own bookkeeping, not of an outside result.
#[test]
fn rayleigh_stiffness_part_from_the_tangent() {
    let n = 12;
    let masses: Vec<f64> = (0..n).map(|i| 1.0 + 0.2 * (i % 3) as f64).collect();
    let base = || {
        LinearModel::new(
            &common::diag(&masses),
            &common::chain_stiffness(n, 40.0, true, false),
        )
        .unwrap()
        .with_rayleigh(0.3, 0.01)
        .unwrap()
    };
    let walk = |products: bool| {
        let mut model = common::Opaque {
            model: base(),
            products,
        };
        let u0: Vec<f64> = (0..n).map(|i| 0.01 * (i as f64 + 1.0)).collect();
        let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::hht(-0.05).unwrap(),
            common::DenseLu::boxed(),
            ImplicitOptions::default(),
        )
        .unwrap();
        for _ in 0..30 {
            it.step(&mut model, &mut state, 0.02).unwrap();
        }
        (state, it.energy().damping_work)
    };
    let (s1, w1) = walk(true);
    let (s2, w2) = walk(false);
    assert_eq!(s1.u, s2.u);
    assert_eq!(s1.v, s2.v);
    assert_eq!(w1.to_bits(), w2.to_bits());
    // The damping did work (a test of an undamped run would prove nothing).
    assert!(w1.abs() > 1e-6, "{w1}");
}

/// A model that gives its consistent mass matrix and no lumped mass: the implicit scheme uses the
/// matrix, the explicit one its row sums (row-sum lumping, common practice); a model that gives
/// neither is refused with the mass error, which names both ways.
#[test]
fn a_consistent_mass_alone_is_enough() {
    struct MatrixMass {
        m: stepgauge::linalg::CsrMatrix,
        k: stepgauge::linalg::CsrMatrix,
        give_mass: bool,
    }
    impl stepgauge::model::Model for MatrixMass {
        fn dofs(&self) -> usize {
            self.k.nrows()
        }
        fn internal_force(
            &mut self,
            _t: f64,
            u: &[f64],
            _v: &[f64],
            out: &mut [f64],
        ) -> Result<(), stepgauge::ModelError> {
            self.k
                .mul_vec(u, out, stepgauge::linalg::Parallelism::serial());
            Ok(())
        }
        fn mass_matrix(&self) -> Option<&stepgauge::linalg::CsrMatrix> {
            self.give_mass.then_some(&self.m)
        }
    }
    impl stepgauge::model::Tangent for MatrixMass {
        fn tangent_pattern(&self) -> &stepgauge::linalg::CsrMatrix {
            &self.k
        }
        fn tangent_stiffness(
            &mut self,
            _t: f64,
            _u: &[f64],
            _v: &[f64],
            out: &mut stepgauge::linalg::CsrMatrix,
        ) -> Result<(), stepgauge::ModelError> {
            out.data_mut().copy_from_slice(self.k.data());
            Ok(())
        }
    }
    use stepgauge::model::Model;
    let n = 6;
    let m = common::dense_band_mass(n);
    let csr = |a: &sprs::CsMat<f64>| stepgauge::linalg::CsrMatrix::from_sprs("matrix", a).unwrap();
    let mut model = MatrixMass {
        m: csr(&m),
        k: csr(&common::chain_stiffness(n, 50.0, true, true)),
        give_mass: true,
    };
    let mut lumped = vec![0.0; n];
    model.lumped_mass(&mut lumped);
    assert_eq!(lumped, model.m.row_sums());
    let start = State::new(0.0, vec![0.0; n], vec![0.1; n]).unwrap();
    let mut state = start.clone();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap();
    for _ in 0..20 {
        it.step(&mut model, &mut state, 0.01).unwrap();
    }
    assert!(it.energy().relative_balance_error() < 1e-12);
    let mut state = start.clone();
    let mut cd = stepgauge::explicit::CentralDifference::new(
        &mut model,
        &mut state,
        stepgauge::explicit::CentralDifferenceOptions::default(),
    )
    .unwrap();
    let dt = 0.5 * cd.stable_limit().unwrap();
    cd.step(&mut model, &mut state, dt).unwrap();

    model.give_mass = false;
    let mut state = start.clone();
    let e = stepgauge::explicit::CentralDifference::new(
        &mut model,
        &mut state,
        stepgauge::explicit::CentralDifferenceOptions::default(),
    )
    .unwrap_err();
    assert!(matches!(e, Error::NonPositiveMass { dof: 0, .. }), "{e}");
    assert!(e.to_string().contains("Model::mass_matrix"), "{e}");
}
