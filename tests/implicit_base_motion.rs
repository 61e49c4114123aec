//! A prescribed displacement in implicit runs, against the exact solution of a base-driven
//! oscillator: a base DOF moved as `g(t)`, a free DOF tied to it by a spring `k`, with a
//! consistent (coupled) mass `M = (m / 6) [[2, 1], [1, 2]]` so that the base's acceleration
//! drives the free DOF through the mass too.
//!
//! The free DOF obeys `m11 u'' + k u = k g - m10 g''` (`m11 = m/3`, `m10 = m/6`, `w^2 = k/m11`);
//! from rest (`u(0) = u'(0) = 0`) its exact solution is, with
//! `B = (k + m10 W^2) A / (k - m11 W^2)`,
//!
//! - `g = A sin(W t)`: `u = B sin(W t) - B (W / w) sin(w t)`;
//! - `g = A (1 - cos(W t))`: `u = A - B cos(W t) + (B - A) cos(w t)`;
//!
//! (exact solutions of the linear equation, particular plus homogeneous part; derived here and
//! checked in `exact_solutions_satisfy_their_equation`), and the base reaction is
//! `r = m00 g'' + m01 u'' + k (g - u)`.
//!
//! The motion's derivatives are given exactly (`TimeFunction::with_derivatives`) or left to the
//! library's extrapolation (`TimeFunction::function`), or the base is driven by its velocity
//! (`prescribe_velocity`). Before the start took the motion's own
//! velocity and acceleration, the base started with `v = 0, a = 0` whatever `g` was: under the
//! trapezoidal rule a sine base then kept a velocity error of `A W` for the whole run, and the
//! free DOF's error did not fall with the step.

use stepgauge::State;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::model::{Constraints, LinearModel, TimeFunction};
use stepgauge::params::AlphaParams;

mod common;

const A: f64 = 0.01;
const W: f64 = 3.0;
const M: f64 = 6.0;
const K: f64 = 40.0;

#[derive(Clone, Copy, Debug)]
enum Base {
    Sine,
    OneMinusCosine,
}

fn omega() -> f64 {
    (K / (M / 3.0)).sqrt()
}

fn b() -> f64 {
    let (m10, m11) = (M / 6.0, M / 3.0);
    (K + m10 * W * W) * A / (K - m11 * W * W)
}

/// `(g, g'')` of the base and `(u, u'')` of the free DOF, exact.
fn exact(base: Base, t: f64) -> ((f64, f64), (f64, f64)) {
    let (w, b) = (omega(), b());
    match base {
        Base::Sine => (
            (A * (W * t).sin(), -A * W * W * (W * t).sin()),
            (
                b * (W * t).sin() - b * W / w * (w * t).sin(),
                -b * W * W * (W * t).sin() + b * W * w * (w * t).sin(),
            ),
        ),
        Base::OneMinusCosine => (
            (A * (1.0 - (W * t).cos()), A * W * W * (W * t).cos()),
            (
                A - b * (W * t).cos() + (b - A) * (w * t).cos(),
                b * W * W * (W * t).cos() - (b - A) * w * w * (w * t).cos(),
            ),
        ),
    }
}

fn motion(base: Base, exact_rates: bool) -> TimeFunction {
    match (base, exact_rates) {
        (Base::Sine, true) => TimeFunction::with_derivatives(
            |t| A * (W * t).sin(),
            |t| A * W * (W * t).cos(),
            |t| -A * W * W * (W * t).sin(),
        ),
        (Base::Sine, false) => TimeFunction::function(|t| A * (W * t).sin()),
        (Base::OneMinusCosine, true) => TimeFunction::with_derivatives(
            |t| A * (1.0 - (W * t).cos()),
            |t| A * W * (W * t).sin(),
            |t| A * W * W * (W * t).cos(),
        ),
        (Base::OneMinusCosine, false) => TimeFunction::function(|t| A * (1.0 - (W * t).cos())),
    }
}

