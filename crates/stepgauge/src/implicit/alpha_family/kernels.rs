//! The fused kernels of the linear path (the right-hand side's and the update's rows, and the
//! passes inside the sweeps of a simplicial factor): every `unsafe` block of the implicit module.

use crate::linalg::{CsrMatrix, SimplicialFactor};

// For the documentation's links only.
#[cfg(doc)]
use super::AlphaIntegrator;
#[cfg(doc)]
use crate::linalg::LinearSolver;

/// Fewest unknowns for which [`AlphaIntegrator::linear_substep_fused`] runs inside the sweeps of
/// a simplicial factor ([`fused_sweeps`]): chain of unit masses, average acceleration, medians
/// of alternated runs on a loaded 2-core machine, step / (solve + `M x` + `K x`): n = 1e4 1.43
/// in the sweeps against 1.23 in chunked passes (3 runs), n = 1e5 0.94 against 1.23, n = 1e6
/// 0.95 against 1.21 (5 runs; noisy figures; the crossing is somewhere between).
pub(super) const FUSED_SWEEP_MIN_N: usize = 32_768;

/// The inputs of the right-hand side's pass of [`AlphaIntegrator::linear_substep_fused`].
pub(super) struct FusedRhs<'a> {
    pub(super) k: &'a CsrMatrix,
    pub(super) h: f64,
    pub(super) af: f64,
    pub(super) bf: f64,
    pub(super) u0: &'a [f64],
    pub(super) v0: &'a [f64],
    pub(super) a0: &'a [f64],
    pub(super) m: &'a [f64],
    pub(super) fi0: &'a [f64],
    pub(super) fe0: &'a [f64],
    pub(super) fe1: &'a [f64],
}

impl FusedRhs<'_> {
    /// Row `i` of `-R_p`: the expressions of [`FusedRhs::chunk`].
    ///
    /// # Panics
    /// If `i >= n`.
    #[inline(always)]
    fn row<const BF0: bool, const LOADED: bool>(&self, i: usize) -> f64 {
        let (u0, v0, a0, h) = (self.u0, self.v0, self.a0, self.h);
        assert!(i < self.k.nrows());
        // SAFETY: `row_dot_by` passes column indices `c < ncols == n`, and `u0`, `v0`, `a0`
        // have `n` entries (checked by the caller); `i < nrows` (asserted).
        let predict = |c: usize| unsafe {
            *u0.get_unchecked(c) + h * *v0.get_unchecked(c) + 0.5 * h * h * *a0.get_unchecked(c)
        };
        let g1 = unsafe { self.k.row_dot_by(i, predict) };
        let ma = self.m[i] * a0[i];
        // Only what the variant reads is loaded (`BF0`, `LOADED` are constants).
        let fi0 = if BF0 { 0.0 } else { self.fi0[i] };
        let (fe0, fe1) = match (BF0, LOADED) {
            (_, false) => (0.0, 0.0),
            (true, true) => (0.0, self.fe1[i]),
            (false, true) => (self.fe0[i], self.fe1[i]),
        };
        self.value::<BF0, LOADED>(ma, g1, fi0, fe0, fe1)
    }

    /// Row value of `-R_p` from `M a_n` (`ma`), the row of `K u_p` (`g1`), the balance force
    /// `g_n` (`fi0`) and the external forces: the one expression of [`FusedRhs::row`] and
    /// [`FusedRhs::chunk`]. `BF0` does not use `fi0` or `fe0`, `LOADED = false` neither force.
    #[inline(always)]
    fn value<const BF0: bool, const LOADED: bool>(
        &self,
        ma: f64,
        g1: f64,
        fi0: f64,
        fe0: f64,
        fe1: f64,
    ) -> f64 {
        let (af, bf) = (self.af, self.bf);
        match (BF0, LOADED) {
            (true, false) => -(ma + g1),
            (true, true) => -(ma + g1 - fe1),
            (false, false) => -(ma + (af * g1 + bf * fi0)),
            (false, true) => {
                let fe = af * fe1 + bf * fe0;
                -(ma + (af * g1 + bf * fi0) - fe)
            }
        }
    }

    /// One chunk (from `start`) of `-R_p`, with `K u_p` formed row by row from the predictor
    /// computed on the fly. The expressions of [`AlphaIntegrator::linear_substep`]: `BF0` for
    /// `alpha_f = 0` (`(1 - alpha_f) = 1`, `g_n` not read), `LOADED = false` for `f_ext = +0`,
    /// not read (`x - 0.0 == x` for every `x`). The caller checked `K` is `n x n` and `u0`,
    /// `v0`, `a0` have `n` entries.
    #[inline(always)]
    pub(super) fn chunk<const BF0: bool, const LOADED: bool>(&self, start: usize, du: &mut [f64]) {
        let (u0, v0, a0, h) = (self.u0, self.v0, self.a0, self.h);
        // SAFETY: `row_dot_by` passes column indices `c < ncols == n`, and `u0`, `v0`, `a0`
        // have `n` entries.
        let predict = |c: usize| unsafe {
            *u0.get_unchecked(c) + h * *v0.get_unchecked(c) + 0.5 * h * h * *a0.get_unchecked(c)
        };
        let len = du.len();
        let r = start..start + len;
        let (m, a0c, fi0) = (&self.m[r.clone()], &a0[r.clone()], &self.fi0[r.clone()]);
        let (fe0, fe1) = if LOADED {
            (&self.fe0[r.clone()], &self.fe1[r])
        } else {
            (&[][..], &[][..])
        };
        for (kk, out) in du.iter_mut().enumerate() {
            // SAFETY: `start + kk < n == nrows`.
            let g1 = unsafe { self.k.row_dot_by(start + kk, predict) };
            let ma = m[kk] * a0c[kk];
            let fi = if BF0 { 0.0 } else { fi0[kk] };
            let (e0, e1) = match (BF0, LOADED) {
                (_, false) => (0.0, 0.0),
                (true, true) => (0.0, fe1[kk]),
                (false, true) => (fe0[kk], fe1[kk]),
            };
            *out = self.value::<BF0, LOADED>(ma, g1, fi, e0, e1);
        }
    }
}

