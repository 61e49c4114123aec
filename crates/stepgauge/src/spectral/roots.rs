//! Eigenvalues of a 3x3 amplification matrix from its characteristic cubic in closed form: the
//! fast path of [`eigenvalues`](super::eigenvalues) and [`eigenvalues_fast`].
//!
//! 1. The coefficients of `det(z I - A) = z^3 + c2 z^2 + c1 z + c0`.
//! 2. One real root `r` in closed form on the depressed cubic `t^3 + p t + q` (`z = t - c2/3`):
//!    Cardano's formula with the cube root taken of `-q/2 - sign(q) sqrt(D)` (no cancellation)
//!    when `D = (q/2)^2 + (p/3)^3 > 0`, the trigonometric form otherwise (three real roots, the
//!    casus irreducibilis, where Cardano's formula would need complex cube roots); then two
//!    Newton steps on the cubic itself, each kept only when it lowers the residual.
//! 3. Deflation to `z^2 + b z + c`: forward (`b = c2 + r`, `c = c1 + r b`) when `r` is the
//!    root of largest modulus, backward (`c = -c0 / r`, `b = (c - c1) / r`) otherwise, the
//!    stable direction for each (Wilkinson 1963, *Rounding Errors in Algebraic Processes*,
//!    ch. 2, on deflation; from memory); the quadratic's roots without cancellation.
//! 4. The condition test: a root of a cluster of width `w` moves by about `eps / w` (a pair) or
//!    `eps / w^2` (three roots) for a relative perturbation `eps` of the coefficients (common
//!    practice: the condition of a polynomial root is `1 / |p'(z)|`), so the closed form is kept
//!    only while every root's condition is at most [`CONDITION_LIMIT`]. Elsewhere, where roots
//!    meet, [`Prepared`](super::Prepared) (and so [`eigenvalues`](super::eigenvalues),
//!    [`spectral_radius`](super::spectral_radius), [`metrics`](super::metrics) and
//!    [`sweep`](super::sweep)) takes the compensated path (`compensated.rs`: the polynomial from
//!    the parameters in double-double, its most isolated real root by a bracketed search, the
//!    pair from a double-double discriminant), and [`eigenvalues_fast`], which has only a rounded
//!    matrix, the balanced Schur form [`eigenvalues3`]; so do both for non-finite or extreme
//!    coefficients.
//!
//! Accuracy, measured against exact roots (`tests/data/exact_roots.csv`: 50-digit mpmath roots of
//! the polynomial formed from the step equations, at random points, next to where roots meet and
//! within a few units in the last place of coalescence points; checked by
//! `tests/spectral_exact.rs` against each path's bound): the closed form's error is at most about
//! `6 f64::EPSILON` times a root's condition, relative to `max(1, largest modulus)`, so at most
//! about `8.5e-14` at the limit (measured worst `2.7e-14`); the compensated path's is a few units
//! of the final rounding, plus the square root of its coefficients' `2^-100`-level error where two
//! roots coincide (measured worst `8.9e-14`, at a pair that is double to 1e-23 beside a third
//! root 4e-6 away); the balanced Schur form's is governed by the eigenvalue's own condition
//! (`|x| |y| / |y^T x|` from its eigenvectors), and where roots meet the rounding of the matrix
//! alone moves them by about `1e-8`.
//!
//! The result does not depend on anything but the matrix (no state, no threads).

use nalgebra::Complex;

use super::amplification::eigenvalues3;

/// Largest condition of a root (relative to the largest modulus: `scale^2 / prod |z_i - z_j|`
/// over the other two roots) for the closed form to be used. The closed form moves a root by
/// about its condition times the coefficients' relative rounding (about `6 f64::EPSILON`: at most
/// about `8.5e-14` of the scale at this limit, measured against exact roots); beyond it the
/// compensated path takes over (see the module documentation). At 64, no point of the bench
/// report's sweeps (`Omega` 1e-2 to 1e2; generalised-alpha `rho_inf = 0.8`, HHT-alpha
/// `rho_inf = 0.9`, central difference) leaves the closed form; generalised-alpha with
/// `rho_inf = 0` sends about 5 % of them, at the small `Omega` where its pair is near 1, to the
/// compensated path (about 50 ns a point against 14).
pub const CONDITION_LIMIT: f64 = 64.0;

