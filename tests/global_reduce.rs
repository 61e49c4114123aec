//! Every global sum and maximum of the integrators, the conjugate gradient and the Lanczos
//! estimate goes through the run's `GlobalReduce`, in the shape a distributed backend needs
//! (per-chunk partials, chunks of `CHUNK` entries in global index space).
//!
//! The probe is a reducer that doubles every sum, as if a second process held an identical copy
//! of the model (each sum formed as `S + S`, exact in binary64). If every global sum goes through
//! the reducer, the doubled world is the same problem: the states are bit-identical to the serial
//! run's, every energy is exactly twice the serial one, and ratios (the relative balance error,
//! CG's step lengths) are unchanged. A sum that bypassed the reducer would show up as a factor of
//! 2 (or sqrt 2) in a ratio and change the trajectory, the energies or the iteration counts. The
//! reducer also records the length of every partials slice it is handed: each must hold one
//! value per chunk of the model's vectors (never a process total). The invariance under
//! duplication is a re-derivation written for this project, not an outside reference.

mod common;

use std::sync::{Arc, Mutex};

use common::Opaque;

use sprs::{CsMat, TriMat};
use stepgauge::State;
use stepgauge::energy::EnergyLedger;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, omega_max_gershgorin};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::lanczos::{EigenOptions, omega_max_lanczos};
use stepgauge::linalg::{
    CHUNK, CgOptions, ConjugateGradient, CsrMatrix, Execution, GlobalReduce, LinearSolver,
    SparseCholesky, add_in_chunk_order, chunk_count,
};
use stepgauge::model::{Constraints, LinearModel, Load, Model, Tangent, TimeFunction};
use stepgauge::params::AlphaParams;

/// Doubles every sum; records `(width, partials.len())` of every sum and the value of every
/// maximum.
#[derive(Default)]
struct Twin {
    sums: Mutex<Vec<(usize, usize)>>,
    maxima: Mutex<Vec<f64>>,
}

impl GlobalReduce for Twin {
    fn sum_chunks(&self, _first_chunk: usize, partials: &[f64], out: &mut [f64]) {
        add_in_chunk_order(partials, out);
        for o in out.iter_mut() {
            *o += *o;
        }
        self.sums.lock().unwrap().push((out.len(), partials.len()));
    }
    fn max(&self, value: f64) -> f64 {
        self.maxima.lock().unwrap().push(value);
        value
    }
}

impl Twin {
    /// Every recorded sum had one partial per chunk of `n` entries.
    fn assert_chunk_shape(&self, n: usize) {
        let sums = self.sums.lock().unwrap();
        assert!(!sums.is_empty(), "no sum reached the reducer");
        for &(width, len) in sums.iter() {
            assert_eq!(len, width * chunk_count(n), "width {width}: {len} partials");
        }
    }
}

/// Three full chunks and a partial one, so that the chunk order matters.
const N: usize = 3 * CHUNK + 7;

/// A chain of `n` masses and `n + 1` springs of varied stiffness, fixed at both ends through its
/// end springs (symmetric positive definite).
fn chain(n: usize) -> LinearModel {
    let spring = |j: usize| 1.0e4 * (1.0 + 0.3 * ((j * 7) % 5) as f64);
    let mut k = TriMat::new((n, n));
    let mut m = TriMat::new((n, n));
    for i in 0..n {
        k.add_triplet(i, i, spring(i) + spring(i + 1));
        if i + 1 < n {
            k.add_triplet(i, i + 1, -spring(i + 1));
            k.add_triplet(i + 1, i, -spring(i + 1));
        }
        m.add_triplet(i, i, 1.0 + 0.1 * ((i * 3) % 4) as f64);
    }
    let (k, m): (CsMat<f64>, CsMat<f64>) = (k.to_csr(), m.to_csr());
    LinearModel::new(&m, &k).unwrap()
}

/// A chain with Rayleigh damping, a load on a DOF in the last chunk, one fixed DOF and one DOF
/// with a prescribed displacement (in different chunks), so that the constraint corrections and
/// the reactions' sums are exercised.
fn loaded_chain(n: usize) -> LinearModel {
    let mut pattern = vec![0.0; n];
    pattern[n - 3] = 50.0;
    chain(n)
        .with_rayleigh(0.5, 1e-5)
        .unwrap()
        .with_load(Load::Pattern {
            pattern,
            factor: TimeFunction::Function(Arc::new(|t: f64| (40.0 * t).sin())),
        })
        .unwrap()
        .with_constraints(Constraints::new().fix(5).prescribe_displacement(
            CHUNK + 11,
            TimeFunction::Function(Arc::new(|t: f64| 1e-3 * (30.0 * t).sin())),
        ))
        .unwrap()
}

/// A start from zero displacement (no stored energy to report) with a velocity field.
fn start(n: usize) -> State {
    let v = (0..n).map(|i| 0.05 * (0.002 * i as f64).sin()).collect();
    State::new(0.0, vec![0.0; n], v).unwrap()
}

fn twin_execution() -> (Arc<Twin>, Execution) {
    let twin = Arc::new(Twin::default());
    let ex = Execution::default().with_reduce(twin.clone());
    (twin, ex)
}

