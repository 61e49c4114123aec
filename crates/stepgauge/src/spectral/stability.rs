//! Where a scheme is stable, exactly: the stability boundaries in `Omega` for one damping ratio,
//! and the verdict at any `Omega`, from the characteristic polynomial in compensated arithmetic.
//!
//! # The criterion
//!
//! The amplification matrix's characteristic polynomial `P(z) = sum_k P_k z^k` (see
//! [`Prepared`](super::Prepared)) has coefficients `P_k(Omega) = a_k + 2 xi b_k Omega + g_k
//! Omega^2`, quadratics in `Omega` for a fixed `xi`. The bilinear transform `z = (1 + s)/(1 - s)`
//! maps the open unit disk onto the open left half plane; with
//! `Q(s) = (1 - s)^3 P((1 + s)/(1 - s)) = q3 s^3 + q2 s^2 + q1 s + q0`,
//!
//! ```text
//! q0 = P0 + P1 + P2 + P3 = P(1)            q1 = -3 P0 - P1 + P2 + 3 P3
//! q2 = 3 P0 - P1 - P2 + 3 P3               q3 = -P0 + P1 - P2 + P3 = -P(-1)
//! ```
//!
//! and the Routh-Hurwitz criterion for a cubic decides where the roots lie (common practice; the
//! same criterion as in Hughes 1987, *The Finite Element Method*, sec. 9.1, for Newmark's method,
//! from memory). With `q0 = P(1) = Omega^2 > 0` for every scheme here, one step is stable
//! (every root in the closed unit disk, the ones on the circle simple) exactly when
//!
//! * `q3 > 0`, `q2 > 0`, `q1 > 0` and `H = q2 q1 - q3 q0 >= 0` (with `H = 0` a simple pair on
//!   the circle: `Q = (q3 s + q2)(s^2 + q1 / q3)`); or
//! * `q3 = 0` (a root at `z = -1`, simple while `q2 != 0`), `q2 > 0` and `q1 >= 0`.
//!
//! Everything else is unstable: `q3 < 0` (a real root beyond -1), `q3 = 0 = q2` (a double root
//! at -1, which grows linearly), a negative `q2`, `q1` or `H` (a root outside).
//!
//! The conditions change only where one of `q3`, `q2`, `q1` (quadratics in `Omega`) or `H` (a
//! quartic) has a positive root. These polynomials are formed in double-double from the scheme's
//! constants (within about `2^-100` of the exact polynomials of the binary inputs), their positive
//! roots found in double-double on intervals of monotonicity (bounded by the roots of their
//! derivatives), and the criterion evaluated at every root and inside every interval between
//! them. The result is exact up to that rounding: no scan, no margin on the spectral radius, and
//! `Omega -> infinity` included (the last interval reaches it). At a given `Omega` the criterion is
//! evaluated directly, in double-double, so a step a few units in the last place inside a limit
//! is stable and one a few outside is not.

use twofloat::TwoFloat as Dd;

use super::compensated::{Constants, div};
use crate::params::Scheme;

/// A polynomial in `Omega` with double-double coefficients, lowest degree first, and for each
/// coefficient a bound on the magnitudes of the terms it was summed from (to tell a coefficient
/// that cancels to rounding, and so is zero, from a small one).
#[derive(Debug, Clone, PartialEq)]
struct Poly {
    c: Vec<Dd>,
    mag: Vec<f64>,
}

/// A value of a criterion polynomial within this fraction of its terms' magnitudes is zero: double-double
/// rounding is about `2^-104` of the terms, so this separates cancellation to rounding from any
/// value a double input can make (one unit in the last place of `Omega` changes a value by about
/// `2^-53` of its terms).
const ZERO: f64 = 16384.0 * f64::EPSILON * f64::EPSILON; // 2^-90 (EPSILON = 2^-52)

/// A coefficient of a criterion polynomial within this fraction of its terms' magnitudes is zero:
/// the rounding of the inputs. A set's parameters are doubles, rounded from what the user meant
/// (`gamma = 0.6` for HHT with `alpha = -0.1` meets `gamma = 1/2 - alpha` only to half a unit in
/// the last place), and a coefficient that vanishes for the meant set (the Hurwitz determinant's
/// `Omega^2` term of a second-order set) is left by that rounding at about `eps` of its terms, a
/// few `eps` after the products that form it. Kept, it would decide the verdict below
/// `Omega = 1e-7` (for HHT, a pair outside the circle by `1e-16 Omega^2`, exact for the rounded
/// doubles and meaningless for the set). 64 `eps` (`2^-46`) covers the rounding of up to four
/// parameters in a product with a margin of 16; a set that misses a condition by less than that
/// is taken to meet it.
const COEFFICIENT_ZERO: f64 = 64.0 * f64::EPSILON;

