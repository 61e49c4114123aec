//! Central difference on multi-DOF models: wave propagation in a bar, energy accounting,
//! variable steps and thread-count independence.

mod common;

use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, StableLimit};
use stepgauge::model::{Constraints, LinearModel, Model, TimeFunction};
use stepgauge::run::{Flow, RecordOptions, RunOptions, StepControl, StopReason, run};
use stepgauge::{ModelError, State};

/// A uniform bar of `ne` two-node elements (length `len`, modulus `e`, density `rho`, unit area)
/// with row-sum lumped mass and free ends.
fn bar(ne: usize, len: f64, e: f64, rho: f64) -> LinearModel {
    let h = len / ne as f64;
    let n = ne + 1;
    let mut m = vec![rho * h; n];
    m[0] *= 0.5;
    m[n - 1] *= 0.5;
    LinearModel::new(
        &common::diag(&m),
        &common::chain_stiffness(n, e / h, false, false),
    )
    .unwrap()
}

/// One-dimensional elastic wave theory (Kolsky 1963, *Stress Waves in Solids*; Graff 1975,
/// *Wave Motion in Elastic Solids*, ch. 2): an end struck at constant speed v0 sends a front at
/// c = sqrt(E / rho) carrying the stress rho c v0; at a free far end the particle speed doubles to
/// 2 v0 when the front arrives, at t = L / c.
#[test]
fn struck_bar_wave_arrives_after_l_over_c_with_stress_rho_c_v0() {
    let (ne, len, e, rho, v0) = (400usize, 2.0f64, 200e9f64, 7800.0f64, 3.0f64);
    let c = (e / rho).sqrt();
    let h = len / ne as f64;
    let mut model = bar(ne, len, e, rho)
        .with_constraints(Constraints::new().prescribe_velocity(0, TimeFunction::Constant(v0)))
        .unwrap();
    let n = model.dofs();
    let mut state = State::at_rest(n, 0.0);
    let mut cd =
        CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    // One lumped two-node bar element has omega = 2 c / h, so h / c is the element bound on the
    // stable step (Belytschko, Liu & Moran 2000, ch. 6); the assembled mesh's omega_max lies just
    // below 2 c / h (by about (pi / 2n)^2 relative for n elements), so its critical step lies just
    // above h / c. For this linear model the estimate is Gershgorin's bound on the assembled
    // matrix (confirmed by Lanczos), which here is the element bound 2 c / h: h / c to rounding.
    let dt_stable = cd.stable_limit().unwrap();
    assert!(
        dt_stable >= (1.0 - 1e-13) * h / c && dt_stable < (1.0 + 1e-4) * h / c,
        "{dt_stable} vs {}",
        h / c
    );
    let dt = 0.9 * dt_stable;

    // Stress behind the front at t = 0.5 L / c, averaged over the elements between 0.1 L and 0.35 L.
    let t_half = 0.5 * len / c;
    while state.t + dt <= t_half {
        cd.step(&mut model, &mut state, dt).unwrap();
    }
    let (i0, i1) = ((0.1 * ne as f64) as usize, (0.35 * ne as f64) as usize);
    let mean_stress: f64 = (i0..i1)
        .map(|i| e * (state.u[i + 1] - state.u[i]) / h)
        .sum::<f64>()
        / (i1 - i0) as f64;
    let expected = -rho * c * v0; // compressive
    assert!(
        ((mean_stress - expected) / expected).abs() < 0.01,
        "stress {mean_stress:e} vs {expected:e}"
    );
    // Ahead of the front the bar is still at rest.
    assert!(state.u[(0.75 * ne as f64) as usize].abs() < 1e-12);

    // Arrival: the free far end first reaches v0 (half of its jump to 2 v0).
    let mut arrival = None;
    while state.t < 1.5 * len / c {
        cd.step(&mut model, &mut state, dt).unwrap();
        if state.v[n - 1] >= v0 {
            arrival = Some(state.t);
            break;
        }
    }
    let arrival = arrival.expect("the wave never arrived");
    // The discrete front spreads over a few elements (dispersion of the lumped mesh): allow
    // two element transit times.
    assert!(
        (arrival - len / c).abs() < 2.0 * h / c,
        "arrival {arrival:e} vs L/c {:e}",
        len / c
    );
    // The energy put in by the impactor is accounted for.
    let l = cd.energy();
    assert!(l.constraint_work > 0.0);
    assert!(
        l.relative_balance_error() < 0.02,
        "{}",
        l.relative_balance_error()
    );
}

