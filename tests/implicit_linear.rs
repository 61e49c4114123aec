//! The generalised-alpha family on linear problems: energy, period error, the classic two-DOF
//! example, convergence orders, high-frequency filtering and agreement with the amplification
//! matrix.

#![allow(clippy::needless_range_loop)]

mod common;

use stepgauge::State;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::model::LinearModel;
use stepgauge::params::AlphaParams;
use stepgauge::spectral::{Scheme, alpha_amplification};

fn spectral_radius(p: &AlphaParams, omega_dt: f64, xi: f64) -> f64 {
    stepgauge::spectral::spectral_radius(&Scheme::Alpha(*p), omega_dt, xi)
}

fn integrator(model: &mut LinearModel, state: &mut State, p: AlphaParams) -> AlphaIntegrator {
    AlphaIntegrator::new(
        model,
        state,
        p,
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap()
}

/// Trapezoidal rule on an undamped SDOF: the discrete energy is conserved exactly (to round-off)
/// and the discrete frequency obeys omega_bar dt = 2 atan(omega dt / 2) (Hughes 1987, *The Finite
/// Element Method*, sec. 9.3). Checked with a dense solve, and with the sparse Cholesky plus one
/// refinement per step (a reused factor otherwise rounds the same way every step and drifts by
/// about one ulp per step: docs/implicit.md).
#[test]
fn average_acceleration_conserves_energy_and_has_the_trapezoidal_period() {
    use stepgauge::linalg::{LinearSolver, SparseCholesky};
    let (m, k) = (3.0f64, 27.0f64);
    let w = (k / m).sqrt();
    type MakeSolver = fn() -> Box<dyn LinearSolver>;
    let solvers: [(MakeSolver, bool); 2] = [
        (common::DenseLu::boxed, false),
        (|| Box::new(SparseCholesky::new()), true),
    ];
    for (solver, refine) in solvers {
        for omega_dt in [0.1f64, 1.0, 5.0] {
            let dt = omega_dt / w;
            let mut model = common::sdof(m, k);
            let mut state = State::new(0.0, vec![0.5], vec![0.0]).unwrap();
            let mut opts = ImplicitOptions::default();
            opts.refine_linear = refine;
            let mut it = AlphaIntegrator::new(
                &mut model,
                &mut state,
                AlphaParams::average_acceleration(),
                solver(),
                opts,
            )
            .unwrap();
            let e0 = 0.5 * k * 0.25;
            let theta = 2.0 * (omega_dt / 2.0).atan();
            let mut worst_e: f64 = 0.0;
            let mut worst_u: f64 = 0.0;
            for n in 1..=10_000 {
                it.step(&mut model, &mut state, dt).unwrap();
                let e = 0.5 * m * state.v[0] * state.v[0] + 0.5 * k * state.u[0] * state.u[0];
                worst_e = worst_e.max((e - e0).abs() / e0);
                // From rest the discrete solution is u_n = u0 cos(n theta) exactly.
                worst_u = worst_u.max((state.u[0] - 0.5 * (n as f64 * theta).cos()).abs());
            }
            assert!(
                worst_e < 1e-12,
                "Omega {omega_dt}: energy error {worst_e:e}"
            );
            assert!(
                worst_u < 1e-9,
                "Omega {omega_dt}: phase deviation {worst_u:e}"
            );
            // The ledger closes with no numerical dissipation.
            let l = it.energy();
            assert!(
                l.numerical_dissipation.abs() < 1e-12 * e0,
                "{}",
                l.numerical_dissipation
            );
        }
    }
}

/// The classic two-DOF example (Bathe, *Finite Element Procedures*, 1996, examples 9.1-9.5):
/// M = diag(2, 1), K = [[6, -2], [-2, 4]], R = [0, 10], from rest, dt = 0.28.
/// Exact modal solution: omega^2 = 2 and 5, modes phi_1 = [1, 1]/sqrt(3), phi_2 = [1/2, -1]
/// /sqrt(3/2) (M-orthonormal), each modal coordinate q_i = (f_i / omega_i^2)(1 - cos omega_i t).
/// stepgauge's history must equal the modal superposition of the amplification-matrix powers (to
/// round-off), and its error against the exact solution must stay within what the spectral
/// radius and period error of each mode predict.
#[test]
fn bathe_two_dof_example_for_every_scheme() {
    let m = [2.0, 1.0];
    let phi = [
        [1.0 / 3f64.sqrt(), 1.0 / 3f64.sqrt()],
        [0.5 / 1.5f64.sqrt(), -1.0 / 1.5f64.sqrt()],
    ];
    let w2 = [2.0, 5.0];
    let f = [0.0, 10.0];
    let modal_force: Vec<f64> = (0..2)
        .map(|i| phi[i][0] * f[0] + phi[i][1] * f[1])
        .collect();
    let exact = |t: f64| {
        let mut u = [0.0; 2];
        for i in 0..2 {
            let q = modal_force[i] / w2[i] * (1.0 - (w2[i].sqrt() * t).cos());
            u[0] += phi[i][0] * q;
            u[1] += phi[i][1] * q;
        }
        u
    };
    let dt = 0.28;
    let schemes = [
        AlphaParams::average_acceleration(),
        AlphaParams::linear_acceleration(),
        AlphaParams::fox_goodwin(),
        AlphaParams::hht(-0.1).unwrap(),
        AlphaParams::wbz(-0.1).unwrap(),
        AlphaParams::generalized_alpha(0.8).unwrap(),
        AlphaParams::newmark(0.3025, 0.6).unwrap(),
    ];
    for p in schemes {
        let mut model = stepgauge::model::LinearModel::new(
            &common::diag(&m),
            &common::dense(&[&[6.0, -2.0], &[-2.0, 4.0]]),
        )
        .unwrap()
        .with_load(stepgauge::model::Load::Pattern {
            pattern: f.to_vec(),
            factor: stepgauge::model::TimeFunction::Constant(1.0),
        })
        .unwrap();
        let mut state = State::at_rest(2, 0.0);
        let mut it = integrator(&mut model, &mut state, p);
        // Modal prediction: each mode's deviation from its static part, q - f/w^2, evolves by
        // the amplification matrix of Omega = omega dt (the static part is reproduced exactly).
        let mut x: Vec<[f64; 3]> = (0..2)
            .map(|i| [-modal_force[i] / w2[i], 0.0, dt * dt * modal_force[i]])
            .collect();
        let amps: Vec<_> = (0..2)
            .map(|i| alpha_amplification(&p, w2[i].sqrt() * dt, 0.0))
            .collect();
        let mut max_err: f64 = 0.0;
        for n in 1..=12 {
            it.step(&mut model, &mut state, dt).unwrap();
            let mut pred = [0.0; 2];
            for i in 0..2 {
                let a = &amps[i];
                let y = x[i];
                x[i] = [
                    a[0][0] * y[0] + a[0][1] * y[1] + a[0][2] * y[2],
                    a[1][0] * y[0] + a[1][1] * y[1] + a[1][2] * y[2],
                    a[2][0] * y[0] + a[2][1] * y[1] + a[2][2] * y[2],
                ];
                let q = x[i][0] + modal_force[i] / w2[i];
                pred[0] += phi[i][0] * q;
                pred[1] += phi[i][1] * q;
            }
            for d in 0..2 {
                assert!(
                    (state.u[d] - pred[d]).abs() < 1e-12,
                    "{:?} step {n}: {} vs {}",
                    p.family(),
                    state.u[d],
                    pred[d]
                );
            }
            let ex = exact(n as f64 * dt);
            max_err = max_err.max((state.u[0] - ex[0]).abs().max((state.u[1] - ex[1]).abs()));
        }
        // Error bound over 12 steps from each mode's amplitude A_i = |f_i|/w_i^2: amplitude decay
        // 1 - rho^n plus phase drift n |Omega_bar - Omega| (first-order bound, Hughes 1987 sec. 9.3),
        // with the phase from the argument of the principal eigenvalue.
        let mut bound = 0.0;
        for i in 0..2 {
            let o = w2[i].sqrt() * dt;
            let ev = stepgauge::spectral::eigenvalues3(&alpha_amplification(&p, o, 0.0));
            let principal = ev
                .iter()
                .filter(|z| z.im > 0.0)
                .max_by(|a, b| a.norm().total_cmp(&b.norm()))
                .unwrap();
            let rho = principal.norm();
            let phase = principal.arg();
            let amp = modal_force[i].abs() / w2[i] * phi[i][0].abs().max(phi[i][1].abs());
            bound += amp * ((1.0 - rho.powi(12)).abs() + 12.0 * (phase - o).abs()) + 1e-12;
        }
        assert!(
            max_err <= 1.5 * bound + 1e-9,
            "{:?}: error {max_err} bound {bound}",
            p.family()
        );
    }
}

/// Measured order of accuracy on the damped SDOF free vibration (exact solution: Chopra,
/// *Dynamics of Structures*, eq. 2.2.4): 2 for gamma = 1/2 and for HHT, WBZ and generalised-alpha
/// (their relations keep second order: Hilber et al. 1977, Chung & Hulbert 1993), 1 for Newmark
/// with gamma > 1/2 (Hughes 1987, sec. 9.1). Four halvings, slope within 0.1.
#[test]
fn convergence_orders_of_the_family() {
    let (m, k, xi) = (1.0f64, 40.0f64, 0.03f64);
    let w = (k / m).sqrt();
    let wd = w * (1.0 - xi * xi).sqrt();
    let (u0, v0) = (0.01, 0.2);
    let exact = |t: f64| {
        (-xi * w * t).exp() * (u0 * (wd * t).cos() + (v0 + xi * w * u0) / wd * (wd * t).sin())
    };
    let cases = [
        (AlphaParams::average_acceleration(), 2.0),
        (AlphaParams::linear_acceleration(), 2.0),
        (AlphaParams::hht(-0.3).unwrap(), 2.0),
        (AlphaParams::wbz(-0.2).unwrap(), 2.0),
        (AlphaParams::generalized_alpha(0.5).unwrap(), 2.0),
        (AlphaParams::generalized_alpha(0.0).unwrap(), 2.0),
        (AlphaParams::newmark(0.3025, 0.6).unwrap(), 1.0),
    ];
    for (p, order) in cases {
        let errs: Vec<f64> = (0..5)
            .map(|h| {
                let dt = 0.02 / 2f64.powi(h);
                let mut model = common::sdof(m, k).with_rayleigh(2.0 * xi * w, 0.0).unwrap();
                let mut state = State::new(0.0, vec![u0], vec![v0]).unwrap();
                let mut it = integrator(&mut model, &mut state, p);
                let steps = (1.0 / dt).round() as usize;
                let mut e: f64 = 0.0;
                for _ in 0..steps {
                    it.step(&mut model, &mut state, dt).unwrap();
                    e = e.max((state.u[0] - exact(state.t)).abs());
                }
                e
            })
            .collect();
        for w2 in errs.windows(2) {
            let slope = (w2[0] / w2[1]).log2();
            assert!(
                (slope - order).abs() < 0.1,
                "{:?} {p:?}: slope {slope}, errors {errs:?}",
                p.family()
            );
        }
    }
}

/// A stiff-soft two-spring chain: the stiff mode (omega dt about 1400) is spurious. Stepped, its
/// modal state follows the amplification matrix exactly, so it decays at the spectral radius
/// there, which is close to rho_inf: about 0.54 for HHT with alpha = -0.3, 0 and 0.6 for
/// generalised-alpha with those rho_inf, while average acceleration keeps it at full amplitude
/// (Hilber, Hughes & Taylor 1977; Chung & Hulbert 1993).
#[test]
fn spurious_stiff_mode_is_filtered_at_the_predicted_rate() {
    let (k_soft, k_stiff, dt) = (1.0f64, 1.0e6f64, 1.0f64);
    // Unit masses: K = [[k_soft + k_stiff, -k_stiff], [-k_stiff, k_stiff]]; its larger eigenvalue
    // and unit eigenvector (closed form of a symmetric 2x2 matrix).
    let (p11, p12, p22) = (k_soft + k_stiff, -k_stiff, k_stiff);
    let tr = p11 + p22;
    let det = p11 * p22 - p12 * p12;
    let lam = 0.5 * (tr + (tr * tr - 4.0 * det).sqrt());
    let (e0, e1) = (-p12, p11 - lam);
    let nrm = (e0 * e0 + e1 * e1).sqrt();
    let phi = [e0 / nrm, e1 / nrm];
    let omega_dt = lam.sqrt() * dt;
    for (p, rho_inf) in [
        (AlphaParams::average_acceleration(), 1.0),
        (AlphaParams::hht(-0.3).unwrap(), 0.7 / 1.3),
        (AlphaParams::generalized_alpha(0.0).unwrap(), 0.0),
        (AlphaParams::generalized_alpha(0.6).unwrap(), 0.6),
    ] {
        let mut model = stepgauge::model::LinearModel::new(
            &common::diag(&[1.0, 1.0]),
            &common::dense(&[&[p11, p12], &[p12, p22]]),
        )
        .unwrap();
        let mut state =
            State::new(0.0, vec![1e-3 * phi[0], 1e-3 * phi[1]], vec![0.0, 0.0]).unwrap();
        let mut it = integrator(&mut model, &mut state, p);
        let modal = |s: &State| {
            let q = |x: &[f64]| phi[0] * x[0] + phi[1] * x[1];
            [q(&s.u), dt * q(&s.v), dt * dt * q(&s.a)]
        };
        let a = alpha_amplification(&p, omega_dt, 0.0);
        let rho = spectral_radius(&p, omega_dt, 0.0);
        // At Omega ~ 1400 the spectral radius is already near its limit (for generalised-alpha it
        // approaches rho_inf only like Omega^(-2/3): Chung & Hulbert 1993).
        assert!(
            (rho - rho_inf).abs() < 0.03,
            "{p:?}: rho {rho} vs rho_inf {rho_inf}"
        );
        let mut x = modal(&state);
        let size = |x: &[f64; 3]| (x[0] * x[0] + x[1] * x[1] + x[2] * x[2]).sqrt();
        let x0 = size(&x);
        let mut sizes = vec![x0];
        for _ in 0..10 {
            it.step(&mut model, &mut state, dt).unwrap();
            x = [
                a[0][0] * x[0] + a[0][1] * x[1] + a[0][2] * x[2],
                a[1][0] * x[0] + a[1][1] * x[1] + a[1][2] * x[2],
                a[2][0] * x[0] + a[2][1] * x[1] + a[2][2] * x[2],
            ];
            let stepped = modal(&state);
            for c in 0..3 {
                assert!(
                    (stepped[c] - x[c]).abs() <= 1e-9 * x0,
                    "{p:?}: {stepped:?} vs {x:?}"
                );
            }
            sizes.push(size(&stepped));
        }
        if rho_inf == 1.0 {
            assert!(
                sizes[10] > 0.5 * x0,
                "average acceleration must not damp: {sizes:?}"
            );
        } else {
            // Ten steps at about rho per step (the factor allows for the near-multiple roots).
            assert!(
                sizes[10] <= 20.0 * (rho + 1e-3).powi(10) * x0 + 1e-12 * x0,
                "{p:?}: {sizes:?}"
            );
        }
    }
}

/// Stepped decay of a mode equals the spectral radius the amplification matrix predicts (ties
/// the integrator to the spectral analysis; Hughes 1987, sec. 9.3): projecting the stepped state
/// x_n = (u, dt v, dt^2 a) on the left eigenvector of the dominant eigenvalue z gives
/// c_n = c_0 z^n exactly, so |c_N / c_0|^(1/N) must equal rho to round-off.
#[test]
fn stepped_decay_equals_the_spectral_radius() {
    for p in [
        AlphaParams::hht(-0.2).unwrap(),
        AlphaParams::wbz(-0.25).unwrap(),
        AlphaParams::generalized_alpha(0.3).unwrap(),
        AlphaParams::newmark(0.3, 0.6).unwrap(),
        AlphaParams::linear_acceleration(),
    ] {
        for omega_dt in [0.5, 2.0, 8.0] {
            let a = alpha_amplification(&p, omega_dt, 0.0);
            let ev = stepgauge::spectral::eigenvalues3(&a);
            let z = *ev
                .iter()
                .max_by(|x, y| x.norm().total_cmp(&y.norm()))
                .unwrap();
            let rho = spectral_radius(&p, omega_dt, 0.0);
            assert!((z.norm() - rho).abs() < 1e-14);
            let l = common::left_eigenvector(&a, z);
            let project = |s: &State| {
                let x = [s.u[0], omega_dt * s.v[0], omega_dt * omega_dt * s.a[0]];
                l[0] * x[0] + l[1] * x[1] + l[2] * x[2]
            };
            // omega = 1, so dt = Omega.
            let mut model = common::sdof(1.0, 1.0);
            let mut state = State::new(0.0, vec![1.0], vec![0.3]).unwrap();
            // Linear acceleration at Omega = 8 is unstable: let it grow.
            let mut opts = ImplicitOptions::default();
            opts.growth_limit = f64::INFINITY;
            let mut it =
                AlphaIntegrator::new(&mut model, &mut state, p, common::DenseLu::boxed(), opts)
                    .unwrap();
            let c0 = project(&state);
            let n = 30;
            for _ in 0..n {
                it.step(&mut model, &mut state, omega_dt).unwrap();
            }
            let measured = (project(&state).norm() / c0.norm()).powf(1.0 / n as f64);
            assert!(
                (measured - rho).abs() < 1e-9 * rho.max(1.0),
                "{p:?} Omega {omega_dt}: measured {measured} predicted {rho}"
            );
        }
    }
}

/// The implicit linear step gives bit-identical results on 1 and 2 threads (fixed chunks, sums
/// in chunk order), on the streamlined path (no constraints: lumped and consistent mass, with
/// and without Rayleigh damping) and on the general one (a constraint).
#[test]
fn implicit_results_do_not_depend_on_the_thread_count() {
    use stepgauge::linalg::SparseCholesky;
    use stepgauge::model::{Constraints, Load, TimeFunction};
    let n = 40_000; // above the default parallel threshold of 32,768
    let make = |case: usize| {
        let mass = if case == 1 {
            common::dense_band_mass(n)
        } else {
            common::diag(&vec![1.0; n])
        };
        let mut pattern = vec![0.0; n];
        pattern[n / 2] = 1.0;
        let model = LinearModel::new(&mass, &common::chain_stiffness(n, 1.0, true, false))
            .unwrap()
            .with_load(Load::Pattern {
                pattern,
                factor: TimeFunction::Constant(0.5),
            })
            .unwrap();
        match case {
            0 => model,
            1 | 2 => model.with_rayleigh(0.01, 0.02).unwrap(),
            _ => model
                .with_constraints(Constraints::new().fix(n - 1))
                .unwrap(),
        }
    };
    for case in 0..4 {
        let go = |threads: usize| {
            let pool = rayon::ThreadPoolBuilder::new()
                .num_threads(threads)
                .build()
                .unwrap();
            pool.install(|| {
                let mut model = make(case);
                let u0: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1013) as f64 * 1e-3).collect();
                let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
                let mut it = AlphaIntegrator::new(
                    &mut model,
                    &mut state,
                    AlphaParams::hht(-0.1).unwrap(),
                    Box::new(SparseCholesky::new()),
                    ImplicitOptions::default(),
                )
                .unwrap();
                for _ in 0..4 {
                    it.step(&mut model, &mut state, 0.7).unwrap();
                }
                (state, it.energy().clone())
            })
        };
        let (s1, e1) = go(1);
        let (s2, e2) = go(2);
        let bits = |x: &[f64]| x.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
        assert_eq!(bits(&s1.u), bits(&s2.u), "case {case}");
        assert_eq!(bits(&s1.v), bits(&s2.v), "case {case}");
        assert_eq!(bits(&s1.a), bits(&s2.a), "case {case}");
        for (x, y) in [
            (e1.kinetic, e2.kinetic),
            (e1.internal_work, e2.internal_work),
            (e1.external_work, e2.external_work),
            (e1.damping_work, e2.damping_work),
            (e1.numerical_dissipation, e2.numerical_dissipation),
        ] {
            assert_eq!(x.to_bits(), y.to_bits(), "case {case}");
        }
        // The run moved (a test on a state at rest could not fail).
        assert!(e1.kinetic > 0.0, "case {case}");
    }
}
