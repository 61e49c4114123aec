//! Single-DOF oscillators `m u'' + c u' + k u = f(t)` with closed-form solutions, derived in
//! the [`reference`](crate::reference#single-dof-solutions) module documentation.

use std::f64::consts::PI;

use super::{ReferenceProblem, finite, non_negative, positive, sinc, sparse};
use crate::error::Result;
use crate::model::{LinearModel, Load, Tangent, TimeFunction};
use crate::state::State;

/// Unit impulse response `(h(t), h'(t))` of `h'' + 2 xi omega h' + omega^2 h = 0`,
/// `h(0) = 0`, `h'(0) = 1`, in every damping regime (see the `reference` module documentation).
// `xi == 1` selects the critically damped form exactly; near it the other two are accurate.
#[allow(clippy::float_cmp)]
pub(crate) fn impulse_response(omega: f64, xi: f64, t: f64) -> (f64, f64) {
    if xi < 1.0 {
        let wd = omega * ((1.0 - xi) * (1.0 + xi)).sqrt();
        let e = (-xi * omega * t).exp();
        let s = t * sinc(wd * t); // sin(wd t) / wd
        let c = (wd * t).cos();
        (e * s, e * (c - xi * omega * s))
    } else if xi == 1.0 {
        let e = (-omega * t).exp();
        (e * t, e * (1.0 - omega * t))
    } else {
        let wh = omega * ((xi - 1.0) * (xi + 1.0)).sqrt();
        let s2 = -xi * omega - wh;
        // s1 s2 = omega^2: s1 = -xi omega + wh without cancellation.
        let s1 = omega * omega / s2;
        if 2.0 * wh * t < 1.0 {
            let e2 = (s2 * t).exp();
            let m1 = (2.0 * wh * t).exp_m1();
            let es = e2 * m1 / (2.0 * wh); // e sinh(wh t) / wh
            let ec = e2 * (1.0 + 0.5 * m1); // e cosh(wh t)
            (es, ec - xi * omega * es)
        } else {
            let (e1, e2) = ((s1 * t).exp(), (s2 * t).exp());
            ((e1 - e2) / (2.0 * wh), (s1 * e1 - s2 * e2) / (2.0 * wh))
        }
    }
}

/// Free response `(u, v)` at `t` from `(u0, v0)` at 0.
pub(crate) fn free_response(omega: f64, xi: f64, u0: f64, v0: f64, t: f64) -> (f64, f64) {
    let (h, hd) = impulse_response(omega, xi, t);
    (
        u0 * (hd + 2.0 * xi * omega * h) + v0 * h,
        -omega * omega * u0 * h + v0 * hd,
    )
}

/// Response `(u, v)` at `t` to `f0 sin(w t)` from rest (see the `reference` module documentation).
pub(crate) fn harmonic_from_rest(m: f64, k: f64, xi: f64, f0: f64, w: f64, t: f64) -> (f64, f64) {
    let omega = (k / m).sqrt();
    let a = f0 / k;
    let r = w / omega;
    if xi == 0.0 {
        let sigma = 0.5 * (omega + w);
        let d = 0.5 * (omega - w);
        let s = t * sinc(d * t);
        let g = a / (1.0 + r);
        let (cs, ss) = ((sigma * t).cos(), (sigma * t).sin());
        let u = g * ((omega * t).sin() - omega * cs * s);
        let v = g * omega * ((omega * t).cos() + sigma * ss * s - cs * (d * t).cos());
        (u, v)
    } else {
        let one_r2 = (1.0 - r) * (1.0 + r);
        let q = one_r2 * one_r2 + (2.0 * xi * r).powi(2);
        let c = a * one_r2 / q;
        let dd = -a * 2.0 * xi * r / q;
        let (sw, cw) = ((w * t).sin(), (w * t).cos());
        let (uf, vf) = free_response(omega, xi, -dd, -w * c, t);
        (c * sw + dd * cw + uf, w * (c * cw - dd * sw) + vf)
    }
}

/// Checks `m`, `k` and `xi` of a single-DOF oscillator.
fn check_mkxi(m: f64, k: f64, xi: f64) -> Result<()> {
    positive("m", m)?;
    positive("k", k)?;
    non_negative("xi", xi)
}

