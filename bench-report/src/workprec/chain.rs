//! The work-precision problem: a uniform fixed-free spring chain, its modes in closed form and
//! its exact response by modal superposition.
//!
//! `N` equal masses `m` in a line, joined by `N` equal springs `k`: the first spring ties mass 1
//! to the ground, mass `N` is free. With `u_i` the displacement of mass `i`,
//!
//! ```text
//! m u_i'' = k (u_{i-1} - 2 u_i + u_{i+1}) + f_i    (i < N, u_0 = 0),
//! m u_N'' = k (u_{N-1} - u_N) + f_N,
//! ```
//!
//! so `K` is tridiagonal with `2k` on the diagonal except `K_NN = k`, and `-k` beside it.
//!
//! **Modes (derived here; checked against a dense eigen-solve in the tests).** Try
//! `phi_i = sin(i theta)`. An interior row gives `k (2 - 2 cos theta) sin(i theta) = m omega^2
//! sin(i theta)`, so `omega = 2 sqrt(k/m) sin(theta/2)`; row 1 holds because `sin(0) = 0`. The
//! free end's row, `k (sin(N theta) - sin((N-1) theta)) = m omega^2 sin(N theta)`, reduces to
//! `sin((N+1) theta) = sin(N theta)`, which holds for `(2N + 1) theta = (2j - 1) pi`. Hence, for
//! `j = 1..N`,
//!
//! ```text
//! theta_j = (2j - 1) pi / (2N + 1),   omega_j = 2 sqrt(k/m) sin(theta_j / 2),
//! phi_j(i) = sqrt(4 / (m (2N + 1))) sin(i theta_j),
//! ```
//!
//! M-orthonormal because `sum_{i=1..N} sin^2(i theta_j) = N/2 - (1/2) sum cos(2 i theta_j)
//! = N/2 + 1/4` (the cosine sum is `-sin(2N theta_j) / (2 sin theta_j) = -1/2` for these
//! `theta_j`).
//!
//! **Exact response.** With the modal coordinates `q_j = phi_j^T M u`, `q_j(0) = phi_j^T M u0`,
//! `q_j'(0) = phi_j^T M v0` and a constant load `f` switched on at `t = 0` (modal load
//! `f_j = phi_j^T f`), each mode is an undamped oscillator:
//!
//! ```text
//! q_j(t) = q_j(0) cos(omega_j t) + q_j'(0) sin(omega_j t) / omega_j
//!          + (f_j / omega_j^2) 2 sin^2(omega_j t / 2),
//! u(t)   = sum_j phi_j q_j(t).
//! ```
//!
//! (`1 - cos x` is written `2 sin^2(x/2)` to keep its small values accurate.) The sum is exact up
//! to rounding: the modes are complete.

use std::f64::consts::PI;

use sprs::{CsMat, TriMat};

/// A uniform fixed-free chain.
#[derive(Debug, Clone, Copy)]
pub struct Chain {
    /// Number of masses (DOFs).
    pub n: usize,
    /// Each mass.
    pub m: f64,
    /// Each spring's stiffness.
    pub k: f64,
}

impl Chain {
    /// The stiffness matrix (CSR), tridiagonal.
    pub fn stiffness(&self) -> CsMat<f64> {
        let n = self.n;
        let mut t = TriMat::new((n, n));
        for i in 0..n {
            let d = if i + 1 == n { self.k } else { 2.0 * self.k };
            if i > 0 {
                t.add_triplet(i, i - 1, -self.k);
            }
            t.add_triplet(i, i, d);
            if i + 1 < n {
                t.add_triplet(i, i + 1, -self.k);
            }
        }
        t.to_csr()
    }

    /// The (diagonal) mass matrix (CSR).
    pub fn mass(&self) -> CsMat<f64> {
        let mut t = TriMat::new((self.n, self.n));
        for i in 0..self.n {
            t.add_triplet(i, i, self.m);
        }
        t.to_csr()
    }

    /// `theta_j = (2j - 1) pi / (2N + 1)` of mode `j = 1..=N`.
    fn theta(&self, j: usize) -> f64 {
        (2 * j - 1) as f64 * PI / (2 * self.n + 1) as f64
    }

