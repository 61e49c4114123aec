//! Cost of one explicit central-difference step on a spring chain, against the DOF count.
//!
//! The integrator and the model are built outside the timed closure; only `step` is timed.
//! Run with `cargo bench --bench explicit_step`.

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use sprs::TriMat;
use tempora::State;
use tempora::explicit::{CentralDifference, CentralDifferenceOptions, StableLimit};
use tempora::model::LinearModel;

fn chain(n: usize) -> LinearModel {
    let mut m = TriMat::new((n, n));
    let mut k = TriMat::new((n, n));
    for i in 0..n {
        m.add_triplet(i, i, 1.0);
        k.add_triplet(i, i, 2.0);
        if i + 1 < n {
            k.add_triplet(i, i + 1, -1.0);
            k.add_triplet(i + 1, i, -1.0);
        }
    }
    LinearModel::new(&m.to_csr(), &k.to_csr()).unwrap()
}

fn explicit_step(c: &mut Criterion) {
    let mut group = c.benchmark_group("explicit_step_chain");
    for n in [1_000usize, 10_000, 100_000, 1_000_000] {
        let mut model = chain(n);
        let u0: Vec<f64> = (0..n).map(|i| ((i % 97) as f64) * 1e-3).collect();
        let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
        let opts = CentralDifferenceOptions {
            stable_limit: StableLimit::Given(1.0),
            ..Default::default()
        };
        let mut cd = CentralDifference::new(&mut model, &mut state, opts).unwrap();
        group.throughput(Throughput::Elements(n as u64));
        group.bench_with_input(BenchmarkId::from_parameter(n), &n, |b, _| {
            b.iter(|| cd.step(&mut model, &mut state, 0.5).unwrap())
        });
    }
    group.finish();
}

criterion_group!(benches, explicit_step);
criterion_main!(benches);
