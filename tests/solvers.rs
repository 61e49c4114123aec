//! The linear solvers behind `LinearSolver`: sparse Cholesky, sparse LU and Jacobi-preconditioned
//! CG on systems with known solutions, on bad input, across thread counts, and against a dense
//! solve.

use proptest::prelude::*;
use sprs::TriMat;
use stepgauge::Error;
use stepgauge::error::Singularity;
use stepgauge::linalg::{
    CgOptions, ConjugateGradient, CsrMatrix, Execution, LinearSolver, Parallelism, SparseCholesky,
    SparseLu,
};

/// A CSR matrix from `(row, col, value)` triplets (duplicates summed).
fn csr(n: usize, entries: &[(usize, usize, f64)]) -> CsrMatrix {
    let mut t = TriMat::new((n, n));
    for &(i, j, v) in entries {
        t.add_triplet(i, j, v);
    }
    CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
}

/// Tridiagonal `[-k, 2k + shift, -k]`: a spring chain fixed at both ends (1D Poisson for
/// `k = 1, shift = 0`), plus `shift` on the diagonal (a mass term of an implicit step).
fn chain(n: usize, k: f64, shift: f64) -> CsrMatrix {
    let mut e = Vec::new();
    for i in 0..n {
        e.push((i, i, 2.0 * k + shift));
        if i + 1 < n {
            e.push((i, i + 1, -k));
            e.push((i + 1, i, -k));
        }
    }
    csr(n, &e)
}

/// 5-point Laplacian on an `m x m` grid with Dirichlet boundaries, plus `shift` on the diagonal.
fn laplace_2d(m: usize, shift: f64) -> CsrMatrix {
    let id = |i: usize, j: usize| i * m + j;
    let mut e = Vec::new();
    for i in 0..m {
        for j in 0..m {
            e.push((id(i, j), id(i, j), 4.0 + shift));
            if i + 1 < m {
                e.push((id(i, j), id(i + 1, j), -1.0));
                e.push((id(i + 1, j), id(i, j), -1.0));
            }
            if j + 1 < m {
                e.push((id(i, j), id(i, j + 1), -1.0));
                e.push((id(i, j + 1), id(i, j), -1.0));
            }
        }
    }
    csr(m * m, &e)
}

fn x_true(n: usize) -> Vec<f64> {
    (0..n).map(|i| 1.0 + (0.37 * i as f64).sin()).collect()
}

fn mul(a: &CsrMatrix, x: &[f64]) -> Vec<f64> {
    let mut y = vec![0.0; a.nrows()];
    a.mul_vec(x, &mut y, Parallelism::serial());
    y
}

fn norm(x: &[f64]) -> f64 {
    x.iter().map(|v| v * v).sum::<f64>().sqrt()
}

fn rel_err(x: &[f64], y: &[f64]) -> f64 {
    let d: Vec<f64> = x.iter().zip(y).map(|(a, b)| a - b).collect();
    norm(&d) / norm(y)
}

fn rel_residual(a: &CsrMatrix, x: &[f64], b: &[f64]) -> f64 {
    let ax = mul(a, x);
    rel_err(&ax, b)
}

fn solvers() -> Vec<Box<dyn LinearSolver>> {
    vec![
        Box::new(SparseCholesky::new()),
        Box::new(SparseLu::new()),
        Box::new(ConjugateGradient::new(CgOptions::default()).unwrap()),
    ]
}

/// Solves `a x = a x_true` after `factor(a)` (already analysed) and checks the forward error
/// (`direct_tol` for direct solvers, `cg_tol` for CG) and the residual.
fn check_solve(s: &mut dyn LinearSolver, a: &CsrMatrix, direct_tol: f64, cg_tol: f64) {
    let xt = x_true(a.nrows());
    let b = mul(a, &xt); // constructed: b = A x_true
    s.factor(a).unwrap();
    let mut x = b.clone();
    let info = s.solve_in_place(&mut x).unwrap();
    let err = rel_err(&x, &xt);
    let res = rel_residual(a, &x, &b);
    let iterative = s.name() == "conjugate gradient";
    let tol = if iterative { cg_tol } else { direct_tol };
    assert!(err <= tol, "{}: forward error {err:e} > {tol:e}", s.name());
    if iterative {
        assert!(info.iterations > 0);
        assert!(res <= 1e-10, "{}: residual {res:e}", s.name());
        // The reported residual is the true one.
        assert!((info.relative_residual - res).abs() <= 1e-3 * res + 1e-16);
    } else {
        assert_eq!(info.iterations, 0);
        assert!(res <= 1e-13, "{}: residual {res:e}", s.name());
    }
}

