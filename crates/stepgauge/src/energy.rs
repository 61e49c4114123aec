//! The energy ledger: kinetic energy, internal energy, external work, damping dissipation, the
//! work of constraint (reaction) forces, each named extra contribution, and the balance error.
//!
//! # Bookkeeping
//! Works are accumulated by the trapezoidal rule on the displacement increment of each step,
//!
//! ```text
//! W_{n+1} = W_n + (u_{n+1} - u_n) . (f_n + f_{n+1}) / 2,
//! ```
//!
//! and the kinetic energy uses the integer-step velocity, `T_n = 1/2 v_n . M v_n`
//! (Belytschko, Liu & Moran 2000, *Nonlinear Finite Elements for Continua and Structures*, sec. 6.2.3).
//! With the central-difference scheme `u_{n+1} - u_n = dt v_{n+1/2}`, and each increment is split
//! in two halves: the half with `f_n` is formed from scalars known at the end of step `n`
//! (`v_n . f_n` and `a_n . f_n`, since `v_{n+1/2} = v_n + dt/2 a_n`), so no previous force vector is
//! stored; only at constrained DOFs, whose half-step velocity comes from the prescribed motion over
//! the next step, are the forces `f_n` kept and the half finished from the increment.
//!
//! The balance is
//!
//! ```text
//! error = T + W_int + W_damp + sum_k W_k + D_num - W_ext - W_constraint - T_0,
//! ```
//!
//! where `D_num` is the energy removed by the time-integration scheme itself: zero for the
//! explicit scheme; for the implicit family the difference between the trapezoidal bookkeeping and
//! the step, which is zero for the trapezoidal rule and positive for dissipative members
//! (see `docs/implicit.md`).
//!
//! where `W_int` is the work done against the internal forces since the start, so the internal
//! (stored plus dissipated) energy is `E_int = E_int,0 + W_int`. For a stable linear elastic run the
//! error stays of the order `(omega_max dt)^2 / 4` of the energy in the highest modes and does not
//! drift; an unstable run makes it grow without bound.
//!
//! # The relative error's reference
//!
//! The relative error divides by [`reference`](EnergyLedger::reference): the largest value seen so
//! far in the run of (a) the largest magnitude among the terms and (b) the energy put in plus the
//! work in flight. (b) matters at the start. The central-difference scheme's kinetic energy at
//! step `n` uses `v_n = v_{n-1/2} + dt/2 a_n`, half a step ahead of the displacement on which the
//! works are booked. For that scheme (free DOFs) the error is exactly
//!
//! ```text
//! error_n = dt^2/8 (a_n . M a_n - a_0 . M a_0)  + rounding
//! ```
//!
//! (re-derived in this project, not an outside reference: with `v_n = (v_{n-1/2} + v_{n+1/2}) / 2`,
//! `T_n - 1/2 v_{n-1/2} . M v_{n+1/2} = dt^2/8 a_n . M a_n`, and the trapezoid works telescope to
//! `1/2 v_{n-1/2} . M v_{n+1/2} - 1/2 v_{-1/2} . M v_{1/2}`). From rest under a load that starts
//! at zero (a ramp), step 1 has kinetic energy `dt^2/8 a_1 . M a_1` and no booked work yet, so a
//! reference made of the terms alone is the error itself: a relative error of 1 for a healthy
//! run. The work in flight is the half of the next trapezoid that the forces of step `n` already
//! determine, `dt/2 (v_n + dt/2 a_n) . f_n` for the external forces (and the reactions' power at
//! the constrained DOFs likewise); with it the first step of a ramp from rest reads 1/4 (the
//! in-flight work is `dt^2/2 a_1 . M a_1` when the ramp's force dominates) and later steps
//! `O((omega dt)^2)`.
//! Keeping the largest value so far means that a run whose energy decays (damping) is still judged
//! against the energy it had.

use serde::{Deserialize, Serialize};

