//! After `analyze`, the sparse Cholesky factor and solve and the conjugate-gradient factor and
//! solve allocate nothing, and neither does the sparse LU solve; a counting global allocator
//! watches them.

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicUsize, Ordering};

use sprs::TriMat;
use stepgauge::linalg::{
    CgOptions, ConjugateGradient, CsrMatrix, Execution, LinearSolver, SparseCholesky, SparseLu,
};

struct Counting;

static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        ALLOCATIONS.fetch_add(1, Ordering::SeqCst);
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        ALLOCATIONS.fetch_add(1, Ordering::SeqCst);
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

/// 5-point Laplacian on an `m x m` grid plus `shift` on the diagonal.
fn laplace_2d(m: usize, shift: f64) -> CsrMatrix {
    let id = |i: usize, j: usize| i * m + j;
    let mut t = TriMat::new((m * m, m * m));
    for i in 0..m {
        for j in 0..m {
            t.add_triplet(id(i, j), id(i, j), 4.0 + shift);
            if i + 1 < m {
                t.add_triplet(id(i, j), id(i + 1, j), -1.0);
                t.add_triplet(id(i + 1, j), id(i, j), -1.0);
            }
            if j + 1 < m {
                t.add_triplet(id(i, j), id(i, j + 1), -1.0);
                t.add_triplet(id(i, j + 1), id(i, j), -1.0);
            }
        }
    }
    CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
}

/// 7-point Laplacian on an `m x m x m` grid plus `shift` on the diagonal.
fn laplace_3d(m: usize, shift: f64) -> CsrMatrix {
    let n = m * m * m;
    let id = |i: usize, j: usize, k: usize| (i * m + j) * m + k;
    let mut t = TriMat::new((n, n));
    for i in 0..m {
        for j in 0..m {
            for k in 0..m {
                let p = id(i, j, k);
                t.add_triplet(p, p, 6.0 + shift);
                for (c, q) in [(i, (i + 1, j, k)), (j, (i, j + 1, k)), (k, (i, j, k + 1))] {
                    if c + 1 < m {
                        let q = id(q.0, q.1, q.2);
                        t.add_triplet(p, q, -1.0);
                        t.add_triplet(q, p, -1.0);
                    }
                }
            }
        }
    }
    CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
}

/// Spring chain `[-1, 2 + shift, -1]`.
fn chain(n: usize, shift: f64) -> CsrMatrix {
    let mut t = TriMat::new((n, n));
    for i in 0..n {
        t.add_triplet(i, i, 2.0 + shift);
        if i + 1 < n {
            t.add_triplet(i, i + 1, -1.0);
            t.add_triplet(i + 1, i, -1.0);
        }
    }
    CsrMatrix::from_sprs("A", &t.to_csr()).unwrap()
}

fn allocations() -> usize {
    ALLOCATIONS.load(Ordering::SeqCst)
}

/// After `analyze(a)` (not counted), the allocations of factor + solve for `a` and then for `a2`
/// (same pattern), as `[(factor, solve); 2]`.
fn count(s: &mut dyn LinearSolver, a: &CsrMatrix, a2: &CsrMatrix) -> [(usize, usize); 2] {
    let n = a.nrows();
    let mut b = vec![1.0; n];
    let mut b2 = vec![0.5; n];
    s.analyze(a).unwrap();
    let mut counts = [(0, 0); 2];
    for (c, (m, rhs)) in counts.iter_mut().zip([(a, &mut b), (a2, &mut b2)]) {
        let before = allocations();
        s.factor(m).unwrap();
        let mid = allocations();
        s.solve_in_place(rhs).unwrap();
        *c = (mid - before, allocations() - mid);
    }
    counts
}

// One test function so that no other test thread allocates while counting.
#[test]
fn factor_and_solve_allocate_nothing_after_analyze() {
    // Warm-up. The first dense block product of faer's supernodal path in a process runs the
    // one-time set-up of its matrix-product backend (private-gemm-x86: the cache sizes read from
    // the system, about 490 allocations, and a per-thread packing buffer of 64 MiB, one
    // allocation per thread). Every later factorisation, by any solver instance, allocates
    // nothing; the warm-up keeps that one-time cost out of the count.
    {
        let w = laplace_3d(15, 1.0);
        let mut s = SparseCholesky::new();
        s.analyze(&w).unwrap();
        s.factor(&w).unwrap();
    }

    // faer factorises the chain by its simplicial path and the 3D grid by its supernodal path
    // (asserted by a unit test of the Cholesky solver).
    let zero = [(0, 0); 2];
    for (a, a2) in [
        (chain(2000, 0.05), chain(2000, 0.5)),
        (laplace_3d(15, 0.0), laplace_3d(15, 0.5)),
    ] {
        let n = a.nrows();
        let c = count(&mut SparseCholesky::new(), &a, &a2);
        assert_eq!(c, zero, "sparse Cholesky, n = {n}: (factor, solve) x 2");

        let mut cg = ConjugateGradient::new(CgOptions::default()).unwrap();
        cg.set_execution(&Execution::serial());
        let c = count(&mut cg, &a, &a2);
        assert_eq!(c, zero, "CG serial, n = {n}: (factor, solve) x 2");
    }

    // LU: faer sizes its factor storage in the first factorisation (and its supernodal path
    // allocates in every factorisation); the solves allocate nothing. The chain only: the 3D
    // grid takes seconds in a debug build.
    let (a, a2) = (chain(2000, 0.05), chain(2000, 0.5));
    let c = count(&mut SparseLu::new(), &a, &a2);
    assert_eq!((c[0].1, c[1].1), (0, 0), "sparse LU: solves");
    eprintln!(
        "sparse LU, n = 2000: factorisation allocations {}, then {}",
        c[0].0, c[1].0
    );

    // CG's parallel path, run from inside a rayon pool (from a thread outside the pool each
    // parallel loop is handed over through rayon's injector queue, which allocates a block per
    // 63 hand-offs).
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap();
    let (a, a2) = (laplace_2d(200, 1.0), laplace_2d(200, 2.0));
    let cg = CgOptions::default(); // parallel above 32,768 unknowns; n = 40,000
    let mut solver = ConjugateGradient::new(cg).unwrap();
    let c = pool.install(|| count(&mut solver, &a, &a2));
    assert_eq!(c, zero, "CG parallel, n = 40000: (factor, solve) x 2");
}
