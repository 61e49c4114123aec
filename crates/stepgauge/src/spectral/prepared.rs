//! A scheme prepared for evaluation at many points: the characteristic polynomial's coefficients
//! as rational functions of `Omega` with per-scheme constants computed once, so that a point
//! costs a few multiply-adds, one division and the closed-form cubic, without building the
//! amplification matrix (the fast path of [`sweep`](super::sweep), [`metrics`](super::metrics),
//! [`spectral_radius`](super::spectral_radius) and [`eigenvalues`](super::eigenvalues)).
//!
//! # The characteristic polynomial from the parameters
//!
//! With `x_n = (u_n, dt v_n, dt^2 a_n)` proportional to `z^n` (`U`, `V`, `A` the amplitudes) the
//! step equations of the generalised-alpha family (see
//! [`alpha_amplification`](super::alpha_amplification)) read
//!
//! ```text
//! (z - 1) U = V + ((1/2 - beta) + beta z) A
//! (z - 1) V = ((1 - gamma) + gamma z) A
//! ((1 - alpha_m) z + alpha_m) A + 2 xi Omega ((1 - alpha_f) z + alpha_f) V
//!     + Omega^2 ((1 - alpha_f) z + alpha_f) U = 0.
//! ```
//!
//! Eliminating `V` and `U` and multiplying by `(z - 1)^2` gives `P(z) A = 0` with
//!
//! ```text
//! P(z) = M(z) (z - 1)^2 + 2 xi Omega E(z) G(z) (z - 1) + Omega^2 E(z) N(z),
//! M(z) = (1 - alpha_m) z + alpha_m,   E(z) = (1 - alpha_f) z + alpha_f,
//! G(z) = gamma z + (1 - gamma),       N(z) = beta z^2 + (gamma + 1/2 - 2 beta) z + (1/2 - gamma + beta),
//! ```
//!
//! (`N = G + B (z - 1)` with `B(z) = beta z + 1/2 - beta`). `P` is `D det(z I - A)`, `D` the
//! matrix's common denominator: with `Z = 2 xi Omega`, each coefficient is
//! `P_k = a_k + b_k Z + g_k Omega^2`,
//!
//! ```text
//! k = 3:  m1,            e1 g1,                   e1 n2        (P_3 = D)
//! k = 2:  m0 - 2 m1,     e1 g0 + e0 g1 - e1 g1,   e1 n1 + e0 n2
//! k = 1:  m1 - 2 m0,     e0 g0 - e1 g0 - e0 g1,   e1 n0 + e0 n1
//! k = 0:  m0,            -e0 g0,                  e0 n0
//! ```
//!
//! where `M = m1 z + m0`, `E = e1 z + e0`, `G = g1 z + g0`, `N = n2 z^2 + n1 z + n0`, and the
//! monic coefficients are `c_k = P_k / P_3` (checked symbolically against the determinant of the
//! matrix, and numerically in the tests below). The central difference (half-step form, see
//! [`cd_amplification`](super::cd_amplification)) has `det(z I - A) = z^3 + c2 z^2 + c1 z + c0`
//! with `c2 = Omega^2 + Z - 2`, `c1 = 1 - Z`, `c0 = 0` (lagged damping velocity: the matrix has
//! rank two) and `c2 = Omega^2 + 3 Z / 2 - 2`, `c1 = 1 - 2 Z`, `c0 = Z / 2` (predicted): the same
//! form with `P_3 = 1`.
//!
//! The constants are rounded once per scheme; a coefficient then carries a few roundings relative
//! to its terms' magnitudes, as the one formed from the rounded matrix entries does (that one
//! also rounds nine quotients and cancels in the minors). The roots come from the same closed
//! form and the same condition test as [`eigenvalues_fast`](super::eigenvalues_fast); where that
//! test fails (clustered roots, extreme or non-finite coefficients) the matrix is built and the
//! balanced Schur form ([`eigenvalues3`](super::eigenvalues3)) takes over, as before.

use nalgebra::Complex;

use super::amplification::eigenvalues3;
use super::compensated::{self, Constants};
use super::metrics::{ExactMode, Metrics, largest_modulus, metrics_from, metrics_from_deflated};
use super::roots::{
    closed_form_roots, deflated_roots, estimate_real_root, in_range, polish_real_root,
};
use crate::params::ForceVelocity;
use crate::params::Scheme;

