//! Cost of one Newton iteration of the implicit family on a nonlinear chain: unit masses joined
//! by hardening springs `f = d + 10 d^3` (fixed ends), full Newton, average acceleration. Each
//! sample times steps and divides by the iterations they report. Run with
//! `cargo bench --bench newton_iteration`.

use std::time::{Duration, Instant};

use criterion::{BenchmarkId, Criterion, criterion_group, criterion_main};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::{CsrMatrix, SparseCholesky};
use stepgauge::model::{Model, Tangent};
use stepgauge::params::AlphaParams;
use stepgauge::{ModelError, State};

/// The cubic-spring chain, with its tangent.
struct CubicChain {
    n: usize,
    pattern: CsrMatrix,
}

impl CubicChain {
    fn new(n: usize) -> Self {
        let mut t = sprs::TriMat::new((n, n));
        for i in 0..n {
            t.add_triplet(i, i, 2.0);
            if i + 1 < n {
                t.add_triplet(i, i + 1, -1.0);
                t.add_triplet(i + 1, i, -1.0);
            }
        }
        CubicChain {
            n,
            pattern: CsrMatrix::from_sprs("K", &t.to_csr()).unwrap(),
        }
    }

    /// Stretch of spring `s`, between mass `s - 1` and mass `s` (walls at both ends).
    fn stretch(&self, u: &[f64], s: usize) -> f64 {
        let left = if s == 0 { 0.0 } else { u[s - 1] };
        let right = if s == self.n { 0.0 } else { u[s] };
        right - left
    }
}

impl Model for CubicChain {
    fn dofs(&self) -> usize {
        self.n
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        out.fill(1.0);
    }
    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        let f = |d: f64| d + 10.0 * d * d * d;
        let mut left = f(self.stretch(u, 0));
        for (i, o) in out.iter_mut().enumerate().take(self.n) {
            let right = f(self.stretch(u, i + 1));
            *o = left - right;
            left = right;
        }
        Ok(())
    }
}

impl Tangent for CubicChain {
    fn tangent_pattern(&self) -> &CsrMatrix {
        &self.pattern
    }

    fn tangent_stiffness(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut CsrMatrix,
    ) -> Result<(), ModelError> {
        let kt = |d: f64| 1.0 + 30.0 * d * d;
        let mut left = kt(self.stretch(u, 0));
        let n = self.n;
        let data = out.data_mut();
        let mut pos = 0;
        for i in 0..n {
            let right = kt(self.stretch(u, i + 1));
            if i > 0 {
                data[pos] = -left;
                pos += 1;
            }
            data[pos] = left + right;
            pos += 1;
            if i + 1 < n {
                data[pos] = -right;
                pos += 1;
            }
            left = right;
        }
        Ok(())
    }
}

fn newton_iteration(c: &mut Criterion) {
    let mut g = c.benchmark_group("newton_iteration_cubic_chain");
    g.sample_size(10);
    for n in [1_000usize, 10_000, 100_000] {
        let mut model = CubicChain::new(n);
        let u0: Vec<f64> = (0..n).map(|i| 0.3 * (i as f64 * 0.01).sin()).collect();
        let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::average_acceleration(),
            Box::new(SparseCholesky::new()),
            ImplicitOptions::default(),
        )
        .unwrap();
        it.step(&mut model, &mut state, 0.05).unwrap();
        g.bench_with_input(BenchmarkId::from_parameter(n), &n, |b, _| {
            // Time per iteration: each step's time divided by the iterations it reports.
            b.iter_custom(|iters| {
                let mut total = Duration::ZERO;
                let mut done = 0u64;
                while done < iters {
                    let t = Instant::now();
                    it.step(&mut model, &mut state, 0.05).unwrap();
                    let k = it.last_report().iterations.max(1) as u64;
                    total += t.elapsed();
                    done += k;
                }
                total.mul_f64(iters as f64 / done as f64)
            })
        });
    }
    g.finish();
}

criterion_group!(benches, newton_iteration);
criterion_main!(benches);