#[test]
fn chain_1d_is_solved_and_refactored_by_all_solvers() {
    let n = 1000;
    let a = chain(n, 1.0, 0.0);
    // Same pattern, new values: a stiffer chain plus a diagonal (mass) shift.
    let a2 = chain(n, 3.5, 0.25);
    for mut s in solvers() {
        s.analyze(&a).unwrap();
        // 1D Poisson, kappa = 4.1e5 (eigenvalues 2 - 2 cos(k pi / (n + 1)), exact): direct
        // solvers lose ~kappa u = 1e-10 at worst; CG's forward error is at most kappa * 1e-10.
        check_solve(s.as_mut(), &a, 1e-10, 4.1e5 * 1e-10);
        // kappa = (4 * 3.5 + 0.25) / 0.25 = 57 at most (Gershgorin bounds).
        check_solve(s.as_mut(), &a2, 1e-13, 57.0 * 1e-10);
    }
}

#[test]
fn laplace_2d_is_solved_and_refactored_by_all_solvers() {
    let m = 50;
    let a = laplace_2d(m, 0.0);
    let a2 = {
        let mut a2 = laplace_2d(m, 0.5);
        a2.data_mut().iter_mut().for_each(|v| *v *= 7.0);
        a2
    };
    for mut s in solvers() {
        s.analyze(&a).unwrap();
        // kappa = cot^2(pi / (2 (m + 1))) = 1.05e3 (eigenvalues of the 5-point stencil, exact).
        check_solve(s.as_mut(), &a, 1e-12, 1.1e3 * 1e-10);
        // kappa <= 8.5 / 0.5 = 17 (Gershgorin bounds).
        check_solve(s.as_mut(), &a2, 1e-13, 17.0 * 1e-10);
    }
}

#[test]
fn lu_solves_unsymmetric_convection_diffusion() {
    // Upwinded 1D convection-diffusion: -u'' + c u' with cell Peclet number 0.5, an unsymmetric
    // M-matrix tridiagonal [-(1 + c h), 2 + c h, -1].
    let n = 500;
    let ch = 0.5;
    let mut e = Vec::new();
    for i in 0..n {
        e.push((i, i, 2.0 + ch));
        if i > 0 {
            e.push((i, i - 1, -(1.0 + ch)));
        }
        if i + 1 < n {
            e.push((i, i + 1, -1.0));
        }
    }
    let a = csr(n, &e);
    let xt = x_true(n);
    let b = mul(&a, &xt); // constructed: b = A x_true
    let mut lu = SparseLu::new();
    lu.analyze(&a).unwrap();
    lu.factor(&a).unwrap();
    let mut x = b.clone();
    let info = lu.solve_in_place(&mut x).unwrap();
    let err = rel_err(&x, &xt);
    assert!(err <= 1e-12, "forward error {err:e}");
    assert!(info.relative_residual <= 1e-14, "{info:?}");
    // The symmetric solvers refuse it instead of solving with one triangle.
    for mut s in [
        Box::new(SparseCholesky::new()) as Box<dyn LinearSolver>,
        Box::new(ConjugateGradient::new(CgOptions::default()).unwrap()),
    ] {
        s.analyze(&a).unwrap();
        let e = s.factor(&a).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NotSymmetric {
                    row: 0,
                    col: 1,
                    value: -1.0,
                    transposed: -1.5,
                    ..
                }
            ),
            "{}: {e}",
            s.name()
        );
    }
}

