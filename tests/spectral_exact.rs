//! The eigenvalues of the amplification matrix against exact ones: `tests/data/exact_roots.csv`,
//! the roots of the characteristic polynomial formed from the step equations and solved with
//! mpmath at 50 digits (`tests/data/exact_roots.py`; nothing of stepgauge used), correctly rounded.
//! 3000 random points over every family, `Omega` in [1e-4, 1e6], `xi` in [0, 1]; about 3500
//! points next to where two roots meet (relative offsets 1e-2 .. 1e-12 of `Omega` from a sign
//! change of the discriminant, roots from about 1e-1 to 1e-6 apart); and the points that a
//! search or CI found hard.
//!
//! Each computed root must lie within the error bound of the path that computed it
//! (`common::roots`): the closed-form cubic (`spectral::eigenvalues` where it does not fall
//! back) by a root's condition as a polynomial root, the balanced Schur form (`eigenvalues3`) by
//! its condition as an eigenvalue, each times a few roundings, capped where roots meet.

use nalgebra::Complex;
use stepgauge::explicit::ForceVelocity;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::{
    CONDITION_LIMIT, Prepared, RootPath, Scheme, eigenvalues, eigenvalues3, spectral_radius,
};

mod common;

use common::roots::{bounds, errors};

const DATA: &str = include_str!("data/exact_roots.csv");

struct Row {
    line: usize,
    kind: String,
    scheme: Scheme,
    omega: f64,
    xi: f64,
    exact: [Complex<f64>; 3],
}

fn rows() -> Vec<Row> {
    let mut out = Vec::new();
    let mut header = true;
    for (i, line) in DATA.lines().enumerate() {
        if line.starts_with('#') {
            continue;
        }
        if header {
            assert!(line.starts_with("kind,scheme,alpha_m"), "columns: {line}");
            header = false;
            continue;
        }
        let f: Vec<&str> = line.split(',').collect();
        assert_eq!(f.len(), 14, "line {}", i + 1);
        let x = |k: usize| -> f64 {
            f[k].parse()
                .unwrap_or_else(|e| panic!("line {}: {e}", i + 1))
        };
        let scheme = match f[1] {
            "alpha" => Scheme::Alpha(AlphaParams::raw(x(2), x(3), x(4), x(5)).unwrap()),
            "cd_lagged" => Scheme::CentralDifference(ForceVelocity::Lagged),
            "cd_predicted" => Scheme::CentralDifference(ForceVelocity::Predicted),
            s => panic!("line {}: scheme {s}", i + 1),
        };
        let z = |k: usize| Complex::new(x(8 + 2 * k), x(9 + 2 * k));
        out.push(Row {
            line: i + 1,
            kind: f[0].to_string(),
            scheme,
            omega: x(6),
            xi: x(7),
            exact: [z(0), z(1), z(2)],
        });
    }
    out
}

/// The table covers what it claims: every kind of point, clusters down to roots 1e-5 apart, and
/// the three schemes' kinds.
#[test]
fn the_table_covers_clusters_and_every_family() {
    let rows = rows();
    assert!(rows.len() > 6000, "{}", rows.len());
    let count = |k: &str| rows.iter().filter(|r| r.kind == k).count();
    assert_eq!(count("random"), 3000);
    assert!(count("cluster") > 3000, "{}", count("cluster"));
    assert_eq!(count("found"), 3);
    // Within a few units in the last place of coalescence points: roots about 1e-8 apart.
    assert!(count("coalescence") >= 300, "{}", count("coalescence"));
    let within_ulps = rows
        .iter()
        .filter(|r| r.kind == "coalescence" && min_separation(&r.exact) < 1e-7)
        .count();
    assert!(
        within_ulps >= 40,
        "{within_ulps} coalescence rows with roots under 1e-7 apart"
    );
    let tight = rows
        .iter()
        .filter(|r| {
            let sep = min_separation(&r.exact);
            sep > 0.0 && sep < 1e-5
        })
        .count();
    assert!(tight > 300, "{tight} points with roots under 1e-5 apart");
    for kind in ["alpha", "cd_lagged", "cd_predicted"] {
        let n = rows
            .iter()
            .filter(|r| {
                matches!(
                    (&r.scheme, kind),
                    (Scheme::Alpha(_), "alpha")
                        | (
                            Scheme::CentralDifference(ForceVelocity::Lagged),
                            "cd_lagged"
                        )
                        | (
                            Scheme::CentralDifference(ForceVelocity::Predicted),
                            "cd_predicted"
                        )
                )
            })
            .count();
        assert!(n > 300, "{kind}: {n}");
    }
}

/// The smallest distance between two of the roots, relative to `max(1, largest modulus)`.
fn min_separation(z: &[Complex<f64>; 3]) -> f64 {
    let sep = [(0, 1), (0, 2), (1, 2)]
        .iter()
        .map(|&(i, j)| (z[i] - z[j]).norm())
        .fold(f64::INFINITY, f64::min);
    sep / z.iter().map(|r| r.norm()).fold(1.0, f64::max)
}

