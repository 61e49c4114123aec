//! Two-DOF linear systems solved exactly by modal superposition, derived in the
//! [`reference`](crate::reference#two-dof-modal-solutions) module documentation.

use std::f64::consts::PI;

use super::{ReferenceProblem, finite, positive, sparse};
use crate::error::Result;
use crate::model::{LinearModel, Load, Tangent, TimeFunction};
use crate::state::State;

/// Modes of a two-DOF system with diagonal mass, in increasing frequency.
#[derive(Debug, Clone, Copy)]
pub(crate) struct Modes2 {
    /// Natural circular frequencies, increasing.
    pub omega: [f64; 2],
    /// `phi[i]` is mode `i`, M-orthonormal.
    pub phi: [[f64; 2]; 2],
    /// The lumped masses.
    pub m: [f64; 2],
}

impl Modes2 {
    /// Modes of `diag(m) u'' + k u = 0`; `det_k` is `det(k)`, given by the caller when it can be
    /// formed without cancellation.
    pub fn new(m: [f64; 2], k: [[f64; 2]; 2], det_k: f64) -> Self {
        let (s0, s1) = (m[0].sqrt(), m[1].sqrt());
        let a = k[0][0] / m[0];
        let b = k[0][1] / (s0 * s1);
        let d = k[1][1] / m[1];
        let hi = 0.5 * (a + d) + (0.5 * (a - d)).hypot(b);
        let lo = det_k / (m[0] * m[1] * hi);
        let theta = 0.5 * (2.0 * b).atan2(a - d);
        let (s, c) = theta.sin_cos();
        Modes2 {
            omega: [lo.sqrt(), hi.sqrt()],
            phi: [[-s / s0, c / s1], [c / s0, s / s1]],
            m,
        }
    }

    /// Displacements and velocities at `t` from `(u0, v0)` under the load `f` applied at 0.
    pub fn response(
        &self,
        u0: [f64; 2],
        v0: [f64; 2],
        f: [f64; 2],
        t: f64,
    ) -> ([f64; 2], [f64; 2]) {
        let mut u = [0.0; 2];
        let mut v = [0.0; 2];
        for (p, w) in self.phi.iter().zip(self.omega) {
            let proj = |x: [f64; 2], m: [f64; 2]| p[0] * m[0] * x[0] + p[1] * m[1] * x[1];
            let q0 = proj(u0, self.m);
            let qd0 = proj(v0, self.m);
            let fi = proj(f, [1.0, 1.0]);
            let (s, c) = (w * t).sin_cos();
            let one_minus_cos = 2.0 * (0.5 * w * t).sin().powi(2);
            let q = q0 * c + qd0 * s / w + fi / (w * w) * one_minus_cos;
            let qd = -w * q0 * s + qd0 * c + fi / w * s;
            for j in 0..2 {
                u[j] += p[j] * q;
                v[j] += p[j] * qd;
            }
        }
        (u, v)
    }
}

/// The classic two-DOF example: `M = diag(2, 1)`, `K = [[6, -2], [-2, 4]]`, load `R = [0, 10]`
/// applied suddenly at `t = 0`, from rest (Bathe, *Finite Element Procedures*, 1996, example 9.1;
/// the matrices are the standard ones of that example).
///
/// Exact modal solution (derived in the [module
/// documentation](crate::reference#two-dof-modal-solutions) and here): `det(K - omega^2 M) = 2
/// omega^4 - 14 omega^2 + 20 = 0` gives `omega^2 = 2` and `5`, with the M-orthonormal modes `phi_1
/// = [1, 1] / sqrt(3)` and `phi_2 = [1, -2] / sqrt(6)` (check: `phi_1^T M phi_1 = (2 + 1) / 3 = 1`,
/// `phi_2^T M phi_2 = (2 + 4) / 6 = 1`, `phi_1^T M phi_2 = (2 - 2) / sqrt(18) = 0`). The modal
/// loads are `f_1 = 10 / sqrt(3)` and `f_2 = -20 / sqrt(6)`, and from rest `q_i = (f_i /
/// omega_i^2)(1 - cos(omega_i t))`, so
///
/// ```text
/// u_1(t) = (5/3)(1 - cos(sqrt(2) t)) - (2/3)(1 - cos(sqrt(5) t)),
/// u_2(t) = (5/3)(1 - cos(sqrt(2) t)) + (4/3)(1 - cos(sqrt(5) t)),
/// ```
///
/// oscillating about the static solution `K^-1 R = [1, 3]`. The observed DOF is the loaded one,
/// `u_2`; the standard run lasts two periods of the first mode, `2 sqrt(2) pi`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct TwoDofStep;