/// The inputs of the update pass of [`AlphaIntegrator::linear_substep_fused`].
pub(super) struct FusedUpdate<'a> {
    pub(super) h: f64,
    pub(super) bh: f64,
    pub(super) bh2: f64,
    pub(super) g: f64,
    pub(super) af: f64,
    pub(super) bf: f64,
    pub(super) am: f64,
    pub(super) bm: f64,
    pub(super) du: &'a [f64],
    pub(super) u0: &'a [f64],
    pub(super) v0: &'a [f64],
    pub(super) a0: &'a [f64],
    pub(super) fi0: &'a [f64],
    pub(super) fe0: &'a [f64],
    pub(super) fe1: &'a [f64],
    pub(super) m: &'a [f64],
}

impl FusedUpdate<'_> {
    /// One chunk (from `start`) of the update: `u`, `v`, `a` and the balance force `g` into the
    /// outputs, and the sums `[u_step . (g_n + g), u_step . (f_ext,n + f_ext), v . M v, NaN
    /// check]` of the chunk. `LOADED = false` treats the external forces as `+0` without reading
    /// them. The same expressions, and the sums in the same order, as the lumped, undamped
    /// branch of [`AlphaIntegrator::linear_substep`].
    #[inline(always)]
    pub(super) fn chunk<const LOADED: bool>(
        &self,
        start: usize,
        [u1, v1, a1, f1]: Chunks4Mut<'_>,
    ) -> [f64; 4] {
        let len = u1.len();
        let r = start..start + len;
        let (du, u0, v0, a0) = (
            &self.du[r.clone()],
            &self.u0[r.clone()],
            &self.v0[r.clone()],
            &self.a0[r.clone()],
        );
        let (fi0, m) = (&self.fi0[r.clone()], &self.m[r.clone()]);
        let (fe0, fe1) = if LOADED {
            (&self.fe0[r.clone()], &self.fe1[r])
        } else {
            (&[][..], &[][..])
        };
        let (v1, a1, f1) = (&mut v1[..len], &mut a1[..len], &mut f1[..len]);
        let fe = |k: usize| if LOADED { (fe0[k], fe1[k]) } else { (0.0, 0.0) };
        // Element-wise, no sums: vectorised.
        for k in 0..len {
            let [un, vn, an, g1] =
                self.values::<LOADED>(du[k], u0[k], v0[k], a0[k], fi0[k], m[k], fe(k));
            u1[k] = un;
            a1[k] = an;
            v1[k] = vn;
            f1[k] = g1;
        }
        // The sums, from the chunk just written (in cache), in order.
        let mut s = [0.0; 4];
        for k in 0..len {
            Self::add_sums::<LOADED>(
                &mut s,
                [u1[k], v1[k], a1[k], f1[k]],
                u0[k],
                fi0[k],
                m[k],
                fe(k),
            );
        }
        s
    }

    /// `[u, v, a, g]` of one row from its correction `d` and the row's values at `t_n`: the
    /// one expression of [`FusedUpdate::chunk`] and [`FusedUpdate::row`]. `fe = (f_ext,n,
    /// f_ext,n+1)`, not used when `LOADED = false`.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn values<const LOADED: bool>(
        &self,
        d: f64,
        u0: f64,
        v0: f64,
        a0: f64,
        fi0: f64,
        m: f64,
        (fe0, fe1): (f64, f64),
    ) -> [f64; 4] {
        let (h, bh, bh2, g) = (self.h, self.bh, self.bh2, self.g);
        let (af, bf, am, bm) = (self.af, self.bf, self.am, self.bm);
        let un = u0 + h * v0 + 0.5 * h * h * a0 + d;
        let an = a0 + d / bh2;
        let vn = v0 + h * a0 + (g * d) / bh;
        // (1 - alpha_f) g1 = f_alpha - alpha_f g0 - M w.
        let w = am * an + bm * a0;
        let fe = if LOADED { af * fe1 + bf * fe0 } else { 0.0 };
        let g1 = (fe - bf * fi0 - m * w) / af;
        [un, vn, an, g1]
    }

    /// Adds one row's terms to the sums `[u_step . (g_n + g), u_step . (f_ext,n + f_ext),
    /// v . M v, NaN check]`, from its new `[u, v, a, g]`: the one expression of both passes.
    #[inline(always)]
    fn add_sums<const LOADED: bool>(
        s: &mut [f64; 4],
        [un, vn, an, g1]: [f64; 4],
        u0: f64,
        fi0: f64,
        m: f64,
        (fe0, fe1): (f64, f64),
    ) {
        let step_u = un - u0;
        s[0] += step_u * (fi0 + g1);
        if LOADED {
            s[1] += step_u * (fe0 + fe1);
        }
        s[2] += m * vn * vn;
        s[3] += zero_if_finite(un) + zero_if_finite(an) + zero_if_finite(vn) + zero_if_finite(g1);
    }
}

