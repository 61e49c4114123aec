//! The published worked examples of the verification suite (`src/verification/published.rs`),
//! driven here the way a user drives stepgauge: through the public API, the `run` loop with a
//! fixed step and recording, and (for Chopra's pulse) the load as a piecewise-linear load table
//! instead of a load function. The suite steps the integrators directly with a load function;
//! these tests check that the run loop (its landing on the end time, its record) and the
//! load-table path reproduce the same printed values.

mod common;

use std::f64::consts::PI;

use stepgauge::State;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::{Load, LoadTable};
use stepgauge::params::AlphaParams;
use stepgauge::reference::{ReferenceProblem, TwoDofStep};
use stepgauge::run::{Flow, RunOptions, StepControl, StopReason, run};

/// Chopra (2012), *Dynamics of Structures*, 4th ed., Examples 5.3 (average acceleration) and
/// 5.4 (linear acceleration), `u` (in) at `t = 0.1 .. 1.0 s` (example numbers and values from
/// memory; an independent recurrence agrees with stepgauge, see the suite's notes).
const CHOPRA_AVERAGE: [f64; 10] = [
    0.0437, 0.2326, 0.6121, 1.0825, 1.4309, 1.4231, 0.9622, 0.1908, -0.6044, -1.1442,
];
const CHOPRA_LINEAR: [f64; 10] = [
    0.0300, 0.2193, 0.6166, 1.1130, 1.4782, 1.4625, 0.9514, 0.1273, -0.6954, -1.2208,
];

/// Chopra's SDOF (m = 0.2533 kip-s^2/in, k = 10 kips/in, zeta = 0.05) under
/// p = 10 sin(pi t / 0.6) kips for t <= 0.6 s, the load given as a table at the step times
/// (exact at the step times, where the Newmark members evaluate it), run by `run` to t = 1 s
/// with dt = 0.1 s: the recorded history matches the printed one to four decimals (half a unit
/// plus a tenth for the book's rounded inputs).
#[test]
fn chopra_pulse_through_the_run_loop_and_a_load_table() {
    let (m, k, zeta) = (0.2533f64, 10.0f64, 0.05f64);
    let times: Vec<f64> = (0..=10).map(|i| 0.1 * f64::from(i)).collect();
    let values: Vec<f64> = times
        .iter()
        .enumerate()
        .map(|(i, t)| {
            if i < 6 {
                10.0 * (PI * t / 0.6).sin()
            } else {
                0.0
            }
        })
        .collect();
    for (params, printed) in [
        (AlphaParams::average_acceleration(), CHOPRA_AVERAGE),
        (AlphaParams::linear_acceleration(), CHOPRA_LINEAR),
    ] {
        let table = LoadTable::new(times.clone(), vec![0], values.clone()).unwrap();
        let mut model = common::sdof(m, k)
            .with_rayleigh(2.0 * zeta * (k / m).sqrt(), 0.0)
            .unwrap()
            .with_load(Load::Table(table))
            .unwrap();
        let mut state = State::at_rest(1, 0.0);
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            params,
            Box::new(SparseCholesky::new()),
            ImplicitOptions::default(),
        )
        .unwrap();
        let options = RunOptions::new(1.0, StepControl::Fixed(0.1));
        let out = run(&mut it, &mut model, &mut state, &options, |_| {
            Flow::Continue
        })
        .unwrap();
        assert!(matches!(out.stop, StopReason::EndTime), "{:?}", out.stop);
        assert_eq!(out.steps, 10);
        let u: Vec<f64> = out.record.u_column(0).collect();
        assert_eq!(u.len(), 11, "the start and ten steps are recorded");
        for (n, (ui, pi)) in u[1..].iter().zip(printed).enumerate() {
            assert!(
                (ui - pi).abs() <= 6e-5,
                "{:?} step {}: {ui} vs printed {pi}",
                params.family(),
                n + 1
            );
            assert!((out.record.times[n + 1] - 0.1 * (n + 1) as f64).abs() < 1e-12);
        }
        assert!(
            (state.t - 1.0).abs() < 1e-15,
            "the run lands on the end time"
        );
    }
}

/// Bathe (1996), *Finite Element Procedures*, sec. 9.2, Example 9.1 (central difference), `U_1`
/// and `U_2` at `t = dt .. 12 dt`, three significant figures (example number and values from
/// memory).
const BATHE_CD: [[f64; 12]; 2] = [
    [
        0.0, 0.0307, 0.168, 0.487, 1.02, 1.70, 2.40, 2.91, 3.07, 2.77, 2.04, 1.02,
    ],
    [
        0.392, 1.45, 2.83, 4.14, 5.02, 5.26, 4.90, 4.17, 3.37, 2.78, 2.54, 2.60,
    ],
];

/// The two-DOF step load of the reference set, run by `run` with the central difference (its
/// default stable-step guard on) for twelve steps of 0.28: the record matches Bathe's printed
/// values within 0.6 units of the last printed digit, and the guard accepted the step (Omega of
/// the highest mode sqrt(5) * 0.28 = 0.63 < 2).
#[test]
fn bathe_central_difference_through_the_run_loop() {
    let problem = TwoDofStep;
    let mut model = problem.model().unwrap();
    let mut state = problem.initial_state();
    let mut cd =
        CentralDifference::new(&mut *model, &mut state, CentralDifferenceOptions::default())
            .unwrap();
    let dt = 0.28;
    let options = RunOptions::new(12.0 * dt, StepControl::Fixed(dt));
    let out = run(&mut cd, &mut *model, &mut state, &options, |_| {
        Flow::Continue
    })
    .unwrap();
    assert!(matches!(out.stop, StopReason::EndTime), "{:?}", out.stop);
    assert_eq!(out.steps, 12);
    for (d, printed) in BATHE_CD.iter().enumerate() {
        let u: Vec<f64> = out.record.u_column(d).collect();
        assert_eq!(u.len(), 13);
        for (n, (ui, &pi)) in u[1..].iter().zip(printed).enumerate() {
            let unit = if pi == 0.0 {
                1e-4
            } else {
                10f64.powi(pi.abs().log10().floor() as i32 - 2)
            };
            assert!(
                (ui - pi).abs() <= 0.6 * unit,
                "U{} step {}: {ui} vs printed {pi}",
                d + 1,
                n + 1
            );
        }
    }
}
