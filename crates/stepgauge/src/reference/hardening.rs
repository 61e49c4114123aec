//! The hardening (Duffing-type) oscillator and its tabulated SciPy reference.

use std::fmt;

use super::{ReferenceProblem, finite, non_negative, positive};
use crate::error::{ModelError, Result};
use crate::linalg::CsrMatrix;
use crate::model::{Damping, Model, Tangent, check_buffers};
use crate::state::State;

/// A hardening oscillator `m u'' + c u' + k u + k3 u^3 = f0 sin(w t)`: one DOF, a cubic spring,
/// linear viscous damping (a constant [`Damping::Matrix`]) and the tangent `k + 3 k3 u^2` for
/// implicit schemes.
///
/// The damping coefficient sits in the damping matrix and is read and changed through
/// [`c`](Duffing::c) and [`set_c`](Duffing::set_c); the other parameters are plain fields.
#[derive(Debug, Clone)]
pub struct Duffing {
    /// Mass.
    pub m: f64,
    /// Linear stiffness.
    pub k: f64,
    /// Cubic stiffness (positive: hardening).
    pub k3: f64,
    /// Load amplitude.
    pub f0: f64,
    /// Load circular frequency.
    pub w: f64,
    /// `[c]`, the damping matrix.
    damping: CsrMatrix,
    /// The 1x1 tangent pattern.
    pattern: CsrMatrix,
}

impl Duffing {
    /// An oscillator from its parameters.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`](crate::Error::InvalidParameter) unless `m > 0`, `c >= 0` and all
    /// are finite.
    pub fn new(m: f64, c: f64, k: f64, k3: f64, f0: f64, w: f64) -> Result<Self> {
        positive("m", m)?;
        non_negative("c", c)?;
        finite("k", k)?;
        finite("k3", k3)?;
        finite("f0", f0)?;
        finite("w", w)?;
        Ok(Duffing {
            m,
            k,
            k3,
            f0,
            w,
            damping: CsrMatrix::from_diagonal(&[c]),
            pattern: CsrMatrix::from_diagonal(&[0.0]),
        })
    }

    /// The parameters of the committed reference (our own, not a physical system): `m = 1`,
    /// `c = 0.1`, `k = 1`, `k3 = 5`, `f0 = 2`, `w = 1.2`.
    pub fn reference() -> Self {
        Duffing {
            m: 1.0,
            k: 1.0,
            k3: 5.0,
            f0: 2.0,
            w: 1.2,
            damping: CsrMatrix::from_diagonal(&[0.1]),
            pattern: CsrMatrix::from_diagonal(&[0.0]),
        }
    }

    /// The damping coefficient `c`.
    pub fn c(&self) -> f64 {
        self.damping.data()[0]
    }

    /// Sets the damping coefficient.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`](crate::Error::InvalidParameter) unless `c >= 0` and finite.
    pub fn set_c(&mut self, c: f64) -> Result<()> {
        non_negative("c", c)?;
        self.damping.data_mut()[0] = c;
        Ok(())
    }

    /// The acceleration `(f0 sin(w t) - c v - k u - k3 u^3) / m` from the equation of motion.
    pub fn acceleration(&self, t: f64, u: f64, v: f64) -> f64 {
        (self.f0 * (self.w * t).sin() - self.c() * v - self.k * u - self.k3 * u.powi(3)) / self.m
    }
}

