//! The energy ledger term by term: each work the integrators report equals the bookkeeping rule
//! of `src/energy.rs`, evaluated here from the recorded states with forces computed from the
//! model's own definitions (a re-derivation in the project: it ties the ledger's fused sums,
//! half-step scalars and constraint corrections to the rule they implement),
//!
//! ```text
//! W_{n+1} = W_n + (u_{n+1} - u_n) . (f_n + f_{n+1}) / 2,    T_n = 1/2 v_n . M v_n,
//! ```
//!
//! on a model with every ingredient at once: Rayleigh damping with both terms, a time-varying
//! load, a prescribed displacement, a fixed DOF and a deformed, moving start. The growth guard's
//! decision and the damped stable step are checked beside them.

mod common;

use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, StableLimit};
use stepgauge::model::{Constraints, Damping, Hints, LinearModel, Load, Model, TimeFunction};
use stepgauge::{ModelError, State};

const N: usize = 4;
const K: f64 = 40.0;
const MASS: [f64; N] = [1.0, 2.0, 1.5, 1.0];
const A0: f64 = 0.3;
const A1: f64 = 0.004;

/// `K u` of the chain (springs `K` between neighbours and from DOF 0 to a wall).
fn k_times(u: &[f64]) -> Vec<f64> {
    (0..N)
        .map(|i| {
            let left = if i == 0 { u[0] } else { u[i] - u[i - 1] };
            let right = if i + 1 < N { u[i] - u[i + 1] } else { 0.0 };
            K * (left + right)
        })
        .collect()
}

fn load(t: f64) -> f64 {
    3.0 * (2.0 * t).sin()
}

/// The base motion `g = 0.02 (1 - cos 1.5 t)`: at rest at the start but accelerating.
fn base(t: f64) -> f64 {
    0.02 * (1.0 - (1.5 * t).cos())
}

fn base_velocity(t: f64) -> f64 {
    0.03 * (1.5 * t).sin()
}

fn base_acceleration(t: f64) -> f64 {
    0.045 * (1.5 * t).cos()
}

/// The chain with DOF 0 moved as `base(t)`, DOF 3 fixed, the load on DOF 2, Rayleigh damping.
fn model() -> LinearModel {
    model_driven(false)
}

/// As [`model`], the base given by its displacement or (`by_velocity`) by its velocity.
fn model_driven(by_velocity: bool) -> LinearModel {
    let constraints = if by_velocity {
        Constraints::new().prescribe_velocity(
            0,
            TimeFunction::with_derivatives(base_velocity, base_acceleration, |t| {
                -0.0675 * (1.5 * t).sin()
            }),
        )
    } else {
        Constraints::new().prescribe_displacement(
            0,
            TimeFunction::with_derivatives(base, base_velocity, base_acceleration),
        )
    };
    LinearModel::new(
        &common::diag(&MASS),
        &common::chain_stiffness(N, K, true, false),
    )
    .unwrap()
    .with_rayleigh(A0, A1)
    .unwrap()
    .with_load(Load::Pattern {
        pattern: vec![0.0, 0.0, 1.0, 0.0],
        factor: TimeFunction::function(load),
    })
    .unwrap()
    .with_constraints(constraints.fix(3))
    .unwrap()
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Stiffness of the extra force: a cubic spring to the wall at DOFs 0 (prescribed) and 2.
const CUBIC: f64 = 2.0e4;

fn cubic(u: &[f64]) -> Vec<f64> {
    let mut f = vec![0.0; N];
    for d in [0, 2] {
        f[d] = CUBIC * u[d].powi(3);
    }
    f
}

/// The chain with an extra force of its own; `fused` says whether it gives its linear stiffness
/// (the integrator then forms `K u` in its own loop) or only the internal force.
struct WithCubic {
    inner: LinearModel,
    fused: bool,
}

impl Model for WithCubic {
    fn dofs(&self) -> usize {
        self.inner.dofs()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.inner.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.inner.internal_force(t, u, v, out)
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), ModelError> {
        self.inner.external_force(t, out)
    }
    fn damping(&self) -> Damping<'_> {
        self.inner.damping()
    }
    fn stiffness_product(
        &mut self,
        t: f64,
        u: &[f64],
        x: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.inner.stiffness_product(t, u, x, out)
    }
    fn constraints(&self) -> &Constraints {
        self.inner.constraints()
    }
    fn hints(&self) -> Hints<'_> {
        if self.fused {
            self.inner.hints()
        } else {
            Hints::default()
        }
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
        out.copy_from_slice(&cubic(u));
        Ok(())
    }
}

