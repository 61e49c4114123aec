//! The implicit family on nonlinear problems: a hardening oscillator against a tight-tolerance
//! reference from SciPy (committed data), Newton's quadratic convergence, modified Newton, line
//! search, cut-back and failure at the smallest step.

mod common;

use common::Duffing;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions, NewtonOptions, NewtonVariant};
use stepgauge::model::Model;
use stepgauge::params::AlphaParams;
use stepgauge::{Error, ModelError, State};

fn start(p: AlphaParams, newton: NewtonOptions) -> (Duffing, State, AlphaIntegrator) {
    start_at(p, newton, 0.5)
}

fn start_at(p: AlphaParams, newton: NewtonOptions, u0: f64) -> (Duffing, State, AlphaIntegrator) {
    let mut model = Duffing::reference();
    let mut state = State::new(0.0, vec![u0], vec![0.0]).unwrap();
    let mut opts = ImplicitOptions::default();
    opts.newton = newton;
    let it =
        AlphaIntegrator::new(&mut model, &mut state, p, common::DenseLu::boxed(), opts).unwrap();
    (model, state, it)
}

/// The displacements at the reference's output times (every 0.1 s) for step `dt`, from `u0`.
fn run_at_rows(p: AlphaParams, dt: f64, u0: f64, rows: &[(f64, f64, f64)]) -> Vec<f64> {
    let (mut model, mut state, mut it) = start_at(p, NewtonOptions::default(), u0);
    let per_row = (0.1 / dt).round() as usize;
    let mut out = Vec::with_capacity(rows.len() - 1);
    for row in &rows[1..] {
        for _ in 0..per_row {
            it.step(&mut model, &mut state, dt).unwrap();
        }
        assert!((state.t - row.0).abs() < 1e-9);
        out.push(state.u[0]);
    }
    out
}

/// Largest deviation from the reference at its output times (every 0.1 s) for step `dt`.
fn max_error(p: AlphaParams, dt: f64) -> f64 {
    let reference = common::duffing_reference();
    let u = run_at_rows(p, dt, 0.5, &reference);
    u.iter()
        .zip(&reference[1..])
        .fold(0.0, |m: f64, (x, r)| m.max((x - r.1).abs()))
}

/// The reference tables are accurate to about 1e-12 (DOP853 at rtol 1e-13 against Radau at
/// rtol 1e-12, the `agrees within` line of each file's header).
const TABLE_ERROR: f64 = 1e-11;

/// The error of the finest of three runs (steps `dt`, `dt/2`, `dt/4`) against the reference must
/// be the scheme's own step error, estimated without the reference (Richardson): for a method of
/// order `p >= 1.85` (the slope checked beside it), `|u_fine - u| <= |u_mid - u_fine| /
/// (2^1.85 - 1)` to leading order, plus the table's own error.
fn richardson_bound(mid: &[f64], fine: &[f64]) -> f64 {
    let diff = mid
        .iter()
        .zip(fine)
        .fold(0.0, |m: f64, (a, b)| m.max((a - b).abs()));
    diff / (2f64.powf(1.85) - 1.0) + TABLE_ERROR
}

/// Hardening oscillator m u'' + c u' + k u + k3 u^3 = F0 sin(w t) (our own parameters) against
/// SciPy's DOP853 at rtol 1e-13, cross-checked by Radau (tests/data/duffing_reference.py, output
/// committed in tests/data/duffing_reference.csv): the error falls at second order and is small.
#[test]
fn hardening_oscillator_matches_the_scipy_reference() {
    for p in [
        AlphaParams::average_acceleration(),
        AlphaParams::hht(-0.1).unwrap(),
        AlphaParams::generalized_alpha(0.7).unwrap(),
    ] {
        let errs: Vec<f64> = [0.02, 0.01, 0.005]
            .iter()
            .map(|&dt| max_error(p, dt))
            .collect();
        for w in errs.windows(2) {
            let slope = (w[0] / w[1]).log2();
            assert!(
                (slope - 2.0).abs() < 0.15,
                "{p:?}: slope {slope}, errors {errs:?}"
            );
        }
        // The finest error is the step error the runs themselves estimate (before: a fixed
        // 2e-3, about 30 times the error measured).
        let reference = common::duffing_reference();
        let mid = run_at_rows(p, 0.01, 0.5, &reference);
        let fine = run_at_rows(p, 0.005, 0.5, &reference);
        let bound = richardson_bound(&mid, &fine);
        assert!(errs[2] <= bound, "{p:?}: {errs:?}, bound {bound:e}");
    }
}