/// The linear single-DOF model with Rayleigh damping `a0 = 2 xi omega` (so `c = a0 m`) and load
/// `factor(t)`.
fn sdof_model(m: f64, k: f64, xi: f64, factor: Option<TimeFunction>) -> Result<LinearModel> {
    let mut model = LinearModel::new(&sparse(1, &[(0, 0, m)]), &sparse(1, &[(0, 0, k)]))?;
    if xi > 0.0 {
        model = model.with_rayleigh(2.0 * xi * (k / m).sqrt(), 0.0)?;
    }
    if let Some(factor) = factor {
        model = model.with_load(Load::Pattern {
            pattern: vec![1.0],
            factor,
        })?;
    }
    Ok(model)
}

/// Free vibration of a single-DOF oscillator: `m u'' + c u' + k u = 0`, `c = 2 xi sqrt(k m)`,
/// from `u(0) = u0`, `u'(0) = v0`.
///
/// Exact in every damping regime: undamped and underdamped as in Chopra, *Dynamics of Structures*,
/// secs. 2.1-2.2; critically damped and overdamped derived in the [module
/// documentation](crate::reference#single-dof-solutions). The standard run lasts three undamped
/// natural periods.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SdofFree {
    /// Mass.
    pub m: f64,
    /// Stiffness.
    pub k: f64,
    /// Damping ratio (any value `>= 0`).
    pub xi: f64,
    /// Initial displacement.
    pub u0: f64,
    /// Initial velocity.
    pub v0: f64,
}

impl SdofFree {
    /// Our undamped case: `m = 2`, `k = 200` (`omega = 10` rad/s), `u0 = 0.02`, `v0 = -0.3`.
    pub fn standard_undamped() -> Self {
        SdofFree {
            m: 2.0,
            k: 200.0,
            xi: 0.0,
            u0: 0.02,
            v0: -0.3,
        }
    }

    /// Our damped case: as [`standard_undamped`](SdofFree::standard_undamped) with `xi = 0.05`.
    pub fn standard_damped() -> Self {
        SdofFree {
            xi: 0.05,
            ..Self::standard_undamped()
        }
    }

    fn omega(&self) -> f64 {
        (self.k / self.m).sqrt()
    }

    /// Exact `(u, v)` at `t`.
    pub fn response(&self, t: f64) -> (f64, f64) {
        free_response(self.omega(), self.xi, self.u0, self.v0, t)
    }
}

impl ReferenceProblem for SdofFree {
    #[allow(clippy::float_cmp)] // the regime named exactly as `impulse_response` selects it
    fn name(&self) -> &'static str {
        if self.xi == 0.0 {
            "sdof-free-undamped"
        } else if self.xi < 1.0 {
            "sdof-free-underdamped"
        } else if self.xi == 1.0 {
            "sdof-free-critically-damped"
        } else {
            "sdof-free-overdamped"
        }
    }
    fn description(&self) -> &'static str {
        "single-DOF oscillator released from an initial displacement and velocity"
    }
    fn source(&self) -> &'static str {
        "Chopra, Dynamics of Structures, ch. 2, secs. 2.1-2.2 (undamped and viscously damped free \
         vibration); critically damped and overdamped cases: exact solution (derived in the doc)"
    }
    fn validate(&self) -> Result<()> {
        check_mkxi(self.m, self.k, self.xi)?;
        finite("u0", self.u0)?;
        finite("v0", self.v0)
    }
    fn model(&self) -> Result<Box<dyn Tangent + Send>> {
        self.validate()?;
        Ok(Box::new(sdof_model(self.m, self.k, self.xi, None)?))
    }
    fn initial_state(&self) -> State {
        let mut s = State::at_rest(1, 0.0);
        s.u[0] = self.u0;
        s.v[0] = self.v0;
        s
    }
    fn t_end(&self) -> f64 {
        3.0 * 2.0 * PI / self.omega()
    }
    fn observed_dof(&self) -> usize {
        0
    }
    fn exact(&self, t: f64) -> f64 {
        self.response(t).0
    }
    fn exact_velocity(&self, t: f64) -> f64 {
        self.response(t).1
    }
    fn is_smooth(&self) -> bool {
        true
    }
    fn natural_frequencies(&self) -> Vec<f64> {
        vec![self.omega()]
    }
}

