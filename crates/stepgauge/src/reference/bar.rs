//! A bar struck at one end at constant speed: one-dimensional wave theory.

use super::{ReferenceProblem, finite, positive, sparse};
use crate::error::{Error, Result};
use crate::model::{Constraints, LinearModel, Tangent, TimeFunction};
use crate::state::State;

/// A uniform elastic bar (unit cross-section) of `elements` two-node elements with row-sum lumped
/// mass, at rest, whose near end (`x = 0`, DOF 0) is driven at the constant speed `v0` from
/// `t = 0` and whose far end (`x = L`, DOF `elements`) is free. The observed DOF is the free end.
///
/// # Reference solution: the continuum bar
///
/// One-dimensional wave theory (Kolsky, *Stress Waves in Solids*, 1963; Graff, *Wave Motion in
/// Elastic Solids*, 1975, ch. 2): `u_tt = c^2 u_xx`, `c = sqrt(E / rho)`, with `u(0, t) = v0 t`,
/// `u_x(L, t) = 0` (free end) and the bar at rest at `t = 0`. With the ramp `R(s) = s` for `s > 0`,
/// 0 otherwise, d'Alembert's solution with image sources is
///
/// ```text
/// u(x, t) = v0 sum_{n >= 0} (-1)^n [ R(t - (2 n L + x) / c) + R(t - (2 (n + 1) L - x) / c) ].
/// ```
///
/// The first term of each pair is a front leaving the driven end, the second its reflection at the
/// free end. Check: at `x = L` the pair's strains `-/+ (v0 / c) H` cancel, so `u_x(L, t) = 0`; at
/// `x = 0` the sum telescopes to `R(t) = t`, so `u(0, t) = v0 t`; each term is a function of
/// `t -+ x / c`, so the wave equation holds; before the first front (`t < x / c`) the bar is at
/// rest. A front leaving the driven end carries the particle speed `v0` and the stress
/// `-rho c v0`; at the free end it reflects with the same sign of displacement, doubling the
/// particle speed; back at the driven end it reflects with the opposite sign. At the free end,
///
/// ```text
/// u(L, t) = 2 v0 sum_{n >= 0} (-1)^n R(t - (2 n + 1) L / c):
///         = 0                   for t <= L / c,
///         = 2 v0 (t - L / c)    for L / c <= t <= 3 L / c,
///         = 4 v0 L / c          for 3 L / c <= t <= 5 L / c,  and so on,
/// ```
///
/// so the free end is alternately at rest and moving at `2 v0`. The standard run lasts `4 L / c`.
///
/// # How the discrete bar approaches it
///
/// The lumped chain is a dispersive medium: its highest frequency is `2 c / h` rather than
/// unbounded, short waves travel slower than `c`, and a front is smeared over a few elements and
/// followed by ringing. Displacements converge to the continuum's as the mesh is refined (slowly
/// near the kinks of `u(L, t)`), but velocities and stresses converge only in a weak (integral)
/// sense: the overshoot behind a front narrows under refinement without shrinking. The natural
/// frequencies reported are the chain's own, `omega_i = (2 c / h) sin((2 i - 1) pi / (4 N))`,
/// `i = 1..N` for `N` elements (the driven node held; a fixed-free chain with a half mass at the
/// free end is one half of a symmetric fixed-fixed chain of `2N` elements), which tend to the
/// continuum's `(2 i - 1) pi c / (2 L)`.
///
/// At the Courant number `c dt / h = 1` the central-difference scheme on this chain is exact at the
/// nodes (the "magic time step" of the one-dimensional wave equation); below it the dispersion
/// shows, mostly in the velocities. The problem is not [smooth](ReferenceProblem::is_smooth).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BarImpact {
    /// Number of elements (`>= 1`).
    pub elements: usize,
    /// Length `L`.
    pub length: f64,
    /// Young's modulus `E`.
    pub modulus: f64,
    /// Density `rho`.
    pub density: f64,
    /// Speed of the driven end.
    pub v0: f64,
}

/// The element count above which [`BarImpact`] does not validate: the model's `elements + 1`
/// DOFs must be indexable by the 32-bit column indices of [`CsrMatrix`](crate::linalg::CsrMatrix).
const MAX_ELEMENTS: usize = u32::MAX as usize - 1;

impl BarImpact {
    /// Our case: a steel-like bar, 100 elements, `L = 0.5` m, `E = 210` GPa,
    /// `rho = 7850` kg/m^3 (`c = 5172` m/s, `L / c = 96.7` us), driven at `v0 = 2` m/s.
    pub fn standard() -> Self {
        BarImpact {
            elements: 100,
            length: 0.5,
            modulus: 210e9,
            density: 7850.0,
            v0: 2.0,
        }
    }