/// The hardening oscillator with its cubic term given as a named extra force
/// (`Model::extra_force`) rather than inside the internal force; the tangent still includes it.
struct CubicAsExtra(Duffing);

impl Model for CubicAsExtra {
    fn dofs(&self) -> usize {
        1
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.0.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        out[0] = self.0.k * u[0];
        Ok(())
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), ModelError> {
        self.0.external_force(t, out)
    }
    fn damping(&self) -> stepgauge::model::Damping<'_> {
        self.0.damping()
    }
    fn damping_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.0.damping_force(t, u, v, out)
    }

    fn extra_force_names(&self) -> Vec<String> {
        vec!["cubic".to_string()]
    }
    fn extra_force(
        &mut self,
        _index: usize,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        out[0] = self.0.k3 * u[0].powi(3);
        Ok(())
    }
}

forward_tangent!(CubicAsExtra);

/// The cubic term as an extra force gives the oscillator's solution: against the SciPy reference
/// (as `hardening_oscillator_matches_the_scipy_reference`, within the Richardson estimate of the
/// runs' own step error at 0.01 and 0.005), and its work is booked under its name, each step's
/// trapezoid `(u_{n+1} - u_n) (f_n + f_{n+1}) / 2` of `f = k3 u^3`, as is the damping work of
/// `f = c v` (the ledger's rule, evaluated
/// here from the states: a re-derivation, to rounding: a few operations a step on terms of the
/// size of the work).
#[test]
fn an_extra_force_enters_the_residual_and_the_ledger() {
    let reference = common::duffing_reference();
    let p = AlphaParams::hht(-0.1).unwrap();
    let mut runs = Vec::new();
    for dt in [0.01f64, 0.005] {
        let mut model = CubicAsExtra(Duffing::reference());
        let mut state = State::new(0.0, vec![0.5], vec![0.0]).unwrap();
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            p,
            common::DenseLu::boxed(),
            ImplicitOptions::default(),
        )
        .unwrap();
        let (k3, c) = (model.0.k3, model.0.c());
        let per_row = (0.1 / dt).round() as usize;
        let (mut work, mut scale, mut n) = (0.0f64, 0.0f64, 0usize);
        let (mut damping, mut d_scale) = (0.0f64, 0.0f64);
        let mut u = Vec::new();
        for row in &reference[1..] {
            for _ in 0..per_row {
                let (u0, v0) = (state.u[0], state.v[0]);
                it.step(&mut model, &mut state, dt).unwrap();
                let u1 = state.u[0];
                work += 0.5 * (u1 - u0) * (k3 * u0.powi(3) + k3 * u1.powi(3));
                // The damping work likewise, of the force `c v`.
                damping += 0.5 * (u1 - u0) * (c * v0 + c * state.v[0]);
                d_scale = d_scale.max(damping.abs());
                scale = scale.max(work.abs());
                n += 1;
                let got = it.energy().extra_work[0];
                let tol = n as f64 * 10.0 * f64::EPSILON * scale.max(f64::MIN_POSITIVE);
                assert!((got - work).abs() <= tol, "step {n}: {got} vs {work}");
                let got = it.energy().damping_work;
                let tol = n as f64 * 10.0 * f64::EPSILON * d_scale.max(f64::MIN_POSITIVE);
                assert!((got - damping).abs() <= tol, "step {n}: {got} vs {damping}");
            }
            assert!((state.t - row.0).abs() < 1e-9, "{} vs {}", state.t, row.0);
            u.push(state.u[0]);
        }
        assert!(scale > 0.1, "the cubic force did work: {scale}");
        runs.push(u);
    }
    let err = runs[1]
        .iter()
        .zip(&reference[1..])
        .fold(0.0, |m: f64, (x, r)| m.max((x - r.1).abs()));
    let bound = richardson_bound(&runs[0], &runs[1]);
    assert!(err <= bound, "error {err:e}, bound {bound:e}");
}