impl Poly {
    fn new(c: Vec<Dd>) -> Self {
        let mag = c.iter().map(|x| x.hi().abs()).collect();
        Poly { c, mag }
    }

    fn combine(terms: &[(f64, &Poly)]) -> Poly {
        let n = terms.iter().map(|(_, p)| p.c.len()).max().unwrap_or(0);
        let mut c = vec![Dd::from(0.0); n];
        let mut mag = vec![0.0; n];
        for (w, p) in terms {
            for i in 0..p.c.len() {
                c[i] += p.c[i] * *w;
                mag[i] += w.abs() * p.mag[i];
            }
        }
        Poly { c, mag }
    }

    fn mul(&self, other: &Poly) -> Poly {
        let n = self.c.len() + other.c.len() - 1;
        let mut c = vec![Dd::from(0.0); n];
        let mut mag = vec![0.0; n];
        for i in 0..self.c.len() {
            for j in 0..other.c.len() {
                c[i + j] += self.c[i] * other.c[j];
                mag[i + j] += self.mag[i] * other.mag[j];
            }
        }
        Poly { c, mag }
    }

    fn sub(&self, other: &Poly) -> Poly {
        Poly::combine(&[(1.0, self), (-1.0, other)])
    }

    /// The polynomial with its cancelled coefficients set to zero and its trailing zeros removed.
    /// A cancelled coefficient is zero exactly (an identity of the exact polynomial, such as
    /// `P(1) = 0` at `Omega = 0`), so its terms' magnitude goes with it: kept, it would count as
    /// rounding in every value and hide a small true value (`q0 = Omega^2` at `Omega = 1e-14`).
    fn cleaned(mut self) -> Poly {
        for (c, m) in self.c.iter_mut().zip(self.mag.iter_mut()) {
            if c.hi().abs() <= COEFFICIENT_ZERO * *m {
                *c = Dd::from(0.0);
                *m = 0.0;
            }
        }
        while self.c.last().is_some_and(|c| c.hi() == 0.0) {
            self.c.pop();
            self.mag.pop();
        }
        self
    }

    fn is_zero(&self) -> bool {
        self.c.is_empty()
    }

    /// The value at `x` and the magnitude of its terms.
    fn eval(&self, x: Dd) -> (Dd, f64) {
        let ax = x.hi().abs();
        let mut v = Dd::from(0.0);
        let mut m = 0.0;
        for (c, mag) in self.c.iter().zip(&self.mag).rev() {
            v = v * x + *c;
            m = m * ax + mag;
        }
        (v, m)
    }

    /// The sign of the value at `x`: `0` where it is zero to double-double rounding.
    fn sign(&self, x: Dd) -> i8 {
        let (v, m) = self.eval(x);
        if v.hi().abs() <= ZERO * m {
            0
        } else if v.hi() > 0.0 {
            1
        } else {
            -1
        }
    }

    fn derivative(&self) -> Poly {
        let c = (1..self.c.len())
            .map(|i| self.c[i] * i as f64)
            .collect::<Vec<_>>();
        let mag = (1..self.mag.len())
            .map(|i| self.mag[i] * i as f64)
            .collect();
        Poly { c, mag }
    }

    /// The positive real roots, ascending, each to double-double precision as a simple root of
    /// its interval of monotonicity (a root of even multiplicity where the polynomial touches
    /// zero at a critical point is included). The polynomial must not be zero.
    fn positive_roots(&self) -> Vec<Dd> {
        let deg = self.c.len().saturating_sub(1);
        if deg == 0 {
            return Vec::new();
        }
        let lead = self.c[deg].hi().abs();
        // Every root lies within 1 + max |c_i / c_deg| of zero (Cauchy).
        let bound = 1.0
            + self.c[..deg]
                .iter()
                .map(|c| c.hi().abs() / lead)
                .fold(0.0, f64::max);
        let hi_end = Dd::from(2.0 * bound);
        // Ends of the intervals of monotonicity: 0, the positive critical points, the bound.
        let mut ends = vec![Dd::from(0.0)];
        if deg >= 2 {
            let d = self.derivative().cleaned();
            ends.extend(d.positive_roots().into_iter().filter(|r| *r < hi_end));
        }
        ends.push(hi_end);
        let mut roots: Vec<Dd> = Vec::new();
        for w in ends.windows(2) {
            let (a, b) = (w[0], w[1]);
            let (sa, sb) = (self.sign(a), self.sign(b));
            let found = if sa == 0 {
                (a.hi() > 0.0).then_some(a)
            } else if sb == 0 {
                Some(b)
            } else if sa != sb {
                Some(self.bracketed(a, b, sa))
            } else {
                None
            };
            if let Some(r) = found
                && roots.last().is_none_or(|last| *last != r)
            {
                roots.push(r);
            }
        }
        roots
    }