/// Undamped linear model: the balance error stays within the swing of the central difference's
/// discrete energy, `(omega_j dt)^2 / 4` of each mode's energy, at a step resolving the motion and
/// at a coarse one, without drifting (the central difference conserves a discrete energy exactly:
/// Hughes 1987, sec. 9.3; Belytschko, Liu & Moran 2000, sec. 6.2.3).
#[test]
fn energy_balance_of_an_undamped_chain_does_not_drift() {
    let n = 20;
    let k = 1.0e4;
    let mut model = LinearModel::new(
        &common::diag(&vec![1.0; n]),
        &common::chain_stiffness(n, k, true, true),
    )
    .unwrap();
    // Initial shape of the first mode plus a little of the others.
    let u0: Vec<f64> = (0..n)
        .map(|i| {
            let x = (i + 1) as f64 / (n + 1) as f64;
            (std::f64::consts::PI * x).sin() + 0.01 * (7.0 * std::f64::consts::PI * x).sin()
        })
        .collect();
    let omega_max = 2.0 * k.sqrt();
    // The start is modes 1 and 7 of the fixed-fixed chain (shapes sin(j pi x), frequencies
    // omega_j = 2 sqrt(k) sin(j pi / (2 (n + 1)))), amplitudes 1 and 0.01. Released from rest, a
    // mode's balance error under the central difference swings up to (omega_j dt)^2 / 4 of its
    // energy (its discrete energy is conserved exactly and differs from the true one by that:
    // common practice; checked numerically when this test was written), and the modes' energies
    // add (the mass and stiffness are diagonal in them, and the ledger's trapezoidal work of a
    // linear force telescopes to 1/2 u K u). So the bound is the energy-weighted sum, plus the
    // rounding of 1e5 steps (about steps x 10 eps relative).
    let modes = [(1.0f64, 1.0f64), (7.0, 0.01)];
    let omega =
        |j: f64| 2.0 * k.sqrt() * (j * std::f64::consts::PI / (2.0 * (n as f64 + 1.0))).sin();
    let bound_for = |dt: f64, steps: usize| {
        let energy: f64 = modes.iter().map(|&(j, a)| (omega(j) * a).powi(2)).sum();
        let swing: f64 = modes
            .iter()
            .map(|&(j, a)| (omega(j) * dt).powi(2) / 4.0 * (omega(j) * a).powi(2))
            .sum();
        swing / energy + steps as f64 * 10.0 * f64::EPSILON
    };
    for (dt, steps) in [(2e-5, 10_000usize), (1.8 / omega_max, 100_000)] {
        // Before: fixed bounds of 1e-6 and (Omega_max)^2 / 4 = 0.81, 37 and 140 times these.
        let bound = bound_for(dt, steps);
        let mut state = State::new(0.0, u0.clone(), vec![0.0; n]).unwrap();
        let mut cd =
            CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
                .unwrap();
        let mut worst_first: f64 = 0.0;
        let mut worst_last: f64 = 0.0;
        for s in 0..steps {
            cd.step(&mut model, &mut state, dt).unwrap();
            let e = cd.energy().relative_balance_error();
            if s < steps / 10 {
                worst_first = worst_first.max(e);
            }
            if s >= steps - steps / 10 {
                worst_last = worst_last.max(e);
            }
        }
        assert!(
            worst_first.max(worst_last) < bound,
            "dt {dt}: {worst_first:e} {worst_last:e}"
        );
        // No drift: a steady drift would make the last tenth's error about ten times the first
        // tenth's; the bounded oscillation (modes beating) leaves them of the same size.
        assert!(
            worst_last <= 2.0 * worst_first + 1e-12,
            "{worst_first:e} -> {worst_last:e}"
        );
    }
}

/// A reference implementation of the classical half-step form with averaged steps,
/// v_{n+1/2} = v_{n-1/2} + (dt_{n-1/2} + dt_{n+1/2})/2 a_n, u_{n+1} = u_n + dt_{n+1/2} v_{n+1/2}
/// (Belytschko, Liu & Moran 2000, eq. 6.2.1-6.2.4), written independently of the library.
fn half_step_reference(k: &[[f64; 2]; 2], m: [f64; 2], u0: [f64; 2], dts: &[f64]) -> [f64; 2] {
    let acc = |u: [f64; 2]| {
        [
            -(k[0][0] * u[0] + k[0][1] * u[1]) / m[0],
            -(k[1][0] * u[0] + k[1][1] * u[1]) / m[1],
        ]
    };
    let mut u = u0;
    let mut v = [0.0; 2]; // v_{-1/2} := v_0 with dt_{-1/2} = 0
    let mut dt_prev = 0.0;
    for &dt in dts {
        let a = acc(u);
        let dt_avg = 0.5 * (dt_prev + dt);
        for i in 0..2 {
            v[i] += dt_avg * a[i];
            u[i] += dt * v[i];
        }
        dt_prev = dt;
    }
    u
}

