//! The roots of the characteristic cubic in compensated (double-double) arithmetic: the path of
//! the points where the closed form's condition test fails, that is where roots meet.
//!
//! Where two roots meet (the principal pair turning from complex to real, such as the central
//! difference's at `Omega_crit`), a relative perturbation `delta` of the coefficients moves them
//! by about `sqrt(delta)`: the coefficients in double precision (or the rounded amplification
//! matrix the eigen-solver would be given) leave about eight correct digits. Here:
//!
//! 1. the polynomial `P(z) = sum_k P_k z^k` is formed from the scheme's constants held in
//!    double-double (each `1 - alpha`, sum and product of the parameters exact to about
//!    `2^-104` of its terms) and from `Z = 2 xi Omega` and `Omega^2` as exact products, and made
//!    monic in double-double: coefficients within about `1e-31` of the exact polynomial of the
//!    binary inputs;
//! 2. the most isolated root (the real root when the other two are a complex pair; of three real
//!    roots the one farthest from the other two) is taken from the closed form in double
//!    precision and polished by Newton steps on the double-double cubic, to about `1e-31` when it
//!    is a simple root;
//! 3. the cubic is deflated by it in double-double (forward when it is the root of largest
//!    modulus, backward otherwise) and the remaining quadratic solved with its discriminant in
//!    double-double, so that the pair that meets is found to about `sqrt(1e-31)`, which is below
//!    the final rounding to double precision. A complex pair's modulus is the square root of the
//!    quadratic's constant term (the pair's product), which does not cancel.
//!
//! The arithmetic is that of the `twofloat` crate (Joldes, Muller & Popescu 2017, "Tight and
//! rigorous error bounds for basic building blocks of double-word arithmetic", *ACM TOMS* 44(2);
//! the algorithms are named in its source).

use nalgebra::Complex;
use twofloat::TwoFloat as Dd;

use super::roots::{deflated_pair, in_range, polish, real_root};
use crate::params::ForceVelocity;
use crate::params::Scheme;

/// The constants `[a_k, b_k, g_k]` of `P_k = a_k + b_k (2 xi Omega) + g_k Omega^2`, `k = 0..=3`,
/// in double-double (the same table as [`Prepared`](super::Prepared)'s, see there).
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct Constants([[Dd; 3]; 4]);

impl Constants {
    /// The scheme's constants: the central difference's are small exact numbers (the table of
    /// [`Prepared`](super::Prepared)), the family's are formed from its parameters.
    pub(crate) fn of(scheme: &Scheme) -> Self {
        let exact = |k: [[f64; 3]; 4]| Constants(k.map(|row| row.map(Dd::from)));
        match scheme {
            Scheme::CentralDifference(ForceVelocity::Lagged) => exact([
                [0.0, 0.0, 0.0],
                [1.0, -1.0, 0.0],
                [-2.0, 1.0, 1.0],
                [1.0, 0.0, 0.0],
            ]),
            Scheme::CentralDifference(ForceVelocity::Predicted) => exact([
                [0.0, 0.5, 0.0],
                [1.0, -2.0, 0.0],
                [-2.0, 1.5, 1.0],
                [1.0, 0.0, 0.0],
            ]),
            Scheme::Alpha(p) => Self::alpha(p.alpha_m, p.alpha_f, p.beta, p.gamma),
        }
    }

    /// Row `j`: `[a_j, b_j, g_j]`.
    pub(crate) fn row(&self, j: usize) -> [Dd; 3] {
        self.0[j]
    }