/// The coefficients `(c2, c1, c0)` of `det(z I - A)`.
#[inline]
pub(crate) fn cubic_coefficients(a: &[[f64; 3]; 3]) -> (f64, f64, f64) {
    let trace = a[0][0] + a[1][1] + a[2][2];
    let minors = a[0][0] * a[1][1] - a[0][1] * a[1][0] + a[0][0] * a[2][2] - a[0][2] * a[2][0]
        + a[1][1] * a[2][2]
        - a[1][2] * a[2][1];
    let det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
        - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
        + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
    (-trace, minors, -det)
}

/// The real cube root to about `1e-14` relative (the root is polished on the cubic afterwards,
/// which takes it to round-off): a first guess from the bits (the biased exponent divided by
/// three, relative error below 4 percent), then two Halley steps
/// `t <- t (t^3 + 2x) / (2 t^3 + x)` (cubic convergence; measured worst 6.3e-15 over the range of
/// normal numbers, bound at 1e-12 in the tests). The library's
/// `cbrt` (correctly rounded) took about a third of a sweep point's time. Zero, non-finite and
/// subnormal arguments go to the library.
#[inline(always)]
fn cbrt_approx(x: f64) -> f64 {
    let a = x.abs();
    if !(f64::MIN_POSITIVE..=f64::MAX).contains(&a) {
        return x.cbrt();
    }
    // bits(a) / 3 plus two thirds of the exponent bias, with the mantissa offset of common
    // practice that centres the first guess's error.
    let mut t = f64::from_bits(a.to_bits() / 3 + 0x2A9F_7893_782D_A1CE);
    for _ in 0..2 {
        let t3 = t * t * t;
        t *= (t3 + 2.0 * a) / (2.0 * t3 + a);
    }
    t.copysign(x)
}

/// One real root of `z^3 + c2 z^2 + c1 z + c0` in closed form (the one of largest modulus when
/// all three are real), to about `1e-14` before [`polish`].
#[inline(always)]
pub(crate) fn real_root(c2: f64, c1: f64, c0: f64) -> f64 {
    // Products with 1/3 and 2/27 rather than quotients (a division's latency is several
    // multiplications'; the last-bit difference is polished away with the root).
    const THIRD: f64 = 1.0 / 3.0;
    const TWO_27THS: f64 = 2.0 / 27.0;
    let shift = -c2 * THIRD;
    let p = c1 - c2 * c2 * THIRD;
    let q = c0 - c2 * c1 * THIRD + TWO_27THS * (c2 * c2 * c2);
    let h = 0.5 * q;
    let p3 = p * THIRD;
    let d = h * h + p3 * p3 * p3;
    let t = if d >= 0.0 {
        // One real root (or a multiple one at d = 0): Cardano without cancellation,
        // t = u - p / (3 u) with u^3 = w, written p u^2 / (3 w) so that the division does not
        // wait for the cube root.
        let s = d.sqrt();
        let w = -h - s.copysign(h);
        let k = p3 / w;
        let u = cbrt_approx(w);
        if u == 0.0 { 0.0 } else { u - k * (u * u) }
    } else {
        // Three real roots (p < 0): t = m cos(theta), the largest in modulus.
        let m = 2.0 * (-p3).sqrt();
        let cos3 = (q / (p3 * m)).clamp(-1.0, 1.0);
        let theta = cos3.acos() * THIRD;
        // The roots are m cos(theta - 2 pi k / 3) with theta in [0, pi/3]: k = 0 gives the
        // largest t, k = 2 the smallest; one of the two has the largest modulus after the shift.
        let t0 = m * theta.cos();
        let t2 = m * (theta + 2.0 * std::f64::consts::FRAC_PI_3).cos();
        if (t0 + shift).abs() >= (t2 + shift).abs() {
            t0
        } else {
            t2
        }
    };
    t + shift
}