/// A harmonic load from rest: `m u'' + c u' + k u = f0 sin(w t)`, `c = 2 xi sqrt(k m)`,
/// `u(0) = u'(0) = 0`.
///
/// Exact transient plus steady state (Chopra, *Dynamics of Structures*, secs. 3.1-3.2), in a form
/// that also holds at resonance (`xi = 0`, `w = omega`: the secular term `t cos(omega t)`), derived
/// in the [module documentation](crate::reference#single-dof-solutions). The standard run lasts
/// three periods of the longer of the natural and the load period.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SdofHarmonic {
    /// Mass.
    pub m: f64,
    /// Stiffness.
    pub k: f64,
    /// Damping ratio (any value `>= 0`).
    pub xi: f64,
    /// Load amplitude.
    pub f0: f64,
    /// Load circular frequency (rad/s), `> 0`.
    pub w: f64,
}

impl SdofHarmonic {
    /// Our damped case: `m = 1.5`, `k = 60` (`omega = sqrt(40)` rad/s), `xi = 0.05`, `f0 = 10`,
    /// `w = 4` rad/s.
    pub fn standard_damped() -> Self {
        SdofHarmonic {
            m: 1.5,
            k: 60.0,
            xi: 0.05,
            f0: 10.0,
            w: 4.0,
        }
    }

    /// Our resonant case: `m = 1`, `k = 16` (`omega = 4` rad/s exactly), `xi = 0`, `f0 = 8`,
    /// `w = 4` rad/s; the amplitude grows like `(f0 / 2k) omega t`.
    pub fn standard_resonant() -> Self {
        SdofHarmonic {
            m: 1.0,
            k: 16.0,
            xi: 0.0,
            f0: 8.0,
            w: 4.0,
        }
    }

    fn omega(&self) -> f64 {
        (self.k / self.m).sqrt()
    }

    /// Exact `(u, v)` at `t`.
    pub fn response(&self, t: f64) -> (f64, f64) {
        harmonic_from_rest(self.m, self.k, self.xi, self.f0, self.w, t)
    }
}

impl ReferenceProblem for SdofHarmonic {
    fn name(&self) -> &'static str {
        if self.xi > 0.0 {
            "sdof-harmonic-damped"
        } else if (self.w / self.omega() - 1.0).abs() < 1e-12 {
            "sdof-harmonic-resonant"
        } else {
            "sdof-harmonic-undamped"
        }
    }
    fn description(&self) -> &'static str {
        "single-DOF oscillator driven from rest by a harmonic force (transient plus steady state)"
    }
    fn source(&self) -> &'static str {
        "Chopra, Dynamics of Structures, ch. 3, secs. 3.1-3.2 (harmonic vibration of undamped \
         and viscously damped systems); resonance-safe undamped form: exact solution (derived \
         in the doc)"
    }
    fn validate(&self) -> Result<()> {
        check_mkxi(self.m, self.k, self.xi)?;
        finite("f0", self.f0)?;
        positive("w", self.w)
    }
    fn model(&self) -> Result<Box<dyn Tangent + Send>> {
        self.validate()?;
        let (f0, w) = (self.f0, self.w);
        let factor = TimeFunction::function(move |t| f0 * (w * t).sin());
        Ok(Box::new(sdof_model(self.m, self.k, self.xi, Some(factor))?))
    }
    fn initial_state(&self) -> State {
        State::at_rest(1, 0.0)
    }
    fn t_end(&self) -> f64 {
        3.0 * 2.0 * PI / self.omega().min(self.w)
    }
    fn observed_dof(&self) -> usize {
        0
    }
    fn exact(&self, t: f64) -> f64 {
        self.response(t).0
    }
    fn exact_velocity(&self, t: f64) -> f64 {
        self.response(t).1
    }
    fn is_smooth(&self) -> bool {
        true
    }
    fn natural_frequencies(&self) -> Vec<f64> {
        vec![self.omega()]
    }
}