    /// The root in `[lo, hi]`, where the polynomial is monotone and has the sign `s_lo` at `lo`
    /// and the other at `hi`: Newton steps from the middle, replaced by bisection whenever they
    /// would leave the bracket, to double-double resolution.
    fn bracketed(&self, mut lo: Dd, mut hi: Dd, s_lo: i8) -> Dd {
        let d = self.derivative();
        let mut x = (lo + hi) * 0.5;
        for _ in 0..300 {
            let (v, m) = self.eval(x);
            if v.hi().abs() <= ZERO * m {
                return x;
            }
            if (v.hi() > 0.0) == (s_lo > 0) {
                lo = x;
            } else {
                hi = x;
            }
            let scale = lo.hi().abs().max(hi.hi().abs()).max(f64::MIN_POSITIVE);
            if (hi - lo).hi() <= 2f64.powi(-100) * scale {
                return x;
            }
            let slope = d.eval(x).0;
            let next = if slope.hi() == 0.0 {
                None
            } else {
                Some(x - div(v, slope))
            };
            x = match next {
                Some(n) if n > lo && n < hi => n,
                _ => (lo + hi) * 0.5,
            };
        }
        x
    }
}

/// The verdict of the criterion at one `Omega`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StepStability {
    /// Every root strictly inside the unit circle.
    Stable,
    /// Every root in the closed unit disk, the ones on the circle simple: bounded, not decaying
    /// in those modes (a root at -1, or a pair on the circle).
    Marginal,
    /// A root outside the circle, or a multiple root on it (which grows linearly).
    Unstable,
}

impl StepStability {
    /// True for [`Stable`](StepStability::Stable) and [`Marginal`](StepStability::Marginal).
    pub fn is_stable(self) -> bool {
        !matches!(self, StepStability::Unstable)
    }
}

/// The criterion from the signs of `q3, q2, q1, q0` and `H` (see the module documentation).
fn classify(q3: i8, q2: i8, q1: i8, q0: i8, h: i8) -> StepStability {
    use StepStability::*;
    if q0 <= 0 {
        return Unstable;
    }
    match q3 {
        1 if q2 > 0 && q1 > 0 && h > 0 => Stable,
        1 if q2 > 0 && q1 > 0 && h == 0 => Marginal,
        0 if q2 > 0 && q1 >= 0 => Marginal,
        _ => Unstable,
    }
}

/// What makes a stability boundary.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
pub enum BoundaryKind {
    /// A real root passes through `z = -1` (`P(-1) = 0`).
    RootAtMinusOne,
    /// A complex pair crosses (or touches) the unit circle (the Hurwitz determinant vanishes).
    PairOnCircle,
    /// Another Hurwitz coefficient vanishes (`q2` or `q1`).
    Coefficient,
}

/// One stability boundary: an `Omega > 0` where the criterion can change.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Boundary {
    /// `Omega` (rounded to the nearest double from its double-double value).
    pub omega: f64,
    /// The double nearest the boundary on its stable side, where the criterion holds: rounded
    /// down where the scheme is stable below and unstable above (the critical `Omega`), up where
    /// it is unstable below and stable above (the start of a stable window), to the nearest
    /// double elsewhere. A step at this `Omega` is stable, whatever the rounding of the boundary.
    pub stable_side: f64,
    /// What happens there (the first kind found, for a root shared by several conditions).
    pub kind: BoundaryKind,
    /// The criterion at the boundary itself.
    pub at: StepStability,
    /// The criterion just above it (on the open interval to the next boundary).
    pub above: StepStability,
}