/// Each computed root within `bound[i]` of its exact partner `i`; the largest error / bound ratio
/// kept in `worst`, with the row's line.
fn assert_within(r: &Row, got: &[Complex<f64>; 3], bound: [f64; 3], worst: &mut (f64, usize)) {
    let e = errors(got, &r.exact);
    for (i, (&ei, &bi)) in e.iter().zip(&bound).enumerate() {
        if ei / bi > worst.0 {
            *worst = (ei / bi, r.line);
        }
        assert!(
            ei <= bi,
            "line {} ({} {} Omega {:e} xi {}): root {i} off by {ei:e} (bound {bi:e})\n\
             computed {got:?}\nexact {:?}",
            r.line,
            r.kind,
            r.scheme.name(),
            r.omega,
            r.xi,
            r.exact
        );
    }
}

/// `spectral::eigenvalues` within the error bound of the path it takes at every point: the
/// closed form where every root's condition allows it (always where the condition is below a
/// third of `CONDITION_LIMIT`: its own estimate of the condition, from computed roots, cannot
/// exceed the limit there), the compensated path where roots meet (never the Schur form: no
/// point of the table has extreme coefficients). The spectral radius within the largest root's
/// bound of the path.
#[test]
fn eigenvalues_are_within_their_error_bounds_of_the_exact_roots() {
    let mut worst = [(0.0f64, 0); 2];
    let mut count = [0usize; 2];
    for r in rows() {
        let a = r.scheme.amplification(r.omega, r.xi);
        let b = bounds(&r.exact, &a);
        let (got, path) = Prepared::new(&r.scheme).eigenvalues_with_path(r.omega, r.xi);
        assert_eq!(
            got,
            eigenvalues(&r.scheme, r.omega, r.xi),
            "line {}",
            r.line
        );
        if b.cond <= CONDITION_LIMIT / 3.0 {
            assert_eq!(path, RootPath::ClosedForm, "line {}", r.line);
        }
        let (k, bound) = match path {
            RootPath::ClosedForm => (0, b.closed_form),
            RootPath::Compensated => (1, b.compensated),
            RootPath::Schur => panic!("line {}: the Schur form was taken", r.line),
        };
        count[k] += 1;
        assert_within(&r, &got, bound, &mut worst[k]);
        let rho = spectral_radius(&r.scheme, r.omega, r.xi);
        let rho_exact = r.exact.iter().map(|z| z.norm()).fold(0.0, f64::max);
        assert!(
            (rho - rho_exact).abs() <= bound.iter().copied().fold(0.0, f64::max),
            "line {}: spectral radius {rho} vs {rho_exact}",
            r.line
        );
    }
    assert!(count[0] > 1500, "{} points on the closed form", count[0]);
    assert!(
        count[1] > 500,
        "{} points on the compensated path",
        count[1]
    );
    println!(
        "closed form: {} points, worst error / bound {:.3} (line {}); compensated: {} points, \
         worst error / bound {:.3} (line {})",
        count[0], worst[0].0, worst[0].1, count[1], worst[1].0, worst[1].1
    );
}

/// Where roots meet, the roots are right to about the last bit: on every coalescence row (roots
/// from about 1e-8 to 1e-3 apart, and generalised-alpha's triple-root approach) each root within
/// `1e-14` of the scale, the spectral radius too. Before the compensated path the balanced
/// Schur form of the rounded matrix was taken there, off by up to `5.5e-8` (measured on this
/// table: central difference at `Omega = 2`, undamped).
#[test]
fn roots_where_they_meet_to_full_precision() {
    let mut worst = (0.0f64, 0);
    for r in rows().into_iter().filter(|r| r.kind == "coalescence") {
        let got = eigenvalues(&r.scheme, r.omega, r.xi);
        let scale = r.exact.iter().map(|z| z.norm()).fold(1.0, f64::max);
        let e = errors(&got, &r.exact).into_iter().fold(0.0, f64::max) / scale;
        let rho = spectral_radius(&r.scheme, r.omega, r.xi);
        let rho_exact = r.exact.iter().map(|z| z.norm()).fold(0.0, f64::max);
        let e = e.max((rho - rho_exact).abs() / scale);
        if e > worst.0 {
            worst = (e, r.line);
        }
        assert!(
            e <= 1e-14,
            "line {} ({} Omega {:e} xi {}): off by {e:e}\ncomputed {got:?}\nexact {:?}",
            r.line,
            r.scheme.name(),
            r.omega,
            r.xi,
            r.exact
        );
    }
    println!(
        "coalescence rows: worst error {:.2e} (line {})",
        worst.0, worst.1
    );
}

/// The balanced Schur form (`eigenvalues3`, the fallback) within its own bound at every point.
#[test]
fn schur_form_is_within_its_error_bound_of_the_exact_roots() {
    let mut worst = (0.0f64, 0);
    for r in rows() {
        let a = r.scheme.amplification(r.omega, r.xi);
        let b = bounds(&r.exact, &a);
        assert_within(&r, &eigenvalues3(&a), b.schur, &mut worst);
    }
    println!(
        "worst error / Schur bound: {:.3} (line {})",
        worst.0, worst.1
    );
}