/// A half-sine pulse from rest: `m u'' + c u' + k u = f(t)`, `c = 2 xi sqrt(k m)`, with
/// `f = f0 sin(pi t / t_d)` for `0 <= t < t_d` and `f = 0` after.
///
/// The configuration of Chopra, *Dynamics of Structures*, ch. 4 ("half-cycle sine pulse force"),
/// with our own numbers. Exact and piecewise: during the pulse the harmonic solution from rest
/// with `w = pi / t_d` ([`SdofHarmonic`], resonance-safe at `t_d = T_n / 2`), after it the free
/// response ([`SdofFree`]) from the state reached at `t_d`; damped as well as undamped. The
/// displacement, velocity and acceleration are continuous at `t_d`; the load's slope jumps there,
/// and with it `u'''`, so the problem is not [smooth](ReferenceProblem::is_smooth): the order a
/// scheme can show is capped at three (second-order schemes keep theirs). The standard run lasts
/// `t_d` plus two natural periods.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SdofHalfSine {
    /// Mass.
    pub m: f64,
    /// Stiffness.
    pub k: f64,
    /// Damping ratio (any value `>= 0`).
    pub xi: f64,
    /// Pulse amplitude.
    pub f0: f64,
    /// Pulse duration, `> 0`.
    pub t_d: f64,
}

impl SdofHalfSine {
    /// A pulse problem with the given mass `m`, stiffness `k`, damping ratio `xi`, amplitude
    /// `f0` and duration `t_d`, checked as [`validate`](ReferenceProblem::validate) checks them.
    ///
    /// ```
    /// use stepgauge::reference::{ReferenceProblem, SdofHalfSine};
    /// let p = SdofHalfSine::new(0.2533, 10.0, 0.05, 10.0, 0.6).unwrap();
    /// assert_eq!(p.exact(0.0), 0.0);
    /// assert!(SdofHalfSine::new(0.2533, 10.0, 0.05, 10.0, 0.0).is_err());
    /// ```
    ///
    /// # Errors
    /// [`Error::InvalidParameter`](crate::Error::InvalidParameter) for a non-positive or
    /// non-finite `m`, `k` or `t_d`, a negative or non-finite `xi`, or a non-finite `f0`.
    pub fn new(m: f64, k: f64, xi: f64, f0: f64, t_d: f64) -> Result<Self> {
        let p = SdofHalfSine { m, k, xi, f0, t_d };
        p.validate()?;
        Ok(p)
    }

    /// Our undamped case: `m = 0.5`, `k = 50` (`omega = 10` rad/s, `T_n = 0.628` s), `f0 = 20`,
    /// `t_d = 0.5` s (`t_d / T_n = 0.80`).
    pub fn standard_undamped() -> Self {
        SdofHalfSine {
            m: 0.5,
            k: 50.0,
            xi: 0.0,
            f0: 20.0,
            t_d: 0.5,
        }
    }

    /// Our damped case: as [`standard_undamped`](SdofHalfSine::standard_undamped) with `xi = 0.05`.
    pub fn standard_damped() -> Self {
        SdofHalfSine {
            xi: 0.05,
            ..Self::standard_undamped()
        }
    }

    fn omega(&self) -> f64 {
        (self.k / self.m).sqrt()
    }

    /// Exact `(u, v)` at `t`.
    pub fn response(&self, t: f64) -> (f64, f64) {
        let w = PI / self.t_d;
        if t <= self.t_d {
            harmonic_from_rest(self.m, self.k, self.xi, self.f0, w, t)
        } else {
            let (ud, vd) = harmonic_from_rest(self.m, self.k, self.xi, self.f0, w, self.t_d);
            free_response(self.omega(), self.xi, ud, vd, t - self.t_d)
        }
    }

    /// The load at `t`.
    pub fn force(&self, t: f64) -> f64 {
        pulse(self.f0, self.t_d, t)
    }
}

fn pulse(f0: f64, t_d: f64, t: f64) -> f64 {
    if (0.0..t_d).contains(&t) {
        f0 * (PI * t / t_d).sin()
    } else {
        0.0
    }
}