/// Running energy totals of one run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct EnergyLedger {
    /// Kinetic energy now, `1/2 v . M v`.
    pub kinetic: f64,
    /// Kinetic energy at the start of the run.
    pub initial_kinetic: f64,
    /// Internal energy stored at the start (from [`Model::stored_energy`](crate::model::Model::stored_energy), else 0).
    pub initial_internal: f64,
    /// Work done against the internal forces since the start.
    pub internal_work: f64,
    /// Work done by the external forces.
    pub external_work: f64,
    /// Energy dissipated by viscous damping.
    pub damping_work: f64,
    /// Work done on the model by the reactions at constrained DOFs (a prescribed motion puts energy in).
    pub constraint_work: f64,
    /// Names of the extra force contributions.
    pub extra_names: Vec<String>,
    /// Work done against each extra force contribution (same order as `extra_names`).
    pub extra_work: Vec<f64>,
    /// Energy dissipated by the time-integration scheme itself (implicit schemes; zero for the
    /// explicit one): the part of the balance that the physical terms do not explain.
    pub numerical_dissipation: f64,
    /// Energy put into the model: initial kinetic and stored energy plus the absolute work of
    /// external and constraint forces, step by step. The instability guard compares the kinetic
    /// energy with it.
    pub energy_in: f64,
    /// Scheme-internal bookkeeping of the half-finished step (see the module documentation).
    pub(crate) pending: Pending,
    /// The largest reference seen so far (see the module documentation, "The relative error's
    /// reference"). Absent from checkpoints written before it existed: read as 0, and the
    /// reference then restarts from the resumed ledger's terms.
    #[serde(default)]
    pub(crate) reference_peak: f64,
    /// The largest force norm seen so far in the run by the implicit scheme's Newton iterations
    /// (the floor of their residual reference, see
    /// [`NewtonOptions`](crate::implicit::NewtonOptions)); kept here so that a resumed run judges
    /// convergence as the uninterrupted one. Read as 0 from older checkpoints.
    #[serde(default)]
    pub(crate) force_peak: f64,
}

/// Per-force scalars from the end of the last step, needed to finish the next trapezoid.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub(crate) struct Pending {
    /// `[v_n . f, a_n . f]` for internal, external and damping forces (over the free DOFs only
    /// for the explicit scheme, which keeps the constrained DOFs' forces in `constrained`).
    pub internal: [f64; 2],
    pub external: [f64; 2],
    pub damping: [f64; 2],
    /// `[v_n . f, a_n . f]` for each extra force (free DOFs only for the explicit scheme).
    pub extra: Vec<[f64; 2]>,
    /// Reaction force at each constrained DOF (in constraint order).
    pub reactions: Vec<f64>,
    /// The forces at each constrained DOF, `[f_int, f_ext, f_damp, f_0 .. f_{k-1}]` per
    /// constraint (stride `3 + k` for `k` extra forces): the explicit scheme finishes a constrained
    /// DOF's trapezoid from these once the step's increment is known, because its half-step
    /// velocity comes from the prescribed motion, not from `v_n + dt/2 a_n`. The implicit family
    /// books each work from the increment directly and neither reads nor writes it (a ledger
    /// carried over from an explicit run keeps its values). Checkpoint format version 2 and later.
    pub constrained: Vec<f64>,
}

impl EnergyLedger {
    /// An empty ledger for a model with the given extra-force names and number of constraints.
    pub(crate) fn new(extra_names: Vec<String>, constraints: usize) -> Self {
        let k = extra_names.len();
        EnergyLedger {
            kinetic: 0.0,
            initial_kinetic: 0.0,
            initial_internal: 0.0,
            internal_work: 0.0,
            external_work: 0.0,
            damping_work: 0.0,
            constraint_work: 0.0,
            numerical_dissipation: 0.0,
            extra_names,
            extra_work: vec![0.0; k],
            energy_in: 0.0,
            reference_peak: 0.0,
            force_peak: 0.0,
            pending: Pending {
                extra: vec![[0.0; 2]; k],
                reactions: vec![0.0; constraints],
                constrained: vec![0.0; constraints * (3 + k)],
                ..Pending::default()
            },
        }
    }

    /// Copies `other` into `self` without allocating (same shapes).
    pub(crate) fn copy_from(&mut self, other: &EnergyLedger) {
        self.kinetic = other.kinetic;
        self.initial_kinetic = other.initial_kinetic;
        self.initial_internal = other.initial_internal;
        self.internal_work = other.internal_work;
        self.external_work = other.external_work;
        self.damping_work = other.damping_work;
        self.constraint_work = other.constraint_work;
        self.numerical_dissipation = other.numerical_dissipation;
        self.extra_work.copy_from_slice(&other.extra_work);
        self.energy_in = other.energy_in;
        self.reference_peak = other.reference_peak;
        self.force_peak = other.force_peak;
        self.pending.internal = other.pending.internal;
        self.pending.external = other.pending.external;
        self.pending.damping = other.pending.damping;
        self.pending.extra.copy_from_slice(&other.pending.extra);
        self.pending
            .reactions
            .copy_from_slice(&other.pending.reactions);
        self.pending
            .constrained
            .copy_from_slice(&other.pending.constrained);
    }