    /// Natural circular frequency of mode `j = 1..=N` (increasing in `j`).
    pub fn omega(&self, j: usize) -> f64 {
        2.0 * (self.k / self.m).sqrt() * (0.5 * self.theta(j)).sin()
    }

    /// Entry `i = 0..N` (0-based DOF, mass `i + 1`) of the M-orthonormal mode `j = 1..=N`.
    pub fn mode_entry(&self, j: usize, i: usize) -> f64 {
        let scale = (4.0 / (self.m * (2 * self.n + 1) as f64)).sqrt();
        scale * ((i + 1) as f64 * self.theta(j)).sin()
    }

    /// The M-orthonormal mode `j = 1..=N`.
    pub fn mode(&self, j: usize) -> Vec<f64> {
        (0..self.n).map(|i| self.mode_entry(j, i)).collect()
    }

    /// The lowest period `2 pi / omega_1`.
    pub fn lowest_period(&self) -> f64 {
        2.0 * PI / self.omega(1)
    }
}

/// The two cases of the comparison.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Case {
    /// (a) Released from the lowest mode shape (free end at 1), at rest, no load.
    SingleMode,
    /// (b) At rest, a constant end load `F = 1` applied suddenly at `t = 0` at the free end.
    StepLoad,
}

impl Case {
    /// Short label for the report.
    pub fn label(self) -> &'static str {
        match self {
            Case::SingleMode => "(a) single-mode release",
            Case::StepLoad => "(b) suddenly applied end load",
        }
    }
}

/// A case on a chain: initial state, load, sample times and the exact free-end displacement
/// there.
#[derive(Debug, Clone)]
pub struct Problem {
    /// The chain.
    pub chain: Chain,
    /// Initial displacement.
    pub u0: Vec<f64>,
    /// Initial velocity.
    pub v0: Vec<f64>,
    /// The constant load (switched on at `t = 0`).
    pub load: Vec<f64>,
    /// End of the run.
    pub horizon: f64,
    /// Sample times `t_k = k T / S`, `k = 1..=S`, the last exactly `T`.
    pub samples: Vec<f64>,
    /// Exact displacement of the free end at the sample times.
    pub exact: Vec<f64>,
    /// Largest exact free-end velocity at the sample times (a scale for absolute tolerances).
    pub velocity_scale: f64,
}

impl Problem {
    /// The case on `chain` over `periods` lowest periods, sampled at `samples` equal intervals.
    pub fn new(chain: Chain, case: Case, periods: f64, samples: usize) -> Problem {
        let n = chain.n;
        let end = n - 1;
        let (u0, load) = match case {
            Case::SingleMode => {
                let s = 1.0 / chain.mode_entry(1, end);
                (chain.mode(1).iter().map(|p| s * p).collect(), vec![0.0; n])
            }
            Case::StepLoad => {
                let mut f = vec![0.0; n];
                f[end] = 1.0;
                (vec![0.0; n], f)
            }
        };
        let v0 = vec![0.0; n];
        let horizon = periods * chain.lowest_period();
        let mut times: Vec<f64> = (1..=samples)
            .map(|k| horizon * k as f64 / samples as f64)
            .collect();
        if let Some(last) = times.last_mut() {
            *last = horizon;
        }
        let modal = Modal::new(&chain, &u0, &v0, &load);
        let exact: Vec<f64> = times.iter().map(|&t| modal.end(t).0).collect();
        let velocity_scale = times
            .iter()
            .map(|&t| modal.end(t).1.abs())
            .fold(0.0, f64::max);
        Problem {
            chain,
            u0,
            v0,
            load,
            horizon,
            samples: times,
            exact,
            velocity_scale,
        }
    }

    /// Largest exact free-end displacement at the sample times (the error's denominator).
    pub fn displacement_scale(&self) -> f64 {
        self.exact.iter().fold(0.0_f64, |a, x| a.max(x.abs()))
    }

