//! The Newton-Raphson iterations of one sub-step: the predictor, the constrained DOFs' motion,
//! the convergence criteria, the evaluation of the residual and the iteration matrix.

use super::{AlphaIntegrator, sum_dot};
use crate::error::{Error, Result};
use crate::implicit::{Criterion, NewtonVariant};
use crate::linalg::{CHUNK, chunk_count, global_sums, sum_partials};
use crate::model::{Motion, Tangent, TimeFunction};
use crate::setup::{DampingModel, model_err};
use crate::state::State;
use crate::validate::check_finite;

impl AlphaIntegrator {
    pub(super) fn try_substep<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        h: f64,
    ) -> Result<usize> {
        if self.fast_linear {
            return self.linear_substep(model, state, h);
        }
        let (t0, t1) = (state.t, state.t + h);
        let step = state.step + 1;
        let p = self.params;
        let cm = (1.0 - p.alpha_m) / (p.beta * h * h);
        let cc = p.gamma / (p.beta * h);
        let nopt = self.options.newton;
        // Predictor: constant acceleration; constrained DOFs from their motion.
        for i in 0..self.n {
            self.u1[i] = state.u[i] + h * state.v[i] + 0.5 * h * h * state.a[i];
        }
        self.dtot.fill(0.0);
        // Rates of a prescribed displacement cost 61 evaluations of a plain function: DOFs that
        // share the function (a base motion on many nodes) reuse the rates of the one before.
        let mut shared: Option<(&TimeFunction, (f64, f64))> = None;
        for ((dof, motion), rates) in self.constraints.iter().zip(&mut self.con_rates) {
            let d = *dof;
            // The displacement at t1, and the velocity and acceleration there from the motion
            // itself (not from the scheme's relations, whose acceleration of a prescribed
            // displacement is only first order and, for the trapezoidal rule, drifts: its
            // error mode at z = -1 is marginal and driven at its own frequency).
            let target = match motion {
                Motion::Fixed => {
                    *rates = (0.0, 0.0);
                    state.u[d]
                }
                Motion::Displacement(g) => {
                    *rates = match shared {
                        Some((f, r)) if f.same_as(g) => r,
                        _ => g.rates(t1),
                    };
                    shared = Some((g, *rates));
                    g.value(t1)
                }
                Motion::Velocity(hv) => {
                    *rates = (hv.value(t1), hv.rates(t1).0);
                    state.u[d] + h * hv.value(t0 + 0.5 * h)
                }
            };
            self.dtot[d] = target - self.u1[d];
            self.u1[d] = target;
        }
        self.report.residuals.clear();
        let (mut r_norm, mut f_ref) = self.evaluate(model, state, t1, h, step)?;
        let mut r_first = r_norm;
        let mut e_first = f64::NAN;
        let mut du_norm = f64::INFINITY;
        let mut last_energy = f64::INFINITY;
        let mut iterations = 0usize;
        loop {
            let rel = r_norm / f_ref.max(f64::MIN_POSITIVE);
            if self.report.residuals.len() < self.report.residuals.capacity() {
                self.report.residuals.push(rel);
            }
            if !rel.is_finite() {
                return Err(self.diverged(t0, h, iterations, rel));
            }
            let (converged, failing) = if iterations == 0 {
                (r_norm == 0.0 || rel <= 1e-14, Criterion::Residual)
            } else if self.linear {
                (
                    iterations > usize::from(self.options.refine_linear),
                    Criterion::Residual,
                )
            } else {
                // The floors of the criteria (see NewtonOptions).
                let step_norm = self.diff_norm(state);
                let u_norm = sum_dot(
                    &self.options.execution,
                    &mut self.scratch,
                    &self.u1,
                    &self.u1,
                )
                .sqrt();
                let u_ref = step_norm.max(u_norm).max(f64::MIN_POSITIVE);
                let e_ref = e_first.max(u_norm * f_ref);
                let residual_ok = rel <= nopt.residual_tolerance;
                let displacement_ok = du_norm <= nopt.displacement_tolerance * u_ref;
                let energy_ok = last_energy <= nopt.energy_tolerance * e_ref;
                // A stall at round-off (see NewtonOptions): the last four relative residuals
                // within a factor 1.5 of each other and below the square root of a finite
                // residual tolerance, with the whole history of the attempt at hand.
                let stalled = iterations >= 3
                    && nopt.residual_tolerance.is_finite()
                    && rel <= nopt.residual_tolerance.sqrt()
                    && self.report.residuals.len() == iterations + 1
                    && plateau(&self.report.residuals);
                let failing = if !residual_ok {
                    Criterion::Residual
                } else if !displacement_ok {
                    Criterion::Displacement
                } else {
                    Criterion::Energy
                };
                (
                    (residual_ok && displacement_ok && energy_ok) || stalled,
                    failing,
                )
            };
            if converged {
                break;
            }
            if iterations >= nopt.max_iterations {
                return Err(Error::NewtonNotConverged {
                    t: t0,
                    dt: h,
                    iterations,
                    residual: rel,
                    cutbacks: 0,
                    criterion: failing,
                    history: self.history(),
                    dof: self.worst_dof(),
                });
            }
            if iterations >= 1 && r_norm > nopt.divergence_factor * r_first {
                return Err(self.diverged(t0, h, iterations, rel));
            }
            // Iteration matrix.
            let rebuild = if self.linear {
                self.factored_for != Some(h)
            } else {
                match nopt.variant {
                    NewtonVariant::Full => true,
                    NewtonVariant::Modified { refresh_every } => {
                        iterations == 0
                            || (refresh_every > 0 && iterations.is_multiple_of(refresh_every))
                    }
                }
            };
            if rebuild {
                model
                    .tangent_stiffness(t1, &self.u1, &self.v1, &mut self.k_t)
                    .map_err(model_err(step, t1))?;
                check_finite("tangent stiffness", self.k_t.data())?;
                self.assemble(cm, cc);
                self.factored_for = None;
                self.solver.factor(&self.jac)?;
                if self.linear {
                    self.factored_for = Some(h);
                }
            }
            // Correction: J du = -R (zero at constrained DOFs).
            for i in 0..self.n {
                self.du[i] = -self.res[i];
            }
            self.solver.solve_in_place(&mut self.du)?;
            for (dof, _) in &self.constraints {
                self.du[*dof] = 0.0;
            }
            let energy = sum_dot(
                &self.options.execution,
                &mut self.scratch,
                &self.du,
                &self.res,
            )
            .abs();
            if iterations == 0 {
                e_first = energy;
            }
            last_energy = energy;
            let mut s = 1.0;
            if nopt.line_search && !self.linear {
                self.usave.copy_from_slice(&self.u1);
                self.dsave.copy_from_slice(&self.dtot);
                let r_start = r_norm;
                for attempt in 0..5 {
                    for i in 0..self.n {
                        self.u1[i] = self.usave[i] + s * self.du[i];
                        self.dtot[i] = self.dsave[i] + s * self.du[i];
                    }
                    let (r, f) = self
                        .evaluate(model, state, t1, h, step)
                        .map_err(|e| self.after_correction(e, t0, h, iterations))?;
                    r_norm = r;
                    f_ref = f;
                    if r <= (1.0 - 1e-4 * s) * r_start || attempt == 4 {
                        break;
                    }
                    s *= 0.5;
                }
            } else {
                for i in 0..self.n {
                    self.u1[i] += self.du[i];
                    self.dtot[i] += self.du[i];
                }
                let (r, f) = self
                    .evaluate(model, state, t1, h, step)
                    .map_err(|e| self.after_correction(e, t0, h, iterations))?;
                r_norm = r;
                f_ref = f;
            }
            du_norm = s * sum_dot(
                &self.options.execution,
                &mut self.scratch,
                &self.du,
                &self.du,
            )
            .sqrt();
            if iterations == 0 {
                r_first = r_first.max(r_norm);
            }
            iterations += 1;
        }
        self.accept(model, state, t1, step)?;
        Ok(iterations)
    }

    /// `||u1 - u||` over all DOFs.
    fn diff_norm(&mut self, state: &State) -> f64 {
        let (u0, u1) = (&state.u, &self.u1);
        let [s] = global_sums(
            &self.options.execution,
            self.n,
            &mut self.scratch,
            |i, s| {
                s[0] += (u1[i] - u0[i]) * (u1[i] - u0[i]);
            },
        );
        s.sqrt()
    }

    /// The relative residuals of the last attempt, for an error (at most the first 64).
    fn history(&self) -> Vec<f64> {
        self.report.residuals.iter().take(64).copied().collect()
    }

    /// An evaluation error after a Newton correction: a non-finite force there may come from the
    /// correction (an overshoot that takes an element outside its range, a solver that returned
    /// a non-finite solution), which a smaller sub-step can avoid, so it is a divergence with its
    /// DOF (cut back). A non-finite force at the predictor is reported at once.
    fn after_correction(&self, e: Error, t0: f64, h: f64, iterations: usize) -> Error {
        match e {
            Error::NonFiniteState { dof, .. } => Error::NewtonDiverged {
                t: t0,
                dt: h,
                iterations: iterations + 1,
                residual: f64::NAN,
                cutbacks: 0,
                history: self.history(),
                dof,
            },
            other => other,
        }
    }

    /// A divergence of the attempt at `t0` with sub-step `h`.
    fn diverged(&self, t0: f64, h: f64, iterations: usize, rel: f64) -> Error {
        Error::NewtonDiverged {
            t: t0,
            dt: h,
            iterations,
            residual: rel,
            cutbacks: 0,
            history: self.history(),
            dof: self.worst_dof(),
        }
    }

    /// Kinematics, forces and residual at the trial `u1`; returns `(||R||, F_ref)` on free DOFs.
    fn evaluate<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        state: &State,
        t1: f64,
        h: f64,
        step: u64,
    ) -> Result<(f64, f64)> {
        let p = self.params;
        let (v0, a0) = (&state.v, &state.a);
        // With the predictor u_pred = u_n + h v_n + h^2/2 a_n and the correction d = u1 - u_pred,
        // a1 = a_n + d/(beta h^2) and v1 = v_n + h a_n + gamma d/(beta h): the Newmark relations
        // written on the correction, which rounds far less than forming them from u1.
        // Divide rather than multiply by rounded reciprocals: a reciprocal's rounding is the same
        // every step and biases the energy of the trapezoidal rule steadily (a drift of about one
        // ulp per step), while the rounding of a division varies and averages out.
        let bh = p.beta * h;
        let bh2 = bh * h;
        for i in 0..self.n {
            let d = self.dtot[i];
            self.a1[i] = a0[i] + d / bh2;
            self.v1[i] = v0[i] + h * a0[i] + (p.gamma * d) / bh;
        }
        for ((dof, _), &(v, a)) in self.constraints.iter().zip(&self.con_rates) {
            (self.v1[*dof], self.a1[*dof]) = (v, a);
        }
        let err = model_err(step, t1);
        model.external_force(t1, &mut self.f_ext1).map_err(&err)?;
        model
            .internal_force(t1, &self.u1, &self.v1, &mut self.f_int1)
            .map_err(&err)?;
        self.damping_at_new(model, t1).map_err(&err)?;
        for (k, f) in self.f_x1.iter_mut().enumerate() {
            model
                .extra_force(k, t1, &self.u1, &self.v1, f)
                .map_err(&err)?;
        }
        // M w with w = (1 - alpha_m) a1 + alpha_m a0.
        for i in 0..self.n {
            self.tmp[i] = (1.0 - p.alpha_m) * self.a1[i] + p.alpha_m * a0[i];
        }
        self.mass
            .mul(&self.tmp, &mut self.mw, self.options.execution.parallelism);
        let (af, bf) = (1.0 - p.alpha_f, p.alpha_f);
        // Chunk by chunk, so that the sums are finished by the reducer in chunk order.
        let (partials, _) = self.scratch.as_chunks_mut::<5>();
        for (c, partial) in partials.iter_mut().take(chunk_count(self.n)).enumerate() {
            let mut sums = [0.0; 5];
            for i in c * CHUNK..((c + 1) * CHUNK).min(self.n) {
                let mut g1 = self.f_int1[i] + self.f_d1[i];
                let mut g0 = self.f_int0[i] + self.f_d0[i];
                for (x1, x0) in self.f_x1.iter().zip(&self.f_x0) {
                    g1 += x1[i];
                    g0 += x0[i];
                }
                let fe = af * self.f_ext1[i] + bf * self.f_ext0[i];
                let g = af * g1 + bf * g0;
                let r = self.mw[i] + g - fe;
                if self.mask[i] {
                    // The residual at a constrained DOF is its reaction.
                    self.res[i] = 0.0;
                    sums[4] += r * r;
                } else {
                    self.res[i] = r;
                    sums[0] += r * r;
                    sums[1] += self.mw[i] * self.mw[i];
                    sums[2] += g * g;
                    sums[3] += fe * fe;
                }
            }
            *partial = sums;
        }
        let sums = sum_partials(
            &self.options.execution,
            &self.scratch.as_chunks::<5>().0[..chunk_count(self.n)],
        );
        if !sums.iter().all(|x| x.is_finite()) {
            return Err(self.non_finite_force(step, t1));
        }
        let f_step = sums[1]
            .sqrt()
            .max(sums[2].sqrt())
            .max(sums[3].sqrt())
            .max(sums[4].sqrt());
        self.f_step = f_step;
        let f_ref = f_step.max(self.ledger.force_peak);
        Ok((sums[0].sqrt(), f_ref))
    }

    /// The DOF with the largest residual at the last evaluation (the first non-finite one if
    /// any): derived from the residual vector when an error needs it, not tracked in the loop.
    /// Constrained DOFs hold a zero residual.
    fn worst_dof(&self) -> usize {
        if let Some(d) = self.res.iter().position(|r| !r.is_finite()) {
            return d;
        }
        let mut worst = (0, -1.0);
        for (i, r) in self.res.iter().enumerate() {
            if r.abs() > worst.1 {
                worst = (i, r.abs());
            }
        }
        worst.0
    }

    /// The error for a non-finite force or residual found by [`evaluate`](Self::evaluate): the
    /// first force that is not finite and its DOF (a cut-back does not make a model's NaN go away,
    /// so it is reported at once).
    fn non_finite_force(&self, step: u64, t: f64) -> Error {
        let (quantity, dof) = [
            ("external force", &self.f_ext1),
            ("internal force", &self.f_int1),
            ("damping force", &self.f_d1),
            ("inertia force", &self.mw),
        ]
        .into_iter()
        .chain(self.f_x1.iter().map(|f| ("extra force", f)))
        .find_map(|(q, x)| x.iter().position(|v| !v.is_finite()).map(|d| (q, d)))
        .unwrap_or(("residual", self.worst_dof()));
        Error::NonFiniteState {
            quantity,
            dof,
            step,
            t,
        }
    }

    /// Fills the iteration matrix `J` for coefficients `cm = (1-alpha_m)/(beta h^2)` and
    /// `cc = gamma/(beta h)`.
    pub(super) fn assemble(&mut self, cm: f64, cc: f64) {
        let af = 1.0 - self.params.alpha_f;
        let (mut s_m, mut s_k) = (cm, af);
        if let DampingModel::Rayleigh { a0, a1 } = self.damping {
            s_m += af * cc * a0;
            s_k += af * cc * a1;
        }
        let data = self.jac.data_mut();
        data.fill(0.0);
        let m_vals = self.mass.values();
        for (k, pos) in self.mass_map.iter().enumerate() {
            data[*pos] += s_m * m_vals[k];
        }
        for (k, pos) in self.k_map.iter().enumerate() {
            data[*pos] += s_k * self.k_t.data()[k];
        }
        if let Some(c) = self.damping.matrix() {
            for (k, pos) in self.c_map.iter().enumerate() {
                data[*pos] += af * cc * c.data()[k];
            }
        }
        for p in &self.con_zero {
            data[*p] = 0.0;
        }
        for p in &self.con_diag {
            data[*p] = 1.0;
        }
    }
}

