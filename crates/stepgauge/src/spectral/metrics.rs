//! Spectral radius, principal roots, algorithmic damping, period error, high-frequency limit,
//! critical `Omega` and order of accuracy of a scheme.

use nalgebra::Complex;
use serde::Serialize;

use super::prepared::Prepared;
use crate::error::{Error, Result};
use crate::params::Scheme;

/// What the amplification matrix says at one `Omega = omega dt`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Metrics {
    /// `Omega = omega dt`.
    pub omega: f64,
    /// Largest eigenvalue modulus, spurious roots included.
    pub spectral_radius: f64,
    /// The principal roots, and what they say against the exact mode.
    pub oscillation: Oscillation,
}

/// The principal roots at one `Omega` (the complex-conjugate pair; the third root of these
/// schemes is real and spurious).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Oscillation {
    /// The principal roots are real: the discrete solution does not oscillate.
    Real,
    /// A complex pair, but the exact mode does not oscillate (`xi >= 1`): there is no exact
    /// period or decay per radian to compare with.
    Overdamped {
        /// The principal root with positive imaginary part.
        root: Complex<f64>,
    },
    /// A complex pair of an oscillating exact mode.
    Pair {
        /// The principal root with positive imaginary part.
        root: Complex<f64>,
        /// Algorithmic damping ratio `xi_bar` of the pair, net of the physical damping: with the
        /// pair `z = exp(-xi Omega) exp(Omega_bar (-xi_bar +/- i))`, the decay per radian of the
        /// discrete oscillation beyond the exact decay `exp(-xi Omega)` per step, so that the
        /// exact solution has `xi_bar = 0` (for `xi = 0`, Hughes's `xi_bar = -ln|z| / Omega_bar`).
        damping_ratio: f64,
        /// Relative period error against the damped exact period:
        /// `Omega sqrt(1 - xi^2) / Omega_bar - 1` (for `xi = 0`, `Omega / Omega_bar - 1`).
        period_error: f64,
    },
}

impl Metrics {
    /// The algorithmic damping ratio of [`Oscillation::Pair`]; `None` where the principal roots
    /// are real or the exact mode does not oscillate.
    pub fn damping_ratio(&self) -> Option<f64> {
        match self.oscillation {
            Oscillation::Pair { damping_ratio, .. } => Some(damping_ratio),
            _ => None,
        }
    }

    /// The relative period error of [`Oscillation::Pair`]; `None` where the principal roots are
    /// real or the exact mode does not oscillate.
    pub fn period_error(&self) -> Option<f64> {
        match self.oscillation {
            Oscillation::Pair { period_error, .. } => Some(period_error),
            _ => None,
        }
    }

    /// The principal root with positive imaginary part; `None` where the roots are real.
    pub fn principal(&self) -> Option<Complex<f64>> {
        match self.oscillation {
            Oscillation::Real => None,
            Oscillation::Overdamped { root } | Oscillation::Pair { root, .. } => Some(root),
        }
    }
}

/// Written as `omega`, `spectral_radius`, `damping_ratio` and `period_error` (the last two
/// `null` where undefined), the root left out.
impl Serialize for Metrics {
    fn serialize<S: serde::Serializer>(&self, s: S) -> std::result::Result<S::Ok, S::Error> {
        use serde::ser::SerializeStruct;
        let mut st = s.serialize_struct("Metrics", 4)?;
        st.serialize_field("omega", &self.omega)?;
        st.serialize_field("spectral_radius", &self.spectral_radius)?;
        st.serialize_field("damping_ratio", &self.damping_ratio())?;
        st.serialize_field("period_error", &self.period_error())?;
        st.end()
    }
}

/// The three eigenvalues of the scheme's amplification matrix: from the characteristic cubic in
/// closed form (its coefficients formed from the parameters, [`Prepared`]), or from the balanced
/// Schur form ([`eigenvalues3`](super::eigenvalues3)) where the roots are clustered (the same
/// test as [`eigenvalues_fast`](super::eigenvalues_fast)).
pub fn eigenvalues(scheme: &Scheme, omega_dt: f64, xi: f64) -> [Complex<f64>; 3] {
    Prepared::new(scheme).eigenvalues(omega_dt, xi)
}