/// Every buffer of a [`Model`] call has length 1: a wrong length is a [`ModelError`] (a NaN
/// mass for [`lumped_mass`](Model::lumped_mass), which cannot return an error), not a panic.
impl Model for Duffing {
    fn dofs(&self) -> usize {
        1
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        let m = if out.len() == 1 { self.m } else { f64::NAN };
        out.fill(m);
    }
    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> std::result::Result<(), ModelError> {
        check_buffers(1, &[("u", u.len()), ("v", v.len()), ("out", out.len())])?;
        out[0] = self.k * u[0] + self.k3 * u[0].powi(3);
        Ok(())
    }
    fn external_force(&mut self, t: f64, out: &mut [f64]) -> std::result::Result<(), ModelError> {
        check_buffers(1, &[("out", out.len())])?;
        out[0] = self.f0 * (self.w * t).sin();
        Ok(())
    }
    fn damping(&self) -> Damping<'_> {
        Damping::Matrix(&self.damping)
    }
    fn stiffness_product(
        &mut self,
        _t: f64,
        u: &[f64],
        x: &[f64],
        out: &mut [f64],
    ) -> std::result::Result<(), ModelError> {
        check_buffers(1, &[("u", u.len()), ("x", x.len()), ("out", out.len())])?;
        out[0] = (self.k + 3.0 * self.k3 * u[0] * u[0]) * x[0];
        Ok(())
    }

    /// `k u^2 / 2 + k3 u^4 / 4`; `None` for a `u` of a length other than 1.
    fn stored_energy(&self, u: &[f64]) -> Option<f64> {
        let &[u] = u else {
            return None;
        };
        Some(0.5 * self.k * u * u + 0.25 * self.k3 * u.powi(4))
    }
}

impl Tangent for Duffing {
    fn tangent_pattern(&self) -> &CsrMatrix {
        &self.pattern
    }

    fn tangent_stiffness(
        &mut self,
        _t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut CsrMatrix,
    ) -> std::result::Result<(), ModelError> {
        check_buffers(1, &[("u", u.len()), ("v", v.len())])?;
        if !out.same_pattern(&self.pattern) {
            return Err(ModelError::failed(
                "the tangent matrix given to Duffing::tangent_stiffness is not 1 x 1 with its one \
                 entry stored",
            ));
        }
        out.data_mut()[0] = self.k + 3.0 * self.k3 * u[0] * u[0];
        Ok(())
    }
}

/// The hardening oscillator [`Duffing::reference`] released from `u0 = 0.5`, `v0 = 0`, against a
/// tabulated reference: SciPy's DOP853 (an eighth-order Runge-Kutta method) at `rtol = 1e-13`,
/// `atol = 1e-15`, cross-checked by Radau IIA (agreement `3.9e-13`), every 0.1 s up to 10 s
/// (`tests/data/duffing_reference.py` in the repository; its output,
/// `tests/data/duffing_reference.csv`, is the table that [`from_table`](Hardening::from_table)
/// reads). The library does not carry the table: the caller reads it (the command line and the
/// verification suite compile it into their own crate). The parameters and the initial state are
/// read from the table's header, so the model always matches its reference.
///
/// # Between the rows
///
/// [`exact`](ReferenceProblem::exact) interpolates with the quintic Hermite polynomial through `u`,
/// `v` (tabulated) and `a` (from the equation of motion, [`Duffing::acceleration`]) at both ends of
/// the row interval. Its error is at most `dt^6 max|u^(6)| / 46080` for rows `dt` apart
/// (`(dt/2)^6 / 6!` at the midpoint): with `dt = 0.1` and `max|u^(6)| = 4.8e3` (estimated on the
/// DOP853 solution), `1.0e-7`; measured against DOP853 at the 100 row midpoints, `9.7e-8`. The
/// cubic Hermite through `u` and `v` alone would err by up to `dt^4 max|u''''| / 384 = 2.6e-5`
/// (`max|u''''| = 99`; measured `2.5e-5`). At the rows themselves `exact` returns the table value.
/// For a convergence study compare only at [`tabulated_times`](ReferenceProblem::tabulated_times),
/// where the reference is accurate to about `1e-12`; outside `[0, 10]`, `exact` is `NaN`.
#[derive(Clone)]
pub struct Hardening {
    model: Duffing,
    u0: f64,
    v0: f64,
    times: Vec<f64>,
    /// `[t, u, v]` rows.
    rows: Vec<[f64; 3]>,
}

