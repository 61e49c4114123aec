//! A time step allocates nothing: a counting global allocator watches the steps (after a
//! warm-up that lets rayon start its threads).

mod common;

use std::alloc::{GlobalAlloc, Layout, System};
use std::sync::atomic::{AtomicUsize, Ordering};

use stepgauge::State;
use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, ForceVelocity, StableLimit,
};
use stepgauge::model::{Constraints, LinearModel, Load, TimeFunction};

struct Counting;

static ALLOCATIONS: AtomicUsize = AtomicUsize::new(0);
/// Live heap bytes, and their peak since the last reset.
static LIVE: AtomicUsize = AtomicUsize::new(0);
static PEAK: AtomicUsize = AtomicUsize::new(0);

fn grow(bytes: usize) {
    let now = LIVE.fetch_add(bytes, Ordering::SeqCst) + bytes;
    PEAK.fetch_max(now, Ordering::SeqCst);
}

unsafe impl GlobalAlloc for Counting {
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        ALLOCATIONS.fetch_add(1, Ordering::SeqCst);
        grow(layout.size());
        unsafe { System.alloc(layout) }
    }
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        LIVE.fetch_sub(layout.size(), Ordering::SeqCst);
        unsafe { System.dealloc(ptr, layout) }
    }
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        ALLOCATIONS.fetch_add(1, Ordering::SeqCst);
        LIVE.fetch_sub(layout.size(), Ordering::SeqCst);
        grow(new_size);
        unsafe { System.realloc(ptr, layout, new_size) }
    }
}

#[global_allocator]
static GLOBAL: Counting = Counting;

fn model(n: usize) -> LinearModel {
    let mut pattern = vec![0.0; n];
    pattern[n - 1] = 1.0;
    LinearModel::new(
        &common::diag(&vec![1.0; n]),
        &common::chain_stiffness(n, 1.0, false, false),
    )
    .unwrap()
    .with_rayleigh(0.01, 0.01)
    .unwrap()
    .with_load(Load::Pattern {
        pattern,
        factor: TimeFunction::table(vec![0.0, 1.0], vec![0.0, 1.0]).unwrap(),
    })
    .unwrap()
    .with_constraints(
        Constraints::new()
            .fix(1)
            .prescribe_velocity(0, TimeFunction::Constant(0.1))
            .prescribe_displacement(2, TimeFunction::function(|t| 0.01 * t)),
    )
    .unwrap()
}

/// The one two-thread pool of this file, built once and never dropped: a dropped pool's threads
/// exit later, and a thread's exit allocates (the work-stealing deques' epoch bookkeeping), which
/// a loaded machine can delay into another check's counting window.
fn pool() -> &'static rayon::ThreadPool {
    static POOL: std::sync::OnceLock<rayon::ThreadPool> = std::sync::OnceLock::new();
    POOL.get_or_init(|| {
        rayon::ThreadPoolBuilder::new()
            .num_threads(2)
            .build()
            .unwrap()
    })
}

// One test function so that no other test thread allocates while counting.
#[test]
fn steps_allocate_nothing() {
    explicit_steps_allocate_nothing();
    explicit_plain_linear_steps_allocate_nothing();
    explicit_memory_is_six_vectors();
    implicit_linear_steps_allocate_nothing();
    implicit_streamlined_steps_allocate_nothing();
}

/// An unloaded, undamped linear chain: the explicit scheme's fused loop (`K u` formed inside the
/// update, no force vectors).
fn plain_model(n: usize) -> LinearModel {
    LinearModel::new(
        &common::diag(&vec![1.0; n]),
        &common::chain_stiffness(n, 1.0, true, true),
    )
    .unwrap()
}

fn explicit_plain_linear_steps_allocate_nothing() {
    let pool = pool();
    for n in [50, 200_000] {
        pool.install(|| {
            let mut m = plain_model(n);
            let mut state = State::new(0.0, vec![1e-3; n], vec![0.0; n]).unwrap();
            let mut opts = CentralDifferenceOptions::default();
            opts.stable_limit = StableLimit::Given(1.0);
            let mut cd = CentralDifference::new(&mut m, &mut state, opts).unwrap();
            for _ in 0..5 {
                cd.step(&mut m, &mut state, 0.5).unwrap();
            }
            let before = ALLOCATIONS.load(Ordering::SeqCst);
            for _ in 0..50 {
                cd.step(&mut m, &mut state, 0.5).unwrap();
            }
            let during = ALLOCATIONS.load(Ordering::SeqCst) - before;
            assert_eq!(during, 0, "n = {n}: {during} allocations in 50 steps");
        });
    }
}

/// The heap an explicit run adds to the model and the state, for an unloaded, undamped linear
/// model with the stable step given: six vectors (lumped mass, its inverse, and the next
/// displacement, half-step velocity, velocity and acceleration; the force vectors are left out)
/// plus the constraint mask of creation (a byte per DOF) and per-chunk partial sums. Creation
/// makes no copy of the state and no scratch vector (the hint check runs first and frees its five
/// vectors before the integrator allocates its own).
fn explicit_memory_is_six_vectors() {
    let n = 300_000;
    let mut m = plain_model(n);
    let mut state = State::new(0.0, vec![1e-3; n], vec![0.0; n]).unwrap();
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Given(1.0);
    let base = LIVE.load(Ordering::SeqCst);
    PEAK.store(base, Ordering::SeqCst);
    let mut cd = CentralDifference::new(&mut m, &mut state, opts).unwrap();
    for _ in 0..5 {
        cd.step(&mut m, &mut state, 0.5).unwrap();
    }
    let added = PEAK.load(Ordering::SeqCst) - base;
    // Six vectors of n doubles, the mask, and 64 KiB for everything of fixed or per-chunk size.
    let limit = 6 * 8 * n + n + 64 * 1024;
    assert!(
        added <= limit,
        "the explicit run added {added} bytes at its peak, more than {limit} (= {:.2} doubles per DOF)",
        added as f64 / (8 * n) as f64
    );
    // And it does hold the six vectors (the count above is not vacuous).
    assert!(added >= 6 * 8 * n, "{added} bytes");
}

