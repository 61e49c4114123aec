//! Checks of the `own_solver` example: the banded Cholesky written in
//! `examples/own_solver/solver.rs` against a dense solve, its typed errors (also as passed on
//! by the implicit integrator), its allocations, and the example's two histories (built-in
//! sparse Cholesky and the example's solver) on the coarse strip.

#![allow(dead_code, clippy::needless_range_loop)]

#[path = "../examples/own_solver/model.rs"]
mod model;
#[path = "../examples/own_solver/solver.rs"]
mod solver;

use std::alloc::{GlobalAlloc, Layout, System};
use std::cell::Cell;

use sprs::TriMat;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::{CsrMatrix, LinearSolver, SparseCholesky};
use stepgauge::model::LinearModel;
use stepgauge::params::AlphaParams;
use stepgauge::run::{Flow, RecordOptions, RunOptions, StepControl, run};
use stepgauge::{Error, State};

use model::Strip;
use solver::{BandedCholesky, CG_NAME, JacobiCg, NAME};

// Allocations counted per thread, so that tests running in parallel do not disturb each other.
thread_local! {
    static ALLOCATIONS: Cell<usize> = const { Cell::new(0) };
}

struct Counting;

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let _ = ALLOCATIONS.try_with(|c| c.set(c.get() + 1));
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let _ = ALLOCATIONS.try_with(|c| c.set(c.get() + 1));
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

fn allocations() -> usize {
    ALLOCATIONS.with(|c| c.get())
}

/// A small deterministic generator (xorshift64*), values in [0, 1).
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        (self.0.wrapping_mul(0x2545_f491_4f6c_dd1d) >> 11) as f64 / (1u64 << 53) as f64
    }
}

/// A random symmetric banded matrix of half-bandwidth `band` whose rows and columns are then
/// shuffled (so that the reordering has a band to find), as dense rows and as CSR. Diagonal
/// `shift + sum |off-diagonal|` makes it positive definite for `shift > 0` (a symmetric matrix
/// with a positive, strictly dominant diagonal: Gershgorin).
fn random_banded(n: usize, band: usize, shift: f64, seed: u64) -> (Vec<Vec<f64>>, CsrMatrix) {
    let mut rng = Rng(seed);
    let mut a = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in i.saturating_sub(band)..i {
            let v = 2.0 * rng.next() - 1.0;
            a[i][j] = v;
            a[j][i] = v;
        }
    }
    for i in 0..n {
        let off: f64 = (0..n).filter(|&j| j != i).map(|j| a[i][j].abs()).sum();
        a[i][i] = off + shift + rng.next();
    }
    // Shuffle: p is a random permutation (Fisher-Yates).
    let mut p: Vec<usize> = (0..n).collect();
    for i in (1..n).rev() {
        let j = (rng.next() * (i + 1) as f64) as usize;
        p.swap(i, j.min(i));
    }
    let shuffled: Vec<Vec<f64>> = (0..n)
        .map(|i| (0..n).map(|j| a[p[i]][p[j]]).collect())
        .collect();
    (shuffled.clone(), csr(&shuffled))
}

fn csr(rows: &[Vec<f64>]) -> CsrMatrix {
    let n = rows.len();
    let mut t = TriMat::new((n, n));
    for (i, r) in rows.iter().enumerate() {
        for (j, &v) in r.iter().enumerate() {
            if v != 0.0 || i == j {
                t.add_triplet(i, j, v);
            }
        }
    }
    CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
}