/// The free DOF's displacement and the base reaction at the times `0.02 k` up to `t_end`, with
/// step `dt` (a divisor of 0.02), and the largest errors of both over the whole run relative to
/// the largest exact values.
struct Run {
    u: Vec<f64>,
    r: Vec<f64>,
    errors: (f64, f64),
    scale: (f64, f64),
}

/// The base driven by its velocity `g'` instead (with its derivative `g''` given): the base
/// displacement is then the midpoint rule's `u_{n+1} = u_n + dt g'(t_n + dt/2)`, second order.
fn velocity(base: Base) -> TimeFunction {
    match base {
        Base::Sine => TimeFunction::with_derivatives(
            |t| A * W * (W * t).cos(),
            |t| -A * W * W * (W * t).sin(),
            |t| -A * W * W * W * (W * t).cos(),
        ),
        Base::OneMinusCosine => TimeFunction::with_derivatives(
            |t| A * W * (W * t).sin(),
            |t| A * W * W * (W * t).cos(),
            |t| -A * W * W * W * (W * t).sin(),
        ),
    }
}

/// How the base is driven: its displacement with exact derivatives, its displacement as a plain
/// function (derivatives extrapolated), or its velocity.
#[derive(Clone, Copy, Debug)]
enum Drive {
    Displacement,
    DisplacementFunction,
    Velocity,
}

fn run(base: Base, drive: Drive, p: AlphaParams, dt: f64, t_end: f64) -> Run {
    let m = common::dense(&[&[M / 3.0, M / 6.0], &[M / 6.0, M / 3.0]]);
    let k = common::dense(&[&[K, -K], &[-K, K]]);
    let constraints = match drive {
        Drive::Displacement => Constraints::new().prescribe_displacement(0, motion(base, true)),
        Drive::DisplacementFunction => {
            Constraints::new().prescribe_displacement(0, motion(base, false))
        }
        Drive::Velocity => Constraints::new().prescribe_velocity(0, velocity(base)),
    };
    let mut model = LinearModel::new(&m, &k)
        .unwrap()
        .with_constraints(constraints)
        .unwrap();
    let mut state = State::at_rest(2, 0.0);
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        p,
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap();
    let steps = (t_end / dt).round() as usize;
    let every = (0.02 / dt).round() as usize;
    let (mut eu, mut er, mut su, mut sr) = (0.0f64, 0.0f64, 0.0f64, 0.0f64);
    let (mut us, mut rs) = (Vec::new(), Vec::new());
    // The constraint work, each step's trapezoid `(g_{n+1} - g_n) (r_n + r_{n+1}) / 2` of the
    // reported reactions (the ledger's rule, evaluated here: a re-derivation, to rounding).
    let (mut w_con, mut w_scale) = (0.0f64, 0.0f64);
    for n in 1..=steps {
        let (g0, r0) = (state.u[0], it.reactions()[0]);
        it.step(&mut model, &mut state, dt).unwrap();
        w_con += 0.5 * (state.u[0] - g0) * (r0 + it.reactions()[0]);
        w_scale = w_scale.max(w_con.abs());
        let got = it.energy().constraint_work;
        assert!(
            (got - w_con).abs() <= n as f64 * 10.0 * f64::EPSILON * w_scale,
            "step {n}: constraint work {got} vs {w_con}"
        );
        let t = n as f64 * dt;
        let ((g, ag), (u, au)) = exact(base, t);
        let r = M / 3.0 * ag + M / 6.0 * au + K * (g - u);
        eu = eu.max((state.u[1] - u).abs());
        er = er.max((it.reactions()[0] - r).abs());
        su = su.max(u.abs());
        sr = sr.max(r.abs());
        if n % every == 0 {
            us.push(state.u[1]);
            rs.push(it.reactions()[0]);
        }
    }
    Run {
        u: us,
        r: rs,
        errors: (eu / su, er / sr),
        scale: (su, sr),
    }
}