impl TwoDofStep {
    /// The mass matrix (diagonal).
    pub const MASS: [f64; 2] = [2.0, 1.0];
    /// The stiffness matrix.
    pub const STIFFNESS: [[f64; 2]; 2] = [[6.0, -2.0], [-2.0, 4.0]];
    /// The load, applied at `t = 0` and held.
    pub const LOAD: [f64; 2] = [0.0, 10.0];

    /// Exact displacements at `t`.
    pub fn displacement(&self, t: f64) -> [f64; 2] {
        let (w1, w2) = (2f64.sqrt(), 5f64.sqrt());
        // 1 - cos x = 2 sin^2(x / 2), without cancellation near t = 0.
        let c1 = 2.0 * (0.5 * w1 * t).sin().powi(2);
        let c2 = 2.0 * (0.5 * w2 * t).sin().powi(2);
        [
            5.0 / 3.0 * c1 - 2.0 / 3.0 * c2,
            5.0 / 3.0 * c1 + 4.0 / 3.0 * c2,
        ]
    }

    /// Exact velocities at `t`.
    pub fn velocity(&self, t: f64) -> [f64; 2] {
        let (w1, w2) = (2f64.sqrt(), 5f64.sqrt());
        let (s1, s2) = ((w1 * t).sin(), (w2 * t).sin());
        [
            5.0 / 3.0 * w1 * s1 - 2.0 / 3.0 * w2 * s2,
            5.0 / 3.0 * w1 * s1 + 4.0 / 3.0 * w2 * s2,
        ]
    }
}

impl ReferenceProblem for TwoDofStep {
    fn name(&self) -> &'static str {
        "two-dof-step"
    }
    fn description(&self) -> &'static str {
        "two masses on three springs under a suddenly applied load (the classic two-DOF example)"
    }
    fn source(&self) -> &'static str {
        "Bathe, Finite Element Procedures, 1996, example 9.1 (the matrices and load); modal \
         solution: exact solution (derived in the doc)"
    }
    fn validate(&self) -> Result<()> {
        Ok(())
    }
    fn model(&self) -> Result<Box<dyn Tangent + Send>> {
        let [m1, m2] = Self::MASS;
        let k = Self::STIFFNESS;
        let model = LinearModel::new(
            &sparse(2, &[(0, 0, m1), (1, 1, m2)]),
            &sparse(
                2,
                &[
                    (0, 0, k[0][0]),
                    (0, 1, k[0][1]),
                    (1, 0, k[1][0]),
                    (1, 1, k[1][1]),
                ],
            ),
        )?
        .with_load(Load::Pattern {
            pattern: Self::LOAD.to_vec(),
            factor: TimeFunction::Constant(1.0),
        })?;
        Ok(Box::new(model))
    }
    fn initial_state(&self) -> State {
        State::at_rest(2, 0.0)
    }
    fn t_end(&self) -> f64 {
        2.0 * 2f64.sqrt() * PI
    }
    fn observed_dof(&self) -> usize {
        1
    }
    fn exact(&self, t: f64) -> f64 {
        self.displacement(t)[1]
    }
    fn exact_velocity(&self, t: f64) -> f64 {
        self.velocity(t)[1]
    }
    fn is_smooth(&self) -> bool {
        true
    }
    fn natural_frequencies(&self) -> Vec<f64> {
        vec![2f64.sqrt(), 5f64.sqrt()]
    }
}