/// The stability of a scheme for one damping ratio over every `Omega > 0`.
#[derive(Debug, Clone, PartialEq)]
pub struct StabilityRegion {
    /// The criterion for small `Omega` (below the first boundary).
    pub below_first: StepStability,
    /// The boundaries, ascending.
    pub boundaries: Vec<Boundary>,
    scheme: Scheme,
    xi: f64,
    q: [Poly; 4],
    h: Poly,
}

impl StabilityRegion {
    /// The region of `scheme` at damping ratio `xi` (`xi >= 0`, finite; the caller checks).
    pub fn new(scheme: &Scheme, xi: f64) -> Self {
        let k = Constants::of(scheme);
        // P_k(Omega) = a_k + (2 xi b_k) Omega + g_k Omega^2 (2 xi is exact).
        let p: Vec<Poly> = (0..4)
            .map(|j| {
                let [a, b, g] = k.row(j);
                Poly::new(vec![a, b * (2.0 * xi), g])
            })
            .collect();
        let comb = |w: [f64; 4]| {
            Poly::combine(&[(w[0], &p[0]), (w[1], &p[1]), (w[2], &p[2]), (w[3], &p[3])])
        };
        let q0 = comb([1.0, 1.0, 1.0, 1.0]);
        let q1 = comb([-3.0, -1.0, 1.0, 3.0]);
        let q2 = comb([3.0, -1.0, -1.0, 3.0]);
        let q3 = comb([-1.0, 1.0, -1.0, 1.0]);
        let q = [q0.cleaned(), q1.cleaned(), q2.cleaned(), q3.cleaned()];
        let h = q[2].mul(&q[1]).sub(&q[3].mul(&q[0])).cleaned();
        let mut candidates: Vec<(Dd, BoundaryKind)> = Vec::new();
        for (poly, kind) in [
            (&q[3], BoundaryKind::RootAtMinusOne),
            (&h, BoundaryKind::PairOnCircle),
            (&q[2], BoundaryKind::Coefficient),
            (&q[1], BoundaryKind::Coefficient),
            (&q[0], BoundaryKind::Coefficient),
        ] {
            if !poly.is_zero() {
                candidates.extend(poly.positive_roots().into_iter().map(|r| (r, kind)));
            }
        }
        candidates.sort_by(|a, b| {
            a.0.hi()
                .total_cmp(&b.0.hi())
                .then(a.0.lo().total_cmp(&b.0.lo()))
        });
        // One boundary per point (roots of several conditions at the same Omega, to
        // double-double rounding, are one).
        let mut points: Vec<(Dd, BoundaryKind)> = Vec::new();
        for (r, kind) in candidates {
            match points.last_mut() {
                Some((last, k)) if (r - *last).hi().abs() <= 2f64.powi(-96) * r.hi() => {
                    // The kinds are listed by priority: a root at -1 names the point first.
                    *k = (*k).min(kind);
                }
                _ => points.push((r, kind)),
            }
        }
        let mut region = StabilityRegion {
            below_first: StepStability::Stable,
            boundaries: Vec::new(),
            scheme: *scheme,
            xi,
            q,
            h,
        };
        let first = points.first().map_or(Dd::from(2.0), |p| p.0);
        region.below_first = region.criterion(first * 0.5);
        let mut below = region.below_first;
        for (i, &(r, kind)) in points.iter().enumerate() {
            let next = points.get(i + 1).map_or(r * 2.0 + 1.0, |p| (r + p.0) * 0.5);
            let above = region.criterion(next);
            let stable_side = match (below.is_stable(), above.is_stable()) {
                (true, false) => region.stable_double(r, false),
                (false, true) => region.stable_double(r, true),
                _ => f64::from(r),
            };
            region.boundaries.push(Boundary {
                omega: f64::from(r),
                stable_side,
                kind,
                at: region.criterion(r),
                above,
            });
            below = above;
        }
        region
    }

    /// The double nearest `r` on the side (`up` or down) where the criterion holds: `r` rounded
    /// that way, then moved on by a unit in the last place while the criterion fails there (at
    /// most a few times: the criterion fails only at `r` itself or beyond it).
    fn stable_double(&self, r: Dd, up: bool) -> f64 {
        let step = |d: f64| if up { d.next_up() } else { d.next_down() };
        let mut d = f64::from(r);
        if (up && Dd::from(d) < r) || (!up && Dd::from(d) > r) {
            d = step(d);
        }
        for _ in 0..4 {
            if self.criterion(Dd::from(d)).is_stable() {
                break;
            }
            d = step(d);
        }
        d
    }