/// The largest eigenvalue modulus; NaN when the amplification matrix has a non-finite entry
/// (a NaN or infinite `omega_dt` or `xi`, or one so large that the entries overflow), never a
/// misleading finite value.
pub fn spectral_radius(scheme: &Scheme, omega_dt: f64, xi: f64) -> f64 {
    Prepared::new(scheme).spectral_radius(omega_dt, xi)
}

/// The largest modulus of three eigenvalues, NaN when one of them is NaN (`f64::max` would drop
/// it).
#[inline]
pub(crate) fn largest_modulus(ev: &[Complex<f64>; 3]) -> f64 {
    // Fast path: the largest squared modulus, one square root (`norm` is `hypot`, several times
    // slower), where no square can overflow or underflow; `n0 + n1 + n2` is NaN when any root
    // is, and the careful path below then gives NaN.
    let (n0, n1, n2) = (ev[0].norm_sqr(), ev[1].norm_sqr(), ev[2].norm_sqr());
    let m2 = n0.max(n1).max(n2);
    if (n0 + n1 + n2).is_finite() && m2 > 1e-290 && m2 < 1e290 {
        return m2.sqrt();
    }
    ev.iter().map(|z| z.norm()).fold(0.0, |m, r| {
        if m.is_nan() || r.is_nan() {
            f64::NAN
        } else {
            m.max(r)
        }
    })
}

/// Spectral radius, principal pair, damping ratio and period error at `omega_dt`.
///
/// The principal pair is the complex-conjugate pair (the third root of these schemes is real and
/// spurious). Without physical damping, `z = exp(Omega_bar (-xi_bar + i))`: `Omega_bar = arg z`,
/// `xi_bar = -ln|z| / Omega_bar` and the period error `Omega / Omega_bar - 1` (Hughes 1987, *The
/// Finite Element Method*, sec. 9.3; Chung & Hulbert 1993). With physical damping `xi < 1` both
/// are measured against the exact damped mode `exp(Omega (-xi +/- i sqrt(1 - xi^2)))`: the period
/// error against the damped period, `Omega sqrt(1 - xi^2) / Omega_bar - 1`, and the algorithmic
/// damping net of the exact decay, `xi_bar = -(ln|z| + xi Omega) / Omega_bar`, so that the exact
/// solution has neither (our extension of the undamped definitions, `docs/spectral.md`).
pub fn metrics(scheme: &Scheme, omega_dt: f64, xi: f64) -> Metrics {
    Prepared::new(scheme).metrics(omega_dt, xi)
}

/// The exact damped mode that the period error and algorithmic damping are measured against.
#[derive(Debug, Clone, Copy, PartialEq)]
pub(crate) struct ExactMode {
    /// The physical damping ratio (its decay per step is `xi Omega`).
    xi: f64,
    /// `sqrt(1 - xi^2)`: the damped frequency over the undamped one.
    damped: f64,
    /// False for `xi >= 1`: the exact mode does not oscillate.
    oscillates: bool,
}

impl ExactMode {
    /// The exact mode at damping ratio `xi` (exactly the undamped definitions for `xi = 0`).
    #[inline]
    pub(crate) fn new(xi: f64) -> Self {
        ExactMode {
            xi,
            damped: if xi == 0.0 {
                1.0
            } else {
                (1.0 - xi * xi).sqrt()
            },
            oscillates: xi < 1.0 || xi.is_nan(),
        }
    }
}

/// [`metrics`] from the three eigenvalues at `omega_dt`.
#[inline]
pub(crate) fn metrics_from(ev: &[Complex<f64>; 3], omega_dt: f64, exact: ExactMode) -> Metrics {
    let rho = largest_modulus(ev);
    // Complex roots come in conjugate pairs; a pair is complex when its imaginary part is more
    // than round-off. The principal root is the complex one with positive imaginary part of
    // largest modulus.
    let mut principal: Option<(Complex<f64>, f64)> = None;
    for z in ev {
        if let Some(n2) = upper_complex(z)
            && principal.is_none_or(|(_, best)| n2 > best)
        {
            principal = Some((*z, n2));
        }
    }
    metrics_with(omega_dt, rho, principal, exact)
}