/// Newton from rest: the same oscillator and load started at `u = v = 0`, where the load starts
/// at zero and the first steps' forces are tiny (a relative convergence test must not divide by
/// them), against SciPy's DOP853 from rest (`tests/data/duffing_from_rest.csv`, made by
/// `tests/data/duffing_reference.py`, cross-checked by Radau): second order, and the finest error
/// within the Richardson estimate of the runs' own step error.
#[test]
fn newton_from_rest_matches_the_scipy_reference() {
    let rows = common::duffing_from_rest();
    assert_eq!(rows.len(), 101);
    assert_eq!(
        (rows[0].1, rows[0].2),
        (0.0, 0.0),
        "the table starts from rest"
    );
    for p in [
        AlphaParams::average_acceleration(),
        AlphaParams::generalized_alpha(0.7).unwrap(),
    ] {
        let runs: Vec<Vec<f64>> = [0.02, 0.01, 0.005]
            .iter()
            .map(|&dt| run_at_rows(p, dt, 0.0, &rows))
            .collect();
        let errs: Vec<f64> = runs
            .iter()
            .map(|u| {
                u.iter()
                    .zip(&rows[1..])
                    .fold(0.0, |m: f64, (x, r)| m.max((x - r.1).abs()))
            })
            .collect();
        for w in errs.windows(2) {
            let slope = (w[0] / w[1]).log2();
            assert!(
                (slope - 2.0).abs() < 0.15,
                "{p:?}: slope {slope}, errors {errs:?}"
            );
        }
        let bound = richardson_bound(&runs[1], &runs[2]);
        assert!(errs[2] <= bound, "{p:?}: {errs:?}, bound {bound:e}");
    }
}

/// Full Newton converges quadratically: on a hard step the estimated order
/// log(r_{k+1}/r_k) / log(r_k/r_{k-1}) is near 2 (Newton's method with an exact Jacobian; e.g.
/// Dennis & Schnabel 1983, *Numerical Methods for Unconstrained Optimization*, thm. 5.2.1).
#[test]
fn full_newton_converges_quadratically() {
    let mut newton = NewtonOptions::default();
    newton.residual_tolerance = 1e-13;
    newton.displacement_tolerance = 1e-13;
    let (mut model, mut state, mut it) = start(AlphaParams::average_acceleration(), newton);
    model.f0 = 30.0; // drive it hard so that steps need several iterations
    let mut best: Option<Vec<f64>> = None;
    for _ in 0..20 {
        it.step(&mut model, &mut state, 0.25).unwrap();
        let r = it.last_report().residuals.clone();
        if best.as_ref().is_none_or(|b| r.len() > b.len()) {
            best = Some(r);
        }
    }
    let r = best.unwrap();
    // The residuals above round-off level of the longest iteration history.
    let useful: Vec<f64> = r.into_iter().filter(|x| *x > 1e-12).collect();
    assert!(useful.len() >= 3, "too few iterations to judge: {useful:?}");
    let n = useful.len();
    let order = (useful[n - 1] / useful[n - 2]).ln() / (useful[n - 2] / useful[n - 3]).ln();
    assert!(
        order > 1.7,
        "convergence order {order}, residuals {useful:?}"
    );
}

/// Modified Newton and the line search reach the same solution as full Newton (to the
/// tolerances); modified Newton needs more iterations (linear convergence).
#[test]
fn modified_newton_and_line_search_reach_the_same_solution() {
    let mut tight = NewtonOptions::default();
    tight.residual_tolerance = 1e-11;
    tight.displacement_tolerance = 1e-11;
    tight.max_iterations = 60;
    let run = |newton: NewtonOptions| {
        let (mut model, mut state, mut it) = start(AlphaParams::hht(-0.2).unwrap(), newton);
        model.f0 = 10.0;
        let mut iters = 0usize;
        for _ in 0..40 {
            let r = it.step(&mut model, &mut state, 0.1).unwrap();
            iters += r.iterations as usize;
        }
        (state.u[0], iters)
    };
    let (u_full, it_full) = run(tight);
    let (u_mod, it_mod) = run({
        let mut o = tight;
        o.variant = NewtonVariant::Modified { refresh_every: 0 };
        o
    });
    let (u_mod3, _) = run({
        let mut o = tight;
        o.variant = NewtonVariant::Modified { refresh_every: 3 };
        o
    });
    let (u_ls, _) = run({
        let mut o = tight;
        o.line_search = true;
        o
    });
    for u in [u_mod, u_mod3, u_ls] {
        assert!((u - u_full).abs() < 1e-8, "{u} vs {u_full}");
    }
    assert!(it_mod > it_full, "modified {it_mod} vs full {it_full}");
}