    /// The scheme.
    pub fn scheme(&self) -> &Scheme {
        &self.scheme
    }

    /// The damping ratio.
    pub fn xi(&self) -> f64 {
        self.xi
    }

    fn criterion(&self, omega: Dd) -> StepStability {
        let s = |p: &Poly| if p.is_zero() { 0 } else { p.sign(omega) };
        classify(
            s(&self.q[3]),
            s(&self.q[2]),
            s(&self.q[1]),
            s(&self.q[0]),
            s(&self.h),
        )
    }

    /// True when a complex pair lies on the unit circle at every `Omega` (the Hurwitz determinant
    /// vanishes identically: no algorithmic damping of the principal pair, as for the trapezoidal
    /// rule).
    pub fn pair_on_circle_everywhere(&self) -> bool {
        self.h.is_zero()
    }

    /// True when a root stays at `z = -1` at every `Omega` (`P(-1)` vanishes identically, as for
    /// generalised-alpha with `rho_inf = 1`).
    pub fn root_at_minus_one_everywhere(&self) -> bool {
        self.q[3].is_zero()
    }

    /// The criterion at `omega_dt` (evaluated in double-double at that double, not through the
    /// boundaries: exact also a few units in the last place from a limit). `Unstable` for a
    /// non-positive or non-finite `omega_dt`.
    pub fn at(&self, omega_dt: f64) -> StepStability {
        if !(omega_dt.is_finite() && omega_dt > 0.0) {
            return StepStability::Unstable;
        }
        self.criterion(Dd::from(omega_dt))
    }

    /// The critical `Omega`: the largest double up to which every `Omega` is stable (the first
    /// boundary beyond which, or at which, the scheme is unstable, rounded to its stable side:
    /// see [`Boundary::stable_side`]). `Some(0)` when the scheme is unstable for every small
    /// step, `None` when it is stable for every step.
    pub fn omega_crit(&self) -> Option<f64> {
        if !self.below_first.is_stable() {
            return Some(0.0);
        }
        self.boundaries
            .iter()
            .find(|b| !b.at.is_stable() || !b.above.is_stable())
            .map(|b| b.stable_side)
    }

    /// True when every `Omega` in `(0, omega_dt]` is stable: what a model with modes at every
    /// frequency up to `omega_max` needs of its step `dt = omega_dt / omega_max` (a step whose own
    /// `Omega` lies in a window that is stable again is not enough: the modes below it are not).
    pub fn stable_up_to(&self, omega_dt: f64) -> bool {
        if !(omega_dt.is_finite() && omega_dt > 0.0) {
            return false;
        }
        match self.omega_crit() {
            None => true,
            Some(crit) => omega_dt <= crit,
        }
    }

    /// The boundary at [`omega_crit`](Self::omega_crit), when there is one.
    pub fn critical_boundary(&self) -> Option<&Boundary> {
        if !self.below_first.is_stable() {
            return None;
        }
        self.boundaries
            .iter()
            .find(|b| !b.at.is_stable() || !b.above.is_stable())
    }