/// [`metrics_from`] for roots as the closed form gives them (`deflated_roots`): a real root
/// first, then a pair that is either complex conjugate with the positive imaginary part first
/// or real. Only the second can then be the principal root (the others have an imaginary part
/// of zero or below), so this is [`metrics_from`] bit for bit without its loop over the roots
/// (checked in the tests), which took a fifth of a sweep point's instructions.
#[inline(always)]
pub(crate) fn metrics_from_deflated(
    ev: &[Complex<f64>; 3],
    omega_dt: f64,
    exact: ExactMode,
) -> Metrics {
    debug_assert!(ev[0].im == 0.0 && ev[2].im <= 0.0);
    let rho = largest_modulus(ev);
    let principal = upper_complex(&ev[1]).map(|n2| (ev[1], n2));
    metrics_with(omega_dt, rho, principal, exact)
}

/// `Some(|z|^2)` when `z` is complex (imaginary part more than round-off) with a positive
/// imaginary part. Compared in squares (no `hypot`): `im > 1e-12 |z|`, with `|z|` floored at
/// 1e-300 where the square is not representable.
#[inline(always)]
fn upper_complex(z: &Complex<f64>) -> Option<f64> {
    let n2 = z.norm_sqr();
    let complex = if n2.is_finite() && n2 > 1e-290 {
        z.im > 0.0 && z.im * z.im > 1e-24 * n2
    } else {
        z.im > 1e-12 * z.norm().max(1e-300)
    };
    complex.then_some(n2)
}

/// The metrics from the spectral radius and the principal root with its squared modulus.
#[inline(always)]
fn metrics_with(
    omega_dt: f64,
    rho: f64,
    principal: Option<(Complex<f64>, f64)>,
    exact: ExactMode,
) -> Metrics {
    let oscillation = match principal {
        Some((z, best)) if exact.oscillates => {
            let omega_bar = arg_upper(z.re, z.im);
            // ln |z| = ln(|z|^2) / 2 (no `hypot`) where the square is representable.
            let ln_mod = if best.is_finite() && best > 1e-290 {
                0.5 * best.ln()
            } else {
                z.norm().ln()
            };
            Oscillation::Pair {
                root: z,
                damping_ratio: -(ln_mod + exact.xi * omega_dt) / omega_bar,
                period_error: omega_dt * exact.damped / omega_bar - 1.0,
            }
        }
        Some((z, _)) => Oscillation::Overdamped { root: z },
        None => Oscillation::Real,
    };
    Metrics {
        omega: omega_dt,
        spectral_radius: rho,
        oscillation,
    }
}

/// `atan2(im, re)` for a root in the upper half plane (`im > 0`, `re` finite; the principal
/// roots have `im > 1e-12 |z|`), in `(0, pi)`: `atan(im / |re|)`, or `pi` minus it for
/// `re < 0`, as fdlibm's `e_atan2.c` finishes it (Sun Microsystems 1993).
///
/// The arctangent is the `libm` crate's (a port of fdlibm's `s_atan.c`: argument reduction to
/// `|x| < 7/16` and an odd polynomial; error below one unit in the last place, from memory).
/// Within one unit in the last place of the platform library's `atan2` (glibc's aims at correct
/// rounding, from memory), which it replaces in the sweep: checked in the tests over twenty
/// decades of both parts. The platform's took about a fifth of a sweep point's instructions
/// (counted with `valgrind --tool=callgrind`). The root itself carries a few units of rounding
/// from the cubic, so the difference does not show in the period error or the damping ratio
/// beyond their own rounding.
#[inline(always)]
fn arg_upper(re: f64, im: f64) -> f64 {
    // pi - PI (the pi of fdlibm's e_atan2.c).
    const PI_LO: f64 = f64::from_bits(0x3CA1_A626_3314_5C07);
    let a = libm::atan(im / re.abs());
    if re < 0.0 {
        std::f64::consts::PI - (a - PI_LO)
    } else {
        a
    }
}

