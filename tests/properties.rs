//! Properties of the schemes on random problems (proptest; failing cases are kept in
//! `tests/properties.proptest-regressions`, which is committed):
//!
//! - the trapezoidal rule conserves the discrete energy of any undamped linear system, at any step;
//! - the central difference below its stability limit conserves a modified (shadow) energy, which
//!   bounds the energy;
//! - the undamped central difference is time-reversible;
//! - a single mode stepped by any member of the families decays at the spectral radius that the
//!   spectral analysis predicts;
//! - for any parameter set (raw sets off every family included), `Omega` and damping, one step
//!   of each engine from the three unit states is the amplification matrix, column by column;
//! - every verdict holds over every set: "unconditional" keeps the spectral radius within
//!   `1 + 1e-9` up to `Omega = 1e6`, "conditional" matches a scan around its `Omega_crit`,
//!   "unstable" has a radius above 1 at small `Omega`.

mod common;

use nalgebra::{DMatrix, DVector};
use proptest::prelude::*;
use sprs::{CsMat, TriMat};
use stepgauge::State;
use stepgauge::explicit::{
    CentralDifference, CentralDifferenceOptions, ForceVelocity, StableLimit,
};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::model::LinearModel;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::{Scheme, eigenvalues3, spectral_radius};

fn sparse(a: &DMatrix<f64>) -> CsMat<f64> {
    let mut t = TriMat::new((a.nrows(), a.ncols()));
    for i in 0..a.nrows() {
        for j in 0..a.ncols() {
            if a[(i, j)] != 0.0 {
                t.add_triplet(i, j, a[(i, j)]);
            }
        }
    }
    t.to_csr()
}

/// A random symmetric positive definite `n x n` matrix `scale (B B^T / n + shift I)` from the
/// entries `b` (in `[-1, 1]`, row-major) and `shift > 0`: its eigenvalues lie in
/// `scale [shift, n + shift]` (Gershgorin on `B B^T / n`, whose entries are at most 1).
fn spd(n: usize, b: &[f64], shift: f64, scale: f64) -> DMatrix<f64> {
    let b = DMatrix::from_row_slice(n, n, &b[..n * n]);
    (&b * b.transpose() / n as f64 + DMatrix::identity(n, n) * shift) * scale
}

/// `omega_max = sqrt(lambda_max(M^-1 K))`, from the symmetric `L^-1 K L^-T` with `M = L L^T`.
fn omega_max(m: &DMatrix<f64>, k: &DMatrix<f64>) -> f64 {
    let l = m.clone().cholesky().expect("M is SPD").l();
    let li = l.try_inverse().expect("L is regular");
    let a = &li * k * li.transpose();
    let a = (&a + a.transpose()) * 0.5;
    a.symmetric_eigenvalues().max().sqrt()
}

fn energy(m: &DMatrix<f64>, k: &DMatrix<f64>, u: &[f64], v: &[f64]) -> f64 {
    let (u, v) = (DVector::from_column_slice(u), DVector::from_column_slice(v));
    0.5 * v.dot(&(m * &v)) + 0.5 * u.dot(&(k * &u))
}

/// A log-uniform value in `[lo, hi]`.
fn log_uniform(lo: f64, hi: f64) -> impl Strategy<Value = f64> {
    (0.0..1.0f64).prop_map(move |s| (lo.ln() + s * (hi.ln() - lo.ln())).exp())
}