/// A scheme with its characteristic polynomial's constants computed once: evaluate it at many
/// `(Omega, xi)` points. Every method gives what the free function of the same name gives for
/// the scheme ([`Prepared::metrics`] is [`metrics`](super::metrics), and so on: they call it).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Prepared {
    scheme: Scheme,
    /// `k[j] = [a_j, b_j, g_j]`: `P_j = a_j + b_j (2 xi Omega) + g_j Omega^2`, `j = 0..=3`.
    k: [[f64; 3]; 4],
}

/// Which way [`Prepared::eigenvalues_with_path`] found the roots.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RootPath {
    /// The closed-form cubic on double-precision coefficients (every root's condition at most
    /// [`CONDITION_LIMIT`](super::CONDITION_LIMIT)).
    ClosedForm,
    /// The compensated path: coefficients, polish, deflation and discriminant in double-double
    /// (where roots meet).
    Compensated,
    /// The balanced real Schur form of the amplification matrix ([`eigenvalues3`]): non-finite or
    /// extreme coefficients only.
    Schur,
}

impl Prepared {
    /// The scheme's constants (see the module documentation).
    pub fn new(scheme: &Scheme) -> Self {
        Prepared {
            scheme: *scheme,
            k: Self::constants(scheme),
        }
    }

    /// The double-precision constants of the scheme (see the module documentation).
    fn constants(scheme: &Scheme) -> [[f64; 3]; 4] {
        match scheme {
            Scheme::CentralDifference(ForceVelocity::Lagged) => [
                [0.0, 0.0, 0.0],
                [1.0, -1.0, 0.0],
                [-2.0, 1.0, 1.0],
                [1.0, 0.0, 0.0],
            ],
            Scheme::CentralDifference(ForceVelocity::Predicted) => [
                [0.0, 0.5, 0.0],
                [1.0, -2.0, 0.0],
                [-2.0, 1.5, 1.0],
                [1.0, 0.0, 0.0],
            ],
            Scheme::Alpha(p) => {
                let (am, af, b, g) = (p.alpha_m, p.alpha_f, p.beta, p.gamma);
                let (m1, m0) = (1.0 - am, am);
                let (e1, e0) = (1.0 - af, af);
                let (g1, g0) = (g, 1.0 - g);
                let (n2, n1, n0) = (b, g + 0.5 - 2.0 * b, 0.5 - g + b);
                [
                    [m0, -e0 * g0, e0 * n0],
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
                ]
            }
        }
    }

    /// The scheme.
    pub fn scheme(&self) -> &Scheme {
        &self.scheme
    }

    /// The monic coefficients `(c2, c1, c0)` of `det(z I - A)`.
    #[inline(always)]
    fn coefficients(&self, omega_dt: f64, xi: f64) -> (f64, f64, f64) {
        let z = 2.0 * xi * omega_dt;
        let o2 = omega_dt * omega_dt;
        let p = |j: usize| self.k[j][0] + self.k[j][1] * z + self.k[j][2] * o2;
        let r = 1.0 / p(3);
        (p(2) * r, p(1) * r, p(0) * r)
    }

    /// Coefficients `[1, c2, c1, c0]` of `det(z I - A) = z^3 + c2 z^2 + c1 z + c0`.
    pub fn characteristic_polynomial(&self, omega_dt: f64, xi: f64) -> [f64; 4] {
        let (c2, c1, c0) = self.coefficients(omega_dt, xi);
        [1.0, c2, c1, c0]
    }

    /// The three eigenvalues of the amplification matrix at `omega_dt`, `xi`: the closed-form
    /// cubic on the coefficients above, or the balanced Schur form of the matrix where the roots
    /// are clustered; three NaN for a non-finite matrix.
    #[inline(always)]
    pub fn eigenvalues(&self, omega_dt: f64, xi: f64) -> [Complex<f64>; 3] {
        self.eigenvalues_with_path(omega_dt, xi).0
    }

