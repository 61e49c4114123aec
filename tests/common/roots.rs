//! Error bounds of computed eigenvalues of a 3x3 amplification matrix (the closed-form cubic's,
//! the compensated path's and the balanced Schur form's), shared by the spectral tests.
//!
//! The closed form moves a root by its condition as a polynomial root times a few roundings of
//! the coefficients (Wilkinson 1963, *Rounding Errors in Algebraic Processes*, ch. 2); the Schur
//! form by the eigenvalue's condition `|x| |y| / |y^T x|` times a few roundings of the matrix's
//! norm (Golub & Van Loan, *Matrix Computations*, 4th ed. 2013, sec. 7.2.2); both from memory.
//! Where roots meet, the square or cube root of the perturbation caps both.
//!
//! The constants in front of `f64::EPSILON` are measured, with a margin: the closed form's
//! error against exact roots (`tests/data/exact_roots.csv` and 2e6 random points) reached 6.3
//! roundings times the condition ([`K`] = 16); the Schur form's reached about 40 roundings of
//! `||A||_F kappa` (3e6 random points against the closed form where that is well conditioned:
//! the central difference with the predicted damping velocity near `Omega = 1.27`,
//! `xi = 0.56`, a non-normal matrix with well-separated roots; [`K_SCHUR`] = 128, a margin of 3).

use nalgebra::Complex;

/// Roundings allowed in front of the closed form's first-order bound.
pub const K: f64 = 16.0 * f64::EPSILON;

/// Roundings allowed in front of the Schur form's first-order bound (and in the perturbation
/// that caps both where roots meet).
pub const K_SCHUR: f64 = 128.0 * f64::EPSILON;

/// The compensated path's final rounding: each root's parts are rounded once from double-double
/// to double (half a unit each), after a last operation or two; four units of the scale.
pub const K_FINAL: f64 = 4.0 * f64::EPSILON;

/// The compensated path's coefficients: a dozen double-double operations on the binary inputs,
/// each within about `2^-104` of its terms, which are at most about the scale's power of the
/// coefficient (`Omega^2` terms of the central difference's `c2` at `Omega^2` scale, the
/// family's terms over its common denominator bounded); `2^-96` leaves a margin of a few hundred.
pub const K_DD: f64 = 256.0 * f64::EPSILON * f64::EPSILON; // 2^-96 (EPSILON = 2^-52)

/// Error bounds of each root (absolute), for each path.
pub struct Bounds {
    /// `max(1, largest modulus)`.
    pub scale: f64,
    /// The closed form's: `K scale max(1, cond_i)` with
    /// `cond_i = scale^2 / prod_{j != i} |z_i - z_j|` (the condition of a polynomial root
    /// relative to the scale, as in `spectral::roots`), capped by [`cluster_bound`].
    pub closed_form: [f64; 3],
    /// The Schur form's: `K_SCHUR ||A||_F kappa_i` with `kappa_i = |x| |y| / |y^T x|` the eigenvalue
    /// condition from the right and left eigenvectors ([`eigenvalue_condition`]), capped by
    /// [`cluster_bound`].
    pub schur: [f64; 3],
    /// The compensated path's: `K_FINAL scale` plus `K_DD scale max(1, cond_i)`, the latter
    /// capped by [`cluster_bound`] with the double-double perturbation `K_DD scale^3`.
    pub compensated: [f64; 3],
    /// The largest `cond_i`.
    pub cond: f64,
}

/// Where roots meet, a first-order bound grows without limit while the roots move only by the
/// square root (two roots together) or cube root (three) of the perturbation `delta` of `p(z)`
/// near `|z| = scale`: a root `d_far` away from the third moves by about `sqrt(delta / d_far)`,
/// three together by `delta^(1/3)`; twice the smaller.
pub fn cluster_bound(delta: f64, d_far: f64) -> f64 {
    2.0 * (delta / d_far).sqrt().min(delta.cbrt())
}

