//! Unit tests of the linear paths: the fused, streamlined and general forms against each other.

use super::*;
use crate::linalg::{Execution, SparseCholesky};
use crate::model::{LinearModel, Load, Model, TimeFunction};
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
                assert_eq!(model.hints().unloaded, !loaded);
                assert!(model.hints().stiffness_of_size(n).is_some());
                let run = |fuse: bool, model: &mut LinearModel| {
                    let u0: Vec<f64> = (0..n).map(|i| (0.3 * i as f64).sin()).collect();
                    let v0: Vec<f64> = (0..n).map(|i| 0.1 * (0.7 * i as f64).cos()).collect();
                    let mut state = State::new(0.0, u0, v0).unwrap();
                    let options = ImplicitOptions {
                        execution: Execution::default().with_parallelism(Parallelism { threshold }),
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