    /// [`Prepared::eigenvalues`] and the path that computed them: the closed form where every
    /// root's condition allows it, the compensated path where roots meet, the balanced Schur
    /// form for non-finite or extreme coefficients (each path's accuracy is in
    /// `docs/spectral.md`).
    #[inline(always)]
    pub fn eigenvalues_with_path(&self, omega_dt: f64, xi: f64) -> ([Complex<f64>; 3], RootPath) {
        let (c2, c1, c0) = self.coefficients(omega_dt, xi);
        match closed_form_roots(c2, c1, c0) {
            Some(z) => (z, RootPath::ClosedForm),
            None => self.fallback(omega_dt, xi),
        }
    }

    /// The paths for points the closed form cannot take, out of line so that the fast one stays
    /// small: the compensated one, or (non-finite or extreme coefficients) the balanced Schur
    /// form. The compensated roots are laid out as the closed form's.
    #[cold]
    #[inline(never)]
    fn fallback(&self, omega_dt: f64, xi: f64) -> ([Complex<f64>; 3], RootPath) {
        self.fallback_with(&mut None, omega_dt, xi)
    }

    /// [`Prepared::fallback`] keeping the double-double constants in `exact` across the points of
    /// one call. They are formed here, on the points that need them, so that a `Prepared` stays
    /// cheap to make (`spectral_radius` makes one per call).
    #[cold]
    #[inline(never)]
    fn fallback_with(
        &self,
        exact: &mut Option<Constants>,
        omega_dt: f64,
        xi: f64,
    ) -> ([Complex<f64>; 3], RootPath) {
        let constants = exact.get_or_insert_with(|| Constants::of(&self.scheme));
        let (c2, c1, c0) = constants.monic(omega_dt, xi);
        match compensated::roots(c2, c1, c0) {
            Some(z) => (z, RootPath::Compensated),
            None => (
                eigenvalues3(&self.scheme.amplification(omega_dt, xi)),
                RootPath::Schur,
            ),
        }
    }

    /// The metrics from the roots of a path (the closed form's and the compensated path's are
    /// laid out alike).
    #[inline(always)]
    fn metrics_of(
        z: &[Complex<f64>; 3],
        path: RootPath,
        omega_dt: f64,
        exact: ExactMode,
    ) -> Metrics {
        match path {
            RootPath::ClosedForm | RootPath::Compensated => {
                metrics_from_deflated(z, omega_dt, exact)
            }
            RootPath::Schur => metrics_from(z, omega_dt, exact),
        }
    }

    /// The spectral radius (largest eigenvalue modulus; NaN for a non-finite matrix).
    #[inline]
    pub fn spectral_radius(&self, omega_dt: f64, xi: f64) -> f64 {
        largest_modulus(&self.eigenvalues(omega_dt, xi))
    }

    /// Spectral radius, principal pair, damping ratio and period error at `omega_dt`.
    #[inline]
    pub fn metrics(&self, omega_dt: f64, xi: f64) -> Metrics {
        let (c2, c1, c0) = self.coefficients(omega_dt, xi);
        let exact = ExactMode::new(xi);
        match closed_form_roots(c2, c1, c0) {
            Some(z) => metrics_from_deflated(&z, omega_dt, exact),
            None => {
                let (z, path) = self.fallback(omega_dt, xi);
                Self::metrics_of(&z, path, omega_dt, exact)
            }
        }
    }