#[test]
fn cholesky_refuses_indefinite_matrices_with_the_row() {
    // diag(1, -1, 2): the pivot of row 1 is -1 (exact).
    let a = csr(3, &[(0, 0, 1.0), (1, 1, -1.0), (2, 2, 2.0)]);
    let mut s = SparseCholesky::new();
    s.analyze(&a).unwrap();
    let e = s.factor(&a).unwrap_err();
    assert!(
        matches!(e, Error::NotPositiveDefinite { row: Some(1), .. }),
        "{e}"
    );
    let msg = e.to_string();
    assert!(msg.contains("not symmetric positive definite"), "{msg}");
    assert!(msg.contains("LU"), "{msg}");
    // No solve with a failed factor.
    let e = s.solve_in_place(&mut [1.0, 1.0, 1.0]).unwrap_err();
    assert!(
        matches!(
            e,
            Error::SolverNotReady {
                missing: "factor",
                ..
            }
        ),
        "{e}"
    );
    // [[1, 2], [2, 1]]: positive diagonal, eigenvalues 3 and -1 (exact).
    let a = csr(2, &[(0, 0, 1.0), (0, 1, 2.0), (1, 0, 2.0), (1, 1, 1.0)]);
    s.analyze(&a).unwrap();
    let e = s.factor(&a).unwrap_err();
    assert!(matches!(e, Error::NotPositiveDefinite { .. }), "{e}");
}

#[test]
fn cholesky_refuses_a_semidefinite_matrix_instead_of_returning_garbage() {
    // A free-free spring chain: singular (rigid-body mode, exact); with k = 0.1 the last pivot
    // comes out at rounding level instead of exactly zero.
    let n = 50;
    let mut e = Vec::new();
    for i in 0..n - 1 {
        for (r, c, v) in [
            (i, i, 0.1),
            (i + 1, i + 1, 0.1),
            (i, i + 1, -0.1),
            (i + 1, i, -0.1),
        ] {
            e.push((r, c, v));
        }
    }
    let a = csr(n, &e);
    let mut s = SparseCholesky::new();
    s.analyze(&a).unwrap();
    let e = s.factor(&a).unwrap_err();
    assert!(
        matches!(e, Error::NotPositiveDefinite { row: Some(_), .. }),
        "{e}"
    );
}

#[test]
fn cg_refuses_indefinite_matrices() {
    let mut cg = ConjugateGradient::new(CgOptions::default()).unwrap();
    // diag(1, -1, 2): the Jacobi preconditioner needs a positive diagonal.
    let a = csr(3, &[(0, 0, 1.0), (1, 1, -1.0), (2, 2, 2.0)]);
    cg.analyze(&a).unwrap();
    let e = cg.factor(&a).unwrap_err();
    assert!(
        matches!(
            e,
            Error::NotPositiveDefinite {
                row: Some(1),
                value: Some(-1.0),
                ..
            }
        ),
        "{e}"
    );
    // [[1, 2], [2, 1]] (eigenvalues 3, -1): with b = (1, -1), an eigenvector of -1, the first
    // direction has curvature p^T A p = -2 (exact).
    let a = csr(2, &[(0, 0, 1.0), (0, 1, 2.0), (1, 0, 2.0), (1, 1, 1.0)]);
    cg.analyze(&a).unwrap();
    cg.factor(&a).unwrap();
    let e = cg.solve_in_place(&mut [1.0, -1.0]).unwrap_err();
    assert!(
        matches!(
            e,
            Error::NotPositiveDefinite {
                row: None,
                value: Some(-2.0),
                ..
            }
        ),
        "{e}"
    );
}