    /// The wave speed `c = sqrt(E / rho)`.
    pub fn wave_speed(&self) -> f64 {
        (self.modulus / self.density).sqrt()
    }

    /// The element length `h = L / N`.
    pub fn element_length(&self) -> f64 {
        self.length / self.elements as f64
    }

    /// Continuum displacement at `x` in `[0, L]`, time `t`.
    ///
    /// NaN for a bar that does not [validate](ReferenceProblem::validate), an `x` outside
    /// `[0, L]`, a non-finite `t`, or a `t` so many periods `4 L / c` on that its phase within a period is lost to
    /// rounding (the rounding of `t` above a thousandth of a period). The cost does not grow with `t`: past two periods the motion is shifted back by
    /// whole periods (see [`BarImpact::period`]).
    pub fn displacement_at(&self, x: f64, t: f64) -> f64 {
        self.periodic(x, t, self.v0, |s| s.max(0.0))
    }

    /// Continuum particle velocity at `x`, `t` (at a front: the value just before it); NaN in the
    /// cases of [`displacement_at`](BarImpact::displacement_at).
    pub fn velocity_at(&self, x: f64, t: f64) -> f64 {
        self.periodic(x, t, 0.0, |s| if s > 0.0 { 1.0 } else { 0.0 })
    }

    /// The period `T = 4 L / c` of the motion: the velocity field repeats after `T`, and the
    /// displacement grows by `v0 T` per period.
    ///
    /// Derivation (from the image sum of the type's documentation, for `0 <= x <= L`, `t >= 0`):
    /// at `t + T` the pair `n` becomes the pair `n - 2` at `t` (the same sign `(-1)^n`), and the
    /// pairs `n = 0, 1` are then all past their fronts, contributing the ramps
    /// `(t + (4L - x)/c) + (t + (2L + x)/c) - (t + (2L - x)/c) - (t + x/c) = 4 L / c` times `v0`
    /// to the displacement and `1 + 1 - 1 - 1 = 0` to the velocity.
    pub fn period(&self) -> f64 {
        4.0 * self.length / self.wave_speed()
    }

    /// The image sum at `t` shifted back by whole periods (each adding `per_period` times the
    /// period), so that at most a few periods of images are summed.
    fn periodic(&self, x: f64, t: f64, per_period: f64, g: impl Fn(f64) -> f64) -> f64 {
        if self.validate().is_err() || !(0.0..=self.length).contains(&x) || !t.is_finite() {
            return f64::NAN;
        }
        let period = self.period();
        if !(period.is_finite() && period > 0.0) {
            return f64::NAN;
        }
        if t <= 2.0 * period {
            return self.image_sum(x, t, g);
        }
        // The rounding of t must leave the phase within a period known to a thousandth.
        if t * f64::EPSILON > 1e-3 * period {
            return f64::NAN;
        }
        let k = (t / period).floor() - 1.0;
        let shifted = t - k * period;
        if !(0.0..=3.0 * period).contains(&shifted) {
            return f64::NAN;
        }
        self.image_sum(x, shifted, g) + k * per_period * period
    }

    /// `v0 sum_n (-1)^n [g(t - (2nL + x)/c) + g(t - (2(n+1)L - x)/c)]` for `g` zero at `s <= 0`
    /// (a valid bar, finite `x` and `t`: then the loop ends after about `t c / (2 L)` terms).
    fn image_sum(&self, x: f64, t: f64, g: impl Fn(f64) -> f64) -> f64 {
        let (l, c) = (self.length, self.wave_speed());
        let mut sum = 0.0;
        let mut sign = 1.0;
        let mut n = 0.0;
        while (2.0 * n * l + x) / c < t {
            sum += sign * (g(t - (2.0 * n * l + x) / c) + g(t - (2.0 * (n + 1.0) * l - x) / c));
            sign = -sign;
            n += 1.0;
        }
        self.v0 * sum
    }
}