/// Two Newton steps on the cubic from `r`, each kept only when it lowers `|p(r)|` (a zero
/// residual or derivative gives a step that is not kept).
///
/// Written without a dependence of the second step on the first one's test: when the first step
/// is not kept, the second would repeat it from the same `r` with the same residual and not be
/// kept either, so the result is `r`; when it is kept, the second starts from the first's point
/// and residual. Both are computed and the result selected at the end, without branches
/// ([`std::hint::select_unpredictable`]): whether a step lowers the residual is a coin toss once
/// the root is at round-off, and the branches the compiler made of the loop form's two
/// selections were mispredicted at about a quarter of the points of a generalised-alpha sweep
/// (counted with `valgrind --branch-sim=yes`), each time discarding the overlapping points'
/// work in the pipeline. The same values bit for bit as the loop form.
#[inline(always)]
pub(crate) fn polish(r: f64, c2: f64, c1: f64, c0: f64) -> f64 {
    let value = |z: f64| ((z + c2) * z + c1) * z + c0;
    let newton = |z: f64, f: f64| z - f / ((3.0 * z + 2.0 * c2) * z + c1);
    let f0 = value(r);
    let r1 = newton(r, f0);
    let f1 = value(r1);
    let r2 = newton(r1, f1);
    let f2 = value(r2);
    let second = std::hint::select_unpredictable(f2.abs() < f1.abs(), r2, r1);
    std::hint::select_unpredictable(f1.abs() < f0.abs(), second, r)
}

/// The eigenvalues by the closed form, or `None` where the fallback must take over.
#[inline]
pub(crate) fn closed_form(a: &[[f64; 3]; 3]) -> Option<[Complex<f64>; 3]> {
    let (c2, c1, c0) = cubic_coefficients(a);
    closed_form_roots(c2, c1, c0)
}

/// The roots of `z^3 + c2 z^2 + c1 z + c0` by the closed form (steps 2 and 3 of the module
/// documentation), or `None` where they cannot be trusted (non-finite or extreme coefficients,
/// a root's condition above [`CONDITION_LIMIT`]): then the caller's slower path takes over.
#[inline(always)]
pub(crate) fn closed_form_roots(c2: f64, c1: f64, c0: f64) -> Option<[Complex<f64>; 3]> {
    if !in_range(c2, c1, c0) {
        return None;
    }
    let r = if c0 == 0.0 {
        0.0
    } else {
        polish(real_root(c2, c1, c0), c2, c1, c0)
    };
    deflated_roots(c2, c1, c0, r)
}

/// True when the closed form may be tried: the bound `max(|c2|, |c1|^(1/2), |c0|^(1/3))` on the
/// roots' modulus (Cauchy-like) is finite and far from overflow and underflow. Compared in
/// powers (no roots taken); false for NaN.
#[inline(always)]
pub(crate) fn in_range(c2: f64, c1: f64, c0: f64) -> bool {
    let (a2, a1, a0) = (c2.abs(), c1.abs(), c0.abs());
    // All roots tiny: zero within the fallback's own resolution; it decides.
    let tiny = a2 < 1e-100 && a1 < 1e-200 && a0 < 1e-300;
    a2 < 1e100 && a1 < 1e200 && a0 < 1e300 && !tiny
}

/// The real root before and after [`polish`] as one step of the staged evaluation
/// ([`Prepared`](super::Prepared)'s blocks): `0` for `c0 = 0` (exact).
#[inline(always)]
pub(crate) fn estimate_real_root(c2: f64, c1: f64, c0: f64) -> f64 {
    if c0 == 0.0 {
        0.0
    } else {
        real_root(c2, c1, c0)
    }
}

/// [`polish`] where `c0 != 0`.
#[inline(always)]
pub(crate) fn polish_real_root(r: f64, c2: f64, c1: f64, c0: f64) -> f64 {
    if c0 == 0.0 { r } else { polish(r, c2, c1, c0) }
}

