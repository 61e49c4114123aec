//! The energy booking of a converged sub-step: the works by the trapezoidal rule, the growth
//! guard, and the acceptance of the sub-step into the state.

use super::{AlphaIntegrator, sum_dot};
use crate::error::{Error, Result};
use crate::linalg::global_sums;
use crate::model::Tangent;
use crate::state::State;

impl AlphaIntegrator {
    /// The new state `(u1, v1, a1)` is finite; otherwise [`Error::NonFiniteState`] naming the
    /// first quantity and DOF that is not.
    pub(super) fn check_new_state(&self, step: u64, t1: f64) -> Result<()> {
        for (quantity, x) in [
            ("displacement", &self.u1),
            ("velocity", &self.v1),
            ("acceleration", &self.a1),
        ] {
            if let Some(dof) = x.iter().position(|v| !v.is_finite()) {
                return Err(Error::NonFiniteState {
                    quantity,
                    dof,
                    step,
                    t: t1,
                });
            }
        }
        Ok(())
    }

    /// Books the converged sub-step in the ledger, checks the guards and accepts it.
    pub(super) fn accept<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        t1: f64,
        step: u64,
    ) -> Result<()> {
        self.check_new_state(step, t1)?;
        let a1 = std::mem::take(&mut self.a1);
        self.reactions_into(&a1, false);
        self.a1 = a1;
        // The reactions (of the constrained DOFs, in `constraints` order) spread over the DOFs
        // for the chunked sum: `tmp` holds them, zero elsewhere.
        self.tmp.fill(0.0);
        for (j, (dof, _)) in self.constraints.iter().enumerate() {
            self.tmp[*dof] = self.reactions0[j] + self.reactions1[j];
        }
        let (u0, u1, r) = (&state.u, &self.u1, &self.tmp);
        let (fi0, fi1, fe0, fe1) = (&self.f_int0, &self.f_int1, &self.f_ext0, &self.f_ext1);
        let (fd0, fd1) = (&self.f_d0, &self.f_d1);
        let w = global_sums(
            &self.options.execution,
            self.n,
            &mut self.scratch,
            |i, w| {
                let du = u1[i] - u0[i];
                w[0] += du * (fi0[i] + fi1[i]);
                w[1] += du * (fe0[i] + fe1[i]);
                w[2] += du * (fd0[i] + fd1[i]);
                w[3] += du * r[i];
            },
        );
        self.mass
            .mul(&self.v1, &mut self.tmp, self.options.execution.parallelism);
        let ke = 0.5
            * sum_dot(
                &self.options.execution,
                &mut self.scratch,
                &self.v1,
                &self.tmp,
            );
        self.book(model, state, t1, step, w, ke)
    }

    /// Books a converged sub-step whose works `w` (internal, external, damping, constraint: sums
    /// of `du . (f_0 + f_1)`, already complete over all processes) and kinetic energy `ke` are
    /// known, checks the growth guard and accepts it. The extra forces' works are summed here.
    pub(super) fn book<M: Tangent + ?Sized>(
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
            let (u0, u1, x0, x1) = (&state.u, &self.u1, &self.f_x0[k], &self.f_x1[k]);
            let [s] = global_sums(
                &self.options.execution,
                self.n,
                &mut self.scratch,
                |i, s| {
                    s[0] += (u1[i] - u0[i]) * (x0[i] + x1[i]);
                },
            );
            let s = 0.5 * s;
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