/// Coefficients `[1, c2, c1, c0]` of the characteristic polynomial
/// `det(z I - A) = z^3 + c2 z^2 + c1 z + c0` at `omega_dt`, `xi`.
///
/// Formed from the parameters, without the matrix (derivation in [`Prepared`]).
pub fn characteristic_polynomial(scheme: &Scheme, omega_dt: f64, xi: f64) -> [f64; 4] {
    Prepared::new(scheme).characteristic_polynomial(omega_dt, xi)
}

/// The high-frequency spectral radius `rho_inf = lim rho(Omega)` as `Omega -> infinity`, or
/// `None` when the spectral radius grows without bound (explicit schemes).
///
/// Computed from the limit matrix in closed form, not from an eigen-solver at a large `Omega`
/// (where the limit is a double or triple root, a general solver loses half or two thirds of the
/// digits). For the family with `beta > 0`, `alpha_f < 1`, the limit matrix on
/// `(u, dt v, dt^2 a)` is block triangular: one root `-alpha_f / (1 - alpha_f)`, and the two roots
/// of `z^2 - T z + P` with `T = (2 beta - gamma - 1/2)/beta` and
/// `P = (beta - gamma/2 - (beta - gamma)(1/2 - beta))/beta^2`; a double root is taken as `T/2`
/// (see `docs/spectral.md`).
pub fn rho_inf(scheme: &Scheme) -> Option<f64> {
    let p = match scheme {
        Scheme::CentralDifference(_) => return None,
        Scheme::Alpha(p) if p.beta == 0.0 => return None,
        Scheme::Alpha(p) => p,
    };
    let (af, b, g) = (p.alpha_f, p.beta, p.gamma);
    let z1 = -af / (1.0 - af);
    let t = (2.0 * b - g - 0.5) / b;
    let q = (b - 0.5 * g - (b - g) * (0.5 - b)) / (b * b);
    let disc = t * t - 4.0 * q;
    let scale = t * t + 4.0 * q.abs();
    let pair = if disc.abs() <= 1e-12 * scale.max(f64::MIN_POSITIVE) {
        // Double root.
        (0.5 * t).abs()
    } else if disc > 0.0 {
        let s = disc.sqrt();
        (0.5 * (t + s)).abs().max((0.5 * (t - s)).abs())
    } else {
        // Complex pair: modulus sqrt(P).
        q.sqrt()
    };
    Some(z1.abs().max(pair))
}

/// Options of the critical-`Omega` search.
const OMEGA_SCAN_START: f64 = 1e-3;
const OMEGA_SCAN_FACTOR: f64 = 1.05;
/// The spectral radius must exceed 1 by this much to count as unstable (round-off margin, so that
/// sets with `rho = 1` exactly, like the trapezoidal rule, are not reported unstable).
pub const INSTABILITY_MARGIN: f64 = 1e-9;