#[test]
fn variable_steps_use_averaged_steps_in_the_velocity_update() {
    let k = [[6.0, -2.0], [-2.0, 4.0]];
    let m = [2.0, 1.0];
    let mut model = LinearModel::new(&common::diag(&m), &common::dense(&[&k[0], &k[1]])).unwrap();
    let dts: Vec<f64> = (0..500)
        .map(|i| 0.05 + 0.04 * ((i * 37 % 11) as f64 / 10.0))
        .collect();
    let mut state = State::new(0.0, vec![1.0, -0.5], vec![0.0, 0.0]).unwrap();
    let mut cd =
        CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    for &dt in &dts {
        cd.step(&mut model, &mut state, dt).unwrap();
    }
    let reference = half_step_reference(&k, m, [1.0, -0.5], &dts);
    for i in 0..2 {
        assert!(
            (state.u[i] - reference[i]).abs() < 1e-12,
            "{:?} vs {reference:?}",
            state.u
        );
    }
}

/// Results are bit-identical on 1 and 2 threads (chunked, ordered reductions).
#[test]
fn results_do_not_depend_on_the_thread_count() {
    let n = 100_000;
    let make = || {
        LinearModel::new(
            &common::diag(&vec![1.0; n]),
            &common::chain_stiffness(n, 1.0, true, false),
        )
        .unwrap()
        .with_rayleigh(0.01, 0.001)
        .unwrap()
    };
    let go = |threads: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| {
            let mut model = make();
            let u0: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1013) as f64 * 1e-3).collect();
            let mut state = State::new(0.0, u0, vec![0.0; n]).unwrap();
            let mut opts = CentralDifferenceOptions::default();
            opts.stable_limit = StableLimit::Given(1.0);
            let mut cd = CentralDifference::new(&mut model, &mut state, opts).unwrap();
            for _ in 0..30 {
                cd.step(&mut model, &mut state, 0.5).unwrap();
            }
            (state, cd.energy().clone())
        })
    };
    let (s1, e1) = go(1);
    let (s2, e2) = go(2);
    let bits = |x: &[f64]| x.iter().map(|v| v.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&s1.u), bits(&s2.u));
    assert_eq!(bits(&s1.v), bits(&s2.v));
    assert_eq!(bits(&s1.a), bits(&s2.a));
    assert_eq!(e1.kinetic.to_bits(), e2.kinetic.to_bits());
    assert_eq!(e1.internal_work.to_bits(), e2.internal_work.to_bits());
    assert_eq!(e1.damping_work.to_bits(), e2.damping_work.to_bits());
}

/// A model with a named extra force (a penalty wall): its work is booked under its own name and
/// the balance closes; the run loop records the chosen DOF at the chosen interval.
struct WallChain {
    inner: LinearModel,
    gap: f64,
    penalty: f64,
}

impl Model for WallChain {
    fn dofs(&self) -> usize {
        self.inner.dofs()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.inner.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.inner.internal_force(t, u, v, out)
    }
    fn stiffness_product(
        &mut self,
        t: f64,
        u: &[f64],
        x: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.inner.stiffness_product(t, u, x, out)
    }
    fn stored_energy(&self, u: &[f64]) -> Option<f64> {
        self.inner.stored_energy(u)
    }
    fn extra_force_names(&self) -> Vec<String> {
        vec!["contact".to_string()]
    }
    fn extra_force(
        &mut self,
        _index: usize,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        out.fill(0.0);
        let last = u.len() - 1;
        let pen = u[last] - self.gap;
        if pen > 0.0 {
            out[last] = self.penalty * pen;
        }
        Ok(())
    }
}