/// The example's solver against nalgebra's dense LU on shuffled random SPD banded matrices:
/// the solutions agree to 1e-12 relative (both are backward stable and these matrices have
/// condition numbers below about 1e2, so each solution carries errors of a few 1e-15:
/// Higham 2002, *Accuracy and Stability of Numerical Algorithms*, theorems 9.4 and 10.4,
/// numbers from memory). The reordering must also find a band at most twice the generated one
/// on the shuffled matrix (RCM is a heuristic; from a peripheral node of a band graph its
/// breadth-first levels are runs of at most `band` consecutive rows, so a row's neighbours lie
/// within two levels: common practice).
#[test]
fn solve_matches_a_dense_solve_on_random_spd_banded_matrices() {
    for (n, band, seed) in [(1, 0, 7), (7, 1, 1), (40, 3, 2), (120, 6, 3)] {
        let (dense, a) = random_banded(n, band, 0.5, seed);
        let mut s = BandedCholesky::new();
        s.analyze(&a).unwrap();
        let found = s.bandwidth().unwrap();
        assert!(
            found <= 2 * band,
            "n {n}: band {found} after RCM, generated {band}"
        );
        s.factor(&a).unwrap();
        let mut rng = Rng(seed + 100);
        let b: Vec<f64> = (0..n).map(|_| 2.0 * rng.next() - 1.0).collect();
        let mut x = b.clone();
        let info = s.solve_in_place(&mut x).unwrap();
        assert_eq!(info.iterations, 0);
        let m = nalgebra::DMatrix::from_fn(n, n, |i, j| dense[i][j]);
        let exact = m.lu().solve(&nalgebra::DVector::from_vec(b)).unwrap();
        let scale = exact.amax();
        let err = x
            .iter()
            .zip(exact.iter())
            .fold(0.0f64, |e, (p, q)| e.max((p - q).abs()));
        assert!(err <= 1e-12 * scale, "n {n}: error {err:e} of {scale:e}");
        // The example's CG to 1e-14: its error is at most cond(A) times the residual, so
        // below 1e-11 of the solution for these matrices; 1e-10 is asked.
        let mut cg = JacobiCg::new(1e-14, 1000);
        cg.analyze(&a).unwrap();
        cg.factor(&a).unwrap();
        // Right-hand side A x_exact, so that the reference solution is known exactly.
        let mut bc: Vec<f64> = (0..n)
            .map(|i| (0..n).map(|j| dense[i][j] * exact[j]).sum())
            .collect();
        let info = cg.solve_in_place(&mut bc).unwrap();
        assert!(info.iterations >= 1 && info.relative_residual <= 1e-14);
        let err_cg = bc
            .iter()
            .zip(exact.iter())
            .fold(0.0f64, |e, (p, q)| e.max((p - q).abs()));
        assert!(err_cg <= 1e-10 * scale, "n {n}: CG error {err_cg:e}");
        // A second factorisation with new values on the same pattern is solved too.
        let mut a2 = a.clone();
        for v in a2.data_mut() {
            *v *= 3.0;
        }
        s.factor(&a2).unwrap();
        // (3A) y = 3 A (x / 3) has the solution y = x / 3.
        let x3: Vec<f64> = x.iter().map(|v| v / 3.0).collect();
        let mut rhs: Vec<f64> = (0..n)
            .map(|i| (0..n).map(|j| 3.0 * dense[i][j] * x3[j]).sum())
            .collect();
        s.solve_in_place(&mut rhs).unwrap();
        let err2 = rhs
            .iter()
            .zip(&x3)
            .fold(0.0f64, |e, (p, q)| e.max((p - q).abs()));
        assert!(err2 <= 1e-12 * scale, "n {n}: refactor error {err2:e}");
    }
}

/// Reverse Cuthill-McKee brings the strip's band from about the nodes along it (x runs fastest
/// in the model's numbering) to about twice the nodes across (the BFS levels of the nine-point
/// pattern from a corner are L-shaped fronts of up to ny - 1 nodes; a row's neighbours lie in the
/// levels before and after it).
#[test]
fn reordering_narrows_the_strip_band() {
    let strip = Strip::coarse();
    let model = strip.model().unwrap();
    let mut s = BandedCholesky::new();
    s.analyze(model.stiffness_matrix()).unwrap();
    assert_eq!(s.natural_bandwidth(), Some(strip.nx)); // (nx - 1) + 1 for the diagonal neighbour
    let b = s.bandwidth().unwrap();
    assert!(b <= 2 * strip.ny, "band {b} after RCM");
}