/// The largest difference of two runs' samples relative to `scale`, over `2^p - 1` with
/// `2^p = 3.3` (the smallest error ratio per halving the check beside it allows): by
/// Richardson, a bound on the finer run's error at the sampled times, to leading order.
fn richardson(a: &[f64], b: &[f64], scale: f64) -> f64 {
    let d = a
        .iter()
        .zip(b)
        .fold(0.0, |m: f64, (x, y)| m.max((x - y).abs()));
    d / scale / (3.3f64 - 1.0)
}

/// The exact solutions satisfy `m11 u'' + k u = k g - m10 g''` and start from rest (checked at
/// sample times: the acceleration formulas against the equation, the start by the formulas).
#[test]
fn exact_solutions_satisfy_their_equation() {
    for base in [Base::Sine, Base::OneMinusCosine] {
        for t in [0.0, 0.3, 1.7, 4.2] {
            let ((g, ag), (u, au)) = exact(base, t);
            let res = M / 3.0 * au + K * u - (K * g - M / 6.0 * ag);
            assert!(res.abs() <= 1e-13, "{base:?} t {t}: {res}");
        }
        let ((g0, _), (u0, _)) = exact(base, 0.0);
        assert!(g0.abs() <= 1e-18 && u0.abs() <= 1e-18);
        // u'(0) = 0 by a central difference of the formula.
        let h = 1e-6;
        let v0 = (exact(base, h).1.0 - exact(base, -h).1.0) / (2.0 * h);
        assert!(v0.abs() <= 1e-9, "{base:?}: {v0}");
    }
}

/// Second order in the free DOF and in the base reaction for both base motions, the trapezoidal
/// rule and HHT-alpha (`alpha = -0.1`; both second order: Hughes 1987, sec. 9.3; Hilber, Hughes &
/// Taylor 1977): over 12 s (about 5 free periods), the error falls by at least 3.3 (order 1.7)
/// per halving of the step and is below 2e-3 of the response at the finest step; with the
/// motion's derivatives given and extrapolated alike, and with the base driven by its velocity. The orders come from the schemes; the
/// bound of 3.3 allows the asymptotic ratio of 4 a pre-asymptotic margin at these steps.
#[test]
fn base_motion_converges_at_second_order() {
    let t_end = 12.0;
    for p in [
        AlphaParams::average_acceleration(),
        AlphaParams::hht(-0.1).unwrap(),
    ] {
        for base in [Base::Sine, Base::OneMinusCosine] {
            for drive in [
                Drive::Displacement,
                Drive::DisplacementFunction,
                Drive::Velocity,
            ] {
                let runs: Vec<Run> = [0.02, 0.01, 0.005]
                    .iter()
                    .map(|&dt| run(base, drive, p, dt, t_end))
                    .collect();
                let errs: Vec<(f64, f64)> = runs.iter().map(|r| r.errors).collect();
                let label = format!("{p:?} {base:?} {drive:?}");
                eprintln!("{label}: {errs:?}");
                for w in errs.windows(2) {
                    assert!(w[0].0 / w[1].0 >= 3.3, "{label}: displacement {errs:?}");
                    assert!(w[0].1 / w[1].1 >= 3.3, "{label}: reaction {errs:?}");
                }
                // The finest run's error at the sampled times is its own step error, as the
                // two finer runs estimate it without the exact solution (before: a fixed 2e-3).
                let (mid, fine) = (&runs[1], &runs[2]);
                let sampled = |x: &[f64], which: usize| {
                    x.iter().enumerate().fold(0.0, |m: f64, (i, v)| {
                        let ((g, ag), (u, au)) = exact(base, 0.02 * (i + 1) as f64);
                        let r = M / 3.0 * ag + M / 6.0 * au + K * (g - u);
                        m.max((v - if which == 0 { u } else { r }).abs())
                    })
                };
                let bu = richardson(&mid.u, &fine.u, fine.scale.0);
                let br = richardson(&mid.r, &fine.r, fine.scale.1);
                let (eu, er) = (
                    sampled(&fine.u, 0) / fine.scale.0,
                    sampled(&fine.r, 1) / fine.scale.1,
                );
                assert!(
                    eu <= bu && er <= br,
                    "{label}: errors {eu:e} {er:e}, bounds {bu:e} {br:e}"
                );
            }
        }
    }
}