#[test]
fn named_extra_forces_are_booked_separately_and_the_balance_closes() {
    let n = 10;
    let inner = LinearModel::new(
        &common::diag(&vec![1.0; n]),
        &common::chain_stiffness(n, 100.0, false, false),
    )
    .unwrap();
    let mut model = WallChain {
        inner,
        gap: 0.05,
        penalty: 400.0,
    };
    let mut state = State::new(0.0, vec![0.0; n], vec![1.0; n]).unwrap();
    let mut cd =
        CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    let mut opts = RunOptions::new(
        0.5,
        StepControl::Auto {
            safety: 0.1,
            reestimate_every: 0,
        },
    );
    opts.record = {
        let mut o = RecordOptions::default();
        o.dofs = Some(vec![n - 1]);
        o.every = 2;
        o.velocity = true;
        o
    };
    let mut calls = 0;
    let out = run(&mut cd, &mut model, &mut state, &opts, |p| {
        calls += 1;
        assert!(p.fraction() <= 1.0);
        Flow::Continue
    })
    .unwrap();
    assert!(matches!(out.stop, StopReason::EndTime), "{:?}", out.stop);
    assert_eq!(state.t, 0.5);
    assert_eq!(calls as u64, out.steps);
    assert_eq!(out.record.dofs, vec![n - 1]);
    assert_eq!(out.record.v.len(), out.record.len());
    let l = cd.energy();
    assert!(l.extra("contact").is_some());
    // The chain reached the wall, and the penalty stored energy while in contact.
    assert!(
        out.record.u_column(0).any(|u| u > 0.05),
        "never reached the wall"
    );
    let peak_contact = out
        .record
        .energy
        .iter()
        .map(|e| e.extra)
        .fold(0.0, f64::max);
    assert!(peak_contact > 0.1, "peak contact energy {peak_contact}");
    assert!(
        l.relative_balance_error() < 0.01,
        "{}",
        l.relative_balance_error()
    );
    assert!(
        out.max_relative_balance_error < 0.05,
        "{}",
        out.max_relative_balance_error
    );
}

/// A model that stiffens with time and reports its element stable step: the run loop's automatic
/// step follows the re-estimates (safety times the current limit).
struct Stiffening(LinearModel);

impl Model for Stiffening {
    fn dofs(&self) -> usize {
        self.0.dofs()
    }
    fn lumped_mass(&self, out: &mut [f64]) {
        self.0.lumped_mass(out)
    }
    fn internal_force(
        &mut self,
        t: f64,
        u: &[f64],
        v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        self.0.internal_force(t, u, v, out)?;
        for f in out.iter_mut() {
            *f *= 1.0 + t;
        }
        Ok(())
    }
    fn element_stable_step(&mut self, t: f64, _u: &[f64]) -> Option<f64> {
        // Unit masses, springs k (1 + t): omega_max <= 2 sqrt(4 k (1 + t)) for the chain; the
        // element step of a spring between two unit masses is 2 / sqrt(2 k (1 + t)) (exact
        // solution of the two-mass oscillator).
        Some(2.0 / (2.0 * 100.0 * (1.0 + t)).sqrt())
    }
}

#[test]
fn automatic_steps_follow_the_reestimated_limit() {
    let n = 5;
    let inner = LinearModel::new(
        &common::diag(&vec![1.0; n]),
        &common::chain_stiffness(n, 100.0, false, false),
    )
    .unwrap();
    let mut model = Stiffening(inner);
    let mut state = State::new(0.0, vec![0.01, 0.0, 0.0, 0.0, -0.01], vec![0.0; n]).unwrap();
    let mut cd =
        CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    let opts = RunOptions::new(
        3.0,
        StepControl::Auto {
            safety: 0.5,
            reestimate_every: 10,
        },
    );
    let out = run(&mut cd, &mut model, &mut state, &opts, |_| Flow::Continue).unwrap();
    assert!(matches!(out.stop, StopReason::EndTime), "{:?}", out.stop);
    let first = 0.5 * 2.0 / 200f64.sqrt();
    approx::assert_relative_eq!(out.dt_max, first, max_relative = 1e-12);
    // By t = 3 the stiffness has grown fourfold: the step halves (1 / sqrt(1 + t)), lagging by
    // at most ten steps. The last step is shortened to land on t_end, so leave it out.
    let dts: Vec<f64> = out.record.times.windows(2).map(|w| w[1] - w[0]).collect();
    let late = dts[dts.len() - 2];
    assert!(
        late > 0.49 * first && late < 0.55 * first,
        "{late} vs {first}"
    );
    assert!(
        dts.windows(2).all(|w| w[1] <= w[0] * (1.0 + 1e-12)),
        "steps must not grow"
    );
    assert_eq!(state.t, 3.0);
}