#[test]
fn lu_reports_singular_matrices() {
    let mut lu = SparseLu::new();
    let singular = |lu: &mut SparseLu, a: &CsrMatrix, b: &mut [f64]| -> Error {
        lu.analyze(a).unwrap();
        match lu.factor(a) {
            Err(e) => e,
            Ok(()) => lu.solve_in_place(b).unwrap_err(),
        }
    };
    // [[1, 2], [2, 4]]: rank 1 (exact); the second pivot is exactly 0.
    let a = csr(2, &[(0, 0, 1.0), (0, 1, 2.0), (1, 0, 2.0), (1, 1, 4.0)]);
    let e = singular(&mut lu, &a, &mut [1.0, 1.0]);
    assert!(
        matches!(
            e,
            Error::SingularMatrix {
                evidence: Singularity::NonFiniteSolution { .. },
                ..
            }
        ),
        "{e}"
    );
    // An empty row 1 (structurally singular).
    let a = csr(3, &[(0, 0, 1.0), (0, 1, 1.0), (2, 2, 1.0)]);
    let e = singular(&mut lu, &a, &mut [1.0, 1.0, 1.0]);
    assert!(
        matches!(
            e,
            Error::SingularMatrix {
                evidence: Singularity::NoPivot { row: 1 },
                ..
            }
        ),
        "{e}"
    );
    // Row 2 = 0.1 row 0 + 0.7 row 1, rounded: singular (constructed), pivot of rounding size.
    let (r0, r1) = ([0.3, 1.1, -0.7], [0.9, -0.2, 0.45]);
    let r2: Vec<f64> = (0..3).map(|j| 0.1 * r0[j] + 0.7 * r1[j]).collect();
    let mut e = Vec::new();
    for (i, r) in [&r0[..], &r1[..], &r2[..]].iter().enumerate() {
        for (j, v) in r.iter().enumerate() {
            e.push((i, j, *v));
        }
    }
    let a = csr(3, &e);
    let err = singular(&mut lu, &a, &mut [1.0, 2.0, 3.0]);
    assert!(matches!(err, Error::SingularMatrix { .. }), "{err}");
    assert!(err.to_string().contains("singular"), "{err}");
}

#[test]
fn lu_refuses_a_load_on_an_unrestrained_mode() {
    // Pure Neumann 5-point Laplacian on 30 x 30 nodes times 0.3: singular with the constant
    // vector as null space (exact); its last pivot is rounding noise, not zero.
    let m = 30;
    let id = |i: usize, j: usize| i * m + j;
    let mut e = Vec::new();
    for i in 0..m {
        for j in 0..m {
            for (p, q) in [(id(i, j), id(i + 1, j)), (id(i, j), id(i, j + 1))] {
                if (q == id(i + 1, j) && i + 1 < m) || (q == id(i, j + 1) && j + 1 < m) {
                    e.extend([(p, p, 0.3), (q, q, 0.3), (p, q, -0.3), (q, p, -0.3)]);
                }
            }
        }
    }
    let a = csr(m * m, &e);
    let mut lu = SparseLu::new();
    lu.analyze(&a).unwrap();
    lu.factor(&a).unwrap();
    // b with a component along the null space: no solution exists.
    let mut b: Vec<f64> = (0..m * m).map(|i| (i as f64).cos()).collect();
    let err = lu.solve_in_place(&mut b).unwrap_err();
    assert!(matches!(err, Error::SingularMatrix { .. }), "{err}");
    // b orthogonal to the null space (a self-equilibrated load): solutions exist, one is found.
    let mut b = vec![0.0; m * m];
    b[0] = 1.0;
    b[1] = -1.0;
    let rhs = b.clone();
    let info = lu.solve_in_place(&mut b).unwrap();
    assert!(rel_residual(&a, &b, &rhs) < 1e-12, "{info:?}");
    // The Cholesky solver refuses the matrix itself.
    let mut ch = SparseCholesky::new();
    ch.analyze(&a).unwrap();
    let err = ch.factor(&a).unwrap_err();
    assert!(matches!(err, Error::NotPositiveDefinite { .. }), "{err}");
}