    /// [`Prepared::metrics`] at each of up to [`BLOCK`] points, bit for bit, computed stage by
    /// stage over the block (coefficients, real root, Newton polish, deflation and condition
    /// test, metrics) so that the independent points overlap in the processor's pipeline: one
    /// point is a chain of dependent divisions and square roots, so the long loop body of one
    /// point at a time left most of the time waiting on their latency.
    ///
    /// # Panics
    /// If `omegas` has more than [`BLOCK`] values (internal use by [`sweep`](super::sweep)).
    #[inline]
    pub(crate) fn metrics_block<'a>(
        &'a self,
        omegas: &'a [f64],
        xi: f64,
    ) -> impl Iterator<Item = Metrics> + use<'a> {
        let roots = self.roots_block(omegas, xi);
        let exact = ExactMode::new(xi);
        let mut constants = None;
        (0..omegas.len()).map(move |i| {
            let o = omegas[i];
            match &roots[i] {
                Some(z) => metrics_from_deflated(z, o, exact),
                None => {
                    let (z, path) = self.fallback_with(&mut constants, o, xi);
                    Self::metrics_of(&z, path, o, exact)
                }
            }
        })
    }

    /// The spectral radius at each point, bit for bit [`Prepared::spectral_radius`], on the
    /// calling thread, computed in blocks stage by stage (see [`sweep`](super::sweep)): the
    /// fastest way to many spectral radii.
    pub fn spectral_radii(&self, omegas: &[f64], xi: f64) -> Vec<f64> {
        let mut out = Vec::with_capacity(omegas.len());
        let mut constants = None;
        for block in omegas.chunks(BLOCK) {
            let roots = self.roots_block(block, xi);
            out.extend(block.iter().zip(&roots).map(|(&o, z)| match z {
                Some(z) => largest_modulus(z),
                None => largest_modulus(&self.fallback_with(&mut constants, o, xi).0),
            }));
        }
        out
    }

    /// The closed-form roots at up to [`BLOCK`] points (`None` where the fallback must take
    /// over), stage by stage.
    #[inline(always)]
    fn roots_block(&self, omegas: &[f64], xi: f64) -> [Option<[Complex<f64>; 3]>; BLOCK] {
        let n = omegas.len();
        assert!(n <= BLOCK);
        let mut c = [(0.0, 0.0, 0.0); BLOCK];
        let mut ok = [false; BLOCK];
        let mut r = [0.0; BLOCK];
        for i in 0..n {
            c[i] = self.coefficients(omegas[i], xi);
        }
        for i in 0..n {
            let (c2, c1, c0) = c[i];
            ok[i] = in_range(c2, c1, c0);
            r[i] = if ok[i] {
                estimate_real_root(c2, c1, c0)
            } else {
                0.0
            };
        }
        for i in 0..n {
            let (c2, c1, c0) = c[i];
            r[i] = if ok[i] {
                polish_real_root(r[i], c2, c1, c0)
            } else {
                0.0
            };
        }
        let mut roots = [None; BLOCK];
        for i in 0..n {
            let (c2, c1, c0) = c[i];
            roots[i] = if ok[i] {
                deflated_roots(c2, c1, c0, r[i])
            } else {
                None
            };
        }
        roots
    }
}

/// Points per block of [`Prepared::metrics_block`] (its stages keep a few arrays of this length
/// on the stack).
pub(crate) const BLOCK: usize = 32;

#[cfg(test)]
mod tests {
    use super::*;
    use crate::params::AlphaParams;
    use crate::spectral::log_space;
    use crate::spectral::roots::cubic_coefficients;

    fn schemes() -> Vec<Scheme> {
        let mut s = vec![
            Scheme::CentralDifference(ForceVelocity::Lagged),
            Scheme::CentralDifference(ForceVelocity::Predicted),
            Scheme::Alpha(AlphaParams::average_acceleration()),
            Scheme::Alpha(AlphaParams::linear_acceleration()),
            Scheme::Alpha(AlphaParams::newmark(0.0, 0.5).unwrap()),
            Scheme::Alpha(AlphaParams::raw(0.1, 0.3, 0.4, 0.7).unwrap()),
        ];
        for r in [0.0, 0.5, 0.8, 1.0] {
            s.push(Scheme::Alpha(AlphaParams::generalized_alpha(r).unwrap()));
            s.push(Scheme::Alpha(
                AlphaParams::hht_from_rho_inf(r.max(0.5)).unwrap(),
            ));
            s.push(Scheme::Alpha(AlphaParams::wbz_from_rho_inf(r).unwrap()));
        }
        s
    }

