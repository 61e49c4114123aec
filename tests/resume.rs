//! A run continued from a saved state and energy ledger is bit-identical to an uninterrupted one
//! (the state holds everything the schemes need; the ledger keeps its pending half-step terms).

mod common;

use stepgauge::State;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions, NewtonOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::{Constraints, LinearModel, Load, Model, TimeFunction};
use stepgauge::params::AlphaParams;

fn model() -> LinearModel {
    let n = 30;
    LinearModel::new(
        &common::diag(&vec![1.0; n]),
        &common::chain_stiffness(n, 50.0, true, false),
    )
    .unwrap()
    .with_rayleigh(0.05, 0.001)
    .unwrap()
    .with_load(Load::Pattern {
        pattern: (0..n).map(|i| if i == n - 1 { 1.0 } else { 0.0 }).collect(),
        factor: TimeFunction::function(|t| (3.0 * t).sin()),
    })
    .unwrap()
    .with_constraints(
        Constraints::new().prescribe_velocity(0, TimeFunction::function(|t| 0.1 * (2.0 * t).cos())),
    )
    .unwrap()
}

fn bits(s: &State) -> Vec<u64> {
    s.u.iter()
        .chain(&s.v)
        .chain(&s.a)
        .map(|x| x.to_bits())
        .collect()
}

/// Steps a fresh central-difference run through `plan`, saving state and ledger (through JSON,
/// as a checkpoint would store them: serde_json's `float_roundtrip` feature makes the doubles read
/// back exactly) before step `cut`; resumes a second integrator on another copy of the model
/// from the saved pair through the rest of the plan, and asserts the two end bit-identical.
fn explicit_resume_matches(plan: &[f64], cut: usize) -> State {
    let mut m = model();
    let mut full = State::at_rest(m.dofs(), 0.0);
    let mut cd =
        CentralDifference::new(&mut m, &mut full, CentralDifferenceOptions::default()).unwrap();
    let mut saved = None;
    for (k, &h) in plan.iter().enumerate() {
        if k == cut {
            saved = Some((
                serde_json::to_string(&full).unwrap(),
                serde_json::to_string(cd.energy()).unwrap(),
            ));
        }
        cd.step(&mut m, &mut full, h).unwrap();
    }
    let (s, l) = saved.unwrap();
    let mut state: State = serde_json::from_str(&s).unwrap();
    let at_cut = state.clone();
    let mut m2 = model();
    let mut cd2 = CentralDifference::resume(
        &mut m2,
        &state,
        serde_json::from_str(&l).unwrap(),
        CentralDifferenceOptions::default(),
    )
    .unwrap();
    for &h in &plan[cut..] {
        cd2.step(&mut m2, &mut state, h).unwrap();
    }
    assert_eq!(bits(&state), bits(&full), "central difference");
    assert_eq!(state.t.to_bits(), full.t.to_bits());
    assert_eq!(cd2.energy(), cd.energy());
    at_cut
}

/// The same for the alpha integrator with `p`.
fn implicit_resume_matches(plan: &[f64], cut: usize, p: AlphaParams) -> State {
    let opts = || {
        let mut o = ImplicitOptions::default();
        o.newton = NewtonOptions::default();
        o
    };
    let mut m = model();
    let mut full = State::at_rest(m.dofs(), 0.0);
    let mut it = AlphaIntegrator::new(
        &mut m,
        &mut full,
        p,
        Box::new(SparseCholesky::new()),
        opts(),
    )
    .unwrap();
    let mut saved = None;
    for (k, &h) in plan.iter().enumerate() {
        if k == cut {
            saved = Some((
                serde_json::to_string(&full).unwrap(),
                serde_json::to_string(it.energy()).unwrap(),
            ));
        }
        it.step(&mut m, &mut full, h).unwrap();
    }
    let (s, l) = saved.unwrap();
    let mut state: State = serde_json::from_str(&s).unwrap();
    let at_cut = state.clone();
    let mut m2 = model();
    let mut it2 = AlphaIntegrator::resume(
        &mut m2,
        &state,
        serde_json::from_str(&l).unwrap(),
        p,
        Box::new(SparseCholesky::new()),
        opts(),
    )
    .unwrap();
    for &h in &plan[cut..] {
        it2.step(&mut m2, &mut state, h).unwrap();
    }
    assert_eq!(bits(&state), bits(&full), "{p:?}");
    assert_eq!(state.t.to_bits(), full.t.to_bits());
    assert_eq!(it2.energy(), it.energy());
    at_cut
}

#[test]
fn explicit_resume_is_bit_identical() {
    explicit_resume_matches(&[0.01; 200], 100);
}

#[test]
fn implicit_resume_is_bit_identical() {
    implicit_resume_matches(
        &[0.05; 60],
        30,
        AlphaParams::generalized_alpha(0.7).unwrap(),
    );
}

/// Resume across an end time off the grid: a run that ends with a shortened step (`t_end =
/// 0.995` with `dt = 0.01`: 99 steps and one of 0.005), saved there and resumed with full steps
/// again, is bit-identical to one integrator taking the same steps without the save, for the
/// central difference (whose half-step velocity must carry the change of step) and for
/// generalised-alpha.
#[test]
fn resume_after_a_shortened_last_step_is_bit_identical() {
    let plan: Vec<f64> = std::iter::repeat_n(0.01, 99)
        .chain(std::iter::once(0.005))
        .chain(std::iter::repeat_n(0.01, 50))
        .collect();
    let at_cut = explicit_resume_matches(&plan, 100);
    assert!((at_cut.t - 0.995).abs() < 1e-12, "{}", at_cut.t);
    implicit_resume_matches(&plan, 100, AlphaParams::generalized_alpha(0.7).unwrap());
}