/// Not positive definite: the factorisation refuses the first non-positive pivot with
/// `Error::NotPositiveDefinite`, naming the row in the caller's numbering and the pivot.
#[test]
fn indefinite_matrix_is_a_typed_error() {
    // Constructed: the chain [-1, 2, -1] (n = 6) with row 4's diagonal lowered to -3: the
    // leading minors are positive up to the reordered position of row 4 at the latest, and the
    // matrix is indefinite (e_4^T A e_4 = -3 < 0), so some pivot is non-positive.
    let n = 6;
    let mut rows = vec![vec![0.0; n]; n];
    for i in 0..n {
        rows[i][i] = 2.0;
        if i + 1 < n {
            rows[i][i + 1] = -1.0;
            rows[i + 1][i] = -1.0;
        }
    }
    rows[4][4] = -3.0;
    let a = csr(&rows);
    let mut s = BandedCholesky::new();
    s.analyze(&a).unwrap();
    let e = s.factor(&a).unwrap_err();
    match e {
        Error::NotPositiveDefinite {
            solver,
            row: Some(row),
            value: Some(pivot),
        } => {
            assert_eq!(solver, NAME);
            assert!(row < n);
            assert!(pivot <= 0.0, "pivot {pivot}");
        }
        other => panic!("expected NotPositiveDefinite, got {other}"),
    }
    // After a failed factor the solver refuses to solve.
    let mut b = vec![1.0; n];
    assert!(matches!(
        s.solve_in_place(&mut b),
        Err(Error::SolverNotReady {
            missing: "factor",
            ..
        })
    ));
    // A singular matrix (a free chain: rigid-body mode) loses its last pivot to rounding or
    // to zero, and is refused as well.
    let mut free = rows.clone();
    free[4][4] = 2.0;
    free[0][0] = 1.0;
    free[n - 1][n - 1] = 1.0;
    let a = csr(&free);
    s.analyze(&a).unwrap();
    assert!(matches!(
        s.factor(&a),
        Err(Error::NotPositiveDefinite { .. })
    ));
}