/// The central difference with the lagged damping velocity: the damping force at the end of a
/// step is `C v_{n+1/2}`, `v_{n+1/2} = (u_{n+1} - u_n) / dt` (at the start, `C v_0`); the
/// reactions at constrained DOFs are `m a_c - (f_ext - f_int - f_damp - f_cubic)` with the
/// centred `a_c = (ahead - v_{n-1/2}) / dt` over the step just taken, `ahead` the velocity of the
/// next half step of the same size (`(g(t + dt) - g(t)) / dt` for a prescribed displacement,
/// `h(t + dt/2)` for a prescribed velocity; the motion's own acceleration at the start; `a_c = 0`
/// at a fixed DOF). The step changes from step to step, so that a trapezoid finished with another
/// step's size would be seen; halfway the run goes on from a copy of its ledger
/// (`CentralDifference::resume`, as from a checkpoint).
#[test]
fn central_difference_ledger_follows_its_rule_term_by_term() {
    for fused in [true, false] {
        for by_velocity in [false, true] {
            ledger_term_by_term(fused, by_velocity);
        }
    }
}

fn ledger_term_by_term(fused: bool, by_velocity: bool) {
    let steps = 300;
    let mut m = WithCubic {
        inner: model_driven(by_velocity),
        fused,
    };
    let mut state = State::new(0.0, vec![0.0, 0.05, -0.03, 0.0], vec![0.0, 0.4, 0.1, 0.0]).unwrap();
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Unchecked;
    let mut cd = CentralDifference::new(&mut m, &mut state, opts.clone()).unwrap();
    let c_times = |v: &[f64]| -> Vec<f64> {
        let kv = k_times(v);
        (0..N).map(|i| A0 * MASS[i] * v[i] + A1 * kv[i]).collect()
    };
    let ext = |t: f64| vec![0.0, 0.0, load(t), 0.0];
    // Forces at the start: damping with the start velocity.
    let mut u_prev = state.u.clone();
    let mut f_int = k_times(&state.u);
    let mut f_ext = ext(0.0);
    let mut f_damp = c_times(&state.v);
    let mut f_cubic = cubic(&state.u);
    let mut reactions = cd.reactions().to_vec();
    // The start's reactions carry the motion's own acceleration.
    let r0 = [
        MASS[0] * base_acceleration(0.0) - (f_ext[0] - f_int[0] - f_damp[0] - f_cubic[0]),
        -(f_ext[3] - f_int[3] - f_damp[3] - f_cubic[3]),
    ];
    for j in 0..2 {
        assert!(
            (reactions[j] - r0[j]).abs() <= 1e-12 * (1.0 + r0[j].abs()),
            "start reaction {j}: {} vs {}",
            reactions[j],
            r0[j]
        );
    }
    let mut w: [f64; 5] = [0.0; 5];
    let mut scale: f64 = 0.0;
    let mut t = 0.0;
    for n in 1..=steps {
        if n == steps / 2 {
            let ledger = cd.energy().clone();
            cd = CentralDifference::resume(&mut m, &state, ledger, opts.clone()).unwrap();
        }
        let dt = 0.01 * (1.0 + 0.3 * (n as f64).sin());
        cd.step(&mut m, &mut state, dt).unwrap();
        t += dt;
        assert_eq!(state.t, t, "step {n}: time");
        let du: Vec<f64> = state.u.iter().zip(&u_prev).map(|(a, b)| a - b).collect();
        let vh: Vec<f64> = du.iter().map(|d| d / dt).collect();
        let (fi, fe, fd, fc) = (k_times(&state.u), ext(t), c_times(&vh), cubic(&state.u));
        let ahead = if by_velocity {
            base_velocity(t + 0.5 * dt)
        } else {
            (base(t + dt) - state.u[0]) / dt
        };
        let a_c = (ahead - vh[0]) / dt;
        // The constrained DOF's integer-step velocity and acceleration, centred on the look-ahead
        // (docs/explicit.md, "Constraints").
        let v_c = 0.5 * (vh[0] + ahead);
        assert!(
            (state.v[0] - v_c).abs() <= 1e-12 * v_c.abs().max(1e-3),
            "step {n}: velocity {} vs {v_c}",
            state.v[0]
        );
        assert!(
            (state.a[0] - a_c).abs() <= 1e-9 * a_c.abs().max(1e-2),
            "step {n}: acceleration {} vs {a_c}",
            state.a[0]
        );
        assert_eq!((state.v[3], state.a[3]), (0.0, 0.0), "step {n}: fixed DOF");
        let r = [
            MASS[0] * a_c - (fe[0] - fi[0] - fd[0] - fc[0]),
            -(fe[3] - fi[3] - fd[3] - fc[3]),
        ];
        for (j, (got, want)) in cd.reactions().iter().zip(&r).enumerate() {
            // The same operations in another order on terms of the size of the forces.
            let tol = 1e-12 * (1.0 + fi[0].abs() + fc[0].abs() + MASS[0] * a_c.abs());
            assert!(
                (got - want).abs() <= tol,
                "fused {fused}, by velocity {by_velocity}, step {n}: reaction {j} {got} vs {want}"
            );
        }
        let half = |f0: &[f64], f1: &[f64]| 0.5 * (dot(&du, f0) + dot(&du, f1));
        w[0] += half(&f_int, &fi);
        w[1] += half(&f_ext, &fe);
        w[2] += half(&f_damp, &fd);
        w[3] += 0.5 * ((reactions[0] + r[0]) * du[0] + (reactions[1] + r[1]) * du[3]);
        w[4] += half(&f_cubic, &fc);
        let kinetic = 0.5
            * (0..N)
                .map(|i| MASS[i] * state.v[i] * state.v[i])
                .sum::<f64>();
        let l = cd.energy();
        scale = w.iter().fold(scale.max(kinetic), |s, x| s.max(x.abs()));
        // Rounding: each step adds a few operations per DOF on terms of the size of the
        // energies; after n steps the two sums differ by at most about n x 10 eps of the scale.
        let tol = n as f64 * 10.0 * f64::EPSILON * scale;
        for (name, got, want) in [
            ("internal", l.internal_work, w[0]),
            ("external", l.external_work, w[1]),
            ("damping", l.damping_work, w[2]),
            ("constraint", l.constraint_work, w[3]),
            ("cubic", l.extra_work[0], w[4]),
            ("kinetic", l.kinetic, kinetic),
        ] {
            assert!(
                (got - want).abs() <= tol,
                "fused {fused}, by velocity {by_velocity}, step {n}: {name} {got} vs {want} (tol {tol:e})"
            );
        }
        (u_prev, f_int, f_ext, f_damp, f_cubic) = (state.u.clone(), fi, fe, fd, fc);
        reactions = r.to_vec();
    }
    // The run did something: every term is far from zero.
    let l = cd.energy();
    for (name, w) in [
        ("external", l.external_work),
        ("damping", l.damping_work),
        ("constraint", l.constraint_work),
        ("cubic", l.extra_work[0]),
    ] {
        assert!(w.abs() > 1e-4, "fused {fused}: {name} work {w}");
    }
}

