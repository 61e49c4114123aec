//! The energy booking of a converged sub-step: the works by the trapezoidal rule, the growth
//! guard, and the acceptance of the sub-step into the state.

use super::AlphaIntegrator;
use crate::error::{Error, Result};
use crate::model::Model;
use crate::state::State;

impl AlphaIntegrator {
    /// Books the converged sub-step in the ledger, checks the guards and accepts it.
    pub(super) fn accept<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        t1: f64,
        step: u64,
    ) -> Result<()> {
        for (what, x) in [
            ("displacement", &self.u1),
            ("velocity", &self.v1),
            ("acceleration", &self.a1),
        ] {
            if let Some(dof) = x.iter().position(|v| !v.is_finite()) {
                return Err(Error::NonFiniteState {
                    quantity: what,
                    dof,
                    step,
                    t: t1,
                });
            }
        }
        let a1 = std::mem::take(&mut self.a1);
        self.reactions_into(&a1, false);
        self.a1 = a1;
        let mut w = [0.0; 4];
        for i in 0..self.n {
            let du = self.u1[i] - state.u[i];
            w[0] += du * (self.f_int0[i] + self.f_int1[i]);
            w[1] += du * (self.f_ext0[i] + self.f_ext1[i]);
            w[2] += du * (self.f_d0[i] + self.f_d1[i]);
        }
        for (j, (dof, _)) in self.constraints.iter().enumerate() {
            let du = self.u1[*dof] - state.u[*dof];
            w[3] += du * (self.reactions0[j] + self.reactions1[j]);
        }
        self.options.reduce.sum_in_place(&mut w);
        self.mass
            .mul(&self.v1, &mut self.tmp, self.options.parallel);
        let ke = 0.5 * self.sum_dot(&self.v1, &self.tmp);
        self.book(model, state, t1, step, w, ke)
    }

    /// Books a converged sub-step whose works `w` (internal, external, damping, constraint: sums
    /// of `du . (f_0 + f_1)`, already complete over all processes) and kinetic energy `ke` are
    /// known, checks the growth guard and accepts it. The extra forces' works are summed here.
    pub(super) fn book<M: Model + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        t1: f64,
        step: u64,
        w: [f64; 4],
        ke: f64,
    ) -> Result<()> {
        let l = &mut self.trial;
        l.copy_from(&self.ledger);
        let (d_int, d_ext, d_damp, d_con) = (0.5 * w[0], 0.5 * w[1], 0.5 * w[2], 0.5 * w[3]);
        let mut d_extra = 0.0;
        for k in 0..self.f_x0.len() {
            let s: f64 = (0..self.n)
                .map(|i| (self.u1[i] - state.u[i]) * (self.f_x0[k][i] + self.f_x1[k][i]))
                .sum();
            let s = 0.5 * self.options.reduce.sum(s);
            l.extra_work[k] += s;
            d_extra += s;
        }
        let d_kin = ke - l.kinetic;
        l.internal_work += d_int;
        l.external_work += d_ext;
        l.damping_work += d_damp;
        l.constraint_work += d_con;
        l.numerical_dissipation -= d_kin + d_int + d_damp + d_extra - d_ext - d_con;
        l.kinetic = ke;
        l.energy_in += d_ext.abs() + d_con.abs();
        // Each step's work is booked in full (no work in flight).
        l.update_reference(0.0);
        // The floor of the Newton residual's reference for the rest of the run.
        l.force_peak = l.force_peak.max(self.f_step);
        l.pending.reactions.copy_from_slice(&self.reactions1);
        let over = l.energy_in > 0.0 && ke > self.options.growth_limit * l.energy_in;
        let (mut highs, mut high) = self.over_limit;
        if over {
            if ke > high {
                highs += 1;
                high = ke;
            }
        } else {
            (highs, high) = (0, 0.0);
        }
        if highs >= self.options.growth_patience.max(1) {
            return Err(Error::Unstable {
                step,
                t: t1,
                kinetic: ke,
                energy_in: l.energy_in,
                limit: self.options.growth_limit,
            });
        }
        self.over_limit = (highs, high);
        // Accept the step.
        std::mem::swap(&mut state.u, &mut self.u1);
        std::mem::swap(&mut state.v, &mut self.v1);
        std::mem::swap(&mut state.a, &mut self.a1);
        std::mem::swap(&mut self.f_int0, &mut self.f_int1);
        std::mem::swap(&mut self.f_ext0, &mut self.f_ext1);
        std::mem::swap(&mut self.f_d0, &mut self.f_d1);
        std::mem::swap(&mut self.f_x0, &mut self.f_x1);
        std::mem::swap(&mut self.reactions0, &mut self.reactions1);
        std::mem::swap(&mut self.ledger, &mut self.trial);
        state.t = t1;
        state.step = step;
        model.accept_step(t1);
        Ok(())
    }
}