#[test]
fn non_finite_input_and_wrong_lengths_are_refused() {
    let a = laplace_2d(4, 0.0);
    let mut bad = a.clone();
    bad.data_mut()[5] = f64::NAN; // row 0 holds entries 0..3, row 1 entries 3..7
    let non_square =
        CsrMatrix::try_from_csr("A", 2, 3, vec![0, 1, 2], vec![0, 1], vec![1.0, 1.0]).unwrap();
    for mut s in solvers() {
        let name = s.name();
        let e = s.analyze(&non_square).unwrap_err();
        assert!(
            matches!(
                e,
                Error::DimensionMismatch {
                    expected: 2,
                    found: 3,
                    ..
                }
            ),
            "{name}: {e}"
        );
        s.analyze(&a).unwrap();
        let e = s.factor(&bad).unwrap_err();
        assert!(
            matches!(e, Error::NonFiniteInput { index: 1, value, .. } if value.is_nan()),
            "{name}: {e}"
        );
        s.factor(&a).unwrap();
        let e = s.solve_in_place(&mut [1.0; 15]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::DimensionMismatch {
                    expected: 16,
                    found: 15,
                    ..
                }
            ),
            "{name}: {e}"
        );
        let mut b = [1.0; 16];
        b[3] = f64::INFINITY;
        let e = s.solve_in_place(&mut b).unwrap_err();
        assert!(
            matches!(e, Error::NonFiniteInput { index: 3, .. }),
            "{name}: {e}"
        );
    }
}

#[test]
fn call_order_and_pattern_changes_are_checked() {
    let a = laplace_2d(4, 0.0);
    let other = laplace_2d(5, 0.0);
    let mut same_size_other_pattern = chain(16, 1.0, 0.0);
    same_size_other_pattern.data_mut()[0] = 2.0;
    for mut s in solvers() {
        let name = s.name();
        let e = s.factor(&a).unwrap_err();
        assert!(
            matches!(
                e,
                Error::SolverNotReady {
                    missing: "analyze",
                    ..
                }
            ),
            "{name}: {e}"
        );
        s.analyze(&a).unwrap();
        let e = s.solve_in_place(&mut [1.0; 16]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::SolverNotReady {
                    missing: "factor",
                    ..
                }
            ),
            "{name}: {e}"
        );
        for wrong in [&other, &same_size_other_pattern] {
            let e = s.factor(wrong).unwrap_err();
            assert!(matches!(e, Error::InvalidMatrix { .. }), "{name}: {e}");
        }
        // A new analysis accepts the new pattern.
        s.analyze(&other).unwrap();
        s.factor(&other).unwrap();
        let mut b = vec![0.0; 25];
        let info = s.solve_in_place(&mut b).unwrap();
        assert_eq!(b, vec![0.0; 25], "{name}: zero rhs, zero solution");
        assert!(info.relative_residual == 0.0 || info.relative_residual.is_nan());
    }
}

#[test]
fn symmetric_solvers_refuse_unsymmetric_patterns() {
    let a = csr(2, &[(0, 0, 2.0), (0, 1, 1.0), (1, 1, 2.0)]);
    for mut s in [
        Box::new(SparseCholesky::new()) as Box<dyn LinearSolver>,
        Box::new(ConjugateGradient::new(CgOptions::default()).unwrap()),
    ] {
        let e = s.analyze(&a).unwrap_err();
        assert!(matches!(e, Error::InvalidMatrix { .. }), "{e}");
    }
    // LU takes it: [[2, 1], [0, 2]] x = (3, 2) has x = (1, 1) (exact).
    let mut lu = SparseLu::new();
    lu.analyze(&a).unwrap();
    lu.factor(&a).unwrap();
    let mut b = [3.0, 2.0];
    lu.solve_in_place(&mut b).unwrap();
    assert_eq!(b, [1.0, 1.0]);
}

#[test]
fn cg_is_bit_identical_for_one_and_two_threads() {
    // n = 22,500 unknowns: 6 chunks, so the parallel path splits the work.
    let a = laplace_2d(150, 0.5);
    let b = mul(&a, &x_true(a.nrows())); // constructed: b = A x_true
    let run = |threads: usize, par: Parallelism| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let mut cg = ConjugateGradient::new(CgOptions::default()).unwrap();
            cg.set_execution(&Execution::default().with_parallelism(par));
            cg.analyze(&a).unwrap();
            cg.factor(&a).unwrap();
            let mut x = b.clone();
            let info = cg.solve_in_place(&mut x).unwrap();
            (x, info)
        })
    };
    let always = Parallelism { threshold: 1 };
    let (x1, i1) = run(1, always);
    let (x2, i2) = run(2, always);
    let (xs, is) = run(2, Parallelism::serial());
    assert!(i1.iterations > 10);
    assert_eq!(i1, i2);
    assert_eq!(i1, is);
    let bits = |x: &[f64]| x.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&x1), bits(&x2));
    assert_eq!(bits(&x1), bits(&xs));
}