impl fmt::Debug for Hardening {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Hardening")
            .field("model", &self.model)
            .field("u0", &self.u0)
            .field("v0", &self.v0)
            .field("rows", &self.rows.len())
            .finish()
    }
}

impl Hardening {
    /// The problem from the text of its reference table (the contents of
    /// `tests/data/duffing_reference.csv`): comment lines (`#`), one of which holds the parameters
    /// as `key=value` (`m c k k3 F0 w u0 v0`), a header `t,u,v`, then rows at increasing times.
    /// `name` names the table in errors.
    ///
    /// # Errors
    /// [`Error::Csv`](crate::Error::Csv) with the 1-based line of the first problem: a row that is
    /// not three numbers, a parameter missing or invalid, fewer than two rows, or times that do
    /// not increase.
    pub fn from_table(name: &str, text: &str) -> Result<Self> {
        parse(text).map_err(|(line, problem)| crate::Error::Csv {
            file: name.to_string(),
            line,
            problem,
        })
    }

    /// The table rows `[t, u, v]`.
    pub fn rows(&self) -> &[[f64; 3]] {
        &self.rows
    }

    /// The oscillator (with the table's parameters).
    pub fn oscillator(&self) -> &Duffing {
        &self.model
    }

    /// Interpolated `(u, v)` at `t` (see the type's documentation); `NaN` outside the table.
    pub fn response(&self, t: f64) -> (f64, f64) {
        let last = self.times.len() - 1;
        if !(t >= self.times[0] && t <= self.times[last]) {
            return (f64::NAN, f64::NAN);
        }
        let i = self.times.partition_point(|&x| x <= t).clamp(1, last) - 1;
        let ([t0, u0, v0], [t1, u1, v1]) = (self.rows[i], self.rows[i + 1]);
        let a0 = self.model.acceleration(t0, u0, v0);
        let a1 = self.model.acceleration(t1, u1, v1);
        let dt = t1 - t0;
        let s = (t - t0) / dt;
        let (s2, s3) = (s * s, s * s * s);
        let (s4, s5) = (s3 * s, s3 * s2);
        let h0 = 1.0 - 10.0 * s3 + 15.0 * s4 - 6.0 * s5;
        let h1 = s - 6.0 * s3 + 8.0 * s4 - 3.0 * s5;
        let h2 = 0.5 * (s2 - 3.0 * s3 + 3.0 * s4 - s5);
        let g0 = 10.0 * s3 - 15.0 * s4 + 6.0 * s5;
        let g1 = -4.0 * s3 + 7.0 * s4 - 3.0 * s5;
        let g2 = 0.5 * (s3 - 2.0 * s4 + s5);
        let u = h0 * u0 + dt * (h1 * v0 + g1 * v1) + dt * dt * (h2 * a0 + g2 * a1) + g0 * u1;
        // d/ds of the basis.
        let dh0 = -30.0 * s2 + 60.0 * s3 - 30.0 * s4;
        let dh1 = 1.0 - 18.0 * s2 + 32.0 * s3 - 15.0 * s4;
        let dh2 = 0.5 * (2.0 * s - 9.0 * s2 + 12.0 * s3 - 5.0 * s4);
        let dg1 = -12.0 * s2 + 28.0 * s3 - 15.0 * s4;
        let dg2 = 0.5 * (3.0 * s2 - 8.0 * s3 + 5.0 * s4);
        let v = dh0 * (u0 - u1) / dt + dh1 * v0 + dg1 * v1 + dt * (dh2 * a0 + dg2 * a1);
        (u, v)
    }
}

