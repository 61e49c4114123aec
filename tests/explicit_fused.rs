//! The explicit scheme's fused path for linear models (`K u` formed inside the update loop, no
//! external-force vector for an unloaded model) gives bit for bit the results of the general path
//! (`internal_force` and `external_force` called into vectors), serially and in parallel, for
//! every combination of load, damping, constraints and force velocity.

mod common;

use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, ForceVelocity, StableLimit,
};
use stepgauge::model::{
    Constraints, Hints, LinearModel, Linearity, Load, Model, TimeFunction, check_hints,
};
use stepgauge::{Error, ModelError, State};

use common::Opaque;

fn model(n: usize, loaded: bool, damped: bool, constrained: bool) -> LinearModel {
    let masses: Vec<f64> = (0..n).map(|i| 1.0 + 0.1 * (i % 5) as f64).collect();
    let mut m = LinearModel::new(
        &common::diag(&masses),
        &common::chain_stiffness(n, 1.0, true, false),
    )
    .unwrap();
    if loaded {
        let mut pattern = vec![0.0; n];
        pattern[n - 1] = 1.0;
        pattern[n / 2] = -0.5;
        m = m
            .with_load(Load::Pattern {
                pattern,
                factor: TimeFunction::table(vec![0.0, 5.0], vec![0.0, 1.0]).unwrap(),
            })
            .unwrap();
    }
    if damped {
        m = m.with_rayleigh(0.01, 0.02).unwrap();
    }
    if constrained {
        m = m
            .with_constraints(
                Constraints::new()
                    .fix(1)
                    .prescribe_velocity(0, TimeFunction::Constant(0.1))
                    .prescribe_displacement(2, TimeFunction::function(|t| 0.01 * t)),
            )
            .unwrap();
    }
    m
}

/// Runs 25 steps of varying size and returns the state and the ledger (as exact JSON).
fn run<M: Model>(mut m: M, n: usize, fv: ForceVelocity) -> (State, String) {
    let u0: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1013) as f64 * 1e-3).collect();
    let v0: Vec<f64> = (0..n)
        .map(|i| ((i * 31) % 17) as f64 * 1e-3 - 0.008)
        .collect();
    let mut state = State::new(0.0, u0, v0).unwrap();
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Given(1.0);
    opts.force_velocity = fv;
    let mut cd = CentralDifference::new(&mut m, &mut state, opts).unwrap();
    for k in 0..25 {
        let dt = if k % 3 == 0 { 0.3 } else { 0.45 };
        cd.step(&mut m, &mut state, dt).unwrap();
    }
    (state, serde_json::to_string(cd.energy()).unwrap())
}

fn bits(x: &[f64]) -> Vec<u64> {
    x.iter().map(|v| v.to_bits()).collect()
}

/// Every variant of the fused loop against the general path, on the serial (n = 300) and the
/// parallel (n = 40,001, over 2 threads) path.
#[test]
fn fused_path_is_bit_identical_to_the_general_path() {
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    for n in [300, 40_001] {
        for case in 0..8 {
            let (loaded, damped, constrained) = (case & 1 != 0, case & 2 != 0, case & 4 != 0);
            for fv in [ForceVelocity::Lagged, ForceVelocity::Predicted] {
                let fused = model(n, loaded, damped, constrained);
                assert!(matches!(fused.hints().linearity, Linearity::Stiffness(_)));
                assert_eq!(fused.hints().unloaded, !loaded);
                let general = Opaque::new(fused.clone());
                let ((s1, e1), (s2, e2)) =
                    pool.install(|| (run(fused, n, fv), run(general, n, fv)));
                let what = format!(
                    "n = {n}, loaded {loaded}, damped {damped}, constrained {constrained}, {fv:?}"
                );
                assert_eq!(bits(&s1.u), bits(&s2.u), "u: {what}");
                assert_eq!(bits(&s1.v), bits(&s2.v), "v: {what}");
                assert_eq!(bits(&s1.a), bits(&s2.a), "a: {what}");
                assert_eq!(e1, e2, "ledger: {what}");
                // The run did move (a test of equal zeros would prove nothing).
                assert!(s1.v.iter().any(|v| v.abs() > 1e-6), "{what}");
            }
        }
    }
}

/// A model whose stiffness hint does not fit its size: `check_hints` refuses it, and so does the
/// integrator when it is created.
#[test]
fn a_stiffness_of_the_wrong_size_is_refused() {
    struct WrongK {
        inner: LinearModel,
        other: LinearModel,
    }
    impl Model for WrongK {
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
        fn hints(&self) -> Hints<'_> {
            Hints::default()
                .stiffness(self.other.stiffness_matrix())
                .unloaded()
        }
        fn stored_energy(&self, u: &[f64]) -> Option<f64> {
            self.inner.stored_energy(u)
        }
    }
    let n = 50;
    let mut wrong = WrongK {
        inner: model(n, false, false, false),
        other: model(n + 1, false, false, false),
    };
    let e = check_hints(&mut wrong, 0.0).unwrap_err();
    assert!(
        matches!(
            e,
            Error::HintMismatch {
                hint: "Linearity::Stiffness",
                ..
            }
        ),
        "{e}"
    );
    let mut state = State::at_rest(n, 0.0);
    let e = CentralDifference::new(&mut wrong, &mut state, CentralDifferenceOptions::default())
        .unwrap_err();
    assert!(matches!(e, Error::HintMismatch { .. }), "{e}");
}