#[test]
fn cg_reports_non_convergence_and_checks_its_options() {
    let a = laplace_2d(20, 0.0);
    let mut opts = CgOptions::default();
    opts.max_iterations = Some(5);
    let mut cg = ConjugateGradient::new(opts).unwrap();
    cg.analyze(&a).unwrap();
    cg.factor(&a).unwrap();
    let mut x = mul(&a, &x_true(400));
    let e = cg.solve_in_place(&mut x).unwrap_err();
    match e {
        Error::SolverNotConverged {
            iterations,
            relative_residual,
        } => {
            assert_eq!(iterations, 5);
            assert!(relative_residual > 1e-10 && relative_residual < 1.0);
        }
        e => panic!("{e}"),
    }
    for tol in [0.0, -1.0, 1.0, f64::NAN] {
        let mut opts = CgOptions::default();
        opts.relative_tolerance = tol;
        let e = ConjugateGradient::new(opts).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "relative_tolerance",
                    ..
                }
            ),
            "{e}"
        );
    }
}

/// A random sparse symmetric matrix with a strictly dominant positive diagonal (so SPD by
/// Gershgorin), as `(n, entries)`.
fn spd_matrix() -> impl Strategy<Value = (usize, Vec<(usize, usize, f64)>)> {
    (1usize..40).prop_flat_map(|n| {
        let offdiag = prop::collection::vec((0..n, 0..n, -1.0f64..1.0), 0..3 * n);
        let margins = prop::collection::vec(0.5f64..2.0, n);
        (Just(n), offdiag, margins).prop_map(|(n, off, margins)| {
            let mut e = Vec::new();
            let mut rowsum = vec![0.0; n];
            for (i, j, v) in off {
                if i != j {
                    e.push((i, j, v));
                    e.push((j, i, v));
                    rowsum[i] += v.abs();
                    rowsum[j] += v.abs();
                }
            }
            for i in 0..n {
                e.push((i, i, rowsum[i] + margins[i]));
            }
            (n, e)
        })
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn solvers_agree_with_a_dense_solve((n, entries) in spd_matrix()) {
        let a = csr(n, &entries);
        let mut dense = nalgebra::DMatrix::<f64>::zeros(n, n);
        for &(i, j, v) in &entries {
            dense[(i, j)] += v;
        }
        let b: Vec<f64> = (0..n).map(|i| (1.3 * i as f64).cos()).collect();
        // Reference: nalgebra's dense LU with partial pivoting.
        let x_ref = dense.clone().lu().solve(&nalgebra::DVector::from_vec(b.clone())).unwrap();
        // Gershgorin: kappa <= (2 max rowsum + 2) / 0.5 < 250 for these sizes, so a CG
        // tolerance of 1e-12 keeps its forward error below 1e-9.
        let mut cg = CgOptions::default();
        cg.relative_tolerance = 1e-12;
        let mut solvers: Vec<Box<dyn LinearSolver>> = vec![
            Box::new(SparseCholesky::new()),
            Box::new(SparseLu::new()),
            Box::new(ConjugateGradient::new(cg).unwrap()),
        ];
        let mut solutions = Vec::new();
        for s in solvers.iter_mut() {
            s.analyze(&a).unwrap();
            s.factor(&a).unwrap();
            let mut x = b.clone();
            s.solve_in_place(&mut x).unwrap();
            let err = rel_err(&x, x_ref.as_slice());
            prop_assert!(err <= 1e-9, "{}: {err:e}", s.name());
            solutions.push(x);
        }
        for x in &solutions[1..] {
            prop_assert!(rel_err(x, &solutions[0]) <= 1e-9);
        }
    }
}