/// Parses the reference table: comment lines (`#`), one of which holds `key=value` parameters,
/// a header `t,u,v`, then rows. The error is the 1-based line (one past the end for a problem of
/// the whole table) and what is wrong.
fn parse(text: &str) -> std::result::Result<Hardening, (usize, String)> {
    let mut params = std::collections::HashMap::new();
    let mut rows = Vec::new();
    for (n, line) in text.lines().enumerate() {
        let line = line.trim();
        if let Some(comment) = line.strip_prefix('#') {
            for token in comment.split_whitespace() {
                if let Some((key, value)) = token.split_once('=')
                    && let Ok(x) = value.parse::<f64>()
                {
                    params.insert(key.to_string(), x);
                }
            }
        } else if line.is_empty() || line.starts_with('t') {
            continue;
        } else {
            let f: Vec<f64> = line
                .split(',')
                .map(|x| x.trim().parse::<f64>())
                .collect::<std::result::Result<_, _>>()
                .map_err(|e| (n + 1, format!("{e}; expected three numbers t,u,v")))?;
            if f.len() != 3 {
                return Err((n + 1, "expected three numbers t,u,v".into()));
            }
            rows.push([f[0], f[1], f[2]]);
        }
    }
    let end = text.lines().count() + 1;
    let get = |key: &str| {
        params.get(key).copied().ok_or_else(|| {
            (
                end,
                format!("parameter {key}=<value> missing from the comments"),
            )
        })
    };
    let model = Duffing::new(
        get("m")?,
        get("c")?,
        get("k")?,
        get("k3")?,
        get("F0")?,
        get("w")?,
    )
    .map_err(|e| (end, e.to_string()))?;
    if rows.len() < 2 || rows.windows(2).any(|w| w[1][0] <= w[0][0]) {
        return Err((
            end,
            "the table needs two or more rows at increasing times".into(),
        ));
    }
    Ok(Hardening {
        model,
        u0: get("u0")?,
        v0: get("v0")?,
        times: rows.iter().map(|r| r[0]).collect(),
        rows,
    })
}

