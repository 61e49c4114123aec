//! The linear path: one solve per sub-step for a linear model without constraints, streamlined
//! into a few passes over the vectors, and its fused forms (see [`kernels`](super::kernels)).

use super::AlphaIntegrator;
use super::kernels::{FusedRhs, FusedUpdate, fused_sweeps, zero_if_finite};
use crate::error::Result;
use crate::linalg::SparseCholesky;
use crate::model::Tangent;
use crate::setup::model_err;
use crate::state::State;
use crate::validate::check_finite;

impl AlphaIntegrator {
    /// The linear path, streamlined: one sub-step of a linear model without constraints whose
    /// damping force is in the iteration matrix, in a few fused passes over the vectors.
    ///
    /// The balance `R(u) = M w + (1 - alpha_f) g(u) + alpha_f g_n - f_alpha` is affine in `u`
    /// with the derivative `J`, so one correction from the predictor solves it:
    ///
    /// 1. predictor `u_p = u_n + h v_n + h^2/2 a_n` (and `v_p = v_n + h a_n`); the model's
    ///    internal force `K u_p` (and damping force at `v_p`): the one product with `K`;
    /// 2. `R_p = M a_n + (1 - alpha_f) g(u_p) + alpha_f g_n - f_alpha`, `J d = -R_p`;
    /// 3. `u_{n+1} = u_p + d`, `a_{n+1} = a_n + d / (beta h^2)`,
    ///    `v_{n+1} = v_p + gamma d / (beta h)` (the Newmark relations on the correction, as in
    ///    the general path), and the new `g` from the balance that the solve has just satisfied,
    ///    `(1 - alpha_f) g_{n+1} = f_alpha - alpha_f g_n - M w`, instead of a second product
    ///    with `K` (the two differ by the solve's residual, at the level of its backward error);
    ///    the internal force is `g` less the damping force at `v_{n+1}` (one product with `C`
    ///    when damped);
    /// 4. the works and the kinetic energy of the ledger in the same pass.
    ///
    /// Without constraints `R = 0` holds at every DOF, which the balance form needs; a model with
    /// constraints takes the general path.
    // `x - x` is 0 for a finite `x` and NaN otherwise: the sums' fourth entry detects a
    // non-finite result in the same pass.
    #[allow(clippy::eq_op)]
    pub(super) fn linear_substep<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        h: f64,
    ) -> Result<usize> {
        let t1 = state.t + h;
        let step = state.step + 1;
        let p = self.params;
        let cm = (1.0 - p.alpha_m) / (p.beta * h * h);
        let cc = p.gamma / (p.beta * h);
        let (af, bf) = (1.0 - p.alpha_f, p.alpha_f);
        let (am, bm) = (1.0 - p.alpha_m, p.alpha_m);
        let bh = p.beta * h;
        let bh2 = bh * h;
        let g = p.gamma;
        let n = self.n;
        let par = self.options.execution.parallelism.parallel_for(n);
        let damped = self.damping.is_damped();
        self.report.residuals.clear();
        let err = model_err(step, t1);
        if self.factored_for != Some(h) {
            self.factored_for = None;
            model
                .tangent_stiffness(t1, &state.u, &state.v, &mut self.k_t)
                .map_err(&err)?;
            check_finite("tangent stiffness", self.k_t.data())?;
            self.assemble(cm, cc);
            self.solver.factor(&self.jac)?;
            self.factored_for = Some(h);
        }
        let fused = self.fuse_linear
            && !damped
            && self.mass.diagonal().is_some()
            && [state.u.len(), state.v.len(), state.a.len()] == [n; 3]
            && model.hints().stiffness_of_size(n).is_some();
        if fused {
            return self.linear_substep_fused(model, state, h);
        }
        model.external_force(t1, &mut self.f_ext1).map_err(&err)?;
        // 1. Predictor (the velocity only where a damping force needs it: the internal force
        // of a linear model does not depend on it).
        let (u0, v0, a0) = (&state.u[..], &state.v[..], &state.a[..]);
        let predict = |i: usize| u0[i] + h * v0[i] + 0.5 * h * h * a0[i];
        if damped {
            crate::linalg::for_chunks2(
                par,
                &mut self.u1,
                &mut self.v1,
                &mut self.no_partials,
                |start, u1, v1, _| {
                    for k in 0..u1.len() {
                        let i = start + k;
                        u1[k] = predict(i);
                        v1[k] = v0[i] + h * a0[i];
                    }
                },
            );
        } else {
            crate::linalg::for_chunks1(par, &mut self.u1, &mut self.no_partials, |start, u1, _| {
                for (k, x) in u1.iter_mut().enumerate() {
                    *x = predict(start + k);
                }
            });
        }
        let v_force = if damped { &self.v1[..] } else { v0 };
        model
            .internal_force(t1, &self.u1, v_force, &mut self.f_int1)
            .map_err(&err)?;
        if damped {
            self.damping_at_new(model, t1).map_err(&err)?;
        }
        // 2. Right-hand side -R_p into du, with M a_n.
        let md = self.mass.diagonal();
        if md.is_none() {
            self.mass
                .mul(a0, &mut self.mw, self.options.execution.parallelism);
        }
        {
            let (mw, fi0, fi1, fd0, fd1) =
                (&self.mw, &self.f_int0, &self.f_int1, &self.f_d0, &self.f_d1);
            let (fe0, fe1) = (&self.f_ext0, &self.f_ext1);
            let rhs = |i: usize| {
                let ma = match md {
                    Some(m) => m[i] * a0[i],
                    None => mw[i],
                };
                let (g1, g0) = if damped {
                    (fi1[i] + fd1[i], fi0[i] + fd0[i])
                } else {
                    (fi1[i], fi0[i])
                };
                let fe = af * fe1[i] + bf * fe0[i];
                -(ma + (af * g1 + bf * g0) - fe)
            };
            match md {
                // Lumped, undamped, alpha_f = 0: the same value, without reading g_n and
                // f_ext(t_n) (multiplied by zero).
                Some(m) if !damped && bf == 0.0 => crate::linalg::for_chunks1(
                    par,
                    &mut self.du,
                    &mut self.no_partials,
                    |start, du, _| {
                        for (k, out) in du.iter_mut().enumerate() {
                            let i = start + k;
                            *out = -(m[i] * a0[i] + fi1[i] - fe1[i]);
                        }
                    },
                ),
                _ => crate::linalg::for_chunks1(
                    par,
                    &mut self.du,
                    &mut self.no_partials,
                    |start, du, _| {
                        for (k, out) in du.iter_mut().enumerate() {
                            *out = rhs(start + k);
                        }
                    },
                ),
            }
        }
        self.solver.solve_in_place(&mut self.du)?;
        // 3. Update, the new balance force, and the works. The predictor is formed again rather
        // than read back (one stream less).
        let lumped_undamped = md.is_some() && !damped;
        {
            let (du, fi0, fd0, fe0, fe1) = (
                &self.du,
                &self.f_int0,
                &self.f_d0,
                &self.f_ext0,
                &self.f_ext1,
            );
            let outs = [&mut self.u1, &mut self.v1, &mut self.a1, &mut self.f_int1];
            let outs = outs.map(|v| &mut v[..]);
            match md {
                Some(m) if !damped => crate::linalg::for_chunks4(
                    par,
                    outs,
                    &mut self.partials,
                    |start, [u1, v1, a1, f1], sums| {
                        let mut s = [0.0; 4];
                        for k in 0..u1.len() {
                            let i = start + k;
                            let d = du[i];
                            let un = predict(i) + d;
                            let an = a0[i] + d / bh2;
                            let vn = v0[i] + h * a0[i] + (g * d) / bh;
                            u1[k] = un;
                            a1[k] = an;
                            v1[k] = vn;
                            // (1 - alpha_f) g1 = f_alpha - alpha_f g0 - M w.
                            let w = am * an + bm * a0[i];
                            let fe = af * fe1[i] + bf * fe0[i];
                            let g1 = (fe - bf * fi0[i] - m[i] * w) / af;
                            f1[k] = g1;
                            let step_u = un - u0[i];
                            s[0] += step_u * (fi0[i] + g1);
                            s[1] += step_u * (fe0[i] + fe1[i]);
                            s[2] += m[i] * vn * vn;
                            s[3] += zero_if_finite(un)
                                + zero_if_finite(an)
                                + zero_if_finite(vn)
                                + zero_if_finite(g1);
                        }
                        *sums = s;
                    },
                ),
                _ => crate::linalg::for_chunks4(
                    par,
                    outs,
                    &mut self.partials,
                    |start, [u1, v1, a1, f1], sums| {
                        let mut s = [0.0; 4];
                        for k in 0..u1.len() {
                            let i = start + k;
                            let d = du[i];
                            let un = predict(i) + d;
                            let an = a0[i] + d / bh2;
                            let vn = v0[i] + h * a0[i] + (g * d) / bh;
                            u1[k] = un;
                            a1[k] = an;
                            v1[k] = vn;
                            let w = am * an + bm * a0[i];
                            let step_u = un - u0[i];
                            s[1] += step_u * (fe0[i] + fe1[i]);
                            s[3] += zero_if_finite(un) + zero_if_finite(an) + zero_if_finite(vn);
                            match md {
                                Some(m) => {
                                    let g0 = fi0[i] + fd0[i];
                                    let fe = af * fe1[i] + bf * fe0[i];
                                    let g1 = (fe - bf * g0 - m[i] * w) / af;
                                    f1[k] = g1;
                                    s[3] += zero_if_finite(g1);
                                    s[2] += m[i] * vn * vn;
                                }
                                // M w in the next pass.
                                None => f1[k] = w,
                            }
                        }
                        *sums = s;
                    },
                ),
            }
        }
        let mut sums = crate::linalg::sum_partials(&self.options.execution, &self.partials);
        if !sums[3].is_finite() {
            // Name the DOF.
            self.check_new_state(step, t1)?;
        }
        let (mut w_int, w_ext, mut ke, mut w_damp) = (sums[0], sums[1], sums[2], 0.0);
        if !lumped_undamped {
            if md.is_none() {
                // M w (w was left in f_int1) and M v_{n+1}.
                self.mass.mul(
                    &self.f_int1,
                    &mut self.mw,
                    self.options.execution.parallelism,
                );
                self.mass
                    .mul(&self.v1, &mut self.res, self.options.execution.parallelism);
            }
            if damped {
                // Field by field (`md` still borrows the mass).
                super::damping_force(
                    model,
                    &self.damping,
                    &self.mass,
                    t1,
                    &self.u1,
                    &self.v1,
                    &mut self.f_d1,
                    &mut self.tmp,
                    self.rayleigh_tangent.as_mut(),
                    self.options.execution.parallelism,
                )
                .map_err(&err)?;
            }
            let (mw, mv, fi0, fd0, fd1, fe0, fe1, u1, v1) = (
                &self.mw,
                &self.res,
                &self.f_int0,
                &self.f_d0,
                &self.f_d1,
                &self.f_ext0,
                &self.f_ext1,
                &self.u1,
                &self.v1,
            );
            crate::linalg::for_chunks1(
                par,
                &mut self.f_int1,
                &mut self.partials,
                |start, f1, sums| {
                    let mut s = [0.0; 4];
                    for k in 0..f1.len() {
                        let i = start + k;
                        let g0 = fi0[i] + fd0[i];
                        let g1 = match md {
                            Some(_) => f1[k],
                            None => {
                                let fe = af * fe1[i] + bf * fe0[i];
                                s[2] += v1[i] * mv[i];
                                (fe - bf * g0 - mw[i]) / af
                            }
                        };
                        let fi = g1 - fd1[i];
                        f1[k] = fi;
                        let step_u = u1[i] - u0[i];
                        s[0] += step_u * (fi0[i] + fi);
                        s[1] += step_u * (fd0[i] + fd1[i]);
                        s[3] += zero_if_finite(fi) + zero_if_finite(fd1[i]);
                    }
                    *sums = s;
                },
            );
            sums = crate::linalg::sum_partials(&self.options.execution, &self.partials);
            w_int = sums[0];
            w_damp = sums[1];
            if md.is_none() {
                ke = sums[2];
            }
        }
        if !sums[3].is_finite() {
            check_finite("internal force", &self.f_int1)?;
            check_finite("damping force", &self.f_d1)?;
        }
        // The sums are global already (finished by the reducer).
        let w = [w_int, w_ext, w_damp, 0.0];
        let ke = 0.5 * ke;
        self.book(model, state, t1, step, w, ke)?;
        Ok(1)
    }

    /// The streamlined linear path of [`linear_substep`](Self::linear_substep) for a diagonal
    /// mass, no damping and a model that gives its stiffness ([`Linearity::Stiffness`](crate::model::Linearity::Stiffness)), in
    /// two passes around the solve instead of four, with the same arithmetic (bit for bit the
    /// same state, forces and ledger):
    ///
    /// 1. one pass over the rows of `K` forms `-R_p` directly: the predictor `u_p` is computed
    ///    on the fly for each entry of a row (`K u_p` summed in stored order, as `spmv` does), so
    ///    that neither `u_p` nor `K u_p` is stored and read back;
    /// 2. the solve;
    /// 3. one pass forms `u`, `v`, `a`, the balance force and the ledger's sums: per chunk, an
    ///    element-wise loop without sums (which the compiler vectorises: its three divisions
    ///    dominated the scalar loop) and then the sums in the same order as before, reading the
    ///    chunk back from cache.
    ///
    /// An unloaded model ([`Hints::unloaded`](crate::model::Hints::unloaded)) is not asked for its external force, and its
    /// external-force vectors (zero) are not read.
    #[allow(clippy::eq_op)]
    fn linear_substep_fused<M: Tangent + ?Sized>(
        &mut self,
        model: &mut M,
        state: &mut State,
        h: f64,
    ) -> Result<usize> {
        let t1 = state.t + h;
        let step = state.step + 1;
        let p = self.params;
        let (af, bf) = (1.0 - p.alpha_f, p.alpha_f);
        let (am, bm) = (1.0 - p.alpha_m, p.alpha_m);
        let bh = p.beta * h;
        let bh2 = bh * h;
        let g = p.gamma;
        let n = self.n;
        let par = self.options.execution.parallelism.parallel_for(n);
        let err = model_err(step, t1);
        let unloaded = model.hints().unloaded;
        if !unloaded {
            model.external_force(t1, &mut self.f_ext1).map_err(&err)?;
        }
        let Some(m) = self.mass.diagonal() else {
            unreachable!("the fused linear path is taken for a diagonal mass only")
        };
        let (u0, v0, a0) = (&state.u[..], &state.v[..], &state.a[..]);
        let Some(k) = model.hints().stiffness_of_size(n) else {
            unreachable!("the fused linear path is taken for a model with a stiffness only")
        };
        let r = FusedRhs {
            k,
            h,
            af,
            bf,
            u0,
            v0,
            a0,
            m,
            fi0: &self.f_int0,
            fe0: &self.f_ext0,
            fe1: &self.f_ext1,
        };
        let mut c = FusedUpdate {
            h,
            bh,
            bh2,
            g,
            af,
            bf,
            am,
            bm,
            du: &[],
            u0,
            v0,
            a0,
            fi0: &self.f_int0,
            fe0: &self.f_ext0,
            fe1: &self.f_ext1,
            m,
        };
        let simplicial = self
            .solver
            .as_sparse_cholesky()
            .and_then(SparseCholesky::simplicial_factor)
            .filter(|f| f.n() == n && f.len() <= 2 * n && n >= self.sweep_min_n);
        if let Some(f) = simplicial {
            // 1-3 inside the sweeps of the factor, for a factor with at most two entries a
            // column on average (a chain's): its sweeps are chains of dependent operations with
            // little work beside them. With more entries the sweeps have work of their own and
            // the rows' work, scalar there, costs more than the chunked passes (2D stencil,
            // n = 1e4, about 20 entries a column: the step 1.4x slower, measured). Below
            // `FUSED_SWEEP_MIN_N` unknowns the chunked passes work in cache and are cheaper
            // (chain, n = 1e4: the step 1.15x slower in the sweeps, measured).
            let outs = [&mut self.u1, &mut self.v1, &mut self.a1, &mut self.f_int1];
            let outs = outs.map(|v| &mut v[..]);
            let (du, partials) = (&mut self.du[..], &mut self.partials[..]);
            match (bf == 0.0, unloaded) {
                (true, true) => fused_sweeps::<true, false>(&f, du, &r, &c, outs, partials),
                (true, false) => fused_sweeps::<true, true>(&f, du, &r, &c, outs, partials),
                (false, true) => fused_sweeps::<false, false>(&f, du, &r, &c, outs, partials),
                (false, false) => fused_sweeps::<false, true>(&f, du, &r, &c, outs, partials),
            }
        } else {
            // 1. -R_p, with K u_p formed row by row.
            crate::linalg::for_chunks1(par, &mut self.du, &mut self.no_partials, |start, du, _| {
                match (bf == 0.0, unloaded) {
                    (true, true) => r.chunk::<true, false>(start, du),
                    (true, false) => r.chunk::<true, true>(start, du),
                    (false, true) => r.chunk::<false, false>(start, du),
                    (false, false) => r.chunk::<false, true>(start, du),
                }
            });
            self.solver.solve_in_place(&mut self.du)?;
            // 3. Update, the new balance force and the works.
            c.du = &self.du;
            let outs = [&mut self.u1, &mut self.v1, &mut self.a1, &mut self.f_int1];
            let outs = outs.map(|v| &mut v[..]);
            crate::linalg::for_chunks4(par, outs, &mut self.partials, |start, o, sums| {
                *sums = if unloaded {
                    c.chunk::<false>(start, o)
                } else {
                    c.chunk::<true>(start, o)
                };
            });
        }
        let sums = crate::linalg::sum_partials(&self.options.execution, &self.partials);
        if !sums[3].is_finite() {
            self.check_new_state(step, t1)?;
            check_finite("internal force", &self.f_int1)?;
        }
        // The sums are global already (finished by the reducer).
        let w = [sums[0], sums[1], 0.0, 0.0];
        let ke = 0.5 * sums[2];
        self.book(model, state, t1, step, w, ke)?;
        Ok(1)
    }
}