/// The implicit integrator passes the solver's error on unchanged: (a) from `new`, where a
/// consistent mass matrix with positive row sums but not positive definite is factored for the
/// initial acceleration; (b) from `step`, where the iteration matrix
/// `M / (beta dt^2) + (1 - alpha_f) K` of a model with a negative stiffness is indefinite.
#[test]
fn integrator_passes_the_solver_error_on() {
    // (a) M = [[1, 2], [2, 1]]: row sums 3 > 0, eigenvalues 3 and -1.
    let m = [vec![1.0, 2.0], vec![2.0, 1.0]];
    let k = [vec![1.0, 0.0], vec![0.0, 1.0]];
    let to_sprs = |r: &[Vec<f64>]| {
        let mut t = TriMat::new((r.len(), r.len()));
        for (i, row) in r.iter().enumerate() {
            for (j, &v) in row.iter().enumerate() {
                t.add_triplet(i, j, v);
            }
        }
        t.to_csr()
    };
    let mut model = LinearModel::new(&to_sprs(&m), &to_sprs(&k)).unwrap();
    let mut state = State::new(0.0, vec![1.0, 0.0], vec![0.0, 0.0]).unwrap();
    let e = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(BandedCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap_err();
    assert!(
        matches!(e, Error::NotPositiveDefinite { solver: NAME, .. }),
        "{e}"
    );

    // (b) Unit masses, K = diag(1, -100): with dt = 1 and the trapezoidal rule
    // J = 4 I + K has the pivot 4 - 100 = -96 at row 1.
    let m = [vec![1.0, 0.0], vec![0.0, 1.0]];
    let k = [vec![1.0, 0.0], vec![0.0, -100.0]];
    let mut model = LinearModel::new(&to_sprs(&m), &to_sprs(&k)).unwrap();
    let mut state = State::new(0.0, vec![1.0, 0.0], vec![0.0, 0.0]).unwrap();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(BandedCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap();
    let e = it.step(&mut model, &mut state, 1.0).unwrap_err();
    match e {
        Error::NotPositiveDefinite { solver, row, value } => {
            assert_eq!(solver, NAME);
            assert_eq!(row, Some(1));
            assert_eq!(value, Some(-96.0));
        }
        other => panic!("expected NotPositiveDefinite, got {other}"),
    }
    assert_eq!(state.t, 0.0, "the state stays at the last good step");
    // The same step is accepted at dt = 0.1 (J = 400 I + K is positive definite).
    it.step(&mut model, &mut state, 0.1).unwrap();
}

/// The example's CG refuses a non-positive diagonal at `factor` (with its row) and a direction
/// of non-positive curvature at `solve_in_place` (with the curvature).
#[test]
fn cg_refuses_indefinite_matrices() {
    let mut cg = JacobiCg::new(1e-12, 100);
    let a = csr(&[vec![1.0, 0.0], vec![0.0, -1.0]]);
    cg.analyze(&a).unwrap();
    assert!(matches!(
        cg.factor(&a),
        Err(Error::NotPositiveDefinite {
            solver: CG_NAME,
            row: Some(1),
            value: Some(-1.0)
        })
    ));
    // Constructed: A = [[1, 2], [2, 1]] (eigenvalues 3, -1), b = (1, -1): the first direction
    // is p = D^-1 b = b, A p = (-1, 1), and p^T A p = -2.
    let a = csr(&[vec![1.0, 2.0], vec![2.0, 1.0]]);
    cg.analyze(&a).unwrap();
    cg.factor(&a).unwrap();
    let mut b = vec![1.0, -1.0];
    let e = cg.solve_in_place(&mut b).unwrap_err();
    assert!(
        matches!(
            e,
            Error::NotPositiveDefinite {
                solver: CG_NAME,
                row: None,
                value: Some(v)
            } if v == -2.0
        ),
        "{e}"
    );
}

/// Other misuse gives typed errors: a changed pattern, an unsymmetric matrix, a wrong
/// right-hand side, a solve before any analysis.
#[test]
fn misuse_gives_typed_errors() {
    let mut s = BandedCholesky::new();
    let mut b = vec![1.0; 3];
    assert!(matches!(
        s.solve_in_place(&mut b),
        Err(Error::SolverNotReady {
            missing: "analyze",
            ..
        })
    ));
    let a = csr(&[
        vec![4.0, 1.0, 0.0],
        vec![1.0, 4.0, 1.0],
        vec![0.0, 1.0, 4.0],
    ]);
    s.analyze(&a).unwrap();
    let other = csr(&[
        vec![4.0, 0.0, 1.0],
        vec![0.0, 4.0, 1.0],
        vec![1.0, 1.0, 4.0],
    ]);
    assert!(matches!(s.factor(&other), Err(Error::InvalidMatrix { .. })));
    let mut unsym = a.clone();
    unsym.data_mut()[1] = 1.5; // entry (0, 1)
    assert!(matches!(
        s.factor(&unsym),
        Err(Error::NotSymmetric { row: 0, col: 1, .. })
    ));
    s.factor(&a).unwrap();
    let mut short = vec![1.0; 2];
    assert!(matches!(
        s.solve_in_place(&mut short),
        Err(Error::DimensionMismatch { .. })
    ));
    let mut nan = vec![1.0, f64::NAN, 0.0];
    assert!(matches!(
        s.solve_in_place(&mut nan),
        Err(Error::NonFiniteInput { index: 1, .. })
    ));
    let lower = csr(&[vec![4.0, 0.0], vec![1.0, 4.0]]);
    assert!(matches!(
        s.analyze(&lower),
        Err(Error::InvalidMatrix { .. })
    ));
}

/// After `analyze`, `factor` and `solve_in_place` allocate nothing (counted on this thread).
#[test]
fn factor_and_solve_allocate_nothing() {
    let strip = Strip::coarse();
    let model = strip.model().unwrap();
    let a = model.stiffness_matrix().clone();
    let mut s = BandedCholesky::new();
    s.analyze(&a).unwrap();
    let mut rhs = vec![1.0; a.nrows()];
    let before = allocations();
    s.factor(&a).unwrap();
    for _ in 0..3 {
        s.solve_in_place(&mut rhs).unwrap();
    }
    let after = allocations();
    assert_eq!(after - before, 0, "allocations in factor + solve");
    // The counter does count on this thread (so the check above can fail).
    let v = std::hint::black_box(vec![0u8; 16]);
    assert!(allocations() > after);
    drop(v);
}

/// The example's claim on its coarse setting: the HHT-alpha histories with the built-in sparse
/// Cholesky and with the example's banded Cholesky agree to 1e-10 of the largest deflection at
/// every DOF and step.
///
/// Why 1e-10: both are backward-stable direct solvers, so each solve differs by about
/// cond(J) eps; for this strip J = M / (beta dt^2) + (1 - alpha_f)(K + c1 C) has a condition
/// number of order 10 (the mass term dominates: omega_max^2 beta dt^2 is about 1 on the coarse
/// mesh), and HHT-alpha is stable (spectral radius <= 1), so the differences stay at a few
/// 1e-15 through the 600 steps (measured: 6.6e-16 relative). 1e-10 leaves a wide margin for
/// other platforms while a fault shows: scaling every pivot by 1 + 1e-8 (a deliberate fault,
/// tried once by hand) gave 3.8e-9; a wrong entry, permutation or stale factor gives far more.
#[test]
fn histories_with_both_solvers_agree() {
    let strip = Strip::coarse();
    let simulate = |solver: Box<dyn LinearSolver>| {
        let mut model = strip.model().unwrap();
        let mut state = State::at_rest(strip.dofs(), 0.0);
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::hht(-0.05).unwrap(),
            solver,
            ImplicitOptions::default(),
        )
        .unwrap();
        let mut options = RunOptions::new(0.3, StepControl::Fixed(5e-4));
        options.record = {
            let mut o = RecordOptions::default();
            o.dofs = None;
            o.energy = false;
            o
        };
        run(&mut it, &mut model, &mut state, &options, |_| {
            Flow::Continue
        })
        .unwrap()
        .into_result()
        .unwrap()
        .record
    };
    let a = simulate(Box::new(SparseCholesky::new()));
    let b = simulate(Box::new(BandedCholesky::new()));
    assert_eq!(a.u.len(), b.u.len());
    assert_eq!(a.len(), 601);
    let peak = a.u.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    // The pulse moves the strip by millimetres (an impulse of 200 Pa x 0.6 m^2 x 2/pi x 20 ms);
    // a run that did nothing would make the comparison empty.
    assert!(peak > 1e-3 && peak < 1e-2, "peak deflection {peak} m");
    let diff =
        a.u.iter()
            .zip(&b.u)
            .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
    assert!(
        diff <= 1e-10 * peak,
        "difference {:e} of the peak",
        diff / peak
    );

    // The example's CG to 1e-12: each solve's error is at most cond(J) 1e-12 (about 1e-11),
    // and a stable scheme adds such errors at most linearly over the 600 steps: 1e-8 of the
    // peak bounds it (measured: 3.7e-14).
    let c = simulate(Box::new(JacobiCg::new(1e-12, 10_000)));
    let diff_cg =
        a.u.iter()
            .zip(&c.u)
            .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
    assert!(diff_cg <= 1e-8 * peak, "CG difference {:e}", diff_cg / peak);
}
