//! Points per second of the spectral analysis: `spectral::sweep` (metrics) and
//! `spectral_radius` over a log grid of `Omega`, for generalised-alpha (3x3) and the central
//! difference; and the balanced Schur form (`eigenvalues3`) at every point for comparison. Run
//! with `cargo bench --bench spectral_sweep`.

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use stepgauge::explicit::ForceVelocity;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::{Scheme, eigenvalues3, log_space, spectral_radius, sweep};

fn spectral_sweep(c: &mut Criterion) {
    let omegas = log_space(1e-2, 1e2, 10_000);
    let xi = 0.05;
    let mut g = c.benchmark_group("spectral_sweep");
    g.throughput(Throughput::Elements(omegas.len() as u64));
    for (name, scheme) in [
        (
            "generalised_alpha_0.8",
            Scheme::Alpha(AlphaParams::generalized_alpha(0.8).unwrap()),
        ),
        (
            "central_difference",
            Scheme::CentralDifference(ForceVelocity::Lagged),
        ),
    ] {
        g.bench_with_input(BenchmarkId::new("sweep", name), &scheme, |b, s| {
            b.iter(|| sweep(std::slice::from_ref(s), &omegas, xi))
        });
        g.bench_with_input(
            BenchmarkId::new("spectral_radius", name),
            &scheme,
            |b, s| {
                b.iter(|| {
                    omegas
                        .iter()
                        .map(|&o| spectral_radius(s, o, xi))
                        .sum::<f64>()
                })
            },
        );
        g.bench_with_input(BenchmarkId::new("schur_form", name), &scheme, |b, s| {
            b.iter(|| {
                omegas
                    .iter()
                    .map(|&o| {
                        eigenvalues3(&s.amplification(o, xi))
                            .iter()
                            .map(|z| z.norm())
                            .fold(0.0, f64::max)
                    })
                    .sum::<f64>()
            })
        });
    }
    g.finish();
}

criterion_group!(benches, spectral_sweep);
criterion_main!(benches);
