//! Checks of the explicit impact example (`examples/impact`) on its coarse mesh: the energy
//! account, the hourglass share, free flight before contact and the rebound of elastic runs.
//! The element-level tests (patch test, rigid-body motion, radial return) are in `model.rs` and
//! run here too.

#[path = "../examples/impact/model.rs"]
mod model;

use model::{Outcome, Sample, Scenario, simulate};
use std::sync::OnceLock;

/// The coarse elastic-plastic run (8 x 4 quads), shared by the checks.
fn plastic() -> &'static Outcome {
    static RUN: OnceLock<Outcome> = OnceLock::new();
    RUN.get_or_init(|| simulate(&Scenario::steel_billet(8, 4, true)).expect("the run completes"))
}

/// The coarse run with plasticity switched off, same speed.
fn elastic() -> &'static Outcome {
    static RUN: OnceLock<Outcome> = OnceLock::new();
    RUN.get_or_init(|| simulate(&Scenario::steel_billet(8, 4, false)).expect("the run completes"))
}

fn max_balance(o: &Outcome) -> f64 {
    o.samples.iter().map(|s| s.balance).fold(0.0, f64::max)
}

/// Energy balance error below 1 % of the largest energy term over the whole run (common
/// practice), for both runs; and the runs do what the scenario says (contact, then separation).
#[test]
fn energy_balance_within_one_percent() {
    for o in [plastic(), elastic()] {
        assert!(o.samples.iter().any(|s| s.in_contact > 0), "no contact");
        let last = o.samples.last().unwrap();
        assert_eq!(last.in_contact, 0, "still on the floor at the end");
        assert!(last.vy > 0.0, "no rebound");
        let b = max_balance(o);
        assert!(b < 0.01, "max relative balance error {b}");
    }
    // The elastic-plastic run dissipates most of the impact energy in plastic work.
    let p = plastic();
    let last = p.samples.last().unwrap();
    assert!(last.plastic > 0.5 * p.samples[0].kinetic, "{last:?}");
    assert_eq!(elastic().samples.last().unwrap().plastic, 0.0);
}

/// The split of the ledger's internal energy: elastic energy from the stress state plus the
/// plastic work equals the ledger's internal work. The model integrates the plastic work with the
/// trapezoidal rule, as the ledger does, so the two agree to rounding when every accepted step
/// makes the material state of its own force evaluation permanent (accepting the wrong state, a
/// skipped or doubled `accept_step`, or an extra force evaluation between the step's and the
/// acceptance breaks it). Tolerance: well inside the balance error (1e-10 of the initial kinetic
/// energy).
#[test]
fn elastic_plus_plastic_is_the_ledger_internal_energy() {
    for o in [plastic(), elastic()] {
        let t0 = o.samples[0].kinetic;
        let worst = o
            .samples
            .iter()
            .map(|s| (s.elastic + s.plastic - s.internal).abs() / t0)
            .fold(0.0, f64::max);
        assert!(worst < 1e-10, "{worst}");
    }
}

/// Hourglass energy below 10 % of the internal energy (common practice), at maximum compression,
/// at the end, and at every step where the internal energy exceeds 1 % of the impact energy.
#[test]
fn hourglass_energy_below_ten_percent_of_internal() {
    for o in [plastic(), elastic()] {
        let t0 = o.samples[0].kinetic;
        let at_max_compression = o
            .snapshots
            .iter()
            .find(|s| s.0 == "maximum compression")
            .map(|s| s.1)
            .expect("the run reaches maximum compression");
        let row = o
            .samples
            .iter()
            .find(|s| s.t == at_max_compression)
            .unwrap();
        let last = o.samples.last().unwrap();
        for s in [row, last] {
            assert!(s.hourglass < 0.1 * s.internal, "{s:?}");
        }
        let worst = o
            .samples
            .iter()
            .filter(|s| s.internal > 0.01 * t0)
            .map(|s| s.hourglass / s.internal)
            .fold(0.0, f64::max);
        assert!(worst < 0.1, "{worst}");
        // The control is active (the coarse mesh has hourglass energy to control).
        assert!(worst > 1e-4, "{worst}");
    }
}