/// Newton stops only when every criterion holds (residual, displacement increment and energy;
/// `NewtonOptions`): with one criterion tight and the others loose, each run ends as tightly
/// converged as that criterion demands. The residual: the last relative residual of every step
/// is within its tolerance. The displacement increment: the run agrees with a fully converged
/// one to 1e-12 (an increment below `1e-13` of the step's change leaves an error of that order;
/// quadratic convergence puts the next one far below), where the loose run does not.
#[test]
fn newton_stops_only_when_every_criterion_holds() {
    let mut loose = NewtonOptions::default();
    loose.residual_tolerance = 0.5;
    loose.displacement_tolerance = 0.5;
    loose.energy_tolerance = 0.5;
    let run = |newton: NewtonOptions, check_residual: bool| {
        let (mut model, mut state, mut it) = start(AlphaParams::average_acceleration(), newton);
        for _ in 0..40 {
            it.step(&mut model, &mut state, 0.25).unwrap();
            if check_residual {
                let last = *it.last_report().residuals.last().unwrap();
                assert!(last <= newton.residual_tolerance, "residual {last:e}");
            }
        }
        state.u[0]
    };
    let tight = run(NewtonOptions::default(), false);
    let sloppy = run(loose, false);
    assert!(
        (sloppy - tight).abs() > 1e-9,
        "the loose run is not distinguishable: {sloppy} vs {tight}"
    );
    run(
        {
            let mut o = loose;
            o.residual_tolerance = 1e-13;
            o
        },
        true,
    );
    let by_increment = run(
        {
            let mut o = loose;
            o.displacement_tolerance = 1e-13;
            o
        },
        false,
    );
    assert!(
        (by_increment - tight).abs() <= 1e-12,
        "{by_increment} vs {tight}"
    );
}

/// With few iterations allowed, a large step is cut back and regrown, and still reaches its end.
#[test]
fn hard_steps_are_cut_back_and_regrown() {
    let mut newton = NewtonOptions::default();
    newton.max_iterations = 4;
    let (mut model, mut state, mut it) = start(AlphaParams::average_acceleration(), newton);
    model.f0 = 40.0;
    let mut cut = 0;
    let mut sub = 0;
    for _ in 0..10 {
        it.step(&mut model, &mut state, 0.5).unwrap();
        cut += it.last_report().cutbacks;
        sub += it.last_report().substeps;
    }
    assert!(cut > 0, "no cut-back happened");
    assert!(sub > 10, "no sub-steps were taken");
    assert!((state.t - 5.0).abs() < 1e-12);
}

/// The hardening oscillator with its load, recording the time of every accepted sub-step.
struct Timed(Duffing, Vec<f64>);

impl Model for Timed {
    fn dofs(&self) -> usize {
        1
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
    ) -> Result<(), ModelError> {
        self.0.internal_force(t, u, v, out)
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), ModelError> {
        self.0.external_force(t, out)
    }

    fn damping(&self) -> stepgauge::model::Damping<'_> {
        self.0.damping()
    }
    fn damping_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.0.damping_force(t, u, v, out)
    }
    fn accept_step(&mut self, t: f64) {
        self.1.push(t);
    }
}

forward_tangent!(Timed);

/// The sub-steps of a cut-back step partition it: every accepted sub-step ends inside the step,
/// the times increase, the last one is the step's end (to the rounding of `t + (t_end - t)`),
/// and there are as many as the report counts; after a regrowth the last sub-step is shortened
/// to land on the end rather than pass it.
#[test]
fn cut_back_sub_steps_partition_the_step() {
    let mut newton = NewtonOptions::default();
    newton.max_iterations = 4;
    newton.regrow_after = 1;
    let (d, mut state, mut it) = start(AlphaParams::average_acceleration(), newton);
    let mut model = Timed(d, Vec::new());
    model.0.f0 = 40.0;
    let (mut cut, mut shortened) = (0, 0);
    for n in 0..40 {
        let t0 = state.t;
        let t_end = t0 + 0.5;
        model.1.clear();
        it.step(&mut model, &mut state, 0.5).unwrap();
        let r = it.last_report();
        cut += r.cutbacks;
        let times = &model.1;
        assert_eq!(times.len(), r.substeps as usize, "step {n}");
        let mut prev = t0;
        for &t in times {
            assert!(
                t > prev && t <= t_end + 4.0 * f64::EPSILON * t_end,
                "step {n}: {times:?}"
            );
            prev = t;
        }
        let last = *times.last().unwrap();
        assert!(
            (last - t_end).abs() <= 4.0 * f64::EPSILON * t_end,
            "step {n}: {times:?}"
        );
        // A last sub-step shorter than the one before it: cut to land on the end.
        if let [.., a, b, c] = times[..]
            && c - b < b - a - 1e-12
        {
            shortened += 1;
        }
        assert_eq!(state.t, t_end);
    }
    assert!(cut > 0, "no cut-back happened");
    assert!(
        shortened > 0,
        "no sub-step was shortened to land on the end"
    );
}

/// A model that fails beyond a time: the failure persists at the smallest step, the error is the
/// model's, typed, and the state is the last converged one.
struct Breaks(Duffing, f64);

impl Model for Breaks {
    fn dofs(&self) -> usize {
        1
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
    ) -> Result<(), ModelError> {
        if t > self.1 {
            return Err(ModelError::failed("material point failed"));
        }
        self.0.internal_force(t, u, v, out)
    }
}