/// `(n, B entries for M, B entries for K, u0, v0)` with `n` in `2..8`.
fn system() -> impl Strategy<Value = (usize, Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>)> {
    (2..8usize).prop_flat_map(|n| {
        let v = move |len: usize| prop::collection::vec(-1.0..1.0f64, len);
        (Just(n), v(n * n), v(n * n), v(n), v(n))
    })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    /// Trapezoidal rule (average acceleration), undamped and unloaded, consistent mass:
    /// `E_n = v_n^T M v_n / 2 + u_n^T K u_n / 2` is the same at every step. Exactly so in exact
    /// arithmetic, at any step size: with `u_{n+1} - u_n = dt (v_n + v_{n+1}) / 2` and
    /// `v_{n+1} - v_n = dt (a_n + a_{n+1}) / 2`, `M a = -K u`,
    /// `E_{n+1} - E_n = (v_{n+1} - v_n)^T M (v_{n+1} + v_n) / 2 + (u_{n+1} - u_n)^T K (u_{n+1} + u_n) / 2
    /// = (dt / 4) [-(u_n + u_{n+1})^T K (v_n + v_{n+1}) + (v_n + v_{n+1})^T K (u_{n+1} + u_n)] = 0`
    /// (Hughes 1987, *The Finite Element Method*, sec. 9.3: the trapezoidal rule conserves
    /// energy for linear systems). Measured here for `Omega = omega_max dt` from 0.05 to 1000,
    /// to 1e-10 relative over 300 steps, with one refinement of each solve
    /// (`ImplicitOptions::refine_linear`): a solve's rounding is about `cond(M + dt^2 K / 4)`
    /// ulps, up to 1e5 at `Omega` near 1000 with a soft second mode, and without the refinement
    /// the energy of such a case drifted by 1.4e-10 over the 300 steps (1.2e-12 with it; the
    /// drift of a reused factor: docs/implicit.md).
    #[test]
    fn trapezoidal_rule_conserves_the_discrete_energy(
        (n, bm, bk, u0, v0) in system(),
        m_shift in 0.2..1.0f64, k_shift in 0.05..1.0f64, k_scale in log_uniform(1e-2, 1e4),
        omega_dt in log_uniform(0.05, 1000.0),
    ) {
        let m = spd(n, &bm, m_shift, 1.0);
        let k = spd(n, &bk, k_shift, k_scale);
        let dt = omega_dt / omega_max(&m, &k);
        let mut model = LinearModel::new(&sparse(&m), &sparse(&k)).unwrap();
        let mut state = State::new(0.0, u0.clone(), v0.clone()).unwrap();
        let mut it = AlphaIntegrator::new(
            &mut model, &mut state, AlphaParams::average_acceleration(),
            common::DenseLu::boxed(), {
                let mut o = ImplicitOptions::default();
                o.refine_linear = true;
                o
            },
        ).unwrap();
        let e0 = energy(&m, &k, &state.u, &state.v);
        prop_assume!(e0 > 1e-6);
        let mut worst: f64 = 0.0;
        for _ in 0..300 {
            it.step(&mut model, &mut state, dt).unwrap();
            worst = worst.max((energy(&m, &k, &state.u, &state.v) - e0).abs() / e0);
        }
        prop_assert!(worst < 1e-10, "n {n}, Omega {omega_dt}: relative energy error {worst:e}");
    }
}

/// Lumped masses and springs of a random chain: `m_i`, and springs `k_0` (to a wall at the
/// left), `k_1 .. k_{n-1}` between neighbours, `k_n` to a wall at the right when `right_wall`.
fn chain_matrices(m: &[f64], k: &[f64], right_wall: bool) -> (DMatrix<f64>, DMatrix<f64>) {
    let n = m.len();
    let mut kk = DMatrix::zeros(n, n);
    for (s, &ks) in k.iter().enumerate().take(n + 1) {
        // Spring s joins DOF s - 1 (or the left wall) and DOF s (or the right wall).
        let (a, b) = (s.checked_sub(1), (s < n).then_some(s));
        if b.is_none() && !right_wall {
            continue;
        }
        for (p, q) in [(a, a), (b, b)] {
            if let (Some(p), Some(q)) = (p, q) {
                kk[(p, q)] += ks;
            }
        }
        if let (Some(p), Some(q)) = (a, b) {
            kk[(p, q)] -= ks;
            kk[(q, p)] -= ks;
        }
    }
    (DMatrix::from_diagonal(&DVector::from_column_slice(m)), kk)
}