/// Before contact no force acts (no gravity, no load; the billet translates rigidly): the
/// momentum `sum m v` and the kinetic energy stay at their initial values to rounding. Tolerance:
/// 1e-13 relative, a few hundred ulps over the ~30 flight steps (the element forces of a uniform
/// translation are zero up to the rounding of `sum_I b_I u_I`).
#[test]
fn free_flight_conserves_momentum_and_kinetic_energy() {
    for o in [plastic(), elastic()] {
        let flight: Vec<&Sample> = o
            .samples
            .iter()
            .take_while(|s| s.in_contact == 0 && s.contact == 0.0)
            .collect();
        assert!(flight.len() > 10, "{} flight steps", flight.len());
        let p0 = flight[0].momentum;
        let t0 = flight[0].kinetic;
        for s in &flight {
            assert!(s.momentum[0].abs() <= 1e-13 * p0[1].abs(), "{s:?}");
            assert!(((s.momentum[1] - p0[1]) / p0[1]).abs() <= 1e-13, "{s:?}");
            assert!(((s.kinetic - t0) / t0).abs() <= 1e-13, "{s:?}");
        }
    }
}

/// A slender elastic rod landing on its end rebounds at its impact speed (one-dimensional wave
/// theory, common practice: the compression wave reflects at the free top and the rod leaves
/// the wall with its impact speed after 2 L / c). The 2-D rod keeps a little energy in lateral
/// and ringing vibration, so we ask for 5 % (measured on this mesh: 0.8 %). The rod stays
/// elastic (no plastic strain anywhere), and its total energy is conserved (balance < 1 %).
#[test]
fn elastic_rod_rebounds_at_its_impact_speed() {
    let o = simulate(&Scenario::steel_rod(4, 16)).unwrap();
    let first = o.samples[0];
    let last = o.samples.last().unwrap();
    assert_eq!(last.in_contact, 0);
    assert!(o.billet.points().iter().all(|p| p.alpha == 0.0));
    let ratio = last.vy / -first.vy;
    assert!((ratio - 1.0).abs() < 0.05, "rebound / impact = {ratio}");
    assert!(max_balance(&o) < 0.01);
}

/// The squat billet with plasticity switched off leaves the floor more slowly than it arrived:
/// lateral (Poisson) motion and the waves reflected from its sides leave part of the energy in
/// vibration. That energy is all accounted for: after separation, the rigid-body kinetic energy
/// `1/2 M v_cm^2` plus the vibration energy (kinetic energy relative to the centre of mass,
/// elastic and hourglass energy) equals the impact energy within the 1 % balance tolerance (the
/// contact spring has given back all but its booked work). Measured: 85 % of the impact speed.
#[test]
fn elastic_billet_keeps_its_energy_in_rebound_and_vibration() {
    let o = elastic();
    let first = o.samples[0];
    let last = o.samples.last().unwrap();
    let m = o.billet.total_mass();
    let rigid = 0.5 * m * last.vy * last.vy + 0.5 * m * (last.momentum[0] / m).powi(2);
    let vibration = last.kinetic - rigid + last.elastic + last.hourglass;
    let total = rigid + vibration + last.contact;
    assert!(
        ((total - first.kinetic) / first.kinetic).abs() < 0.01,
        "{total} vs {}",
        first.kinetic
    );
    let ratio = last.vy / -first.vy;
    assert!(ratio > 0.75 && ratio < 1.0, "{ratio}");
    // The contact spring returns its energy: the work left booked to it after separation (the
    // ledger's trapezoid across the arrival and departure steps) is below 1 % of the impact
    // energy.
    assert!(
        last.contact.abs() < 0.01 * first.kinetic,
        "{}",
        last.contact
    );
}

/// The stable step is re-estimated as the mesh deforms, and never exceeds the undeformed
/// estimate; the run takes the steps it set out to.
#[test]
fn stable_step_is_reestimated() {
    let o = plastic();
    let (lo, hi) = o.dt_range;
    assert!(lo > 0.0 && lo <= hi);
    // Elements compressed below their undeformed size raise the bound: the step drops during
    // contact (coarse mesh, measured: by 0.5 % in the elastic-plastic run, 0.3 % in the elastic
    // one); without re-estimation it would stay at the flight value.
    assert!(lo < 0.999 * hi, "{lo} {hi}");
    let (lo_e, hi_e) = elastic().dt_range;
    assert!(lo_e < 0.999 * hi_e, "{lo_e} {hi_e}");
    let flight = o.samples[1].dt;
    assert!((flight - hi).abs() <= 1e-12 * hi);
}

/// The integrator evaluates the internal force once per step (plus once at the start, for the
/// initial acceleration) and calls `accept_step` once per accepted step: the protocol that makes
/// trial history variables safe (`src/model/mod.rs`, "Trial evaluations and history variables").
/// The stable-step re-estimate uses the element bound and evaluates no force.
#[test]
fn one_force_evaluation_and_one_acceptance_per_step() {
    let o = plastic();
    assert_eq!(o.billet.accepted_steps, o.steps);
    assert_eq!(o.billet.evaluations, o.steps + 1);
}
