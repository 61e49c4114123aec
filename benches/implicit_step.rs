//! Cost of one linear implicit step (average acceleration, `LinearModel`, `SparseCholesky`, the
//! factor reused: the first step factors outside the timing) on a spring chain and a 2D
//! five-point stencil, against the DOF count. Run with `cargo bench --bench implicit_step`.

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use sprs::{CsMat, TriMat};
use stepgauge::State;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::LinearModel;
use stepgauge::params::AlphaParams;

fn unit_mass(n: usize) -> CsMat<f64> {
    let mut m = TriMat::new((n, n));
    for i in 0..n {
        m.add_triplet(i, i, 1.0);
    }
    m.to_csr()
}

fn chain(n: usize) -> LinearModel {
    let mut k = TriMat::new((n, n));
    for i in 0..n {
        k.add_triplet(i, i, 2.0);
        if i + 1 < n {
            k.add_triplet(i, i + 1, -1.0);
            k.add_triplet(i + 1, i, -1.0);
        }
    }
    LinearModel::new(&unit_mass(n), &k.to_csr()).unwrap()
}

/// Five-point stencil on an `m x m` grid with fixed edges.
fn stencil(m: usize) -> LinearModel {
    let n = m * m;
    let mut k = TriMat::new((n, n));
    for i in 0..m {
        for j in 0..m {
            let p = i * m + j;
            k.add_triplet(p, p, 4.0);
            if i + 1 < m {
                k.add_triplet(p, p + m, -1.0);
                k.add_triplet(p + m, p, -1.0);
            }
            if j + 1 < m {
                k.add_triplet(p, p + 1, -1.0);
                k.add_triplet(p + 1, p, -1.0);
            }
        }
    }
    LinearModel::new(&unit_mass(n), &k.to_csr()).unwrap()
}

fn bench(c: &mut Criterion, group: &str, models: Vec<LinearModel>) {
    let mut g = c.benchmark_group(group);
    g.sample_size(10);
    for mut model in models {
        let n = stepgauge::model::Model::dofs(&model);
        let u0: Vec<f64> = (0..n).map(|i| (i as f64 * 1e-3).sin()).collect();
        let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::average_acceleration(),
            Box::new(SparseCholesky::new()),
            ImplicitOptions::default(),
        )
        .unwrap();
        it.step(&mut model, &mut state, 2.0).unwrap(); // factors
        g.throughput(Throughput::Elements(n as u64));
        g.bench_with_input(BenchmarkId::from_parameter(n), &n, |b, _| {
            b.iter(|| it.step(&mut model, &mut state, 2.0).unwrap())
        });
    }
    g.finish();
}

fn implicit_step(c: &mut Criterion) {
    let sizes = [1_000usize, 10_000, 100_000, 1_000_000];
    bench(
        c,
        "implicit_step_chain",
        sizes.iter().map(|&n| chain(n)).collect(),
    );
    bench(
        c,
        "implicit_step_stencil_2d",
        sizes
            .iter()
            .map(|&n| stencil((n as f64).sqrt().round() as usize))
            .collect(),
    );
}

criterion_group!(benches, implicit_step);
criterion_main!(benches);