fn chain() -> impl Strategy<Value = (Vec<f64>, Vec<f64>, bool, Vec<f64>, Vec<f64>)> {
    (2..9usize).prop_flat_map(|n| {
        (
            prop::collection::vec(log_uniform(0.1, 10.0), n),
            prop::collection::vec(log_uniform(0.1, 10.0), n + 1),
            any::<bool>(),
            prop::collection::vec(-1.0..1.0f64, n),
            prop::collection::vec(-1.0..1.0f64, n),
        )
    })
}

/// A central-difference integrator on the chain at `fraction` of its estimated stable step;
/// returns it with the model, the state, the step and `Omega_max = omega_max dt` (exact, from
/// the dense eigenproblem).
fn explicit_chain(
    m: &[f64],
    k: &[f64],
    right_wall: bool,
    u0: &[f64],
    v0: &[f64],
    fraction: f64,
) -> (
    CentralDifference,
    LinearModel,
    State,
    f64,
    f64,
    DMatrix<f64>,
    DMatrix<f64>,
) {
    let (mm, kk) = chain_matrices(m, k, right_wall);
    let mut model = LinearModel::new(&sparse(&mm), &sparse(&kk)).unwrap();
    let mut state = State::new(0.0, u0.to_vec(), v0.to_vec()).unwrap();
    let cd = CentralDifference::new(&mut model, &mut state, {
        let mut o = CentralDifferenceOptions::default();
        o.stable_limit = StableLimit::Estimate;
        o
    })
    .unwrap();
    let dt = fraction * cd.stable_limit().unwrap();
    let omega = omega_max(&mm, &kk) * dt;
    (cd, model, state, dt, omega, mm, kk)
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 48, ..ProptestConfig::default() })]

    /// Central difference (lumped mass, undamped, unloaded) at `s` times the estimated stable
    /// step, `s` in (0.05, 0.95). With the integer-step velocity `v_n` and `a_n = -M^-1 K u_n`,
    /// the shadow energy
    /// `H_n = v_{n+1/2}^T M v_{n-1/2} / 2 + u_n^T K u_n / 2 = v_n^T M v_n / 2 - (dt^2 / 8) a_n^T M a_n + u_n^T K u_n / 2`
    /// is conserved exactly in exact arithmetic (derivation: `M (v_{n+3/2} - v_{n-1/2}) =
    /// -dt K (u_n + u_{n+1})` and `u_{n+1} - u_n = dt v_{n+1/2}` make `H_{n+1} - H_n =
    /// -(u_{n+1} - u_n)^T K (u_{n+1} + u_n) / 2 + (u_{n+1}^T K u_{n+1} - u_n^T K u_n) / 2 = 0`;
    /// it is the modified energy of the leapfrog, common practice). Since
    /// `a^T M a = u^T K M^-1 K u <= omega_max^2 u^T K u`, `H >= (1 - Omega_max^2 / 4) E` with
    /// `E = v^T M v / 2 + u^T K u / 2`, and `H_0 <= E_0`, so
    /// `E_n <= E_0 / (1 - (Omega_max / 2)^2)` for every n: bounded, no growth. Checked over
    /// 2000 steps: `H` to 1e-10 relative (rounding), `E_n` against the bound.
    #[test]
    fn central_difference_energy_stays_bounded_below_the_limit(
        (m, k, right_wall, u0, v0) in chain(), s in 0.05..0.95f64,
    ) {
        let (mut cd, mut model, mut state, dt, omega, mm, kk) =
            explicit_chain(&m, &k, right_wall, &u0, &v0, s);
        prop_assert!(omega < 2.0, "Omega_max {omega} at s = {s}");
        let shadow = |st: &State| {
            let a = DVector::from_column_slice(&st.a);
            energy(&mm, &kk, &st.u, &st.v) - dt * dt / 8.0 * a.dot(&(&mm * &a))
        };
        let e0 = energy(&mm, &kk, &state.u, &state.v);
        let h0 = shadow(&state);
        prop_assume!(e0 > 1e-6);
        let bound = e0 / (1.0 - 0.25 * omega * omega);
        let (mut worst_h, mut peak): (f64, f64) = (0.0, 0.0);
        for _ in 0..2000 {
            cd.step(&mut model, &mut state, dt).unwrap();
            worst_h = worst_h.max((shadow(&state) - h0).abs() / e0);
            peak = peak.max(energy(&mm, &kk, &state.u, &state.v));
        }
        prop_assert!(worst_h < 1e-10, "shadow energy drifts by {worst_h:e} (s {s}, Omega {omega})");
        prop_assert!(peak <= bound * (1.0 + 1e-10),
            "energy {peak} above the bound {bound} (E_0 {e0}, Omega {omega})");
    }

    /// Undamped central difference is time-reversible: N steps forward, the velocity negated, N
    /// steps again give back `u_0` and `-v_0` (exactly in exact arithmetic: from `(u_N, -v_N,
    /// a_N)` the half-step velocity is `-v_N + (dt/2) a_N = -v_{N-1/2}`, so the next displacement
    /// is `u_N - dt v_{N-1/2} = u_{N-1}`, and so on back). In floating point each step adds a few
    /// ulps of rounding to the state, which the stable map carries without growth beyond the
    /// ratio `1 / sqrt(1 - (Omega_max / 2)^2)` of the energy norm to the shadow-energy norm, so
    /// the error grows at most linearly: measured in the energy norm
    /// `||(du, dv)|| = sqrt(dv^T M dv + du^T K du)` relative to that of `(u_0, v_0)`, the
    /// tolerance is `2N * 64 eps` times that ratio (about 1.4e-11 at N = 300 and s = 0.95; the
    /// 64 ulps per step cover the chain's three-term rows and the half-step updates).
    #[test]
    fn undamped_central_difference_is_time_reversible(
        (m, k, right_wall, u0, v0) in chain(), s in 0.05..0.95f64, steps in 50..300usize,
    ) {
        let (mut cd, mut model, mut state, dt, omega, mm, kk) =
            explicit_chain(&m, &k, right_wall, &u0, &v0, s);
        let _ = dt;
        for _ in 0..steps {
            cd.step(&mut model, &mut state, dt).unwrap();
        }
        state.v.iter_mut().for_each(|v| *v = -*v);
        for _ in 0..steps {
            cd.step(&mut model, &mut state, dt).unwrap();
        }
        let norm0 = (2.0 * energy(&mm, &kk, &u0, &v0)).sqrt();
        prop_assume!(norm0 > 1e-3);
        let du: Vec<f64> = state.u.iter().zip(&u0).map(|(x, y)| x - y).collect();
        let dv: Vec<f64> = state.v.iter().zip(&v0).map(|(x, y)| x + y).collect();
        let error = (2.0 * energy(&mm, &kk, &du, &dv)).sqrt() / norm0;
        let ratio = 1.0 / (1.0 - 0.25 * omega * omega).sqrt();
        let tol = 2.0 * steps as f64 * 64.0 * f64::EPSILON * ratio;
        prop_assert!(error <= tol,
            "N {steps}, Omega {omega}: relative error {error:e}, tolerance {tol:e}");
    }
}