/// The damped stable step: the damping ratio of the Rayleigh damping at the estimated highest
/// frequency, `xi = a0 / (2 w) + a1 w / 2` (Chopra 2012, eq. 11.4.8), and the lagged limit
/// `2 (sqrt(1 + xi^2) - xi) / w` (Belytschko, Liu & Moran 2000, sec. 6.2, from memory).
#[test]
fn the_damped_stable_step_uses_the_rayleigh_ratio_at_omega_max() {
    let mut m = model();
    let mut state = State::at_rest(N, 0.0);
    let cd =
        CentralDifference::new(&mut m, &mut state, CentralDifferenceOptions::default()).unwrap();
    let s = cd.stable_step().expect("an estimate");
    let w = s.omega_max.expect("omega_max");
    let xi = A0 / (2.0 * w) + A1 * w / 2.0;
    assert!(
        (s.xi.unwrap() - xi).abs() <= 1e-14 * xi,
        "{:?} vs {xi}",
        s.xi
    );
    let limit = 2.0 * ((1.0 + xi * xi).sqrt() - xi) / w;
    assert!(
        (s.dt_critical_damped - limit).abs() <= 1e-14 * limit,
        "{} vs {limit}",
        s.dt_critical_damped
    );
    assert!(s.dt_critical_damped < s.dt_critical);
}

/// The growth guard rejects the first step whose kinetic energy exceeds `limit x energy_in`, and
/// only such a step: the error reports a kinetic energy above the product and the kept state's
/// is below it (on a run with an energy budget far from 1, so that a sum in place of the
/// product would be seen).
#[test]
fn the_growth_guard_trips_on_the_product_of_limit_and_budget() {
    for u0 in [30.0, 0.03] {
        let mut m = common::sdof(1.0, 1.0);
        let mut state = State::new(0.0, vec![u0], vec![0.0]).unwrap();
        let mut opts = CentralDifferenceOptions::default();
        opts.stable_limit = StableLimit::Unchecked;
        let mut cd = CentralDifference::new(&mut m, &mut state, opts).unwrap();
        let err = loop {
            if let Err(e) = cd.step(&mut m, &mut state, 2.2) {
                break e;
            }
        };
        match err {
            stepgauge::Error::Unstable {
                kinetic,
                energy_in,
                limit,
                ..
            } => {
                assert_eq!(limit, 10.0);
                assert!(
                    kinetic > limit * energy_in,
                    "{kinetic} vs {limit} x {energy_in}"
                );
                let kept = 0.5 * state.v[0] * state.v[0];
                assert!(
                    kept <= limit * energy_in,
                    "kept {kept} vs {limit} x {energy_in}"
                );
                assert!((energy_in - 0.5 * u0 * u0).abs() <= 1e-12 * energy_in);
            }
            other => panic!("u0 {u0}: {other:?}"),
        }
    }
}