/// The smallest `Omega` at which the spectral radius exceeds `1 + INSTABILITY_MARGIN`, found by a
/// geometric scan from `1e-3` up to `omega_max_scan` followed by bisection to full precision;
/// `None` when the scan finds none.
///
/// This is an independent scan, a cross-check: the margin shifts a crossing where `rho` leaves 1
/// with a finite slope by about the margin over the slope (refined with a margin of `1e-12`), and
/// a window narrower than the scan's factor can be missed. The verdicts ([`check`](super::check))
/// rest on the exact criterion of [`StabilityRegion`](super::StabilityRegion).
///
/// A NaN `omega_max_scan` scans nothing (`None`); an infinite one scans up to `f64::MAX`. Where
/// the spectral radius is NaN (a NaN `xi`, or an `Omega` so large that the amplification matrix
/// overflows) no instability is counted.
pub fn omega_crit_numeric(scheme: &Scheme, xi: f64, omega_max_scan: f64) -> Option<f64> {
    if omega_max_scan.is_nan() {
        return None;
    }
    // Growing `hi` eventually exceeds any finite limit (and `hi * 1.05` overflows to infinity,
    // which exceeds `f64::MAX`), so the scan always ends.
    let omega_max_scan = omega_max_scan.min(f64::MAX);
    let unstable = |o: f64| spectral_radius(scheme, o, xi) > 1.0 + INSTABILITY_MARGIN;
    if unstable(OMEGA_SCAN_START) {
        return Some(0.0);
    }
    let mut lo = OMEGA_SCAN_START;
    let mut hi = lo;
    loop {
        hi *= OMEGA_SCAN_FACTOR;
        if hi > omega_max_scan {
            return None;
        }
        if unstable(hi) {
            break;
        }
        lo = hi;
    }
    let bisect = |lo: &mut f64, hi: &mut f64, unstable: &dyn Fn(f64) -> bool| {
        for _ in 0..200 {
            let mid = 0.5 * (*lo + *hi);
            if mid <= *lo || mid >= *hi {
                break;
            }
            if unstable(mid) {
                *hi = mid;
            } else {
                *lo = mid;
            }
        }
    };
    bisect(&mut lo, &mut hi, &unstable);
    // The margin shifts the crossing where rho leaves 1 with a finite slope (damped sets) by about
    // margin / slope; a second bisection with a margin near round-off, inside the bracket that a
    // genuine instability was found in, removes that shift.
    let strict = |o: f64| spectral_radius(scheme, o, xi) > 1.0 + FINE_MARGIN;
    let mut lo2 = lo;
    while strict(lo2) && lo2 > OMEGA_SCAN_START {
        lo2 /= OMEGA_SCAN_FACTOR;
    }
    if !strict(lo2) {
        bisect(&mut lo2, &mut hi, &strict);
        return Some(0.5 * (lo2 + hi));
    }
    Some(0.5 * (lo + hi))
}

/// Margin of the refining bisection of [`omega_crit_numeric`] (a few thousand ulps above 1).
const FINE_MARGIN: f64 = 1e-12;

/// Order of accuracy from the local truncation error: the characteristic polynomial evaluated at
/// the exact root `exp(lambda dt)` (`lambda = omega (-xi + i sqrt(1 - xi^2))`) falls like
/// `Omega^(k + 2)` for a scheme of order `k` (Hughes 1987, sec. 9.1). Measured at
/// `Omega = 0.04` and `0.02` (small enough for the leading term, large enough that a fourth-order
/// residual stays above round-off), without damping and (when `xi > 0`) with the given damping, and
/// the smaller order kept: a scheme that is second order only without damping (the central
/// difference with the lagged damping velocity) is first order for `xi > 0`.
pub fn order_of_accuracy(scheme: &Scheme, xi: f64) -> u32 {
    const O1: f64 = 0.04;
    const MAX_ORDER: f64 = 8.0;
    let residual = |o: f64, xi: f64| {
        let c = characteristic_polynomial(scheme, o, xi);
        let lam = Complex::new(-xi * o, o * (1.0 - xi * xi).sqrt());
        let z = lam.exp();
        (((z + c[1]) * z + c[2]) * z + c[3]).norm()
    };
    let measure = |xi: f64| {
        let (r1, r2) = (residual(O1, xi), residual(0.5 * O1, xi));
        let slope = (r1 / r2).log2();
        if slope.is_finite() {
            (slope - 2.0).round().clamp(0.0, MAX_ORDER) as u32
        } else {
            // Both residuals at round-off: higher order than can be resolved here.
            MAX_ORDER as u32
        }
    };
    let mut order = measure(0.0);
    if xi > 0.0 && xi < 1.0 {
        order = order.min(measure(xi));
    }
    order
}