    /// The generalised-alpha family's constants from its parameters, in double-double.
    fn alpha(am: f64, af: f64, b: f64, g: f64) -> Self {
        let one = |x: f64| Dd::new_sub(1.0, x);
        let (m1, m0) = (one(am), Dd::from(am));
        let (e1, e0) = (one(af), Dd::from(af));
        let (g1, g0) = (Dd::from(g), one(g));
        let n2 = Dd::from(b);
        let n1 = Dd::new_add(g, 0.5) - 2.0 * b;
        let n0 = Dd::new_sub(0.5, g) + b;
        Constants([
            [m0, -(e0 * g0), e0 * n0],
            [
                m1 - 2.0 * m0,
                e0 * g0 - e1 * g0 - e0 * g1,
                e1 * n0 + e0 * n1,
            ],
            [
                m0 - 2.0 * m1,
                e1 * g0 + e0 * g1 - e1 * g1,
                e1 * n1 + e0 * n2,
            ],
            [m1, e1 * g1, e1 * n2],
        ])
    }

    /// The monic coefficients `(c2, c1, c0)` at `Omega`, `xi`, in double-double.
    pub(crate) fn monic(&self, omega_dt: f64, xi: f64) -> (Dd, Dd, Dd) {
        // 2 xi is exact (a power of two times xi); both products are exact in double-double.
        let z = Dd::new_mul(2.0 * xi, omega_dt);
        let o2 = Dd::new_mul(omega_dt, omega_dt);
        let p = |j: usize| {
            let [a, b, g] = self.0[j];
            a + b * z + g * o2
        };
        let lead = p(3);
        (div(p(2), lead), div(p(1), lead), div(p(0), lead))
    }
}

/// The three roots of the monic cubic `z^3 + c2 z^2 + c1 z + c0` given in double-double, laid out
/// as the closed form lays them out (a real root, then the pair: complex with the positive
/// imaginary part first, or real with the larger modulus first); `None` for non-finite or extreme
/// coefficients (the caller's eigen-solver takes over).
pub(crate) fn roots(c2: Dd, c1: Dd, c0: Dd) -> Option<[Complex<f64>; 3]> {
    let (h2, h1, h0) = (c2.hi(), c1.hi(), c0.hi());
    if !in_range(h2, h1, h0) {
        return None;
    }
    let r = if h0 == 0.0 && c0.lo() == 0.0 {
        // An exact root 0 (the lagged central difference): deflate by it exactly.
        Dd::from(0.0)
    } else {
        let guesses = guesses(h2, h1, h0);
        let cubic = Cubic {
            c2,
            c1,
            c0,
            guesses: guesses.map(|z| z.re),
        };
        match trusted_isolated(&guesses) {
            // The double-precision roots tell the isolated one apart: a few Newton steps.
            Some(r) => cubic.newton(Dd::from(r)),
            // They do not (a tight cluster): search every real root in its own bracket.
            None => cubic.isolated_real_root(),
        }
    };
    // Deflation: z^3 + c2 z^2 + c1 z + c0 = (z - r)(z^2 + b z + c).
    let b = c2 + r;
    let c = if r.hi().abs().powi(3) >= h0.abs() {
        c1 + r * b
    } else {
        -div(c0, r)
    };
    let hb = -(b * 0.5);
    let disc = hb * hb - c;
    let (z2, z3) = if disc.hi() < 0.0 {
        let im = f64::from((-disc).sqrt());
        let re = f64::from(hb);
        (Complex::new(re, im), Complex::new(re, -im))
    } else {
        let s = disc.sqrt();
        let big = if hb.hi() >= 0.0 { hb + s } else { hb - s };
        let small = if big.hi() == 0.0 {
            Dd::from(0.0)
        } else {
            div(c, big)
        };
        (
            Complex::new(f64::from(big), 0.0),
            Complex::new(f64::from(small), 0.0),
        )
    };
    let z1 = Complex::new(f64::from(r), 0.0);
    let finite = [z1, z2, z3]
        .iter()
        .all(|z| z.re.is_finite() && z.im.is_finite());
    finite.then_some([z1, z2, z3])
}