/// A stiff spring between two masses, a soft spring from the first mass to the wall:
///
/// ```text
/// wall --k_soft-- m1 --k_stiff-- m2,     K = [[k_soft + k_stiff, -k_stiff], [-k_stiff, k_stiff]],
/// ```
///
/// released from `(u0, v0)`. With `k_stiff / k_soft` large, the masses move together on the soft
/// spring at `omega_1 ~ sqrt(k_soft / (m1 + m2))` while they vibrate against each other at `omega_2
/// ~ sqrt(k_stiff (m1 + m2) / (m1 m2))`: the stiff mode bounds the explicit step, the soft one sets
/// the time scale. Exact modal solution from the closed-form 2x2 eigenproblem (derived in the
/// [module documentation](crate::reference#two-dof-modal-solutions), with `det K = k_soft
/// k_stiff`). The observed DOF is `m2`; the standard run lasts one period of the soft mode.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StiffSoft {
    /// Mass on both springs.
    pub m1: f64,
    /// Mass on the stiff spring only.
    pub m2: f64,
    /// Spring from `m1` to the wall.
    pub k_soft: f64,
    /// Spring between the masses.
    pub k_stiff: f64,
    /// Initial displacements.
    pub u0: [f64; 2],
    /// Initial velocities.
    pub v0: [f64; 2],
}

impl StiffSoft {
    /// Our case: unit masses, `k_soft = 1`, `k_stiff = 10^4` (ratio `10^4`; `omega_1 = 0.7071`,
    /// `omega_2 = 141.4` rad/s), released from `u0 = [1, 1.01]` at rest, which puts about the same
    /// energy (0.5) in each mode.
    pub fn standard() -> Self {
        StiffSoft {
            m1: 1.0,
            m2: 1.0,
            k_soft: 1.0,
            k_stiff: 1e4,
            u0: [1.0, 1.01],
            v0: [0.0, 0.0],
        }
    }

    fn stiffness(&self) -> [[f64; 2]; 2] {
        [
            [self.k_soft + self.k_stiff, -self.k_stiff],
            [-self.k_stiff, self.k_stiff],
        ]
    }

    fn modes(&self) -> Modes2 {
        Modes2::new(
            [self.m1, self.m2],
            self.stiffness(),
            self.k_soft * self.k_stiff,
        )
    }

    /// Exact displacements and velocities at `t`.
    pub fn response(&self, t: f64) -> ([f64; 2], [f64; 2]) {
        self.modes().response(self.u0, self.v0, [0.0; 2], t)
    }
}