/// The other two roots of `z^3 + c2 z^2 + c1 z + c0` by deflation with its real root `r`: the
/// complex pair with the positive imaginary part first, or two real roots with the larger
/// modulus first (no condition test).
#[inline(always)]
pub(crate) fn deflated_pair(c2: f64, c1: f64, c0: f64, r: f64) -> (Complex<f64>, Complex<f64>) {
    // Deflate: b from the leading coefficients (forward), c forward when r is the root of
    // largest modulus and backward (from the constant term) otherwise.
    let b = c2 + r;
    let c = if r.abs().powi(3) >= c0.abs() {
        c1 + r * b
    } else {
        -c0 / r
    };
    let hb = -0.5 * b;
    let disc = hb * hb - c;
    if disc < 0.0 {
        let im = (-disc).sqrt();
        (Complex::new(hb, im), Complex::new(hb, -im))
    } else {
        let big = hb + disc.sqrt().copysign(hb);
        let small = if big == 0.0 { 0.0 } else { c / big };
        (Complex::new(big, 0.0), Complex::new(small, 0.0))
    }
}

/// The other two roots by deflation with the real root `r`, and the condition test: the three
/// roots, or `None` where the fallback must take over.
#[inline(always)]
pub(crate) fn deflated_roots(c2: f64, c1: f64, c0: f64, r: f64) -> Option<[Complex<f64>; 3]> {
    let (z2, z3) = deflated_pair(c2, c1, c0, r);
    let z1 = Complex::new(r, 0.0);
    // Condition of each root relative to the largest modulus: scale^2 / prod |z_i - z_j|
    // (a root moves by about this many units of the coefficients' rounding, relative to the
    // scale), in squares (no square roots). An exactly zero constant term gives the exact root 0
    // (the central difference's matrix has rank 2): its deflation is exact, and only the pair's
    // condition counts.
    let s2 = (r * r).max(z2.norm_sqr()).max(z3.norm_sqr());
    let (d12, d13, d23) = (
        (z1 - z2).norm_sqr(),
        (z1 - z3).norm_sqr(),
        (z2 - z3).norm_sqr(),
    );
    // `cond^2 <= L^2` as products (no divisions; false when a product is NaN).
    const L2: f64 = CONDITION_LIMIT * CONDITION_LIMIT;
    let well_conditioned = if c0 == 0.0 {
        s2 <= L2 * d23
    } else {
        let s4 = s2 * s2;
        s4 <= L2 * (d12 * d13) && s4 <= L2 * (d12 * d23) && s4 <= L2 * (d13 * d23)
    };
    let ok = well_conditioned
        && z2.re.is_finite()
        && z2.im.is_finite()
        && z3.re.is_finite()
        && z3.im.is_finite();
    ok.then_some([z1, z2, z3])
}

/// The largest distance between paired roots of `a` and `b`, minimised over the six pairings
/// (NaN when a root is NaN): sorting alone pairs wrongly where roots are near ties (a real root
/// and a complex pair sharing a real part to round-off, such as generalised-alpha's with
/// `rho_inf = 0` at `Omega = 1`, `xi = 1`: `1/2` and `1/2 +/- i/(2 sqrt 3)`), and the result does
/// not depend on how the ties were broken. Used to compare two sets of eigenvalues.
pub fn pairing_distance(a: &[Complex<f64>; 3], b: &[Complex<f64>; 3]) -> f64 {
    const PERMUTATIONS: [[usize; 3]; 6] = [
        [0, 1, 2],
        [0, 2, 1],
        [1, 0, 2],
        [1, 2, 0],
        [2, 0, 1],
        [2, 1, 0],
    ];
    let nan_max = |m: f64, d: f64| {
        if m.is_nan() || d.is_nan() {
            f64::NAN
        } else {
            m.max(d)
        }
    };
    PERMUTATIONS
        .iter()
        .map(|p| (0..3).map(|i| (a[p[i]] - b[i]).norm()).fold(0.0, nan_max))
        .fold(f64::INFINITY, |m, d| if d.is_nan() { d } else { m.min(d) })
}