    /// Relative error of a computed free-end history at the sample times:
    /// `max_k |u_k - u(t_k)| / max_k |u(t_k)|`. Infinite when a value is not finite or the
    /// length differs.
    pub fn error(&self, computed: &[f64]) -> f64 {
        if computed.len() != self.exact.len() || computed.iter().any(|x| !x.is_finite()) {
            return f64::INFINITY;
        }
        let worst = computed
            .iter()
            .zip(&self.exact)
            .fold(0.0_f64, |a, (c, e)| a.max((c - e).abs()));
        worst / self.displacement_scale()
    }
}

/// Modal data of a start and load, for the free end.
pub struct Modal {
    omega: Vec<f64>,
    /// `phi_j(end)` times each of `q_j(0)`, `q_j'(0)`, `f_j`.
    q0: Vec<f64>,
    qd0: Vec<f64>,
    f: Vec<f64>,
}

impl Modal {
    /// Projects `u0`, `v0` and the load on the modes.
    pub fn new(chain: &Chain, u0: &[f64], v0: &[f64], load: &[f64]) -> Modal {
        let n = chain.n;
        let end = n - 1;
        let mut m = Modal {
            omega: Vec::with_capacity(n),
            q0: Vec::with_capacity(n),
            qd0: Vec::with_capacity(n),
            f: Vec::with_capacity(n),
        };
        for j in 1..=n {
            let phi = chain.mode(j);
            let dot = |x: &[f64], w: f64| phi.iter().zip(x).map(|(p, x)| p * x).sum::<f64>() * w;
            let pe = phi[end];
            m.omega.push(chain.omega(j));
            m.q0.push(pe * dot(u0, chain.m));
            m.qd0.push(pe * dot(v0, chain.m));
            m.f.push(pe * dot(load, 1.0));
        }
        m
    }

