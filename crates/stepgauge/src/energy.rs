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
//! (stored plus dissipated) energy is `E_int = E_int,0 + W_int`. The relative error divides by the
//! largest magnitude among the terms. For a stable linear elastic run the error stays of the order
//! `(omega_max dt)^2 / 4` of the energy in the highest modes and does not drift; an unstable run
//! makes it grow without bound.

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

    /// `|balance_error| / scale`, or 0 when every term is zero.
    pub fn relative_balance_error(&self) -> f64 {
        let s = self.scale();
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
    }
}