/// `x / y` in double-double, to about `2^-104` relative: long division with three quotient
/// digits, each residual formed exactly (Bailey's `qd` library's accurate division, from memory).
///
/// Written here because `twofloat`'s own division of two double-double numbers (0.8.4) forms the
/// reciprocal's residual `1 - y_hi t` without a fused multiply-add, which leaves only about
/// double precision: `x / x` came out as `1 - 3.7e-17` for the coefficients of Newmark's linear
/// acceleration at `Omega = 2 sqrt(3)`, where the pair's discriminant is `-6.5e-18`.
pub(crate) fn div(x: Dd, y: Dd) -> Dd {
    let q1 = x.hi() / y.hi();
    let r = x - y * q1;
    let q2 = r.hi() / y.hi();
    let r = r - y * q2;
    let q3 = r.hi() / y.hi();
    Dd::new_add(q1, q2) + q3
}

/// The closed form's roots on the double-precision coefficients (a few units of rounding times
/// each root's condition off): a real root first, then the pair.
fn guesses(c2: f64, c1: f64, c0: f64) -> [Complex<f64>; 3] {
    let r = polish(real_root(c2, c1, c0), c2, c1, c0);
    let (z2, z3) = deflated_pair(c2, c1, c0, r);
    [Complex::new(r, 0.0), z2, z3]
}

/// The most isolated real root of the double-precision roots `z` when they certainly identify
/// it: its error (about `16 eps` times its condition `scale^2 / (d1 d2)`, relative to the scale)
/// is below a hundredth of its distance to the others, so the root a Newton search from it finds
/// is that one. `None` inside a tight cluster, where the doubles cannot tell the roots apart.
fn trusted_isolated(z: &[Complex<f64>; 3]) -> Option<f64> {
    let scale = z.iter().map(|r| r.norm()).fold(1.0, f64::max);
    let sep = |i: usize| {
        let (a, b) = ((i + 1) % 3, (i + 2) % 3);
        ((z[i] - z[a]).norm(), (z[i] - z[b]).norm())
    };
    // Of the real ones, the farthest from its nearer neighbour.
    let best = (0..3).filter(|&i| z[i].im == 0.0).max_by(|&i, &j| {
        let (si, sj) = (sep(i), sep(j));
        si.0.min(si.1).total_cmp(&sj.0.min(sj.1))
    })?;
    let (d1, d2) = sep(best);
    let error = 16.0 * f64::EPSILON * scale * scale * scale / (d1 * d2);
    (error.is_finite() && error < 0.01 * d1.min(d2)).then_some(z[best].re)
}

/// A monic cubic `z^3 + c2 z^2 + c1 z + c0` in double-double, with starting points for its real
/// roots.
struct Cubic {
    c2: Dd,
    c1: Dd,
    c0: Dd,
    guesses: [f64; 3],
}

impl Cubic {
    fn value(&self, z: Dd) -> Dd {
        ((z + self.c2) * z + self.c1) * z + self.c0
    }

    fn slope(&self, z: Dd) -> Dd {
        (z * 3.0 + self.c2 * 2.0) * z + self.c1
    }

    /// Newton steps from `x` (a double-precision estimate of a simple root) while they shrink, at
    /// most eight: a simple root's estimate to rounding needs one or two.
    fn newton(&self, mut x: Dd) -> Dd {
        let mut last = f64::INFINITY;
        for _ in 0..8 {
            let (f, d) = (self.value(x), self.slope(x));
            if f.hi() == 0.0 || d.hi() == 0.0 {
                break;
            }
            let step = div(f, d);
            let size = step.hi().abs();
            // Stop when the step no longer shrinks (or is NaN).
            if size >= last || size.is_nan() {
                break;
            }
            x -= step;
            last = size;
            if size <= 2f64.powi(-104) * x.hi().abs() {
                break;
            }
        }
        x
    }