/// A member of the families, drawn over its stable parameter range.
#[derive(Debug, Clone, Copy)]
enum Family {
    GeneralizedAlpha(f64),
    Hht(f64),
    Newmark { beta: f64, gamma: f64 },
    CentralDifference(bool),
}

fn family() -> impl Strategy<Value = Family> {
    prop_oneof![
        (0.0..=1.0f64).prop_map(Family::GeneralizedAlpha),
        (-1.0 / 3.0..=0.0f64).prop_map(Family::Hht),
        // 2 beta >= gamma >= 1/2: beta = gamma / 2 + extra.
        (0.5..1.0f64, 0.0..0.5f64).prop_map(|(gamma, extra)| Family::Newmark {
            beta: gamma / 2.0 + extra,
            gamma
        }),
        any::<bool>().prop_map(Family::CentralDifference),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 64, ..ProptestConfig::default() })]

    /// The stepped decay of a damped SDOF equals `spectral::spectral_radius`: the stepped map on
    /// `x_n = (u_n, dt v_n, dt^2 a_n)` is the amplification matrix `A`, so the projection
    /// `c_n = l . x_n` on the left eigenvector `l` of the dominant eigenvalue `z` is exactly
    /// `c_0 z^n`, whatever the other (transient) components do; the measured rate
    /// `|c_N / c_0|^(1/N)` must then equal `rho = |z|` to round-off (1e-8 relative: the rounding
    /// of each step, over the conditioning of the eigenvector basis, which the case filter keeps
    /// above 1e-3 by refusing nearly repeated roots). `N` keeps `rho^N` above 1e-150.
    /// Scheme parameters, `Omega` (0.01 to 100, below 1.9 for the central difference) and
    /// `xi` (0 to 0.2) are random (Hughes 1987, sec. 9.3, for the analysis).
    #[test]
    fn spectral_radius_equals_the_stepped_decay(
        fam in family(), omega_dt in log_uniform(0.01, 100.0), xi in 0.0..0.2f64,
    ) {
        let scheme = match fam {
            Family::GeneralizedAlpha(r) => Scheme::Alpha(AlphaParams::generalized_alpha(r).unwrap()),
            Family::Hht(a) => Scheme::Alpha(AlphaParams::hht(a).unwrap()),
            Family::Newmark { beta, gamma } => Scheme::Alpha(AlphaParams::newmark(beta, gamma).unwrap()),
            Family::CentralDifference(p) => Scheme::CentralDifference(
                if p { ForceVelocity::Predicted } else { ForceVelocity::Lagged }),
        };
        // The central difference only inside its damped stability limit (a fraction 0.005 to
        // 0.95 of it).
        let omega_dt = match scheme {
            Scheme::CentralDifference(fv) => omega_dt.min(1.9) / 2.0 * fv.critical_omega_dt(xi),
            Scheme::Alpha(_) => omega_dt,
        };
        let a = scheme.amplification(omega_dt, xi);
        let ev = eigenvalues3(&a);
        let z = *ev.iter().max_by(|x, y| x.norm().total_cmp(&y.norm())).unwrap();
        let rho = spectral_radius(&scheme, omega_dt, xi);
        // The closed-form radius agrees with the Schur form to 3e-12 of max(1, rho), the bound
        // of the fast path's own proptest in tests/spectral.rs (both sides round; at small rho,
        // for example rho_inf = 0 at large Omega, the error is absolute, not relative).
        prop_assert!((z.norm() - rho).abs() <= 3e-12 * rho.max(1.0), "{} vs {rho}", z.norm());
        // Refuse nearly repeated roots (a defective A has no isolated left eigenvector) and a
        // spectral radius at round-off level.
        let gap = ev.iter().filter(|w| (**w - z).norm() > 0.0).map(|w| (*w - z).norm()).fold(f64::INFINITY, f64::min);
        prop_assume!(rho > 1e-6 && gap > 1e-3 * rho);
        let l = common::left_eigenvector(&a, z);
        let project = |s: &State| {
            let x = [s.u[0], omega_dt * s.v[0], omega_dt * omega_dt * s.a[0]];
            l[0] * x[0] + l[1] * x[1] + l[2] * x[2]
        };
        // m = k = 1 (omega = 1, dt = Omega); C = 2 xi M as mass-proportional Rayleigh damping.
        let mut model = common::sdof(1.0, 1.0).with_rayleigh(2.0 * xi, 0.0).unwrap();
        let mut state = State::new(0.0, vec![1.0], vec![0.3]).unwrap();
        let n = ((150.0 / -rho.log10().min(-1e-3)) as usize).clamp(5, 40);
        match scheme {
            Scheme::CentralDifference(fv) => {
                let mut opts = CentralDifferenceOptions::default();
                opts.force_velocity = fv;
                opts.stable_limit = StableLimit::Unchecked;
                let mut cd = CentralDifference::new(&mut model, &mut state, opts).unwrap();
                let c0 = project(&state);
                for _ in 0..n {
                    cd.step(&mut model, &mut state, omega_dt).unwrap();
                }
                let measured = (project(&state).norm() / c0.norm()).powf(1.0 / n as f64);
                prop_assert!((measured - rho).abs() <= 1e-8 * rho,
                    "{fam:?} Omega {omega_dt} xi {xi}: measured {measured}, predicted {rho}");
            }
            Scheme::Alpha(p) => {
                let mut opts = ImplicitOptions::default();
                opts.growth_limit = f64::INFINITY;
                let mut it = AlphaIntegrator::new(&mut model, &mut state, p, common::DenseLu::boxed(), opts).unwrap();
                let c0 = project(&state);
                for _ in 0..n {
                    it.step(&mut model, &mut state, omega_dt).unwrap();
                }
                let measured = (project(&state).norm() / c0.norm()).powf(1.0 / n as f64);
                prop_assert!((measured - rho).abs() <= 1e-8 * rho,
                    "{fam:?} Omega {omega_dt} xi {xi}: measured {measured}, predicted {rho} (N {n})");
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Every parameter set: the engines step what the analysis analyses, and the verdicts hold.

/// Any scheme the library steps or analyses: raw generalised-alpha sets anywhere in
/// `alpha_m` in [-1.5, 0.9], `alpha_f` in [-0.5, 0.9], `beta` in [0.01, 2], `gamma` in [0, 2]
/// (off-family, first-order, conditionally stable and unstable sets: almost none meets
/// `gamma = 1/2 - alpha_m + alpha_f`), and the named families (generalised-alpha, WBZ-alpha,
/// HHT-alpha by their parameter; Newmark with `beta` in [0.01, 1], `gamma` in [0, 1.5]; the
/// central difference in both forms).
fn any_scheme() -> impl Strategy<Value = Scheme> {
    prop_oneof![
        3 => (-1.5..0.9f64, -0.5..0.9f64, 0.01..2.0f64, 0.0..2.0f64).prop_map(|(am, af, b, g)| {
            Scheme::Alpha(AlphaParams::raw(am, af, b, g).unwrap())
        }),
        1 => (0.0..=1.0f64).prop_map(|r| Scheme::Alpha(AlphaParams::generalized_alpha(r).unwrap())),
        1 => (0.0..=1.0f64).prop_map(|r| Scheme::Alpha(AlphaParams::wbz_from_rho_inf(r).unwrap())),
        1 => (-1.0 / 3.0..=0.0f64).prop_map(|a| Scheme::Alpha(AlphaParams::hht(a).unwrap())),
        1 => (0.01..1.0f64, 0.0..1.5f64)
            .prop_map(|(b, g)| Scheme::Alpha(AlphaParams::newmark(b, g).unwrap())),
        1 => any::<bool>().prop_map(|p| Scheme::CentralDifference(if p {
            ForceVelocity::Predicted
        } else {
            ForceVelocity::Lagged
        })),
    ]
}

/// A damping ratio: zero a quarter of the time, else uniform on `[0, 2]` (over-damped included).
fn any_xi() -> impl Strategy<Value = f64> {
    prop_oneof![1 => Just(0.0), 3 => 0.0..2.0f64]
}

/// One step of the scheme's engine from each unit state `(u, dt v, dt^2 a) = e_j` of the SDOF
/// `m = k = 1` (so `dt = Omega`) with Rayleigh damping `c = a0 m + a1 k = 2 xi` split by `theta`
/// between the two terms: the columns of the map the engine applies, as a matrix. The engines
/// are resumed on the unit state (its acceleration taken as given, not re-derived from
/// equilibrium), so each state is stepped as it is.
fn stepped_matrix(scheme: &Scheme, omega_dt: f64, xi: f64, theta: f64) -> [[f64; 3]; 3] {
    let dt = omega_dt;
    let mut out = [[0.0; 3]; 3];
    for j in 0..3 {
        let mut model = common::sdof(1.0, 1.0)
            .with_rayleigh(2.0 * xi * theta, 2.0 * xi * (1.0 - theta))
            .unwrap();
        let mut x = [0.0; 3];
        x[j] = 1.0;
        let mut state = State::new(0.0, vec![x[0]], vec![x[1] / dt]).unwrap();
        state.a[0] = x[2] / (dt * dt);
        match scheme {
            Scheme::CentralDifference(fv) => {
                let opts = || {
                    let mut o = CentralDifferenceOptions::default();
                    o.force_velocity = *fv;
                    o.stable_limit = StableLimit::Unchecked;
                    o.growth_limit = f64::INFINITY;
                    o
                };
                let mut rest = State::at_rest(1, 0.0);
                let ledger = CentralDifference::new(&mut model, &mut rest, opts())
                    .unwrap()
                    .energy()
                    .clone();
                let mut cd = CentralDifference::resume(&mut model, &state, ledger, opts()).unwrap();
                cd.step(&mut model, &mut state, dt).unwrap();
            }
            Scheme::Alpha(p) => {
                let opts = || {
                    let mut o = ImplicitOptions::default();
                    o.growth_limit = f64::INFINITY;
                    o
                };
                let mut rest = State::at_rest(1, 0.0);
                let ledger = AlphaIntegrator::new(
                    &mut model,
                    &mut rest,
                    *p,
                    common::DenseLu::boxed(),
                    opts(),
                )
                .unwrap()
                .energy()
                .clone();
                let mut it = AlphaIntegrator::resume(
                    &mut model,
                    &state,
                    ledger,
                    *p,
                    common::DenseLu::boxed(),
                    opts(),
                )
                .unwrap();
                it.step(&mut model, &mut state, dt).unwrap();
            }
        }
        let y = [state.u[0], dt * state.v[0], dt * dt * state.a[0]];
        for i in 0..3 {
            out[i][j] = y[i];
        }
    }
    out
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 256, ..ProptestConfig::default() })]

    /// The engines step what the spectral analysis analyses: one step of the central difference
    /// or of the alpha integrator from each unit state `(u, dt v, dt^2 a)` gives, column by
    /// column, `Scheme::amplification` (the matrix every verdict, spectrum and stable step rests
    /// on), for any set, `Omega` from 1e-3 to 1e4, `xi` from 0 to 2 with any split between the
    /// two Rayleigh terms. A re-derivation check within the project (the matrix is the project's
    /// own), which ties the stepping code to the analysed coefficients.
    ///
    /// Bound: both sides form each entry with a few dozen operations on terms no larger than
    /// `S = (1 + 2 xi Omega + Omega^2) / (min(beta, 1) min(1 - alpha_m, 1) min(1 - alpha_f, 1))`
    /// (the balance's inertia, damping and stiffness terms over the weights the implicit update
    /// divides by; 1 for the central difference), each rounding by `eps / 2` of its size: the
    /// two agree within `64 eps S`, about `1.4e-14 S`.
    #[test]
    fn the_engines_step_the_amplification_matrix(
        scheme in any_scheme(), omega_dt in log_uniform(1e-3, 1e4), xi in any_xi(),
        theta in 0.0..=1.0f64,
    ) {
        let stepped = stepped_matrix(&scheme, omega_dt, xi, theta);
        let analysed = scheme.amplification(omega_dt, xi);
        let weights = match scheme {
            Scheme::Alpha(p) => {
                p.beta().min(1.0) * (1.0 - p.alpha_m()).min(1.0) * (1.0 - p.alpha_f()).min(1.0)
            }
            Scheme::CentralDifference(_) => 1.0,
        };
        let s = (1.0 + 2.0 * xi * omega_dt + omega_dt * omega_dt) / weights;
        let bound = 64.0 * f64::EPSILON * s;
        for i in 0..3 {
            for j in 0..3 {
                prop_assert!(
                    (stepped[i][j] - analysed[i][j]).abs() <= bound,
                    "{scheme:?} Omega {omega_dt} xi {xi} theta {theta}: entry ({i}, {j}) stepped \
                     {} analysed {} (bound {bound:e})\nstepped {stepped:?}\nanalysed {analysed:?}",
                    stepped[i][j], analysed[i][j]
                );
            }
        }
    }

    /// A verdict of "unconditionally stable" holds everywhere: the spectral radius stays within
    /// `1 + 1e-9` on 60 `Omega` from 1e-3 to 1e6 and `rho_inf <= 1 + 1e-9` (the computed radius
    /// is good to a few units of 1e-16 away from coalescing roots and to about 1e-15 near them,
    /// tests/spectral_exact.rs; a set with `rho` above 1 by 1e-9 at any sampled `Omega` would
    /// grow by `e` in 1e9 steps, which no stable verdict may hide). A verdict of "conditionally
    /// stable" matches a scan: `rho <= 1 + 1e-9` below `Omega_crit` (at 40 fractions of it from
    /// 1e-3 to 0.999) and `rho > 1` within `1e-3` above it unless the set is stable again right
    /// there. For any set of [`any_scheme`] and any damping ratio from 0 to 2.
    #[test]
    fn verdicts_hold_over_every_set(scheme in any_scheme(), xi in any_xi()) {
        use stepgauge::spectral::{CheckContext, Stability, check, log_space, rho_inf};
        let v = check(&scheme, xi, &CheckContext::default()).unwrap();
        match v.stability {
            Stability::Unconditional => {
                for o in log_space(1e-3, 1e6, 60) {
                    let r = spectral_radius(&scheme, o, xi);
                    prop_assert!(r <= 1.0 + 1e-9, "{scheme:?} xi {xi}: rho({o}) = {r}");
                }
                let ri = rho_inf(&scheme);
                prop_assert!(ri.is_some_and(|r| r <= 1.0 + 1e-9), "{scheme:?} xi {xi}: {ri:?}");
            }
            Stability::Conditional { omega_crit, .. } => {
                for f in log_space(1e-3, 0.999, 40) {
                    let r = spectral_radius(&scheme, f * omega_crit, xi);
                    prop_assert!(r <= 1.0 + 1e-9,
                        "{scheme:?} xi {xi}: rho({}) = {r} below Omega_crit {omega_crit}",
                        f * omega_crit);
                }
                let just_above = omega_crit * (1.0 + 1e-3);
                let window_there = v.stable_again.iter().any(|(a, _)| *a <= just_above);
                if !window_there {
                    let r = spectral_radius(&scheme, just_above, xi);
                    prop_assert!(r > 1.0,
                        "{scheme:?} xi {xi}: rho({just_above}) = {r} above Omega_crit {omega_crit}");
                }
            }
            Stability::Unstable => {
                // Unstable for every small step: the radius exceeds 1 somewhere below 1e-2.
                let worst = log_space(1e-4, 1e-2, 30)
                    .into_iter()
                    .map(|o| spectral_radius(&scheme, o, xi))
                    .fold(0.0, f64::max);
                prop_assert!(worst > 1.0, "{scheme:?} xi {xi}: max rho below 1e-2 = {worst}");
            }
        }
    }
}