/// True when the last four values of `history` are finite and within a factor 1.5 of each other:
/// a residual that neither falls nor grows. A linearly converging sequence passes only at a rate
/// above `1.5^(-1/3) = 0.87` per iteration. (Rounding plateaus fluctuate: on the truss example's
/// slow ramp a factor 1.25 cut back 226 extra sub-steps in 200 steps, 1.5 seven, 2 none; 2 would
/// pass a rate of 0.8.)
fn plateau(history: &[f64]) -> bool {
    match history {
        [.., a, b, c, d] => {
            // min and max skip NaN: every value must be finite on its own.
            let lo = a.min(*b).min(*c).min(*d);
            let hi = a.max(*b).max(*c).max(*d);
            [a, b, c, d].iter().all(|x| x.is_finite()) && hi <= 1.5 * lo
        }
        _ => false,
    }
}

#[cfg(test)]
mod tests {
    use super::plateau;

    /// Flat histories are plateaus; a linear convergence at rate 0.8 or 0.85 is not (its last four
    /// span a factor 1/0.8^3 = 1.95 or 1/0.85^3 = 1.63); one at 0.9 is (1.37: the documented
    /// limit of the rule); a growing or non-finite one is not; fewer than four values never are.
    #[test]
    fn the_plateau_rule() {
        let geometric = |r: f64| (0..6).map(|k| 1e-5 * r.powi(k)).collect::<Vec<f64>>();
        assert!(plateau(&[1e-1, 1.3e-5, 1.0e-5, 1.0e-5, 1.0e-5, 1.0e-5]));
        assert!(!plateau(&geometric(0.8)));
        assert!(!plateau(&geometric(0.85)));
        assert!(plateau(&geometric(0.9)));
        assert!(!plateau(&geometric(1.2)));
        assert!(!plateau(&[1e-5, 1e-5, f64::NAN, 1e-5]));
        assert!(!plateau(&[1e-5, 1e-5, 1e-5]));
    }
}