/// A ramp-and-hold base motion given as a plain function steps as the same motion given as a
/// table: the function's rates look forward (the slope of the ramp from its start, none after
/// its end), as the table's do. The kink at `t = 1` falls on the grid (binary steps). Before, the
/// function's rates were centred differences, which straddle the kink: the free DOF's
/// displacement at `t = 5` differed from the table's run by 25 %, 10 % and 4 % at `dt` = 0.1,
/// 0.05 and 0.025 (first order). The two runs differ only by the rounding of the function's
/// finite differences (relative `1e-9` at most, see `TimeFunction::rates`).
#[test]
fn a_ramp_as_a_function_steps_as_the_same_ramp_as_a_table() {
    let ramp_end = 1.0;
    let run = |motion: TimeFunction, dt: f64| -> f64 {
        let m = common::dense(&[&[M / 3.0, M / 6.0], &[M / 6.0, M / 3.0]]);
        let k = common::dense(&[&[K, -K], &[-K, K]]);
        let mut model = LinearModel::new(&m, &k)
            .unwrap()
            .with_constraints(Constraints::new().prescribe_displacement(0, motion))
            .unwrap();
        let mut state = State::at_rest(2, 0.0);
        let mut it = AlphaIntegrator::new(
            &mut model,
            &mut state,
            AlphaParams::average_acceleration(),
            common::DenseLu::boxed(),
            ImplicitOptions::default(),
        )
        .unwrap();
        let steps = (5.0 / dt).round() as usize;
        let mut worst = 0.0f64;
        for _ in 0..steps {
            it.step(&mut model, &mut state, dt).unwrap();
            worst = worst.max(state.u[1].abs());
        }
        assert_eq!(state.t, 5.0);
        state.u[1] / worst
    };
    for dt in [0.125, 0.0625, 0.03125] {
        let f = run(
            TimeFunction::function(move |t: f64| A * (t / ramp_end).clamp(0.0, 1.0)),
            dt,
        );
        let tab = run(
            TimeFunction::table(vec![0.0, ramp_end, 100.0], vec![0.0, A, A]).unwrap(),
            dt,
        );
        assert!(
            (f - tab).abs() <= 1e-9,
            "dt {dt}: function {f}, table {tab}"
        );
    }
}

/// Two DOFs driven by two different motions (the two bases of this file, derivatives given): each
/// prescribed DOF steps with its own motion's velocity and acceleration (the rates of one
/// function are shared only between DOFs driven by that same function).
#[test]
fn two_motions_keep_their_own_rates() {
    let m = common::dense(&[
        &[M / 3.0, M / 6.0, 0.0],
        &[M / 6.0, 2.0 * M / 3.0, M / 6.0],
        &[0.0, M / 6.0, M / 3.0],
    ]);
    let k = common::dense(&[&[K, -K, 0.0], &[-K, 2.0 * K, -K], &[0.0, -K, K]]);
    let mut model = LinearModel::new(&m, &k)
        .unwrap()
        .with_constraints(
            Constraints::new()
                .prescribe_displacement(0, motion(Base::Sine, true))
                .prescribe_displacement(2, motion(Base::OneMinusCosine, true)),
        )
        .unwrap();
    let mut state = State::at_rest(3, 0.0);
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        common::DenseLu::boxed(),
        ImplicitOptions::default(),
    )
    .unwrap();
    for n in 1..=50 {
        it.step(&mut model, &mut state, 0.02).unwrap();
        let t = state.t;
        let sine = (A * W * (W * t).cos(), -A * W * W * (W * t).sin());
        let one_minus_cos = (A * W * (W * t).sin(), A * W * W * (W * t).cos());
        for (d, (v, a)) in [(0, sine), (2, one_minus_cos)] {
            assert!(
                (state.v[d] - v).abs() <= 1e-15 && (state.a[d] - a).abs() <= 1e-14,
                "step {n}, DOF {d}: ({}, {}) vs ({v}, {a})",
                state.v[d],
                state.a[d]
            );
        }
    }
}