    /// The intervals of `Omega` above `omega_crit` where the scheme is stable again, as
    /// `(from, to)` with `to = f64::INFINITY` for the last (empty for most schemes); each end is
    /// its boundary rounded to the stable side (see [`Boundary::stable_side`]).
    pub fn stable_again(&self) -> Vec<(f64, f64)> {
        let Some(crit) = self.omega_crit() else {
            return Vec::new();
        };
        let mut out: Vec<(f64, f64)> = Vec::new();
        // The index of the boundary where the last interval in `out` ends.
        let mut last_end = None;
        for (i, b) in self.boundaries.iter().enumerate() {
            if b.omega <= crit || !b.above.is_stable() {
                continue;
            }
            let to = self
                .boundaries
                .get(i + 1)
                .map_or(f64::INFINITY, |n| n.stable_side);
            match out.last_mut() {
                // Joined across a boundary that is itself stable.
                Some(last) if last_end == Some(i) && b.at.is_stable() => last.1 = to,
                _ => out.push((b.stable_side, to)),
            }
            last_end = Some(i + 1);
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::params::AlphaParams;
    use crate::params::ForceVelocity;

    fn poly(c: &[f64]) -> Poly {
        Poly::new(c.iter().map(|&x| Dd::from(x)).collect()).cleaned()
    }

    /// Positive roots of polynomials with known roots (exact: they are small integers or halves):
    /// simple ones, a double one (touching zero at a critical point), negative and zero roots
    /// left out, none at all.
    #[test]
    fn positive_roots_of_known_polynomials() {
        let roots = |c: &[f64]| -> Vec<f64> {
            poly(c)
                .positive_roots()
                .into_iter()
                .map(f64::from)
                .collect()
        };
        // (x - 1)(x - 2)(x - 3)(x + 1) = x^4 - 5x^3 + 5x^2 + 5x - 6.
        assert_eq!(roots(&[-6.0, 5.0, 5.0, -5.0, 1.0]), vec![1.0, 2.0, 3.0]);
        // (x - 2)^2 (x + 1) = x^3 - 3x^2 + 4.
        assert_eq!(roots(&[4.0, 0.0, -3.0, 1.0]), vec![2.0]);
        // x (x - 0.5) = x^2 - 0.5 x: the root at 0 is not positive.
        assert_eq!(roots(&[0.0, -0.5, 1.0]), vec![0.5]);
        // x^2 + 1: none.
        assert!(roots(&[1.0, 0.0, 1.0]).is_empty());
        // A polynomial with zero coefficients only is zero (no roots asked of it).
        assert!(poly(&[0.0, 0.0]).is_zero());
    }

    /// The criterion's cases (see the module documentation).
    #[test]
    fn criterion_cases() {
        use StepStability::*;
        assert_eq!(classify(1, 1, 1, 1, 1), Stable);
        assert_eq!(classify(1, 1, 1, 1, 0), Marginal);
        assert_eq!(classify(1, 1, 1, 1, -1), Unstable);
        assert_eq!(classify(1, 0, 1, 1, -1), Unstable);
        assert_eq!(classify(0, 1, 1, 1, 0), Marginal);
        assert_eq!(classify(0, 1, 0, 1, 0), Marginal);
        assert_eq!(classify(0, 0, 1, 1, 0), Unstable);
        assert_eq!(classify(-1, 1, 1, 1, 1), Unstable);
        assert_eq!(classify(1, 1, 1, 0, 1), Unstable);
    }

    /// The central difference (closed form `2 (sqrt(1 + xi^2) - xi)`, Belytschko, Liu & Moran
    /// 2000, from memory) and Newmark's linear acceleration (`sqrt(12)` for every `xi`, from
    /// Hughes's damped formula with `gamma = 1/2`, from memory) to a few units in the last place;
    /// the trapezoidal rule unconditional with its pair on the circle; the region reports what
    /// happens at the boundary.
    #[test]
    fn regions_of_known_schemes() {
        let cd = Scheme::CentralDifference(ForceVelocity::Lagged);
        for xi in [0.0f64, 0.05, 0.3, 1.0] {
            let r = StabilityRegion::new(&cd, xi);
            let want = 2.0 / (xi + (1.0 + xi * xi).sqrt());
            let got = r.omega_crit().unwrap();
            assert!(
                (got - want).abs() <= 4.0 * f64::EPSILON * want,
                "xi {xi}: {got} {want}"
            );
            let b = r.critical_boundary().unwrap();
            assert_eq!(b.kind, BoundaryKind::RootAtMinusOne);
            assert_eq!(b.at.is_stable(), xi > 0.0, "xi {xi}");
        }
        let la = Scheme::Alpha(AlphaParams::linear_acceleration());
        for xi in [0.0, 0.1, 0.5] {
            let got = StabilityRegion::new(&la, xi).omega_crit().unwrap();
            assert!((got - 12f64.sqrt()).abs() <= 1e-15 * got, "xi {xi}: {got}");
        }
        let tr = StabilityRegion::new(&Scheme::Alpha(AlphaParams::average_acceleration()), 0.0);
        assert_eq!(tr.omega_crit(), None);
        assert!(tr.pair_on_circle_everywhere());
        assert_eq!(tr.at(1e6), StepStability::Marginal);
        assert_eq!(
            tr.at(0.0),
            StepStability::Unstable,
            "no step of zero length"
        );
        let damped = StabilityRegion::new(&Scheme::Alpha(AlphaParams::average_acceleration()), 0.1);
        assert_eq!(damped.at(3.0), StepStability::Stable);
        assert!(!damped.pair_on_circle_everywhere());
    }
}