forward_tangent!(Breaks);

/// The kept state is a converged one: its acceleration satisfies the (undamped, unloaded)
/// equation of motion `m a + f_int(u) = 0` to the Newton tolerance (1e-8 relative to the force),
/// and the energy ledger belongs to it (the kinetic energy of its velocity).
fn assert_converged(d: &mut Duffing, state: &State, it: &AlphaIntegrator) {
    let (mut f, mut m) = ([0.0], [0.0]);
    d.internal_force(state.t, &state.u, &state.v, &mut f)
        .unwrap();
    d.lumped_mass(&mut m);
    let residual = m[0] * state.a[0] + f[0];
    assert!(
        residual.abs() <= 1e-7 * f[0].abs().max(1.0),
        "t = {}: residual {residual:e} of a kept state",
        state.t
    );
    let kinetic = 0.5 * m[0] * state.v[0] * state.v[0];
    assert!((it.energy().kinetic - kinetic).abs() <= 1e-14 * kinetic.max(1e-300));
}

/// A model whose internal force is NaN beyond a time (a material law that breaks down without
/// reporting it).
struct GoesNan(Duffing, f64);

impl Model for GoesNan {
    fn dofs(&self) -> usize {
        1
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
    ) -> Result<(), ModelError> {
        self.0.internal_force(t, u, v, out)?;
        if t > self.1 {
            out[0] = f64::NAN;
        }
        Ok(())
    }
}

forward_tangent!(GoesNan);

/// A non-finite internal force is reported at once, as the model's failure at a DOF, not after
/// the cut-backs (they cannot make a model's NaN go away; before, it cost every cut-back and the
/// error named no DOF). The state is the last accepted one.
#[test]
fn a_non_finite_force_fails_the_step_at_once_with_its_dof() {
    let mut model = GoesNan(Duffing::reference(), 0.33);
    let mut state = State::new(0.0, vec![0.5], vec![0.0]).unwrap();
    let mut newton = NewtonOptions::default();
    newton.max_cutbacks = 4;
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        // The trapezoidal rule balances forces at t_{n+1} itself (what `assert_converged` checks).
        AlphaParams::average_acceleration(),
        common::DenseLu::boxed(),
        {
            let mut o = ImplicitOptions::default();
            o.newton = newton;
            o
        },
    )
    .unwrap();
    it.step(&mut model, &mut state, 0.2).unwrap();
    let e = it.step(&mut model, &mut state, 0.2).unwrap_err();
    match e {
        Error::NonFiniteState {
            quantity,
            dof,
            t,
            step,
        } => {
            assert_eq!((quantity, dof, step), ("internal force", 0, 2));
            assert!((t - 0.4).abs() < 1e-15, "{t}");
        }
        other => panic!("expected a non-finite force, got {other}"),
    }
    assert_eq!(it.last_report().cutbacks, 0);
    assert_eq!(state.t, 0.2);
    assert_converged(&mut model.0, &state, &it);
}

#[test]
fn failure_at_the_smallest_step_keeps_the_last_converged_state() {
    let mut model = Breaks(Duffing::reference(), 0.35);
    let mut state = State::new(0.0, vec![0.5], vec![0.0]).unwrap();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap();
    it.step(&mut model, &mut state, 0.2).unwrap();
    let e = it.step(&mut model, &mut state, 0.2).unwrap_err();
    assert!(matches!(e, Error::Model { t, .. } if t > 0.35), "{e}");
    // Sub-steps up to t <= 0.35 converged and were kept; nothing beyond.
    assert!(state.t > 0.2 && state.t <= 0.35, "t = {}", state.t);
    assert_converged(&mut model.0, &state, &it);

    // Newton that cannot converge (one iteration on a nonlinear step): typed error, state kept.
    let (mut model, mut state, mut it) = start(AlphaParams::average_acceleration(), {
        let mut o = NewtonOptions::default();
        o.max_iterations = 1;
        o.max_cutbacks = 2;
        o
    });
    let before = state.clone();
    let ledger = it.energy().clone();
    let e = it.step(&mut model, &mut state, 0.5).unwrap_err();
    match e {
        Error::NewtonNotConverged {
            cutbacks, dt, t, ..
        } => {
            assert_eq!(cutbacks, 2);
            assert!((dt - 0.125).abs() < 1e-15);
            assert_eq!(t, before.t);
        }
        other => panic!("{other}"),
    }
    assert_eq!(state, before);
    assert_eq!(
        it.energy(),
        &ledger,
        "the ledger is the last converged state's"
    );
}