impl ReferenceProblem for BarImpact {
    fn name(&self) -> &'static str {
        "bar-impact"
    }
    fn description(&self) -> &'static str {
        "uniform elastic bar of lumped two-node elements driven at constant speed at one end, \
         free at the other"
    }
    fn source(&self) -> &'static str {
        "one-dimensional wave theory: Kolsky, Stress Waves in Solids, 1963; Graff, Wave Motion in \
         Elastic Solids, 1975, ch. 2 (continuum solution by images derived in the doc)"
    }
    fn validate(&self) -> Result<()> {
        if self.elements == 0 || self.elements >= MAX_ELEMENTS {
            return Err(Error::InvalidParameter {
                name: "elements",
                value: self.elements as f64,
                expected: "at least one element, and fewer than 2^32 - 1 (the sparse matrices index \
                           columns with 32 bits)",
            });
        }
        positive("length", self.length)?;
        positive("modulus", self.modulus)?;
        positive("density", self.density)?;
        finite("v0", self.v0)
    }
    fn model(&self) -> Result<Box<dyn Tangent + Send>> {
        self.validate()?;
        let ne = self.elements;
        let n = ne + 1;
        let h = self.element_length();
        let (m, k) = (self.density * h, self.modulus / h);
        let mut mass = Vec::with_capacity(n);
        let mut stiff = Vec::with_capacity(4 * ne);
        for i in 0..n {
            let ends = usize::from(i > 0) + usize::from(i < ne);
            mass.push((i, i, 0.5 * m * ends as f64));
            stiff.push((i, i, k * ends as f64));
            if i < ne {
                stiff.push((i, i + 1, -k));
                stiff.push((i + 1, i, -k));
            }
        }
        let model = LinearModel::new(&sparse(n, &mass), &sparse(n, &stiff))?.with_constraints(
            Constraints::new().prescribe_velocity(0, TimeFunction::Constant(self.v0)),
        )?;
        Ok(Box::new(model))
    }
    /// The bar at rest with the driven end moving at `v0`; an empty state for a bar that does not
    /// validate (whose model cannot be built either).
    fn initial_state(&self) -> State {
        if self.validate().is_err() {
            return State::at_rest(0, 0.0);
        }
        let mut s = State::at_rest(self.elements + 1, 0.0);
        s.v[0] = self.v0;
        s
    }
    fn t_end(&self) -> f64 {
        4.0 * self.length / self.wave_speed()
    }
    fn observed_dof(&self) -> usize {
        self.elements
    }
    fn exact(&self, t: f64) -> f64 {
        self.displacement_at(self.length, t)
    }
    fn exact_velocity(&self, t: f64) -> f64 {
        self.velocity_at(self.length, t)
    }
    fn is_smooth(&self) -> bool {
        false
    }
    /// The chain's frequencies; empty for a bar that does not validate.
    fn natural_frequencies(&self) -> Vec<f64> {
        if self.validate().is_err() {
            return Vec::new();
        }
        let n = self.elements as f64;
        let w = 2.0 * self.wave_speed() / self.element_length();
        (1..=self.elements)
            .map(|i| w * ((2.0 * i as f64 - 1.0) * std::f64::consts::PI / (4.0 * n)).sin())
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The continuum solution: the driven end moves at v0, the free end is stress-free, the bar is
    /// at rest ahead of the first front, which travels at c = sqrt(E / rho); the free end moves at
    /// 2 v0 between L / c and 3 L / c and rests between 3 L / c and 5 L / c; the wave equation
    /// holds away from the fronts (Kolsky 1963; Graff 1975, ch. 2).
    #[test]
    fn continuum_solution_has_the_right_speed_ends_and_free_end_velocity() {
        let p = BarImpact::standard();
        let (l, c, v0) = (p.length, p.wave_speed(), p.v0);
        let tl = l / c;
        assert!((c - 5172.2).abs() < 0.1, "{c}");
        for t in [0.1, 0.9, 1.5, 2.2, 3.7, 6.1].map(|s| s * tl) {
            // Driven end.
            assert!((p.displacement_at(0.0, t) - v0 * t).abs() < 1e-15, "t {t}");
            // Free end: no strain (one-sided difference over a small part of an element).
            let dx = 1e-6 * l;
            let strain = (p.displacement_at(l, t) - p.displacement_at(l - dx, t)) / dx;
            assert!(strain.abs() < 1e-9, "t {t}: {strain}");
        }
        // The front: at x, motion starts at x / c.
        for x in [0.2, 0.5, 0.9].map(|s| s * l) {
            assert_eq!(p.displacement_at(x, 0.999 * x / c), 0.0);
            assert!(p.displacement_at(x, 1.001 * x / c) > 0.0);
            // Behind it, before its reflection returns (at (2 L - x) / c): particle speed v0 and
            // strain -v0 / c (stress -rho c v0).
            let t = tl;
            let dx = 1e-6 * l;
            let strain = (p.displacement_at(x + dx, t) - p.displacement_at(x - dx, t)) / (2.0 * dx);
            assert!((strain + v0 / c).abs() < 1e-9 * v0 / c, "x {x}: {strain}");
            assert_eq!(p.velocity_at(x, t), v0);
        }
        // Free end velocity: 0, 2 v0, 0, 2 v0 on the successive transits.
        for (s, v) in [
            (0.5, 0.0),
            (1.2, 2.0),
            (2.9, 2.0),
            (3.1, 0.0),
            (4.9, 0.0),
            (5.1, 2.0),
        ] {
            assert_eq!(p.exact_velocity(s * tl), v * v0, "t = {s} L/c");
        }
        assert!((p.exact(2.0 * tl) - 2.0 * v0 * tl).abs() < 1e-15);
        assert!((p.exact(4.0 * tl) - 4.0 * v0 * tl).abs() < 1e-15);
        // Wave equation u_tt = c^2 u_xx at points away from the fronts (central differences;
        // both sides vanish for a piecewise-linear field, the check is that they agree).
        for (xs, ts) in [(0.3, 0.2), (0.3, 0.5), (0.7, 1.6), (0.1, 2.5), (0.55, 3.3)] {
            let (x, t) = (xs * l, ts * tl);
            let (dx, dt) = (1e-4 * l, 1e-4 * tl);
            let u = |x: f64, t: f64| p.displacement_at(x, t);
            let utt = (u(x, t + dt) - 2.0 * u(x, t) + u(x, t - dt)) / (dt * dt);
            let uxx = (u(x + dx, t) - 2.0 * u(x, t) + u(x - dx, t)) / (dx * dx);
            assert!(
                (utt - c * c * uxx).abs() < 1e-6 * v0 * c / l,
                "({xs}, {ts}): {utt} {uxx}"
            );
        }
    }

    /// The chain's frequencies satisfy K phi = omega^2 M phi with the driven node held: checked by
    /// the Sturm count of the tridiagonal K - lambda M just below and above each one.
    #[test]
    fn chain_frequencies_are_the_eigenvalues_of_the_model() {
        let p = BarImpact {
            elements: 7,
            ..BarImpact::standard()
        };
        let h = p.element_length();
        let (m, k) = (p.density * h, p.modulus / h);
        let n = p.elements; // free nodes 1..=n
        // Number of eigenvalues below lambda = number of negative pivots of K - lambda M.
        let count_below = |lambda: f64| {
            let mut below = 0;
            let mut d_prev = 1.0;
            for i in 1..=n {
                let (mi, ki) = if i == n { (0.5 * m, k) } else { (m, 2.0 * k) };
                let mut d = ki - lambda * mi;
                if i > 1 {
                    d -= k * k / d_prev;
                }
                if d < 0.0 {
                    below += 1;
                }
                d_prev = d;
            }
            below
        };
        for (i, w) in p.natural_frequencies().iter().enumerate() {
            let l = w * w;
            assert_eq!(count_below(l * (1.0 - 1e-9)), i, "mode {i}");
            assert_eq!(count_below(l * (1.0 + 1e-9)), i + 1, "mode {i}");
        }
        // And they tend to the continuum's (2 i - 1) pi c / (2 L).
        let fine = BarImpact::standard();
        let w1 = fine.natural_frequencies()[0];
        let w1c = std::f64::consts::PI * fine.wave_speed() / (2.0 * fine.length);
        assert!((w1 - w1c).abs() < 1e-4 * w1c);
    }

    /// Shifting by whole periods gives what the image sum itself gives (the derivation on
    /// [`BarImpact::period`]), and late or absurd times end at once.
    #[test]
    fn late_times_use_the_period() {
        let p = BarImpact::standard();
        let period = p.period();
        for x in [0.0, 0.13, 0.5].map(|s| s * p.length) {
            for s in [2.3, 3.05, 7.71, 40.2] {
                let t = s * period;
                let direct = p.image_sum(x, t, |s| s.max(0.0));
                let shifted = p.displacement_at(x, t);
                assert!(
                    (shifted - direct).abs() <= 1e-9 * direct.abs(),
                    "{x} {s}: {shifted} {direct}"
                );
                let direct_v = p.image_sum(x, t, |s| if s > 0.0 { 1.0 } else { 0.0 });
                assert_eq!(p.velocity_at(x, t), direct_v, "{x} {s}");
            }
        }
        // A year of simulated time: finite, and the mean speed of the bar is v0.
        let t = 3.15e7;
        assert!((p.displacement_at(p.length, t) / (p.v0 * t) - 1.0).abs() < 1e-6);
        for t in [f64::INFINITY, f64::NAN, 1e300] {
            assert!(p.exact(t).is_nan(), "{t}");
        }
        // A bar of no length would sum images for ever: refused with NaN.
        let flat = BarImpact {
            length: 0.0,
            ..BarImpact::standard()
        };
        assert!(flat.exact(1.0).is_nan() && flat.exact_velocity(1.0).is_nan());
        let huge = BarImpact {
            elements: usize::MAX,
            ..BarImpact::standard()
        };
        assert!(huge.model().is_err());
        assert_eq!(huge.initial_state().dofs(), 0);
        assert!(huge.natural_frequencies().is_empty());
    }

    #[test]
    fn bad_bars_are_refused() {
        let p = BarImpact {
            elements: 0,
            ..BarImpact::standard()
        };
        assert!(p.model().is_err());
        let p = BarImpact {
            density: -1.0,
            ..BarImpact::standard()
        };
        assert!(matches!(
            p.validate().unwrap_err(),
            Error::InvalidParameter {
                name: "density",
                ..
            }
        ));
    }
}
