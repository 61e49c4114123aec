//! A model's hints (linear, its stiffness, unloaded) are declared once and checked against its
//! forces on pseudo-random vectors (`check_hints`; the integrators run it when created): a wrong
//! hint is refused with the hint and the DOF, a right one passes even when the model sums its
//! force in another order than the matrix product. These are checks of the
//! hints' own definitions (common practice for such declarations), not of an outside result.

mod common;

use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::{CsrMatrix, SparseCholesky};
use stepgauge::model::{
    Constraints, Hints, LinearModel, Load, Model, Tangent, TimeFunction, check_hints,
};
use stepgauge::params::AlphaParams;
use stepgauge::{Error, ModelError, State};

const N: usize = 40;

/// A chain of springs `k` between neighbours and to a wall on the left, its force summed element
/// by element (another order than the matrix product), with an optional cubic term, an optional
/// velocity term and a claimed set of hints.
struct Springs {
    k: f64,
    cubic: f64,
    viscous: f64,
    stiffness: CsrMatrix,
    claim: fn(&Springs) -> Hints<'_>,
}

impl Springs {
    fn new(claim: fn(&Springs) -> Hints<'_>) -> Self {
        let k = 7.0;
        Springs {
            k,
            cubic: 0.0,
            viscous: 0.0,
            stiffness: CsrMatrix::from_sprs(
                "stiffness",
                &common::chain_stiffness(N, k, true, false),
            )
            .unwrap(),
            claim,
        }
    }
}

impl Model for Springs {
    fn dofs(&self) -> usize {
        N
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        out.fill(2.0);
    }
    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        out.fill(0.0);
        // Element e joins DOF e - 1 (the wall for e = 0) and DOF e.
        for e in 0..N {
            let left = if e == 0 { 0.0 } else { u[e - 1] };
            let s = u[e] - left;
            let f = self.k * s + self.cubic * s * s * s;
            out[e] += f;
            if e > 0 {
                out[e - 1] -= f;
            }
        }
        for (o, vi) in out.iter_mut().zip(v) {
            *o += self.viscous * vi;
        }
        Ok(())
    }

    fn hints(&self) -> Hints<'_> {
        (self.claim)(self)
    }
}

impl Tangent for Springs {
    fn tangent_pattern(&self) -> &CsrMatrix {
        &self.stiffness
    }

    fn tangent_stiffness(
        &mut self,
        _t: f64,
        _u: &[f64],
        _v: &[f64],
        out: &mut CsrMatrix,
    ) -> Result<(), ModelError> {
        out.data_mut().copy_from_slice(self.stiffness.data());
        Ok(())
    }
}

fn mismatch(e: &Error) -> (&'static str, Option<usize>) {
    match e {
        Error::HintMismatch { hint, dof, .. } => (hint, *dof),
        e => panic!("expected a hint mismatch, got {e}"),
    }
}

#[test]
fn right_hints_pass_whatever_the_summation_order() {
    let mut s = Springs::new(|s| Hints::default().stiffness(&s.stiffness).unloaded());
    check_hints(&mut s, 0.0).unwrap();
    let mut s = Springs::new(|_| Hints::default().linear());
    check_hints(&mut s, 3.5).unwrap();
    // The library's own linear model, loaded, damped and constrained.
    let mut pattern = vec![0.0; N];
    pattern[3] = 1.0;
    let mut m = LinearModel::new(
        &common::diag(&[1.0; N]),
        &common::chain_stiffness(N, 5.0, true, true),
    )
    .unwrap()
    .with_rayleigh(0.1, 1e-3)
    .unwrap()
    .with_load(Load::Pattern {
        pattern,
        factor: TimeFunction::function(|t| t.sin()),
    })
    .unwrap()
    .with_constraints(Constraints::new().fix(0))
    .unwrap();
    check_hints(&mut m, 0.0).unwrap();
    // No claims: nothing to check.
    let mut s = Springs::new(|_| Hints::default());
    s.cubic = 1e3;
    check_hints(&mut s, 0.0).unwrap();
}

#[test]
fn wrong_hints_are_refused_with_the_hint_and_the_dof() {
    // A cubic term under a linear claim.
    let mut s = Springs::new(|_| Hints::default().linear());
    s.cubic = 50.0;
    let (hint, dof) = mismatch(&check_hints(&mut s, 0.0).unwrap_err());
    assert_eq!(hint, "Linearity::Linear");
    assert!(dof.is_some());
    // A velocity term under a linear claim.
    let mut s = Springs::new(|_| Hints::default().linear());
    s.viscous = 0.3;
    assert_eq!(
        mismatch(&check_hints(&mut s, 0.0).unwrap_err()).0,
        "Linearity::Linear"
    );
    // A stiffness 1 % off (the claim says the force is exactly K u).
    let mut s = Springs::new(|s| Hints::default().stiffness(&s.stiffness));
    s.k *= 1.01;
    let (hint, dof) = mismatch(&check_hints(&mut s, 0.0).unwrap_err());
    assert_eq!(hint, "Linearity::Stiffness");
    assert_eq!(dof, Some(0));
    // A loaded model that claims to be unloaded.
    struct Claims(LinearModel);
    impl Model for Claims {
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
        ) -> Result<(), ModelError> {
            self.0.internal_force(t, u, v, out)
        }
        fn external_force(&mut self, t: f64, out: &mut [f64]) -> Result<(), ModelError> {
            self.0.external_force(t, out)
        }
        fn hints(&self) -> Hints<'_> {
            Hints::default().unloaded()
        }
    }
    let mut pattern = vec![0.0; N];
    pattern[17] = 2.0;
    let loaded = LinearModel::new(
        &common::diag(&[1.0; N]),
        &common::chain_stiffness(N, 5.0, true, true),
    )
    .unwrap()
    .with_load(Load::Pattern {
        pattern,
        factor: TimeFunction::Constant(1.0),
    })
    .unwrap();
    let mut c = Claims(loaded);
    let e = check_hints(&mut c, 0.0).unwrap_err();
    assert_eq!(mismatch(&e), ("unloaded", Some(17)));
    assert!(e.to_string().contains("at DOF 17"), "{e}");
    // A load that starts at t = 1.2 (after the first samples) is still seen.
    let mut pattern = vec![0.0; N];
    pattern[5] = 1.0;
    let late = LinearModel::new(
        &common::diag(&[1.0; N]),
        &common::chain_stiffness(N, 5.0, true, true),
    )
    .unwrap()
    .with_load(Load::Pattern {
        pattern,
        factor: TimeFunction::function(|t| if t > 1.2 { 1.0 } else { 0.0 }),
    })
    .unwrap();
    let e = check_hints(&mut Claims(late), 0.0).unwrap_err();
    assert_eq!(mismatch(&e), ("unloaded", Some(5)));
}

/// Both integrators refuse a model whose hints are wrong when they are created, before any step
/// (in every build).
#[test]
fn integrators_refuse_wrong_hints() {
    let mut s = Springs::new(|_| Hints::default().linear());
    s.cubic = 50.0;
    let mut state = State::at_rest(N, 0.0);
    let e = CentralDifference::new(&mut s, &mut state, CentralDifferenceOptions::default())
        .unwrap_err();
    assert_eq!(mismatch(&e).0, "Linearity::Linear");
    let e = AlphaIntegrator::new(
        &mut s,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap_err();
    assert_eq!(mismatch(&e).0, "Linearity::Linear");
    // The state is untouched.
    assert!(state.u.iter().all(|u| *u == 0.0));
}