    /// The real root farthest from the other two roots: the only real one, or of three real roots
    /// the one whose nearer neighbour is farthest. Each real root is found in its own interval of
    /// monotonicity (bounded by the roots of the derivative and the Cauchy bound) by Newton steps
    /// kept inside a shrinking bracket, so that it is found to double-double precision as a
    /// simple root of its interval, however close the other roots are.
    fn isolated_real_root(&self) -> Dd {
        let (c2, c1, c0) = (self.c2, self.c1, self.c0);
        // Every root lies within 1 + max |c_k| of zero (Cauchy).
        let bound = 1.0 + c2.hi().abs().max(c1.hi().abs()).max(c0.hi().abs());
        let (lo, hi) = (Dd::from(-1.001 * bound), Dd::from(1.001 * bound));
        // Critical points: 3 z^2 + 2 c2 z + c1 = 0, z = (-c2 -/+ sqrt(c2^2 - 3 c1)) / 3.
        let d = c2 * c2 - c1 * 3.0;
        if d.hi() <= 0.0 {
            // Monotone: one real root.
            return self.bracketed(lo, hi);
        }
        let sq = d.sqrt();
        // Without cancellation: the critical point of larger modulus first, the other from the
        // product of the two, c1 / 3.
        let big = if c2.hi() >= 0.0 { -(c2 + sq) } else { sq - c2 };
        let big = big / 3.0;
        let small = if big.hi() == 0.0 {
            big
        } else {
            div(c1, big * 3.0)
        };
        let (s1, s2) = if big < small {
            (big, small)
        } else {
            (small, big)
        };
        let (f1, f2) = (self.value(s1), self.value(s2));
        // f rises to a local maximum f1 at s1, falls to a local minimum f2 at s2, then rises.
        if f1.hi() < 0.0 {
            return self.bracketed(s2, hi);
        }
        if f2.hi() > 0.0 {
            return self.bracketed(lo, s1);
        }
        // Three real roots (a double one where f1 or f2 is zero).
        let roots = [
            self.bracketed(lo, s1),
            self.bracketed(s1, s2),
            self.bracketed(s2, hi),
        ];
        let gap = |i: usize| {
            let (a, b) = ((i + 1) % 3, (i + 2) % 3);
            let da = (roots[i] - roots[a]).hi().abs();
            let db = (roots[i] - roots[b]).hi().abs();
            da.min(db)
        };
        let best = (0..3)
            .max_by(|&i, &j| gap(i).total_cmp(&gap(j)))
            .unwrap_or(0);
        roots[best]
    }