impl FusedUpdate<'_> {
    /// Row `i` of the update from its correction `d`: the expressions of
    /// [`FusedUpdate::chunk`], the outputs written and the row's terms added to the sums `s`
    /// in the same order.
    #[inline(always)]
    fn row<const LOADED: bool>(
        &self,
        i: usize,
        d: f64,
        [u1, v1, a1, f1]: &mut Chunks4Mut<'_>,
        s: &mut [f64; 4],
    ) {
        let (u0, fi0, m) = (self.u0[i], self.fi0[i], self.m[i]);
        let fe = if LOADED {
            (self.fe0[i], self.fe1[i])
        } else {
            (0.0, 0.0)
        };
        let x = self.values::<LOADED>(d, u0, self.v0[i], self.a0[i], fi0, m, fe);
        [u1[i], v1[i], a1[i], f1[i]] = x;
        Self::add_sums::<LOADED>(s, x, u0, fi0, m, fe);
    }
}

/// Steps 1-3 of [`AlphaIntegrator::linear_substep_fused`] inside the sweeps of a simplicial
/// factor ([`SimplicialFactor::solve_fused`]): row `i` of `-R_p` is formed when the forward sweep
/// first needs it, and row `i` of the update as soon as the backward sweep has its correction, so
/// that this work overlaps the sweeps' chains of dependent operations, and neither the
/// right-hand side nor the correction goes through memory in the caller's order. The correction
/// is the one [`LinearSolver::solve_in_place`] gives, bit for bit, so are `u`, `v`, `a` and the
/// balance force. The sums of the rows of chunk `i / CHUNK` go to `partials[i / CHUNK]` in the
/// backward sweep's order: the order of the chunked pass when that sweep visits the rows in
/// increasing order (for the chain, whose elimination order is the reverse one), otherwise
/// another fixed order (the results differ from the chunked pass's at round-off, and do not
/// depend on the thread count).
pub(super) fn fused_sweeps<const BF0: bool, const LOADED: bool>(
    f: &SimplicialFactor<'_>,
    work: &mut [f64],
    r: &FusedRhs<'_>,
    c: &FusedUpdate<'_>,
    mut outs: Chunks4Mut<'_>,
    partials: &mut [[f64; 4]],
) {
    let n = f.n();
    assert!(outs.iter().all(|o| o.len() == n));
    assert_eq!(partials.len(), crate::linalg::chunk_count(n));
    partials.fill([0.0; 4]);
    let mut cur = usize::MAX;
    let mut s = [0.0; 4];
    f.solve_fused(
        work,
        |i| r.row::<BF0, LOADED>(i),
        |i, d| {
            let chunk = i / crate::linalg::CHUNK;
            if chunk != cur {
                if let Some(p) = partials.get_mut(cur) {
                    for (p, x) in p.iter_mut().zip(s) {
                        *p += x;
                    }
                }
                s = [0.0; 4];
                cur = chunk;
            }
            c.row::<LOADED>(i, d, &mut outs, &mut s);
        },
    );
    if let Some(p) = partials.get_mut(cur) {
        for (p, x) in p.iter_mut().zip(s) {
            *p += x;
        }
    }
}

/// The four output chunks of [`FusedUpdate::chunk`].
type Chunks4Mut<'a> = [&'a mut [f64]; 4];

/// `0` for a finite `x`, NaN otherwise: summed over a vector, a finiteness check without a
/// branch in the loop.
#[inline]
pub(super) fn zero_if_finite(x: f64) -> f64 {
    x * 0.0
}
