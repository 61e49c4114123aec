//! Cost of the stable-step estimates of the explicit scheme on the 1D spring chain and the 3D
//! seven-point stencil cube: the Gershgorin bound (one pass over the stiffness) and the Lanczos
//! estimate of `omega_max` (`omega_max_lanczos` on the stiffness product, and
//! `stable_step::estimate` on the model with its default options).
//!
//! ```sh
//! cargo bench --bench stable_step
//! ```
//!
//! The Lanczos runs use a relative tolerance of 1e-4 (ample for a step taken at 0.9 of the
//! limit): with the default 1e-10 the estimate does not converge on the uniform chain beyond a
//! few thousand DOFs within the default 5000 products, because the chain's highest eigenvalues
//! lie closer together than that tolerance. `estimate` with its defaults is timed on the cube,
//! where it converges.

mod common;

use std::time::Duration;

use common::{chain, cube};
use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use stepgauge::State;
use stepgauge::explicit::{
    EigenOptions, StableStepOptions, omega_max_gershgorin, omega_max_lanczos, stable_step,
};
use stepgauge::linalg::{Execution, Parallelism};
use stepgauge::model::{LinearModel, Model};

fn gershgorin(c: &mut Criterion) {
    let mut group = c.benchmark_group("stable_step/gershgorin");
    group.sample_size(20);
    group.warm_up_time(Duration::from_millis(500));
    group.measurement_time(Duration::from_secs(2));
    let models: [(&str, LinearModel); 6] = [
        ("chain", chain(10_000)),
        ("chain", chain(100_000)),
        ("chain", chain(1_000_000)),
        ("cube", cube(22)),
        ("cube", cube(46)),
        ("cube", cube(100)),
    ];
    for (name, model) in &models {
        let n = model.dofs();
        group.throughput(Throughput::Elements(n as u64));
        group.bench_with_input(BenchmarkId::new(*name, n), model, |b, m| {
            b.iter(|| omega_max_gershgorin(m.stiffness_matrix(), m.lumped(), None).expect("valid"))
        });
    }
    group.finish();
}

fn lanczos(c: &mut Criterion) {
    let mut group = c.benchmark_group("stable_step/lanczos");
    group.sample_size(10);
    group.warm_up_time(Duration::from_millis(500));
    group.measurement_time(Duration::from_secs(3));
    let mut options = EigenOptions::default();
    options.tolerance = 1e-4;
    let models: [(&str, LinearModel); 5] = [
        ("chain", chain(1_000)),
        ("chain", chain(10_000)),
        ("cube", cube(10)),
        ("cube", cube(22)),
        ("cube", cube(46)),
    ];
    for (name, model) in &models {
        let n = model.dofs();
        let k = model.stiffness_matrix();
        group.throughput(Throughput::Elements(n as u64));
        group.bench_with_input(BenchmarkId::new(*name, n), model, |b, m| {
            b.iter(|| {
                omega_max_lanczos(
                    m.lumped(),
                    None,
                    |x, out| {
                        k.mul_vec(x, out, Parallelism::default());
                        Ok(())
                    },
                    &options,
                    &Execution::default(),
                )
                .expect("converges at 1e-4")
            })
        });
    }
    group.finish();
}

fn estimate_default(c: &mut Criterion) {
    let mut group = c.benchmark_group("stable_step/estimate_default");
    group.sample_size(10);
    group.warm_up_time(Duration::from_millis(500));
    group.measurement_time(Duration::from_secs(3));
    for m in [10, 22] {
        let mut model = cube(m);
        let n = model.dofs();
        let state = State::at_rest(n, 0.0);
        let options = StableStepOptions::default();
        group.throughput(Throughput::Elements(n as u64));
        group.bench_with_input(BenchmarkId::new("cube", n), &n, |b, _| {
            b.iter(|| {
                stable_step::estimate(&mut model, &state, &options, &Execution::default())
                    .expect("converges")
            })
        });
    }
    group.finish();
}

criterion_group!(benches, gershgorin, lanczos, estimate_default);
criterion_main!(benches);