/// The largest step for which the period error at circular frequency `omega` stays within
/// `target` (e.g. 0.01 for 1 percent), by bisection on `Omega` (the period error grows with
/// `Omega` over the range where the roots are complex). `None` where the period error is not
/// defined for small steps: with `xi >= 1` the exact mode does not oscillate, so there is no
/// period to keep. `Some(0.0)` when even the smallest step (`Omega = 1e-6`) misses the target.
///
/// # Errors
/// [`Error::InvalidParameter`] for a non-positive or non-finite `omega` or `target`.
pub fn largest_step_for_period_error(
    scheme: &Scheme,
    omega: f64,
    xi: f64,
    target: f64,
) -> Result<Option<f64>> {
    largest_step(omega, target, |o| {
        metrics(scheme, o, xi).period_error().map(f64::abs)
    })
}

/// The largest step for which the algorithmic damping ratio at circular frequency `omega` stays
/// within `target`; `None` where the damping ratio is not defined for small steps (`xi >= 1`: no
/// exact oscillation), `Some(0.0)` when even the smallest step misses the target.
///
/// # Errors
/// [`Error::InvalidParameter`] for a non-positive or non-finite `omega` or `target`.
pub fn largest_step_for_damping(
    scheme: &Scheme,
    omega: f64,
    xi: f64,
    target: f64,
) -> Result<Option<f64>> {
    largest_step(omega, target, |o| {
        metrics(scheme, o, xi).damping_ratio().map(|d| (d).abs())
    })
}

fn largest_step(
    omega: f64,
    target: f64,
    measure: impl Fn(f64) -> Option<f64>,
) -> Result<Option<f64>> {
    for (name, v) in [("omega", omega), ("target", target)] {
        if !(v.is_finite() && v > 0.0) {
            return Err(Error::InvalidParameter {
                name,
                value: v,
                expected: "a positive, finite value",
            });
        }
    }
    let ok = |o: f64| measure(o).is_some_and(|m| m <= target);
    // Grow until the measure fails, then bisect.
    let mut lo = 1e-6;
    match measure(lo) {
        None => return Ok(None),
        Some(m) if m.is_nan() || m > target => return Ok(Some(0.0)),
        Some(_) => {}
    }
    let mut hi = lo;
    while ok(hi) {
        lo = hi;
        hi *= 1.5;
        if hi > 1e6 {
            return Ok(Some(hi / omega));
        }
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if mid <= lo || mid >= hi {
            break;
        }
        if ok(mid) {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    Ok(Some(lo / omega))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The argument of an upper-half-plane root is within one unit in the last place of the
    /// library's `atan2` (correctly rounded) over twenty decades of both parts, both signs of the
    /// real part, every branch of the reduction, and the edges (`re = 0`, `-0`, a quotient that
    /// overflows).
    #[test]
    fn argument_within_one_ulp_of_the_library() {
        let mut worst = 0u64;
        let (mut n, mut off) = (0usize, 0usize);
        let mut x = 1e-10;
        while x < 1e10 {
            for re in [x, -x, x * 1.000_000_7, -x * 0.999_999_3] {
                let mut y = 1e-10;
                while y < 1e10 {
                    for im in [y, y * 1.234_567_8] {
                        if im * im <= 1e-24 * (re * re + im * im) {
                            continue;
                        }
                        let (got, want) = (arg_upper(re, im), im.atan2(re));
                        let d = got.to_bits().abs_diff(want.to_bits());
                        worst = worst.max(d);
                        n += 1;
                        off += usize::from(d > 0);
                    }
                    y *= 1.093;
                }
            }
            x *= 1.107;
        }
        assert!(worst <= 1, "{worst} ulp");
        assert!(n > 100_000, "{n}");
        eprintln!("argument: {n} points, {off} one ulp off the library, none more");
        for (re, im) in [
            (0.0, 1.0),
            (-0.0, 1.0),
            (1e-300, 1e300),
            (-1e-300, 1e300),
            (1.0, 1.0),
        ] {
            let (got, want) = (arg_upper(re, im), f64::atan2(im, re));
            assert!(
                got.to_bits().abs_diff(want.to_bits()) <= 1,
                "{re} {im}: {got} {want}"
            );
        }
    }
}