/// The energies of `doubled` are exactly twice those of `serial`; the relative balance error is
/// the same.
fn assert_doubled(serial: &EnergyLedger, doubled: &EnergyLedger) {
    let pairs = [
        ("kinetic", serial.kinetic, doubled.kinetic),
        (
            "initial kinetic",
            serial.initial_kinetic,
            doubled.initial_kinetic,
        ),
        ("internal work", serial.internal_work, doubled.internal_work),
        ("external work", serial.external_work, doubled.external_work),
        ("damping work", serial.damping_work, doubled.damping_work),
        (
            "constraint work",
            serial.constraint_work,
            doubled.constraint_work,
        ),
        ("energy put in", serial.energy_in, doubled.energy_in),
        ("reference", serial.reference(), doubled.reference()),
    ];
    for (what, s, d) in pairs {
        assert!(s != 0.0, "{what} is zero: the check would not see it");
        assert_eq!((2.0 * s).to_bits(), d.to_bits(), "{what}: {s:e} vs {d:e}");
    }
    assert_eq!(
        serial.relative_balance_error().to_bits(),
        doubled.relative_balance_error().to_bits()
    );
}

/// Lanczos settings that stop after 150 products, whatever the accuracy reached then (the
/// estimate still carries its upper bound); the test suite runs unoptimised.
fn short_lanczos() -> EigenOptions {
    let mut e = EigenOptions::default();
    e.max_products = 150;
    e.tolerance_at_budget = 0.5;
    e
}

/// `steps` explicit steps of `dt` (`None`: half the stable limit). Returns the state, the
/// ledger and the step used.
fn explicit_run<M: Model>(
    model: &mut M,
    execution: Execution,
    steps: usize,
    dt: Option<f64>,
) -> (State, EnergyLedger, f64) {
    let mut state = start(N);
    let mut options = CentralDifferenceOptions::default();
    options.execution = execution;
    // A short estimate (the suite runs unoptimised): any stopping point exercises the sums.
    options.stable_step.eigen = short_lanczos();
    let mut cd = CentralDifference::new(model, &mut state, options).unwrap();
    // The doubled run's stable-step estimate rounds differently (see the Lanczos test): both
    // runs take the serial run's step.
    let dt = dt.unwrap_or_else(|| 0.5 * cd.stable_limit().unwrap());
    for _ in 0..steps {
        cd.step(model, &mut state, dt).unwrap();
    }
    (state, cd.energy().clone(), dt)
}

/// The two states are the same bit for bit (the first differing DOF otherwise).
fn assert_same_state(a: &State, b: &State) {
    for (what, x, y) in [("u", &a.u, &b.u), ("v", &a.v, &b.v)] {
        let first = x
            .iter()
            .zip(y)
            .position(|(p, q)| p.to_bits() != q.to_bits());
        assert!(first.is_none(), "{what} differs first at DOF {first:?}");
    }
}

#[test]
fn explicit_sums_all_go_through_the_reducer() {
    // Fused linear path (the model hands over its stiffness; Gershgorin through `max`).
    let (twin, ex) = twin_execution();
    let (s1, l1, dt) = explicit_run(&mut loaded_chain(N), Execution::default(), 40, None);
    let (s2, l2, _) = explicit_run(&mut loaded_chain(N), ex, 40, Some(dt));
    assert_same_state(&s1, &s2);
    assert_doubled(&l1, &l2);
    twin.assert_chunk_shape(N);
    // Gershgorin's bound on the free DOFs, computed here, is one of the maxima the reducer saw.
    let model = loaded_chain(N);
    let mut mass = vec![0.0; N];
    model.lumped_mass(&mut mass);
    let mask = model.constraints().validate(N).unwrap();
    let g = omega_max_gershgorin(model.stiffness_matrix(), &mass, Some(&mask)).unwrap();
    assert!(
        twin.maxima.lock().unwrap().contains(&g),
        "Gershgorin's bound {g} bypassed the reducer"
    );

    // General path: internal forces from the model, the stable step by finite differences.
    let (twin, ex) = twin_execution();
    let undamped = || {
        let mut pattern = vec![0.0; N];
        pattern[7] = 20.0;
        chain(N)
            .with_load(Load::Pattern {
                pattern,
                factor: TimeFunction::Constant(1.0),
            })
            .unwrap()
            .with_constraints(
                Constraints::new().prescribe_velocity(2 * CHUNK + 1, TimeFunction::Constant(0.01)),
            )
            .unwrap()
    };
    let opaque = || Opaque {
        model: undamped(),
        products: false,
    };
    let (s1, l1, dt) = explicit_run(&mut opaque(), Execution::default(), 30, None);
    let (s2, l2, _) = explicit_run(&mut opaque(), ex, 30, Some(dt));
    assert_same_state(&s1, &s2);
    // No damping here: compare the others.
    let mut l1d = l1.clone();
    let mut l2d = l2.clone();
    l1d.damping_work = 1.0;
    l2d.damping_work = 2.0;
    assert_doubled(&l1d, &l2d);
    twin.assert_chunk_shape(N);
    // The constraint flag, the probe's largest displacement and one largest direction entry per
    // stiffness product (at least two).
    let maxima = twin.maxima.lock().unwrap().len();
    assert!(
        maxima >= 4,
        "{maxima} maxima: the probe's bypassed the reducer"
    );
}