    /// Exact displacement and velocity of the free end at `t`.
    pub fn end(&self, t: f64) -> (f64, f64) {
        let mut u = 0.0;
        let mut v = 0.0;
        for j in 0..self.omega.len() {
            let w = self.omega[j];
            let (s, c) = (w * t).sin_cos();
            let half = (0.5 * w * t).sin();
            u += self.q0[j] * c + self.qd0[j] * s / w + self.f[j] / (w * w) * 2.0 * half * half;
            v += -self.q0[j] * w * s + self.qd0[j] * c + self.f[j] / w * s;
        }
        (u, v)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Dense `K` of the chain.
    fn dense_k(c: &Chain) -> nalgebra::DMatrix<f64> {
        let k = c.stiffness();
        let mut d = nalgebra::DMatrix::zeros(c.n, c.n);
        for (v, (i, j)) in k.iter() {
            d[(i, j)] = *v;
        }
        d
    }

    /// The closed-form eigenpairs agree with a dense symmetric eigen-solve of `K / m` (values to
    /// 1e-12 relative, vectors to 1e-10 up to sign) and are M-orthonormal.
    #[test]
    fn closed_form_modes_match_a_dense_eigen_solve() {
        for c in [
            Chain {
                n: 7,
                m: 1.0,
                k: 1.0,
            },
            Chain {
                n: 60,
                m: 2.5,
                k: 40.0,
            },
        ] {
            let a = dense_k(&c) / c.m;
            let eig = nalgebra::SymmetricEigen::new(a);
            let mut order: Vec<usize> = (0..c.n).collect();
            order.sort_by(|&x, &y| eig.eigenvalues[x].total_cmp(&eig.eigenvalues[y]));
            for (j0, &col) in order.iter().enumerate() {
                let j = j0 + 1;
                let w2 = c.omega(j).powi(2);
                let lam = eig.eigenvalues[col];
                assert!(
                    (w2 - lam).abs() <= 1e-12 * lam.abs().max(1.0),
                    "mode {j}: {w2} vs {lam}"
                );
                // The solver's vectors are unit in the Euclidean norm; ours are M-orthonormal,
                // i.e. sqrt(m) phi is unit.
                let phi = c.mode(j);
                let dot: f64 = (0..c.n)
                    .map(|i| c.m.sqrt() * phi[i] * eig.eigenvectors[(i, col)])
                    .sum();
                assert!((dot.abs() - 1.0).abs() < 1e-10, "mode {j}: |cos| = {dot}");
            }
            for j in [1, c.n / 2, c.n] {
                for l in [1, 2, c.n] {
                    let pj = c.mode(j);
                    let pl = c.mode(l);
                    let g: f64 = pj.iter().zip(&pl).map(|(a, b)| c.m * a * b).sum();
                    let want = if j == l { 1.0 } else { 0.0 };
                    assert!((g - want).abs() < 1e-12, "phi_{j}^T M phi_{l} = {g}");
                }
            }
        }
    }

    /// The modal solution satisfies the equations of motion at the free end (central second
    /// difference in time, `h = 1e-3`, truncation about `h^2 omega_max^4 / 12 < 1e-6` of the
    /// load) and the initial conditions; the step load's static part is the end flexibility
    /// `N / k` (springs in series).
    #[test]
    fn modal_solution_satisfies_the_equations_of_motion() {
        let c = Chain {
            n: 12,
            m: 1.0,
            k: 1.0,
        };
        for case in [Case::SingleMode, Case::StepLoad] {
            let p = Problem::new(c, case, 1.0, 10);
            let end = c.n - 1;
            let modal = Modal::new(&c, &p.u0, &p.v0, &p.load);
            // u(0) and v(0)
            let (u, v) = modal.end(0.0);
            assert!((u - p.u0[end]).abs() < 1e-12 && v.abs() < 1e-12);
            // Equations of motion of the last mass need u_{N-1} too: superpose the full vector.
            let full = |t: f64| -> Vec<f64> {
                let mut u = vec![0.0; c.n];
                for j in 1..=c.n {
                    let phi = c.mode(j);
                    let w = c.omega(j);
                    let q0: f64 = phi.iter().zip(&p.u0).map(|(a, b)| a * b * c.m).sum();
                    let f: f64 = phi.iter().zip(&p.load).map(|(a, b)| a * b).sum();
                    let q = q0 * (w * t).cos() + f / (w * w) * (1.0 - (w * t).cos());
                    for i in 0..c.n {
                        u[i] += phi[i] * q;
                    }
                }
                u
            };
            let h = 1e-3;
            for t in [3.0, 17.5, 40.0] {
                let (um, u0, up) = (full(t - h), full(t), full(t + h));
                let acc = (up[end] - 2.0 * u0[end] + um[end]) / (h * h);
                let force = c.k * (u0[end - 1] - u0[end]) + p.load[end];
                assert!(
                    (c.m * acc - force).abs() < 1e-5,
                    "t = {t}: {acc} vs {force}"
                );
                // The free-end closed form agrees with the full superposition.
                assert!((modal.end(t).0 - u0[end]).abs() < 1e-10);
            }
        }
        // Step load: each mode oscillates about its static value, and the static values add up
        // to the end flexibility N / k of N springs in series.
        let static_sum: f64 = (1..=c.n)
            .map(|j| c.mode_entry(j, c.n - 1).powi(2) / c.omega(j).powi(2))
            .sum();
        assert!((static_sum - c.n as f64 / c.k).abs() < 1e-9, "{static_sum}");
    }

    /// Case (a) is the single mode: `u_N(t) = cos(omega_1 t)`, and the error measure is relative
    /// to the peak.
    #[test]
    fn single_mode_case_is_a_cosine_and_the_error_is_relative_to_the_peak() {
        let c = Chain {
            n: 30,
            m: 1.0,
            k: 1.0,
        };
        let p = Problem::new(c, Case::SingleMode, 1.0, 50);
        for (t, u) in p.samples.iter().zip(&p.exact) {
            assert!((u - (c.omega(1) * t).cos()).abs() < 1e-12);
        }
        assert!((p.displacement_scale() - 1.0).abs() < 1e-12);
        assert_eq!(*p.samples.last().unwrap(), p.horizon);
        let zero = vec![0.0; p.samples.len()];
        assert!((p.error(&zero) - 1.0).abs() < 1e-12);
        assert_eq!(p.error(&p.exact), 0.0);
        assert_eq!(p.error(&zero[1..]), f64::INFINITY);
    }
}