    /// Internal energy: stored at the start plus work done against internal forces since.
    pub fn internal(&self) -> f64 {
        self.initial_internal + self.internal_work
    }

    /// Total work done against the extra force contributions.
    pub fn extra_total(&self) -> f64 {
        self.extra_work.iter().sum()
    }

    /// Work of the named extra contribution, if there is one by that name (`None` also when the
    /// public `extra_names` and `extra_work` have been edited out of step).
    pub fn extra(&self, name: &str) -> Option<f64> {
        self.extra_names
            .iter()
            .position(|n| n == name)
            .and_then(|i| self.extra_work.get(i).copied())
    }

    /// The balance error `T + W_int + W_damp + sum W_k + D_num - W_ext - W_constraint - T_0`.
    pub fn balance_error(&self) -> f64 {
        self.kinetic
            + self.internal_work
            + self.damping_work
            + self.extra_total()
            + self.numerical_dissipation
            - self.external_work
            - self.constraint_work
            - self.initial_kinetic
    }

    /// The largest magnitude among the ledger's terms (the scale of the relative error).
    pub fn scale(&self) -> f64 {
        let mut s = self
            .kinetic
            .abs()
            .max(self.initial_kinetic.abs())
            .max(self.internal().abs())
            .max(self.initial_internal.abs())
            .max(self.external_work.abs())
            .max(self.damping_work.abs())
            .max(self.constraint_work.abs())
            .max(self.numerical_dissipation.abs());
        for w in &self.extra_work {
            s = s.max(w.abs());
        }
        s
    }

    /// Records the end of an accepted or trial step: the reference becomes the largest of its
    /// value so far, [`scale`](Self::scale) and `energy_in + in_flight` (the work in flight, see
    /// the module documentation; 0 for schemes that book each step's work in full).
    pub(crate) fn update_reference(&mut self, in_flight: f64) {
        let candidate = self.scale().max(self.energy_in + in_flight.abs());
        // NaN never lowers the peak; a non-finite ledger is reported by the schemes.
        if candidate > self.reference_peak {
            self.reference_peak = candidate;
        }
    }

    /// The reference of the relative balance error: the largest seen so far in the run of the
    /// terms' largest magnitude and the energy put in plus the work in flight, and at least the
    /// current [`scale`](Self::scale) (see the module documentation).
    pub fn reference(&self) -> f64 {
        self.reference_peak.max(self.scale())
    }

    /// `|balance_error| / reference`, or 0 when the reference is zero (nothing has happened).
    pub fn relative_balance_error(&self) -> f64 {
        let s = self.reference();
        if s > 0.0 {
            self.balance_error().abs() / s
        } else {
            0.0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn balance_of_a_consistent_ledger_is_zero() {
        let mut l = EnergyLedger::new(vec!["hourglass".into()], 0);
        l.initial_kinetic = 10.0;
        l.kinetic = 4.0;
        l.internal_work = 5.0;
        l.extra_work[0] = 0.5;
        l.damping_work = 1.5;
        l.external_work = 1.0;
        assert_eq!(l.balance_error(), 0.0);
        assert_eq!(l.extra("hourglass"), Some(0.5));
        assert_eq!(l.extra("contact"), None);
        l.kinetic = 5.0;
        assert_eq!(l.relative_balance_error(), 0.1);
        // The reference keeps its largest value: the same error after the energy has gone down
        // is judged against the energy the run had.
        l.update_reference(0.0);
        assert_eq!(l.reference(), 10.0);
        l.kinetic = 1.0;
        l.initial_kinetic = 2.0; // the scale of the terms falls to 5 (internal work)
        assert_eq!(l.balance_error(), 1.0 + 5.0 + 1.5 + 0.5 - 1.0 - 2.0);
        assert_eq!(l.scale(), 5.0);
        assert_eq!(l.reference(), 10.0);
        assert_eq!(l.relative_balance_error(), 0.5);
        // Work in flight counts with the energy put in.
        l.energy_in = 3.0;
        l.update_reference(-9.5);
        assert_eq!(l.reference(), 12.5);
    }
}