/// The three eigenvalues of a 3x3 real matrix: the closed form of the characteristic cubic
/// where it is trustworthy, [`eigenvalues3`] elsewhere (see the module documentation). Three
/// NaN for a matrix with a non-finite entry.
pub fn eigenvalues_fast(a: &[[f64; 3]; 3]) -> [Complex<f64>; 3] {
    match closed_form(a) {
        Some(z) => z,
        None => eigenvalues3(a),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::params::AlphaParams;
    use crate::params::ForceVelocity;
    use crate::spectral::{Scheme, log_space};

    pub(crate) fn schemes() -> Vec<Scheme> {
        let mut s = vec![
            Scheme::CentralDifference(ForceVelocity::Lagged),
            Scheme::CentralDifference(ForceVelocity::Predicted),
            Scheme::Alpha(AlphaParams::average_acceleration()),
            Scheme::Alpha(AlphaParams::linear_acceleration()),
            Scheme::Alpha(AlphaParams::fox_goodwin()),
            Scheme::Alpha(AlphaParams::newmark(0.3025, 0.6).unwrap()),
        ];
        for r in [0.0, 0.3, 0.6, 0.9, 1.0] {
            s.push(Scheme::Alpha(AlphaParams::generalized_alpha(r).unwrap()));
        }
        for r in [0.5, 0.8, 1.0] {
            s.push(Scheme::Alpha(AlphaParams::hht_from_rho_inf(r).unwrap()));
            s.push(Scheme::Alpha(AlphaParams::wbz_from_rho_inf(r).unwrap()));
        }
        s
    }

    /// Sorted for comparison: by real part, then imaginary part.
    fn sorted(mut z: [Complex<f64>; 3]) -> [Complex<f64>; 3] {
        z.sort_by(|a, b| a.re.total_cmp(&b.re).then(a.im.total_cmp(&b.im)));
        z
    }

    /// The closed form agrees with the balanced Schur form wherever it is used, to `3e-12` of
    /// `max(1, largest modulus)` (the gaps it demands bound the roots' condition; each path's
    /// own error against exact roots is checked in `tests/spectral_exact.rs`), on a grid of
    /// `Omega` from 1e-4 to 1e6 and damping ratios from 0 to 1, for the central difference and
    /// members of every named family (incl. `rho_inf` 0 and 1); and it is used for nearly every
    /// point of the usual plotting range, `Omega` 1e-2 to 1e2 with `xi <= 0.3`.
    #[test]
    fn closed_form_agrees_with_the_schur_form() {
        let (mut used, mut total_usual, mut used_usual) = (0, 0, 0);
        let mut worst: f64 = 0.0;
        for s in schemes() {
            for xi in [0.0, 0.05, 0.3, 1.0] {
                for o in log_space(1e-4, 1e6, 201) {
                    let a = s.amplification(o, xi);
                    let usual = (1e-2..=1e2).contains(&o) && xi <= 0.3;
                    total_usual += usize::from(usual);
                    if let Some(z) = closed_form(&a) {
                        used += 1;
                        used_usual += usize::from(usual);
                        let (f, r) = (sorted(z), sorted(eigenvalues3(&a)));
                        let scale = r.iter().map(|z| z.norm()).fold(1.0f64, f64::max);
                        let e = pairing_distance(&f, &r) / scale;
                        assert!(
                            e <= 3e-12,
                            "{} xi {xi} Omega {o:e}: {e:e}\n{f:?}\n{r:?}",
                            s.name()
                        );
                        worst = worst.max(e);
                    }
                }
            }
        }
        // Not vacuous: a large share of the grid is compared (the rest, small and large Omega
        // where roots cluster, goes to the compensated path).
        assert!(used > 4000, "closed form used for {used} points");
        // The closed form carries the usual plotting range (speed): at least 95 % of it here,
        // where the schemes with rho_inf near 0 send their small-Omega points (the pair near 1,
        // conditions up to 1 / Omega) to the compensated path.
        assert!(
            used_usual * 100 >= 95 * total_usual,
            "{used_usual} of {total_usual}"
        );
        eprintln!("closed form on {used} points, worst difference {worst:e}");
    }

    /// The branch-free polish gives what the plain loop of two kept-if-better Newton steps gives,
    /// bit for bit, on the cubics of every scheme over a wide grid (and on a few made-up ones
    /// with zero, huge and NaN coefficients), from the closed-form estimate and from perturbed
    /// starting points.
    #[test]
    fn polish_equals_the_loop_form() {
        fn looped(mut r: f64, c2: f64, c1: f64, c0: f64) -> f64 {
            let value = |z: f64| ((z + c2) * z + c1) * z + c0;
            let mut f = value(r);
            for _ in 0..2 {
                let df = (3.0 * r + 2.0 * c2) * r + c1;
                let next = r - f / df;
                let fn_ = value(next);
                if fn_.abs() < f.abs() {
                    r = next;
                    f = fn_;
                }
            }
            r
        }
        let mut cubics = vec![
            (0.0, 0.0, 1.0),
            (1e90, -1e180, 1e250),
            (f64::NAN, 1.0, 1.0),
            (-3.0, 3.0, -1.0),
        ];
        for s in schemes() {
            for xi in [0.0, 0.05, 1.0] {
                for o in log_space(1e-4, 1e6, 301) {
                    cubics.push(cubic_coefficients(&s.amplification(o, xi)));
                }
            }
        }
        let mut kept = [0usize; 3];
        for (c2, c1, c0) in cubics {
            let r = real_root(c2, c1, c0);
            for start in [r, r * (1.0 + 1e-9), r + 1e-3, 0.0] {
                let (got, want) = (polish(start, c2, c1, c0), looped(start, c2, c1, c0));
                assert_eq!(got.to_bits(), want.to_bits(), "{c2} {c1} {c0} from {start}");
                kept[usize::from(got != start) + usize::from(got.is_nan())] += 1;
            }
        }
        // Both outcomes occur (the test exercises both selections).
        assert!(kept[0] > 100 && kept[1] > 100, "{kept:?}");
    }

    /// Non-finite entries give NaN (through the fallback), zero and nilpotent matrices zero.
    /// The approximate cube root is within `1e-12` of the library's, relative, over the whole
    /// range of normal numbers and both signs, and hands the rest to the library.
    #[test]
    fn approximate_cube_root() {
        let mut worst: f64 = 0.0;
        let mut x = f64::MIN_POSITIVE;
        while x < f64::MAX / 1.37 {
            for v in [x, -x, x * 1.0123456789, x * 1.9999999] {
                let e = (cbrt_approx(v) - v.cbrt()).abs() / v.cbrt().abs();
                worst = worst.max(e);
            }
            x *= 1.37;
        }
        assert!(worst <= 1e-12, "{worst:e}");
        eprintln!("cube root: worst relative difference {worst:e}");
        for v in [0.0, -0.0, 1e-310, f64::INFINITY, f64::NEG_INFINITY] {
            assert_eq!(cbrt_approx(v).to_bits(), v.cbrt().to_bits(), "{v}");
        }
        assert!(cbrt_approx(f64::NAN).is_nan());
    }

    #[test]
    fn non_finite_and_degenerate_matrices() {
        let mut a = [[1.0, 0.5, 0.0], [0.0, 1.0, 0.0], [0.0, 0.0, 2.0]];
        a[2][1] = f64::NAN;
        assert!(closed_form(&a).is_none());
        assert!(eigenvalues_fast(&a).iter().all(|z| z.re.is_nan()));
        a[2][1] = f64::INFINITY;
        assert!(eigenvalues_fast(&a).iter().all(|z| z.re.is_nan()));
        assert_eq!(
            eigenvalues_fast(&[[0.0; 3]; 3]),
            [Complex::new(0.0, 0.0); 3]
        );
        let nil = [[0.0, 1.0, 0.0], [0.0, 0.0, 1.0], [0.0, 0.0, 0.0]];
        assert!(eigenvalues_fast(&nil).iter().all(|z| z.norm() == 0.0));
        // Exact: a triangular matrix has its diagonal as eigenvalues.
        let tri = [[0.5, 3.0, -1.0], [0.0, -0.25, 2.0], [0.0, 0.0, 2.0]];
        let z = sorted(eigenvalues_fast(&tri));
        for (z, want) in z.iter().zip([-0.25, 0.5, 2.0]) {
            assert!((z.re - want).abs() < 1e-15 && z.im == 0.0, "{z}");
        }
    }
}
