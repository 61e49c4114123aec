//! Cost of one explicit central-difference step on a linear model with lumped mass, against the
//! DOF count: the 1D spring chain (`K = tridiag(-1, 2, -1)`) and the 3D seven-point stencil on a
//! cube of `m^3` DOFs, from 1e3 to 1e7 DOFs.
//!
//! The integrator and the model are built outside the timed closure; only `step` is timed (at
//! 0.9 of the Gershgorin stable step, so the run stays bounded however long criterion runs it).
//! The large sizes take few samples so that `cargo bench` stays reasonable.
//!
//! ```sh
//! cargo bench --bench explicit_step                 # all
//! cargo bench --bench explicit_step -- chain/1000000  # one size
//! ```
//!
//! The ratios the project claims (step / hand-written loop, bandwidth / STREAM triad, 2-thread
//! speed-up, memory per DOF) are measured by the bench report (`bench-report/`), not here.

use std::time::Duration;

mod common;

use common::{chain, cube};
use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use stepgauge::State;
use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, StableLimit, omega_max_gershgorin,
};
use stepgauge::model::{LinearModel, Model};

fn bench_model(c: &mut Criterion, name: &str, sizes: &[usize], build: fn(usize) -> LinearModel) {
    let mut group = c.benchmark_group(format!("explicit_step/{name}"));
    for &size in sizes {
        let mut model = build(size);
        let n = model.dofs();
        let w = omega_max_gershgorin(model.stiffness_matrix(), model.lumped(), None)
            .expect("a valid bench model");
        let dt = 0.9 * 2.0 / w;
        let u0: Vec<f64> = (0..n).map(|i| ((i % 97) as f64) * 1e-3).collect();
        let mut state = State::new(0.0, u0, vec![0.0; n]).expect("finite start");
        let mut opts = CentralDifferenceOptions::default();
        opts.stable_limit = StableLimit::Given(2.0 / w);
        let mut cd = CentralDifference::new(&mut model, &mut state, opts).expect("a valid start");
        if n >= 1_000_000 {
            group.sample_size(10);
            group.warm_up_time(Duration::from_secs(1));
            group.measurement_time(Duration::from_secs(if n >= 5_000_000 { 10 } else { 4 }));
        } else {
            group.sample_size(50);
            group.warm_up_time(Duration::from_secs(1));
            group.measurement_time(Duration::from_secs(2));
        }
        group.throughput(Throughput::Elements(n as u64));
        group.bench_with_input(BenchmarkId::from_parameter(n), &n, |b, _| {
            b.iter(|| cd.step(&mut model, &mut state, dt).expect("a stable step"))
        });
    }
    group.finish();
}

fn explicit_step(c: &mut Criterion) {
    bench_model(
        c,
        "chain",
        &[1_000, 10_000, 100_000, 1_000_000, 10_000_000],
        chain,
    );
    // m^3 = 1000, 10648, 97336, 1e6, 9938375.
    bench_model(c, "cube", &[10, 22, 46, 100, 215], cube);
}

criterion_group!(benches, explicit_step);
criterion_main!(benches);
