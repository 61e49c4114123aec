//! Section "Spectral sweep": points per second per core of the spectral analysis, on one thread:
//! `spectral::sweep` (spectral radius, damping ratio, period error per point), `spectral_radius`
//! alone (one call per point, and `Prepared::spectral_radii` over the whole grid), and, for
//! comparison in the same run, the robust eigen-solver `eigenvalues3` (balanced real Schur form)
//! that every point went through before the closed-form fast path.

use std::fmt::Write as _;
use std::time::Instant;

use stepgauge::explicit::ForceVelocity;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::{Prepared, Scheme, eigenvalues3, log_space, spectral_radius, sweep};

use crate::{Section, Settings, Target};

/// Target: points per second per core.
const TARGET: f64 = 1e7;

/// Median over `repeats` of the points per second of `f` over `points` points.
fn rate(repeats: usize, points: usize, mut f: impl FnMut() -> f64) -> f64 {
    let mut sink = 0.0;
    sink += f();
    let mut r: Vec<f64> = (0..repeats.max(1))
        .map(|_| {
            let t = Instant::now();
            sink += f();
            points as f64 / t.elapsed().as_secs_f64()
        })
        .collect();
    std::hint::black_box(sink);
    r.sort_by(f64::total_cmp);
    r[r.len() / 2]
}

fn mega(x: f64) -> String {
    format!("{:.1}", x / 1e6)
}

/// Measures and renders the section.
pub fn section(settings: Settings) -> Section {
    let points = if settings.quick { 20_000 } else { 200_000 };
    let repeats = if settings.quick { 3 } else { 9 };
    let xi = 0.05;
    let usual = log_space(1e-2, 1e2, points);
    let wide = log_space(1e-4, 1e6, points);
    let cases: Vec<(&str, Scheme)> = vec![
        (
            "generalised-alpha, rho_inf = 0.8 (3x3)",
            Scheme::Alpha(AlphaParams::generalized_alpha(0.8).unwrap()),
        ),
        (
            "HHT-alpha, rho_inf = 0.9 (3x3)",
            Scheme::Alpha(AlphaParams::hht_from_rho_inf(0.9).unwrap()),
        ),
        (
            "central difference (2x2 in a 3x3 form)",
            Scheme::CentralDifference(ForceVelocity::Lagged),
        ),
    ];
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("one-thread pool");
    let mut rows = Vec::new();
    for (name, scheme) in &cases {
        for (grid, omegas) in [("1e-2..1e2", &usual), ("1e-4..1e6", &wide)] {
            let (r_sweep, r_rho, r_radii, r_schur) = pool.install(|| {
                let r_sweep = rate(repeats, omegas.len(), || {
                    let m = sweep(std::slice::from_ref(scheme), omegas, xi);
                    m[0].iter().map(|p| p.spectral_radius).sum()
                });
                let r_rho = rate(repeats, omegas.len(), || {
                    omegas.iter().map(|&o| spectral_radius(scheme, o, xi)).sum()
                });
                let r_radii = rate(repeats, omegas.len(), || {
                    Prepared::new(scheme)
                        .spectral_radii(omegas, xi)
                        .iter()
                        .sum()
                });
                // The path before the fast one: the eigen-solver at every point (a tenth of the
                // points: it is slow).
                let few = &omegas[..omegas.len() / 10];
                let r_schur = rate(repeats.min(5), few.len(), || {
                    few.iter()
                        .map(|&o| {
                            eigenvalues3(&scheme.amplification(o, xi))
                                .iter()
                                .map(|z| z.norm())
                                .fold(0.0, f64::max)
                        })
                        .sum()
                });
                (r_sweep, r_rho, r_radii, r_schur)
            });
            eprintln!(
                "   {name}, {grid}: sweep {:.2e}/s, spectral_radius {:.2e}/s, spectral_radii \
                 {:.2e}/s, Schur {:.2e}/s",
                r_sweep, r_rho, r_radii, r_schur
            );
            rows.push((*name, grid, r_sweep, r_rho, r_radii, r_schur));
        }
    }
    let threads = rayon::current_num_threads();
    let t = Instant::now();
    let all = sweep(&[cases[0].1], &wide, xi);
    let par_rate = wide.len() as f64 / t.elapsed().as_secs_f64();
    std::hint::black_box(all);

    let mut body = String::new();
    let _ = writeln!(
        body,
        "Points per second on one thread (a one-thread rayon pool), `xi = {xi}`, {points} values \
         of `Omega` evenly spaced on a log axis, medians of {repeats} runs. `sweep` computes the \
         spectral radius, the damping ratio and the period error of each point \
         (`spectral::metrics`, in blocks of points evaluated stage by stage); `spectral_radius` \
         the largest eigenvalue modulus alone, one call per point; `spectral_radii` the same \
         values for the whole grid in blocks (`Prepared::spectral_radii`). The eigenvalues come \
         from the characteristic cubic in closed form, its coefficients formed from the \
         parameters without the matrix (`spectral::Prepared`), and where roots meet (a root's \
         condition above 64) from the compensated path (double-double coefficients, bracketed \
         real root, double-double discriminant; `docs/spectral.md`); the last column times the \
         balanced Schur form of the matrix at every point, as every point was computed before \
         the fast path (same run), and as clustered points were until the compensated path \
         replaced it (the Schur form loses half the digits where roots meet). The usual \
         plotting range is `Omega` 1e-2 to 1e2, where these three schemes take the closed form \
         at every point; on the wide grid, small `Omega` (the pair near 1, condition about \
         `1 / Omega`) and large `Omega` (the dissipative members' three roots closing in) take \
         the compensated path.\n"
    );
    let _ = writeln!(
        body,
        "| scheme | Omega | sweep (M points/s) | spectral_radius (M points/s) | spectral_radii (M points/s) | Schur form at every point (M points/s) |"
    );
    let _ = writeln!(body, "|---|---|---|---|---|---|");
    let mut targets = Vec::new();
    for (name, grid, s, r, radii, schur) in &rows {
        let _ = writeln!(
            body,
            "| {name} | {grid} | {} | {} | {} | {} |",
            mega(*s),
            mega(*r),
            mega(*radii),
            mega(*schur)
        );
        if *grid == "1e-2..1e2" {
            for (what, v) in [("sweep (metrics)", s), ("spectral_radius", r)] {
                targets.push(Target {
                    threads: "1".to_string(),
                    what: format!("{what} points/s per core, {name}, Omega {grid}"),
                    measured: format!("{:.2e}", v),
                    target: format!(">= {TARGET:.0e}"),
                    met: *v >= TARGET,
                });
            }
        }
    }
    let _ = writeln!(
        body,
        "\n`sweep` on all {threads} threads, {} on the wide grid: {} M points/s.",
        cases[0].0,
        mega(par_rate)
    );
    Section {
        title: "Spectral sweep".to_string(),
        body,
        targets,
    }
}