    /// The root of the cubic in `[lo, hi]`, where it is monotone and changes sign (or vanishes at
    /// an end): Newton steps from a starting point inside (or the middle), replaced by bisection
    /// whenever they would leave the bracket, until the bracket or the step is at double-double
    /// resolution.
    fn bracketed(&self, mut lo: Dd, mut hi: Dd) -> Dd {
        let f_lo = self.value(lo);
        if f_lo.hi() == 0.0 {
            return lo;
        }
        let rising = f_lo.hi() < 0.0;
        let mut x = match self.guesses.iter().find(|&&g| g > lo.hi() && g < hi.hi()) {
            Some(&g) => Dd::from(g),
            None => (lo + hi) * 0.5,
        };
        for _ in 0..200 {
            let f = self.value(x);
            if f.hi() == 0.0 {
                return x;
            }
            if (f.hi() < 0.0) == rising {
                lo = x;
            } else {
                hi = x;
            }
            let width = (hi - lo).hi().abs();
            let scale = lo.hi().abs().max(hi.hi().abs()).max(f64::MIN_POSITIVE);
            if width <= 2f64.powi(-104) * scale {
                return x;
            }
            let d = self.slope(x);
            let newton = if d.hi() == 0.0 {
                None
            } else {
                Some(x - div(f, d))
            };
            match newton {
                Some(n) if n > lo && n < hi => {
                    if (n - x).hi().abs() <= 2f64.powi(-104) * scale {
                        return n;
                    }
                    x = n;
                }
                _ => x = (lo + hi) * 0.5,
            }
        }
        x
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Double roots known exactly: `(z + 1)^2 z` (the undamped central difference at
    /// `Omega = 2`), `(z - 1/2)^2 (z + 1/4)` and a pair `1/2 +/- 1e-9 i` beside `-0.3`. The
    /// compensated path gives them to the last bit of double precision where the double-precision
    /// discriminant leaves about eight digits.
    #[test]
    fn double_roots_to_full_precision() {
        let exact = |c: [f64; 3]| (Dd::from(c[0]), Dd::from(c[1]), Dd::from(c[2]));
        let (c2, c1, c0) = exact([2.0, 1.0, 0.0]);
        let z = roots(c2, c1, c0).unwrap();
        assert_eq!(z[0], Complex::new(0.0, 0.0));
        assert_eq!(
            (z[1], z[2]),
            (Complex::new(-1.0, 0.0), Complex::new(-1.0, 0.0))
        );
        // (z - 1/2)^2 (z + 1/4) = z^3 - 3/4 z^2 + 0 z + 1/16.
        let (c2, c1, c0) = exact([-0.75, 0.0, 0.0625]);
        let z = roots(c2, c1, c0).unwrap();
        let mut re: Vec<f64> = z.iter().map(|z| z.re).collect();
        re.sort_by(f64::total_cmp);
        assert_eq!(re, vec![-0.25, 0.5, 0.5]);
        assert!(z.iter().all(|z| z.im == 0.0));
        // (z + 0.3)((z - 1/2)^2 + 1e-18): coefficients in double-double.
        let e = Dd::from(1e-18);
        let q1 = Dd::from(0.25) + e;
        let (c2, c1, c0) = (Dd::from(-1.0) + 0.3, q1 - Dd::from(0.3), q1 * 0.3);
        let z = roots(c2, c1, c0).unwrap();
        assert!((z[0].re + 0.3).abs() <= 1e-16, "{z:?}");
        assert!((z[1].re - 0.5).abs() <= 1e-16 && (z[1].im - 1e-9).abs() <= 1e-16 * 1e-9 + 1e-24);
    }
}

#[cfg(test)]
mod property_tests {
    use super::*;
    use proptest::prelude::*;

    /// Unit roundoff of double-double.
    const U_DD: f64 = f64::EPSILON * f64::EPSILON / 4.0; // 2^-106

    /// The coefficients of `(z - a)(z - b)(z - c)` for real `a, b, c`, each product of two
    /// doubles exact in double-double, the sums and the triple product rounded once or twice.
    fn from_real(a: f64, b: f64, c: f64) -> (Dd, Dd, Dd) {
        let ab = Dd::new_mul(a, b);
        let c2 = -(Dd::new_add(a, b) + c);
        let c1 = ab + Dd::new_mul(a, c) + Dd::new_mul(b, c);
        let c0 = -(ab * c);
        (c2, c1, c0)
    }

    /// The coefficients of `(z - r)((z - p)^2 + q^2)`.
    fn from_pair(r: f64, p: f64, q: f64) -> (Dd, Dd, Dd) {
        let prod = Dd::new_mul(p, p) + Dd::new_mul(q, q);
        let c2 = -(Dd::from(r) + 2.0 * p);
        let c1 = Dd::new_mul(r, 2.0 * p) + prod;
        let c0 = -(prod * r);
        (c2, c1, c0)
    }

    /// Each exact root is matched by one computed root within its first-order perturbation bound
    /// (a standard result, e.g. Higham 2002, *Accuracy and Stability of Numerical Algorithms*,
    /// 2nd ed., sec. 26.3.2: `|dz| <= |dp(z)| / |p'(z)|`) for coefficient errors of a few units of
    /// double-double rounding, plus the rounding of the root to double.
    fn assert_roots(z: [Complex<f64>; 3], exact: [Complex<f64>; 3]) {
        let mut used = [false; 3];
        for (i, e) in exact.iter().enumerate() {
            let m = e.norm();
            let size = m * m * m + 4.0 * m * m + 4.0 * m + 1.0;
            let slope: f64 = (0..3)
                .filter(|&j| j != i)
                .map(|j| (e - exact[j]).norm())
                .product();
            let tol = 2.0 * f64::EPSILON * m + 64.0 * U_DD * size / slope;
            let k = (0..3)
                .filter(|&k| !used[k])
                .min_by(|&a, &b| (z[a] - e).norm().total_cmp(&(z[b] - e).norm()))
                .unwrap();
            used[k] = true;
            assert!(
                (z[k] - e).norm() <= tol,
                "root {e} found as {} (error {:e}, bound {tol:e}); all {z:?}",
                z[k],
                (z[k] - e).norm()
            );
        }
    }

    proptest! {
        /// Three real roots, two of them as close as `1e-10` of the scale, and a real root with
        /// a complex pair whose imaginary part goes down to `1e-9`: the compensated roots hold
        /// the bound of a double-double solve (a derived bound, not a reference value).
        #[test]
        fn roots_hold_the_double_double_bound(
            a in -2.0f64..2.0,
            b in -2.0f64..2.0,
            gap in prop_oneof![Just(0.0), -10.0f64..-0.5],
            sign in prop::bool::ANY,
            c in -2.0f64..2.0,
            q_exp in -9.0f64..0.0,
        ) {
            // Two roots `b` and `b + d`, `d = 10^gap` (0: an independent third root `c`).
            let d = if gap == 0.0 { c - b } else { 10f64.powf(gap) * if sign { 1.0 } else { -1.0 } };
            let b2 = b + d;
            prop_assume!((a - b).abs() > 1e-3 && (a - b2).abs() > 1e-3 && b != b2);
            let z = roots(from_real(a, b, b2).0, from_real(a, b, b2).1, from_real(a, b, b2).2)
                .expect("in range");
            assert_roots(z, [a, b, b2].map(|x| Complex::new(x, 0.0)));
            let q = 10f64.powf(q_exp);
            let (c2, c1, c0) = from_pair(a, c, q);
            let z = roots(c2, c1, c0).expect("in range");
            assert_roots(z, [Complex::new(a, 0.0), Complex::new(c, q), Complex::new(c, -q)]);
            // The layout: the real root first, the pair with the positive imaginary part first.
            prop_assert!(z[0].im == 0.0 && z[1].im > 0.0 && z[2].im < 0.0, "{z:?}");
        }

        /// Three real roots in a cluster `a, a + e1, a + e2` (`|e| >= 1e-6`), where the
        /// double-precision roots cannot tell an isolated one apart and each root is searched
        /// in its own bracket.
        #[test]
        fn clustered_roots_hold_the_double_double_bound(
            a in -2.0f64..2.0,
            e1 in -6.0f64..-2.0,
            e2 in -6.0f64..-2.0,
            s1 in prop::bool::ANY,
            s2 in prop::bool::ANY,
        ) {
            let b = a + if s1 { 1.0 } else { -1.0 } * 10f64.powf(e1);
            let c = a + if s2 { 1.0 } else { -1.0 } * 10f64.powf(e2);
            prop_assume!(b != c && (b - c).abs() > 1e-7);
            let (c2, c1, c0) = from_real(a, b, c);
            let z = roots(c2, c1, c0).expect("in range");
            assert_roots(z, [a, b, c].map(|x| Complex::new(x, 0.0)));
        }
    }
}

#[cfg(test)]
mod division_tests {
    use super::*;

    /// `x / x` is one to the last bit of double-double; `1/3` and `2/3` within `2^-104` of
    /// their values (exact: `3 q` is `1` to that precision); a quotient of two non-trivial
    /// double-double numbers times the divisor gives the dividend back to `2^-104`.
    #[test]
    fn division_to_double_double_precision() {
        let x = Dd::new_add(1.0 + 1.0 / 3.0, 1e-17) * 3.7;
        let q = div(x, x);
        assert_eq!((q.hi(), q.lo()), (1.0, 0.0));
        let third = div(Dd::from(1.0), Dd::from(3.0));
        let back = third * 3.0 - 1.0;
        assert!(back.hi().abs() <= 2f64.powi(-104), "{}", back.hi());
        let y = Dd::new_add(0.6666666666666667, -5.551115123125783e-17);
        let z = div(x, y);
        let err = z * y - x;
        assert!(
            err.hi().abs() <= 2f64.powi(-103) * x.hi().abs(),
            "{}",
            err.hi()
        );
    }
}