    /// The coefficients from the parameters equal those from the matrix's trace, principal
    /// minors and determinant, to a few roundings of the latter's terms (products of `k` entries
    /// for the coefficient of degree `3 - k`, which cancel: the central difference's entries grow
    /// like `Omega^2`), and the central difference's equal their exact values to a few roundings.
    #[test]
    fn coefficients_equal_the_matrix_invariants() {
        for s in schemes() {
            let p = Prepared::new(&s);
            for xi in [0.0, 0.05, 0.5, 1.0] {
                for o in log_space(1e-3, 1e3, 61) {
                    let (c2, c1, c0) = p.coefficients(o, xi);
                    let a = s.amplification(o, xi);
                    let amax = a.iter().flatten().fold(1.0f64, |m, x| m.max(x.abs()));
                    let (d2, d1, d0) = cubic_coefficients(&a);
                    for (k, (x, y)) in [(c2, d2), (c1, d1), (c0, d0)].into_iter().enumerate() {
                        assert!(
                            (x - y).abs() <= 1e-14 * amax.powi(k as i32 + 1),
                            "{} {o} {xi}: {x} {y}",
                            s.name()
                        );
                    }
                    let z = 2.0 * xi * o;
                    let exact = match s {
                        Scheme::CentralDifference(ForceVelocity::Lagged) => {
                            Some((o * o + z - 2.0, 1.0 - z, 0.0))
                        }
                        Scheme::CentralDifference(ForceVelocity::Predicted) => {
                            Some((o * o + 1.5 * z - 2.0, 1.0 - 2.0 * z, 0.5 * z))
                        }
                        Scheme::Alpha(_) => None,
                    };
                    if let Some((e2, e1, e0)) = exact {
                        for (x, y) in [(c2, e2), (c1, e1), (c0, e0)] {
                            assert!((x - y).abs() <= 4e-16 * (1.0 + o * o), "{o} {xi}");
                        }
                    }
                }
            }
        }
    }

    /// The staged blocks give exactly the point-by-point metrics (bit for bit, NaN included).
    #[test]
    fn blocks_equal_points() {
        let mut omegas = log_space(1e-6, 1e6, 301);
        omegas.extend([0.0, f64::NAN, f64::INFINITY, 1e300, 1e-300]);
        for s in schemes() {
            let p = Prepared::new(&s);
            for xi in [0.0, 0.05, 1.0] {
                for chunk in omegas.chunks(BLOCK) {
                    for (m, &o) in p.metrics_block(chunk, xi).zip(chunk) {
                        let want = p.metrics(o, xi);
                        assert_eq!(format!("{m:?}"), format!("{want:?}"), "{} {o}", s.name());
                    }
                }
                let radii = p.spectral_radii(&omegas, xi);
                assert_eq!(radii.len(), omegas.len());
                for (r, &o) in radii.iter().zip(&omegas) {
                    assert_eq!(r.to_bits(), p.spectral_radius(o, xi).to_bits(), "{o}");
                }
            }
        }
    }

    /// For roots from the closed form, the metrics without the loop over the roots equal the
    /// general ones bit for bit (NaN and `None` included), over every scheme and a wide grid.
    #[test]
    fn deflated_metrics_equal_the_general_ones() {
        let mut omegas = log_space(1e-6, 1e6, 601);
        omegas.extend([0.0, 1e-300, 1e300]);
        let mut complex = 0;
        for s in schemes() {
            let p = Prepared::new(&s);
            for xi in [0.0, 0.05, 0.3, 1.0, 2.0] {
                for &o in &omegas {
                    let (c2, c1, c0) = p.coefficients(o, xi);
                    if let Some(z) = closed_form_roots(c2, c1, c0) {
                        let exact = ExactMode::new(xi);
                        let (got, want) = (
                            metrics_from_deflated(&z, o, exact),
                            metrics_from(&z, o, exact),
                        );
                        assert_eq!(
                            format!("{got:?}"),
                            format!("{want:?}"),
                            "{} {o} {xi}",
                            s.name()
                        );
                        complex += usize::from(want.principal().is_some());
                    }
                }
            }
        }
        assert!(complex > 1000, "{complex}");
    }

    /// NaN in, NaN out; an overflowing `Omega` gives NaN, never a panic.
    #[test]
    fn non_finite_points() {
        for s in schemes() {
            let p = Prepared::new(&s);
            for (o, xi) in [(f64::NAN, 0.0), (1.0, f64::NAN), (f64::INFINITY, 0.0)] {
                assert!(p.spectral_radius(o, xi).is_nan(), "{} {o} {xi}", s.name());
                assert!(p.metrics(o, xi).spectral_radius.is_nan());
            }
        }
    }
}