fn implicit_run<M: Tangent>(model: &mut M, execution: Execution) -> (State, EnergyLedger, usize) {
    let mut state = start(N);
    let mut options = ImplicitOptions::default();
    options.execution = execution;
    let p = AlphaParams::hht(-0.1).unwrap();
    let mut it = AlphaIntegrator::new(
        model,
        &mut state,
        p,
        Box::new(SparseCholesky::new()),
        options,
    )
    .unwrap();
    let mut iterations = 0;
    for _ in 0..8 {
        it.step(model, &mut state, 2e-3).unwrap();
        iterations += it.last_report().iterations;
    }
    (state, it.energy().clone(), iterations)
}

#[test]
fn implicit_sums_all_go_through_the_reducer() {
    // Linear path (the model is declared linear).
    let (twin, ex) = twin_execution();
    let (s1, l1, _) = implicit_run(&mut loaded_chain(N), Execution::default());
    let (s2, l2, _) = implicit_run(&mut loaded_chain(N), ex);
    assert_same_state(&s1, &s2);
    assert_doubled(&l1, &l2);
    twin.assert_chunk_shape(N);

    // Newton path (the same physics behind the core methods and the tangent).
    let (twin, ex) = twin_execution();
    let (s1, l1, i1) = implicit_run(&mut Opaque::new(loaded_chain(N)), Execution::default());
    let (s2, l2, i2) = implicit_run(&mut Opaque::new(loaded_chain(N)), ex);
    assert_eq!(i1, i2, "Newton iterations");
    assert!(i1 >= 8);
    assert_same_state(&s1, &s2);
    // `Plain` drops the Rayleigh damping: compare the others.
    let (mut l1, mut l2) = (l1, l2);
    l1.damping_work = 1.0;
    l2.damping_work = 2.0;
    assert_doubled(&l1, &l2);
    twin.assert_chunk_shape(N);
}

#[test]
fn conjugate_gradient_sums_go_through_the_reducer() {
    // The chain's stiffness plus a diagonal of the same size: well conditioned, so that CG takes
    // tens of iterations, not thousands (the test suite runs unoptimised).
    let k = chain(N).stiffness_matrix().clone();
    let shift = CsrMatrix::from_diagonal(&vec![5.0e4; N]);
    let mut a = CsrMatrix::pattern_union(&[&k, &shift]).unwrap();
    for (m, w) in [(&k, 1.0), (&shift, 1.0)] {
        for (at, v) in m.positions_in(&a).unwrap().into_iter().zip(m.data()) {
            a.data_mut()[at] += w * v;
        }
    }
    let b: Vec<f64> = (0..N).map(|i| ((i * 37) % 101) as f64 - 50.0).collect();
    let solve = |execution: &Execution| {
        let mut cg = ConjugateGradient::new(CgOptions::default()).unwrap();
        cg.set_execution(execution);
        cg.analyze(&a).unwrap();
        cg.factor(&a).unwrap();
        let mut x = b.clone();
        let info = cg.solve_in_place(&mut x).unwrap();
        (x, info)
    };
    let (twin, ex) = twin_execution();
    let (x1, i1) = solve(&Execution::default());
    let (x2, i2) = solve(&ex);
    assert_eq!(i1.iterations, i2.iterations);
    assert!(i1.iterations > 5, "{i1:?}");
    assert_eq!(x1, x2);
    twin.assert_chunk_shape(N);
}

#[test]
fn lanczos_sums_go_through_the_reducer() {
    let model = chain(N);
    let k = model.stiffness_matrix().clone();
    let mut mass = vec![0.0; N];
    model.lumped_mass(&mut mass);
    let run = |execution: &Execution| {
        let apply = |x: &[f64], y: &mut [f64]| {
            k.mul_vec(x, y, execution.parallelism);
            Ok(())
        };
        omega_max_lanczos(&mass, None, apply, &short_lanczos(), execution).unwrap()
    };
    let (twin, ex) = twin_execution();
    let a = run(&Execution::default());
    let b = run(&ex);
    // The normalisations by sqrt(2 s) instead of sqrt(s) round differently: the same Krylov
    // space to rounding, not bit for bit, and the top of a long chain's spectrum is clustered
    // (the estimate stops at its budget). Each Ritz value is a lower bound on lambda_max and
    // each `lambda_upper` an upper bound (with the probability stated in the crate's docs), so
    // each run's value must lie below the other's upper bound; a bypassed sum would put one off
    // by a factor of 2.
    assert!(
        a.lambda_max <= b.lambda_upper && b.lambda_max <= a.lambda_upper,
        "{a:?} {b:?}"
    );
    assert!(a.lambda_upper < 1.5 * a.lambda_max, "{a:?}");
    twin.assert_chunk_shape(N);
}