impl ReferenceProblem for SdofHalfSine {
    fn name(&self) -> &'static str {
        if self.xi == 0.0 {
            "sdof-half-sine-undamped"
        } else {
            "sdof-half-sine-damped"
        }
    }
    fn description(&self) -> &'static str {
        "single-DOF oscillator struck from rest by a half-sine force pulse"
    }
    fn source(&self) -> &'static str {
        "Chopra, Dynamics of Structures, ch. 4 (half-cycle sine pulse force: forced phase, then \
         free vibration); damped case: exact solution (derived in the doc)"
    }
    fn validate(&self) -> Result<()> {
        check_mkxi(self.m, self.k, self.xi)?;
        finite("f0", self.f0)?;
        positive("t_d", self.t_d)
    }
    fn model(&self) -> Result<Box<dyn Tangent + Send>> {
        self.validate()?;
        let (f0, t_d) = (self.f0, self.t_d);
        let factor = TimeFunction::function(move |t| pulse(f0, t_d, t));
        Ok(Box::new(sdof_model(self.m, self.k, self.xi, Some(factor))?))
    }
    fn initial_state(&self) -> State {
        State::at_rest(1, 0.0)
    }
    fn t_end(&self) -> f64 {
        self.t_d + 2.0 * 2.0 * PI / self.omega()
    }
    fn observed_dof(&self) -> usize {
        0
    }
    fn exact(&self, t: f64) -> f64 {
        self.response(t).0
    }
    fn exact_velocity(&self, t: f64) -> f64 {
        self.response(t).1
    }
    fn is_smooth(&self) -> bool {
        false
    }
    fn natural_frequencies(&self) -> Vec<f64> {
        vec![self.omega()]
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Largest residual of `m a + c v + k u - f` over 2000 times in `(0, t_end]`, with `v` from the
    /// exact velocity and `a` its five-point central difference, relative to the largest term of
    /// the equation over the run; also the largest mismatch between the exact velocity and the
    /// central difference of the displacement, relative to `max|v|`. Times within `3h` of `skip`
    /// are left out (a kink of the load). The step is `h = 1e-4`, or `1e-3 / rate` when the fastest
    /// rate of the solution (`omega (xi + sqrt(xi^2 - 1))` when overdamped) exceeds 10 /s.
    fn residuals(
        p: &dyn ReferenceProblem,
        m: f64,
        k: f64,
        xi: f64,
        force: impl Fn(f64) -> f64,
        skip: Option<f64>,
    ) -> (f64, f64) {
        let omega = (k / m).sqrt();
        let h = step(omega, xi);
        let c = 2.0 * xi * m * omega;
        let n = 2000;
        let ts: Vec<f64> = (1..=n)
            .map(|i| p.t_end() * i as f64 / n as f64)
            .filter(|t| !skip.is_some_and(|s| (t - s).abs() < 3.0 * h))
            .collect();
        // Per time: the terms m a, c v, k u, f, and the velocity from differences.
        let rows: Vec<([f64; 4], f64, f64)> = ts
            .iter()
            .map(|&t| {
                let a = derivative(|t| p.exact_velocity(t), t, h);
                let v = p.exact_velocity(t);
                let terms = [m * a, c * v, k * p.exact(t), -force(t)];
                let vd = derivative(|t| p.exact(t), t, h);
                (terms, v, vd)
            })
            .collect();
        let scale = rows
            .iter()
            .flat_map(|r| r.0)
            .fold(0.0, |x: f64, y| x.max(y.abs()));
        let vmax = rows.iter().fold(0.0, |x: f64, r| x.max(r.1.abs()));
        let (mut eq, mut vel): (f64, f64) = (0.0, 0.0);
        for (terms, v, vd) in rows {
            eq = eq.max(terms.iter().sum::<f64>().abs() / scale);
            vel = vel.max((vd - v).abs() / vmax);
        }
        (eq, vel)
    }

    /// The five-point difference errs by `h^4 |f^(5)| / 30`, about `(rate h)^4 / 30` relative
    /// (below 1e-12 here); round-off adds about `1e-16 / (rate h)`, below 1e-12 too.
    fn tolerance() -> f64 {
        1e-10
    }

    /// The fastest rate in the free response.
    fn rate(omega: f64, xi: f64) -> f64 {
        if xi > 1.0 {
            omega * (xi + (xi * xi - 1.0).sqrt())
        } else {
            omega
        }
    }

    /// The five-point central difference `f'(t)`: `(f(t-2h) - 8 f(t-h) + 8 f(t+h) - f(t+2h)) /
    /// 12h`.
    fn derivative(f: impl Fn(f64) -> f64, t: f64, h: f64) -> f64 {
        (f(t - 2.0 * h) - 8.0 * f(t - h) + 8.0 * f(t + h) - f(t + 2.0 * h)) / (12.0 * h)
    }

    /// The difference step: 1e-4, smaller for fast solutions.
    fn step(omega: f64, xi: f64) -> f64 {
        1e-4f64.min(1e-3 / rate(omega, xi))
    }

    /// Free vibration satisfies `m u'' + c u' + k u = 0` and its initial conditions in every
    /// damping regime, including critically and overdamped (xi = 1, 3, 30).
    #[test]
    fn free_vibration_satisfies_its_equation_in_every_regime() {
        for xi in [0.0, 0.05, 0.7, 1.0, 1.0 + 1e-7, 3.0, 30.0] {
            let p = SdofFree {
                xi,
                ..SdofFree::standard_undamped()
            };
            let (eq, vel) = residuals(&p, p.m, p.k, xi, |_| 0.0, None);
            let tol = tolerance();
            assert!(
                eq < tol && vel < tol,
                "xi {xi}: {eq:e} {vel:e} (tol {tol:e})"
            );
            assert_eq!(p.exact(0.0), p.u0);
            assert!((p.exact_velocity(0.0) - p.v0).abs() < 1e-15);
        }
    }

    /// The regimes join continuously at xi = 1 (the forms differ, the solution does not).
    #[test]
    fn free_vibration_is_continuous_across_critical_damping() {
        for t in [0.01, 0.1, 0.3, 1.0] {
            let at = |xi: f64| {
                SdofFree {
                    xi,
                    ..SdofFree::standard_undamped()
                }
                .response(t)
            };
            let (c, below, above) = (at(1.0), at(1.0 - 1e-9), at(1.0 + 1e-9));
            for (x, y) in [(c, below), (c, above)] {
                assert!((x.0 - y.0).abs() < 1e-10, "t {t}: {x:?} {y:?}");
                assert!((x.1 - y.1).abs() < 1e-9, "t {t}: {x:?} {y:?}");
            }
        }
    }

    /// Logarithmic decrement: successive peaks of the underdamped response are in the ratio
    /// exp(2 pi xi / sqrt(1 - xi^2)) (Chopra, *Dynamics of Structures*, sec. 2.2), one damped
    /// period apart.
    #[test]
    fn underdamped_peaks_decay_by_the_logarithmic_decrement() {
        let p = SdofFree::standard_damped();
        let w = (p.k / p.m).sqrt();
        let td = 2.0 * PI / (w * (1.0 - p.xi * p.xi).sqrt());
        for t in [0.1, 0.37, 0.8] {
            let ratio = p.exact(t) / p.exact(t + td);
            let expected = (2.0 * PI * p.xi / (1.0 - p.xi * p.xi).sqrt()).exp();
            assert!((ratio - expected).abs() < 1e-12, "{ratio} vs {expected}");
        }
    }

    /// The harmonic response satisfies its equation of motion and starts from rest, damped,
    /// undamped, near resonance and at resonance.
    #[test]
    fn harmonic_response_satisfies_its_equation() {
        let cases = [
            SdofHarmonic::standard_damped(),
            SdofHarmonic::standard_resonant(),
            SdofHarmonic {
                w: 4.0 * (1.0 + 1e-9),
                ..SdofHarmonic::standard_resonant()
            },
            SdofHarmonic {
                w: 9.0,
                ..SdofHarmonic::standard_resonant()
            },
            SdofHarmonic {
                xi: 2.0,
                ..SdofHarmonic::standard_damped()
            },
        ];
        for p in cases {
            let (f0, w) = (p.f0, p.w);
            let (eq, vel) = residuals(&p, p.m, p.k, p.xi, |t| f0 * (w * t).sin(), None);
            let tol = tolerance();
            assert!(eq < tol && vel < tol, "{p:?}: {eq:e} {vel:e} (tol {tol:e})");
            assert_eq!(p.exact(0.0), 0.0);
            assert!(p.exact_velocity(0.0).abs() < 1e-15, "{p:?}");
        }
    }

    /// At resonance the undamped response is u = (A / 2)(sin(omega t) - omega t cos(omega t))
    /// (Chopra, *Dynamics of Structures*, sec. 3.1): at t = 2 pi n / omega it equals -pi n A.
    /// Near resonance the resonance-safe form agrees with it to the size of the detuning.
    #[test]
    fn resonance_grows_linearly_and_is_approached_continuously() {
        let p = SdofHarmonic::standard_resonant();
        let a = p.f0 / p.k;
        for n in 1..=5 {
            let t = 2.0 * PI * n as f64 / 4.0;
            let expected = -PI * n as f64 * a;
            assert!((p.exact(t) - expected).abs() < 1e-13, "n {n}");
        }
        let near = SdofHarmonic {
            w: 4.0 * (1.0 + 1e-7),
            ..p
        };
        for t in [0.3, 2.0, 7.0] {
            assert!((near.exact(t) - p.exact(t)).abs() < 1e-5 * a, "t {t}");
        }
    }

    /// Long after the start the damped response is the steady state, of amplitude
    /// A / sqrt((1 - r^2)^2 + (2 xi r)^2) (Chopra, *Dynamics of Structures*, sec. 3.2).
    #[test]
    fn damped_harmonic_response_settles_to_the_steady_state_amplitude() {
        let p = SdofHarmonic::standard_damped();
        let r = p.w / (p.k / p.m).sqrt();
        let rd = 1.0 / ((1.0 - r * r).powi(2) + (2.0 * p.xi * r).powi(2)).sqrt();
        let t = 200.0; // exp(-xi omega t) = exp(-63)
        let (u, v) = p.response(t);
        let amplitude = (u * u + (v / p.w).powi(2)).sqrt();
        let expected = p.f0 / p.k * rd;
        assert!((amplitude - expected).abs() < 1e-12 * expected);
    }

    /// The half-sine response satisfies its equation of motion on both sides of t_d, and the
    /// displacement and velocity are continuous at t_d.
    #[test]
    fn half_sine_response_satisfies_its_equation_and_is_continuous() {
        for p in [
            SdofHalfSine::standard_undamped(),
            SdofHalfSine::standard_damped(),
            // Pulse duration half the natural period: the forced phase is at resonance.
            SdofHalfSine {
                t_d: PI / 10.0,
                ..SdofHalfSine::standard_undamped()
            },
        ] {
            let (eq, vel) = residuals(&p, p.m, p.k, p.xi, |t| p.force(t), Some(p.t_d));
            let tol = tolerance();
            assert!(eq < tol && vel < tol, "{p:?}: {eq:e} {vel:e}");
            let eps = 1e-9;
            let (before, after) = (p.response(p.t_d - eps), p.response(p.t_d + eps));
            let (ud, vd) = p.response(p.t_d);
            let w = (p.k / p.m).sqrt();
            // Across 2 eps, u changes by about 2 eps v and v by about 2 eps a, |a| <= w^2 max|u|.
            assert!((after.0 - before.0).abs() < 3.0 * eps * vd.abs() + 1e-15);
            assert!((after.1 - before.1).abs() < 3.0 * eps * w * w * ud.abs().max(1e-3));
        }
    }

    /// After an undamped half-sine pulse the free vibration has the amplitude of Chopra's
    /// closed form (*Dynamics of Structures*, ch. 4, half-cycle sine pulse, phase t >= t_d):
    /// u_max / u_st = (T_n / t_d) |cos(pi t_d / T_n)| / |(T_n / 2 t_d)^2 - 1|.
    #[test]
    fn half_sine_free_phase_amplitude_matches_the_textbook_form() {
        for t_d in [0.2, 0.5, 1.3] {
            let p = SdofHalfSine {
                t_d,
                ..SdofHalfSine::standard_undamped()
            };
            let w = (p.k / p.m).sqrt();
            let tn = 2.0 * PI / w;
            let expected = p.f0 / p.k * (tn / t_d) * (PI * t_d / tn).cos().abs()
                / ((tn / (2.0 * t_d)).powi(2) - 1.0).abs();
            for t in [t_d + 0.1, t_d + 1.7] {
                let (u, v) = p.response(t);
                let amplitude = (u * u + (v / w).powi(2)).sqrt();
                assert!(
                    (amplitude - expected).abs() < 1e-12 * expected,
                    "t_d {t_d}: {amplitude} vs {expected}"
                );
            }
        }
    }

    #[test]
    fn bad_parameters_are_refused_by_name() {
        let p = SdofFree {
            m: -1.0,
            ..SdofFree::standard_undamped()
        };
        assert!(matches!(
            p.model().err(),
            Some(crate::Error::InvalidParameter { name: "m", .. })
        ));
        let p = SdofHarmonic {
            xi: f64::NAN,
            ..SdofHarmonic::standard_damped()
        };
        assert!(p.validate().is_err());
        let p = SdofHalfSine {
            t_d: 0.0,
            ..SdofHalfSine::standard_undamped()
        };
        assert!(matches!(
            p.validate().unwrap_err(),
            crate::Error::InvalidParameter { name: "t_d", .. }
        ));
    }
}