fn explicit_steps_allocate_nothing() {
    for (n, treatment) in [
        (50, ForceVelocity::Lagged),
        (50, ForceVelocity::Predicted),
        (200_000, ForceVelocity::Lagged),
        (200_000, ForceVelocity::Predicted),
    ] {
        if n < 1000 {
            // Serial path, called from the test's own thread.
            check(n, treatment);
        } else {
            // Parallel path. Called from a thread outside rayon's pool, every parallel loop is
            // handed over through rayon's injector queue, which allocates a block per 63
            // hand-offs; from inside the pool (as here) the step allocates nothing at all.
            let pool = pool();
            pool.install(|| check(n, treatment));
        }
    }
}

fn check(n: usize, treatment: ForceVelocity) {
    {
        let mut m = model(n);
        let mut state = State::at_rest(n, 0.0);
        let mut opts = CentralDifferenceOptions::default();
        opts.stable_limit = StableLimit::Given(1.0);
        opts.force_velocity = treatment;
        let mut cd = CentralDifference::new(&mut m, &mut state, opts).unwrap();
        for _ in 0..5 {
            cd.step(&mut m, &mut state, 0.5).unwrap();
        }
        let before = ALLOCATIONS.load(Ordering::SeqCst);
        for _ in 0..50 {
            cd.step(&mut m, &mut state, 0.5).unwrap();
        }
        let during = ALLOCATIONS.load(Ordering::SeqCst) - before;
        assert_eq!(
            during, 0,
            "n = {n}, {treatment:?}: {during} allocations in 50 steps"
        );
    }
}

/// The implicit linear path allocates nothing per step either (after the first step, which
/// factors the matrix: faer sets up its matrix-product kernels on first use). Called from the one
/// test function, so that no other test thread allocates while counting.
fn implicit_linear_steps_allocate_nothing() {
    use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
    use stepgauge::linalg::SparseCholesky;
    use stepgauge::params::AlphaParams;
    let n = 2000;
    let mut m = LinearModel::new(
        &common::dense_band_mass(n),
        &common::chain_stiffness(n, 1.0e4, true, false),
    )
    .unwrap()
    .with_rayleigh(0.1, 1e-4)
    .unwrap()
    .with_constraints(
        Constraints::new().prescribe_displacement(n - 1, TimeFunction::function(|t| 1e-3 * t)),
    )
    .unwrap();
    let mut state = State::at_rest(n, 0.0);
    let mut it = AlphaIntegrator::new(
        &mut m,
        &mut state,
        AlphaParams::hht(-0.1).unwrap(),
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    )
    .unwrap();
    for _ in 0..3 {
        it.step(&mut m, &mut state, 0.01).unwrap();
    }
    let before = ALLOCATIONS.load(Ordering::SeqCst);
    for _ in 0..20 {
        it.step(&mut m, &mut state, 0.01).unwrap();
    }
    let during = ALLOCATIONS.load(Ordering::SeqCst) - before;
    assert_eq!(during, 0, "{during} allocations in 20 implicit steps");
}

/// The streamlined implicit linear path (no constraints: lumped and consistent mass, undamped
/// and damped), serial and, above the parallel threshold, from inside rayon's pool, allocates
/// nothing per step after the first.
fn implicit_streamlined_steps_allocate_nothing() {
    use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
    use stepgauge::linalg::SparseCholesky;
    use stepgauge::params::AlphaParams;
    let run = |n: usize, consistent: bool, damped: bool| {
        let mass = if consistent {
            common::dense_band_mass(n)
        } else {
            common::diag(&vec![1.0; n])
        };
        let mut pattern = vec![0.0; n];
        pattern[n - 1] = 1.0;
        let mut m = LinearModel::new(&mass, &common::chain_stiffness(n, 1.0e4, true, false))
            .unwrap()
            .with_load(Load::Pattern {
                pattern,
                factor: TimeFunction::table(vec![0.0, 1.0], vec![0.0, 1.0]).unwrap(),
            })
            .unwrap();
        if damped {
            m = m.with_rayleigh(0.1, 1e-4).unwrap();
        }
        let mut state = State::at_rest(n, 0.0);
        let mut it = AlphaIntegrator::new(
            &mut m,
            &mut state,
            AlphaParams::hht(-0.1).unwrap(),
            Box::new(SparseCholesky::new()),
            ImplicitOptions::default(),
        )
        .unwrap();
        for _ in 0..3 {
            it.step(&mut m, &mut state, 0.01).unwrap();
        }
        let before = ALLOCATIONS.load(Ordering::SeqCst);
        for _ in 0..10 {
            it.step(&mut m, &mut state, 0.01).unwrap();
        }
        let during = ALLOCATIONS.load(Ordering::SeqCst) - before;
        assert_eq!(
            during, 0,
            "n = {n}, consistent {consistent}, damped {damped}: {during} allocations in 10 steps"
        );
        assert!(
            state.u.iter().any(|&x| x != 0.0),
            "the load moved the chain"
        );
    };
    let pool = pool();
    for consistent in [false, true] {
        for damped in [false, true] {
            run(2000, consistent, damped);
            pool.install(|| run(40_000, consistent, damped));
        }
    }
}