impl ReferenceProblem for Hardening {
    fn name(&self) -> &'static str {
        "hardening"
    }
    fn description(&self) -> &'static str {
        "harmonically driven, damped oscillator with a hardening cubic spring (Duffing type)"
    }
    fn source(&self) -> &'static str {
        "SciPy solve_ivp DOP853 at rtol 1e-13, cross-checked by Radau \
         (tests/data/duffing_reference.py, table tests/data/duffing_reference.csv); quintic \
         Hermite interpolation between rows"
    }
    fn validate(&self) -> Result<()> {
        Ok(())
    }
    fn model(&self) -> Result<Box<dyn Tangent + Send>> {
        Ok(Box::new(self.model.clone()))
    }
    fn initial_state(&self) -> State {
        let mut s = State::at_rest(1, 0.0);
        s.u[0] = self.u0;
        s.v[0] = self.v0;
        s
    }
    fn t_end(&self) -> f64 {
        self.times[self.times.len() - 1]
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
    fn tabulated_times(&self) -> Option<&[f64]> {
        Some(&self.times)
    }
    fn is_smooth(&self) -> bool {
        true
    }
    fn natural_frequencies(&self) -> Vec<f64> {
        Vec::new()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The committed table, read as a user would.
    fn committed() -> Hardening {
        let path = concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/../../tests/data/duffing_reference.csv"
        );
        let text = std::fs::read_to_string(path).expect("the committed table is in the repository");
        Hardening::from_table(path, &text).expect("the committed table parses")
    }

    /// The committed table parses into 101 rows every 0.1 s from the initial state, with the
    /// parameters of `Duffing::reference`.
    #[test]
    fn the_table_parses_with_the_reference_parameters() {
        let p = committed();
        assert_eq!(p.rows().len(), 101);
        assert_eq!(p.rows()[0], [0.0, 0.5, 0.0]);
        assert_eq!(p.t_end(), 10.0);
        let r = Duffing::reference();
        let m = p.oscillator();
        assert_eq!(
            (m.m, m.c(), m.k, m.k3, m.f0, m.w),
            (r.m, r.c(), r.k, r.k3, r.f0, r.w)
        );
        assert!(parse("# m=1\nt,u,v\n0,1,2\n").is_err());
        let e = Hardening::from_table("x.csv", "# m=1\nt,u,v\n0,1,z\n").unwrap_err();
        assert!(e.to_string().starts_with("x.csv:3: "), "{e}");
        assert!(parse("# m=1 c=0 k=1 k3=0 F0=0 W=1 u0=0 v0=0\nt,u,v\n0,1\n").is_err());
    }

    /// At the rows `exact` is the table; between them it is the quintic Hermite interpolant, whose
    /// error at the row midpoints against an independent integration (classical RK4 from the
    /// preceding row, 500 steps of 1e-4 s, error ~1e-15) is below 2e-7 (measured 9.7e-8 against
    /// DOP853); the velocity is within 1e-5.
    #[test]
    fn interpolation_is_exact_at_rows_and_accurate_between() {
        let p = committed();
        for r in p.rows() {
            assert_eq!(p.exact(r[0]), r[1]);
            assert!((p.exact_velocity(r[0]) - r[2]).abs() < 1e-14);
        }
        assert!(p.exact(-0.1).is_nan() && p.exact(10.05).is_nan());
        let m = p.oscillator();
        let f = |t: f64, y: [f64; 2]| [y[1], m.acceleration(t, y[0], y[1])];
        let (mut worst_u, mut worst_v): (f64, f64) = (0.0, 0.0);
        for w in p.rows().windows(2) {
            let (mut t, mut y) = (w[0][0], [w[0][1], w[0][2]]);
            let h = 1e-4;
            let steps = ((w[1][0] - w[0][0]) / (2.0 * h)).round() as usize;
            for _ in 0..steps {
                let k1 = f(t, y);
                let k2 = f(
                    t + h / 2.0,
                    [y[0] + h / 2.0 * k1[0], y[1] + h / 2.0 * k1[1]],
                );
                let k3 = f(
                    t + h / 2.0,
                    [y[0] + h / 2.0 * k2[0], y[1] + h / 2.0 * k2[1]],
                );
                let k4 = f(t + h, [y[0] + h * k3[0], y[1] + h * k3[1]]);
                for j in 0..2 {
                    y[j] += h / 6.0 * (k1[j] + 2.0 * k2[j] + 2.0 * k3[j] + k4[j]);
                }
                t += h;
            }
            worst_u = worst_u.max((p.exact(t) - y[0]).abs());
            worst_v = worst_v.max((p.exact_velocity(t) - y[1]).abs());
        }
        assert!(worst_u < 2e-7, "{worst_u:e}");
        assert!(worst_v < 1e-5, "{worst_v:e}");
        eprintln!("quintic Hermite at midpoints: |du| <= {worst_u:.2e}, |dv| <= {worst_v:.2e}");
    }

    /// The model's forces and tangent are those of the equation, and `set_c` changes the damping
    /// force and matrix together.
    #[test]
    fn the_oscillator_is_consistent() {
        let mut d = Duffing::reference();
        let mut out = [0.0];
        d.internal_force(0.0, &[0.5], &[0.0], &mut out).unwrap();
        assert_eq!(out[0], 0.5 + 5.0 * 0.125);
        let mut kt = d.tangent_pattern().clone();
        d.tangent_stiffness(0.0, &[0.5], &[0.0], &mut kt).unwrap();
        // Tangent against a central difference of the internal force.
        let (mut fp, mut fm) = ([0.0], [0.0]);
        d.internal_force(0.0, &[0.5 + 1e-6], &[0.0], &mut fp)
            .unwrap();
        d.internal_force(0.0, &[0.5 - 1e-6], &[0.0], &mut fm)
            .unwrap();
        assert!((kt.data()[0] - (fp[0] - fm[0]) / 2e-6).abs() < 1e-8);
        d.set_c(0.3).unwrap();
        match d.damping() {
            Damping::Matrix(c) => assert_eq!(c.data(), &[0.3]),
            other => panic!("{other:?}"),
        }
        assert!(d.set_c(-1.0).is_err());
        assert!(Duffing::new(0.0, 0.1, 1.0, 1.0, 1.0, 1.0).is_err());
    }
}