/// A vector spanning the null space of the rank-two complex 3x3 matrix with rows `r` (the
/// largest of the three cross products of two rows; bilinear, so `r_k . x = 0`).
fn null_vector(r: [[Complex<f64>; 3]; 3]) -> [Complex<f64>; 3] {
    let cross = |a: [Complex<f64>; 3], b: [Complex<f64>; 3]| {
        [
            a[1] * b[2] - a[2] * b[1],
            a[2] * b[0] - a[0] * b[2],
            a[0] * b[1] - a[1] * b[0],
        ]
    };
    let norm = |v: &[Complex<f64>; 3]| v.iter().map(|c| c.norm_sqr()).sum::<f64>();
    [cross(r[0], r[1]), cross(r[0], r[2]), cross(r[1], r[2])]
        .into_iter()
        .max_by(|a, b| norm(a).total_cmp(&norm(b)))
        .unwrap()
}

/// The condition `|x| |y| / |y^T x|` of the eigenvalue `z` of `a` (infinite where the right and
/// left eigenvectors are orthogonal: a defective root).
pub fn eigenvalue_condition(a: &[[f64; 3]; 3], z: Complex<f64>) -> f64 {
    let m = |i: usize, j: usize| {
        Complex::new(a[i][j], 0.0) - if i == j { z } else { Complex::new(0.0, 0.0) }
    };
    let x = null_vector([0, 1, 2].map(|i| [0, 1, 2].map(|j| m(i, j))));
    let y = null_vector([0, 1, 2].map(|i| [0, 1, 2].map(|j| m(j, i))));
    let n = |v: &[Complex<f64>; 3]| v.iter().map(|c| c.norm_sqr()).sum::<f64>().sqrt();
    let yx = (0..3).map(|k| y[k] * x[k]).sum::<Complex<f64>>().norm();
    n(&x) * n(&y) / yx
}

/// The bounds of the roots `z` (exact, or the best available) of the matrix `a`.
pub fn bounds(z: &[Complex<f64>; 3], a: &[[f64; 3]; 3]) -> Bounds {
    let scale = z.iter().map(|r| r.norm()).fold(1.0, f64::max);
    let norm_a = a.iter().flatten().map(|x| x * x).sum::<f64>().sqrt();
    let delta = K_SCHUR * scale.max(norm_a) * scale * scale;
    let delta_dd = K_DD * scale * scale * scale;
    let mut closed_form = [0.0; 3];
    let mut schur = [0.0; 3];
    let mut compensated = [0.0; 3];
    let mut worst = 0.0f64;
    for i in 0..3 {
        let (j, k) = ((i + 1) % 3, (i + 2) % 3);
        let (dj, dk) = ((z[i] - z[j]).norm(), (z[i] - z[k]).norm());
        // The lagged central difference's exact root 0 (no constant term): the closed form takes
        // it exactly, and its polynomial condition is not the closed form's.
        let cond = if z[i] == Complex::new(0.0, 0.0) {
            1.0
        } else {
            scale * scale / (dj * dk)
        };
        worst = worst.max(cond);
        let cluster = cluster_bound(delta, dj.max(dk));
        closed_form[i] = (K * scale * cond.max(1.0)).min(cluster);
        schur[i] = (K_SCHUR * norm_a * eigenvalue_condition(a, z[i])).min(cluster);
        compensated[i] = K_FINAL * scale
            + (K_DD * scale * cond.max(1.0)).min(cluster_bound(delta_dd, dj.max(dk)));
    }
    Bounds {
        scale,
        closed_form,
        schur,
        compensated,
        cond: worst,
    }
}

/// For each root of `reference`, the distance to its partner in `computed` (the pairing that
/// makes the largest distance smallest).
pub fn errors(computed: &[Complex<f64>; 3], reference: &[Complex<f64>; 3]) -> [f64; 3] {
    const PERMUTATIONS: [[usize; 3]; 6] = [
        [0, 1, 2],
        [0, 2, 1],
        [1, 0, 2],
        [1, 2, 0],
        [2, 0, 1],
        [2, 1, 0],
    ];
    let mut best = [f64::INFINITY; 3];
    let mut best_max = f64::INFINITY;
    for q in PERMUTATIONS {
        let e = [0, 1, 2].map(|i| (computed[q[i]] - reference[i]).norm());
        let m = e.iter().copied().fold(0.0, f64::max);
        if m < best_max {
            best_max = m;
            best = e;
        }
    }
    best
}