impl ReferenceProblem for StiffSoft {
    fn name(&self) -> &'static str {
        "stiff-soft"
    }
    fn description(&self) -> &'static str {
        "two masses, a soft spring to the wall and a stiff spring between them, released with both \
         modes excited"
    }
    fn source(&self) -> &'static str {
        "modal superposition with the closed-form 2x2 eigenproblem: exact solution (derived in \
         the doc)"
    }
    fn validate(&self) -> Result<()> {
        positive("m1", self.m1)?;
        positive("m2", self.m2)?;
        positive("k_soft", self.k_soft)?;
        positive("k_stiff", self.k_stiff)?;
        for (name, x) in [
            ("u0[0]", self.u0[0]),
            ("u0[1]", self.u0[1]),
            ("v0[0]", self.v0[0]),
            ("v0[1]", self.v0[1]),
        ] {
            finite(name, x)?;
        }
        Ok(())
    }
    fn model(&self) -> Result<Box<dyn Tangent + Send>> {
        self.validate()?;
        let k = self.stiffness();
        let model = LinearModel::new(
            &sparse(2, &[(0, 0, self.m1), (1, 1, self.m2)]),
            &sparse(
                2,
                &[
                    (0, 0, k[0][0]),
                    (0, 1, k[0][1]),
                    (1, 0, k[1][0]),
                    (1, 1, k[1][1]),
                ],
            ),
        )?;
        Ok(Box::new(model))
    }
    fn initial_state(&self) -> State {
        let mut s = State::at_rest(2, 0.0);
        s.u.copy_from_slice(&self.u0);
        s.v.copy_from_slice(&self.v0);
        s
    }
    fn t_end(&self) -> f64 {
        2.0 * PI / self.modes().omega[0]
    }
    fn observed_dof(&self) -> usize {
        1
    }
    fn exact(&self, t: f64) -> f64 {
        self.response(t).0[1]
    }
    fn exact_velocity(&self, t: f64) -> f64 {
        self.response(t).1[1]
    }
    fn is_smooth(&self) -> bool {
        true
    }
    fn natural_frequencies(&self) -> Vec<f64> {
        self.modes().omega.to_vec()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// `max_t |M a + K u - f|` with `a` the five-point central difference (step `h`) of the exact
    /// velocity,
    /// relative to `max |K u| + |f|`, and `max |v - (u(t+h) - u(t-h)) / 2h|` relative to
    /// `omega_max max|u|`, over 2000 times in `(0, t_end]`.
    fn residuals(
        m: [f64; 2],
        k: [[f64; 2]; 2],
        f: [f64; 2],
        t_end: f64,
        h: f64,
        response: impl Fn(f64) -> ([f64; 2], [f64; 2]),
        omega_max: f64,
    ) -> (f64, f64) {
        let n = 2000;
        let ts: Vec<f64> = (1..=n).map(|i| t_end * i as f64 / n as f64).collect();
        let ku = |u: [f64; 2]| {
            [
                k[0][0] * u[0] + k[0][1] * u[1],
                k[1][0] * u[0] + k[1][1] * u[1],
            ]
        };
        let mut scale: f64 = f[0].abs().max(f[1].abs());
        let mut umax: f64 = 0.0;
        for &t in &ts {
            let (u, _) = response(t);
            let x = ku(u);
            scale = scale.max(x[0].abs().max(x[1].abs()));
            umax = umax.max(u[0].abs().max(u[1].abs()));
        }
        let (mut eq, mut vel): (f64, f64) = (0.0, 0.0);
        for &t in &ts {
            let (u, v) = response(t);
            // Five-point central differences: (g(-2h) - 8 g(-h) + 8 g(h) - g(2h)) / 12h.
            let r: Vec<([f64; 2], [f64; 2])> = [-2.0, -1.0, 1.0, 2.0]
                .iter()
                .map(|s| response(t + s * h))
                .collect();
            let x = ku(u);
            for j in 0..2 {
                let a = (r[0].1[j] - 8.0 * r[1].1[j] + 8.0 * r[2].1[j] - r[3].1[j]) / (12.0 * h);
                eq = eq.max((m[j] * a + x[j] - f[j]).abs() / scale);
                let vd = (r[0].0[j] - 8.0 * r[1].0[j] + 8.0 * r[2].0[j] - r[3].0[j]) / (12.0 * h);
                vel = vel.max((vd - v[j]).abs() / (omega_max * umax));
            }
        }
        (eq, vel)
    }

    /// The closed form satisfies M u'' + K u = f and starts from rest; it agrees with the generic
    /// modal solution; the frequencies are sqrt(2) and sqrt(5) (Bathe 1996, example 9.1).
    #[test]
    fn two_dof_step_satisfies_its_equation_and_matches_the_modal_solution() {
        let p = TwoDofStep;
        let h = 1e-4;
        let (eq, vel) = residuals(
            TwoDofStep::MASS,
            TwoDofStep::STIFFNESS,
            TwoDofStep::LOAD,
            p.t_end(),
            h,
            |t| (p.displacement(t), p.velocity(t)),
            5f64.sqrt(),
        );
        // Five-point differences err by (omega h)^4 / 30 relative (1e-15 here), plus round-off.
        assert!(eq < 1e-10 && vel < 1e-10, "{eq:e} {vel:e}");
        assert_eq!(p.displacement(0.0), [0.0, 0.0]);
        assert_eq!(p.velocity(0.0), [0.0, 0.0]);

        let modes = Modes2::new(TwoDofStep::MASS, TwoDofStep::STIFFNESS, 20.0);
        assert!((modes.omega[0] - 2f64.sqrt()).abs() < 1e-15);
        assert!((modes.omega[1] - 5f64.sqrt()).abs() < 1e-15);
        for t in [0.3, 1.7, 4.4, 8.0] {
            let (u, v) = modes.response([0.0; 2], [0.0; 2], TwoDofStep::LOAD, t);
            let (ue, ve) = (p.displacement(t), p.velocity(t));
            for j in 0..2 {
                assert!((u[j] - ue[j]).abs() < 1e-14, "t {t}: {u:?} vs {ue:?}");
                assert!((v[j] - ve[j]).abs() < 1e-14, "t {t}: {v:?} vs {ve:?}");
            }
        }
        // The time average over a common period-free window is the static solution [1, 3]: the
        // cosines average out over many periods.
        let n = 200_000;
        let t_long = 2000.0;
        let mut mean = [0.0; 2];
        for i in 0..n {
            let u = p.displacement(t_long * (i as f64 + 0.5) / n as f64);
            mean[0] += u[0] / n as f64;
            mean[1] += u[1] / n as f64;
        }
        assert!(
            (mean[0] - 1.0).abs() < 2e-3 && (mean[1] - 3.0).abs() < 2e-3,
            "{mean:?}"
        );
    }

    /// The modes solve K phi = omega^2 M phi and are M-orthonormal, and the solution satisfies
    /// M u'' + K u = 0 and its initial conditions, for the standard ratio 10^4 and for 10^8.
    #[test]
    fn stiff_soft_satisfies_its_equation_for_large_stiffness_ratios() {
        for ratio in [1e4, 1e8] {
            let p = StiffSoft {
                k_stiff: ratio,
                m2: 0.5,
                v0: [0.3, -2.0],
                ..StiffSoft::standard()
            };
            let k = p.stiffness();
            let modes = p.modes();
            let m = [p.m1, p.m2];
            for (i, phi) in modes.phi.iter().enumerate() {
                let w2 = modes.omega[i].powi(2);
                for r in 0..2 {
                    let kphi = k[r][0] * phi[0] + k[r][1] * phi[1];
                    let res = (kphi - w2 * m[r] * phi[r]).abs();
                    assert!(res < 1e-12 * ratio, "ratio {ratio} mode {i}: {res:e}");
                }
                for (j, psi) in modes.phi.iter().enumerate() {
                    let dot = m[0] * phi[0] * psi[0] + m[1] * phi[1] * psi[1];
                    let expected = if i == j { 1.0 } else { 0.0 };
                    assert!((dot - expected).abs() < 1e-14, "{dot}");
                }
            }
            // The soft frequency against its series expansion in 1/ratio:
            // omega_1^2 = k_soft / (m1 + m2) (1 - k_soft m2^2 / (k_stiff (m1 + m2)^2) + ...)
            // (from lambda_1 = 2 det / (tr + sqrt(tr^2 - 4 det)) of M^-1 K, expanded).
            let ms = p.m1 + p.m2;
            let approx = p.k_soft / ms * (1.0 - p.k_soft * p.m2 * p.m2 / (p.k_stiff * ms * ms));
            let rel = (modes.omega[0].powi(2) - approx).abs() / approx;
            assert!(
                rel < (10.0 / (ratio * ratio)).max(1e-14),
                "ratio {ratio}: {rel:e}"
            );

            let h = 1e-2 / modes.omega[1];
            let (eq, vel) = residuals(
                m,
                k,
                [0.0; 2],
                p.t_end(),
                h,
                |t| p.response(t),
                modes.omega[1],
            );
            // Truncation (omega h)^4 / 30 = 3e-10; the phase omega t is rounded by eps omega t,
            // which the differences amplify by 1 / (omega h): eps t / h relative at the end of the
            // run.
            let tol = 1e-9 + 20.0 * f64::EPSILON * p.t_end() / h;
            eprintln!("stiff-soft ratio {ratio:e}: residuals {eq:.1e} {vel:.1e} (tol {tol:.1e})");
            assert!(eq < tol && vel < tol, "ratio {ratio}: {eq:e} {vel:e}");
            let (u, v) = p.response(0.0);
            assert!((u[0] - p.u0[0]).abs() < 1e-14 && (u[1] - p.u0[1]).abs() < 1e-14);
            assert!((v[0] - p.v0[0]).abs() < 1e-12 && (v[1] - p.v0[1]).abs() < 1e-12);
        }
    }

    /// Our standard case puts about the same energy in each mode.
    #[test]
    fn stiff_soft_standard_case_excites_both_modes_equally() {
        let p = StiffSoft::standard();
        let modes = p.modes();
        let e: Vec<f64> = (0..2)
            .map(|i| {
                let phi = modes.phi[i];
                let q = phi[0] * p.m1 * p.u0[0] + phi[1] * p.m2 * p.u0[1];
                0.5 * (modes.omega[i] * q).powi(2)
            })
            .collect();
        assert!(
            (e[0] - 0.5).abs() < 0.02 && (e[1] - 0.5).abs() < 0.02,
            "{e:?}"
        );
        assert!((modes.omega[0] - 0.5f64.sqrt()).abs() < 1e-4);
        assert!((modes.omega[1] - 2e4f64.sqrt()).abs() < 1e-2);
    }
}
