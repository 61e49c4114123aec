//! The central-difference step's fused loops: the update before the force evaluation (loop A)
//! and the end-of-step loop (accelerations, velocities and the ledger's dot products in one pass,
//! with the linear stiffness product fused in when the model gives one). Every `unsafe` block of
//! the explicit integrator is in this file.

use crate::linalg::{CsrMatrix, for_chunks2};
use crate::model::Model;

/// Partial sums of the end-of-step loop, per chunk:
/// `[vh.f_int, vh.f_ext, vh.f_d, v.f_int, v.f_ext, v.f_d, a.f_int, a.f_ext, a.f_d, m v^2]`.
pub(super) type EndSums = [f64; 10];

/// The model's stiffness from [`Model::hints`] ([`Linearity::Stiffness`](crate::model::Linearity::Stiffness)),
/// when it gives one of the right size.
pub(super) fn fused_stiffness<M: Model + ?Sized>(model: &M, n: usize) -> Option<&CsrMatrix> {
    model.hints().stiffness_of_size(n)
}

/// The inputs of the end-of-step loop (loop B): per DOF
///
/// ```text
/// f_int = (K u)_i  (fused)  or  f_int[i]
/// f     = f_ext - f_int - (d0 m vf + d1 f_d) - sum_k f_k
/// a     = f / m  (as f * (1/m); 0 on constrained DOFs)
/// v     = v_half + (dt/2) a
/// ```
///
/// and the energy sums ([`EndSums`]). The loop is compiled for each combination of a fused
/// stiffness, a load, damping and extra forces, so that each variant leaves out the vectors it
/// does not need; each does the same operations in the same order as the general one (a missing
/// load is `0.0 - f_int`), so results do not depend on which one runs.
pub(super) struct EndLoop<'a> {
    pub(super) stiffness: Option<&'a CsrMatrix>,
    pub(super) u: &'a [f64],
    pub(super) fi: &'a [f64],
    pub(super) fe: &'a [f64],
    pub(super) fd: &'a [f64],
    pub(super) fx: &'a [Vec<f64>],
    pub(super) m: &'a [f64],
    pub(super) minv: &'a [f64],
    pub(super) vh: &'a [f64],
    pub(super) vf: &'a [f64],
    pub(super) damped: bool,
    pub(super) d0: f64,
    pub(super) d1: f64,
    pub(super) half: f64,
}

impl EndLoop<'_> {
    /// Runs the variant of the loop that fits the inputs, over the fixed chunks (in parallel
    /// when `par`).
    pub(super) fn dispatch(
        &self,
        par: bool,
        an: &mut [f64],
        vn: &mut [f64],
        partials: &mut [EndSums],
    ) {
        match self.stiffness.is_some() {
            true => self.dispatch1::<true>(par, an, vn, partials),
            false => self.dispatch1::<false>(par, an, vn, partials),
        }
    }

    fn dispatch1<const FUSED: bool>(
        &self,
        par: bool,
        an: &mut [f64],
        vn: &mut [f64],
        partials: &mut [EndSums],
    ) {
        match !self.fe.is_empty() {
            true => self.dispatch2::<FUSED, true>(par, an, vn, partials),
            false => self.dispatch2::<FUSED, false>(par, an, vn, partials),
        }
    }

    fn dispatch2<const FUSED: bool, const LOADED: bool>(
        &self,
        par: bool,
        an: &mut [f64],
        vn: &mut [f64],
        partials: &mut [EndSums],
    ) {
        match self.damped {
            true => self.dispatch3::<FUSED, LOADED, true>(par, an, vn, partials),
            false => self.dispatch3::<FUSED, LOADED, false>(par, an, vn, partials),
        }
    }

    fn dispatch3<const FUSED: bool, const LOADED: bool, const DAMPED: bool>(
        &self,
        par: bool,
        an: &mut [f64],
        vn: &mut [f64],
        partials: &mut [EndSums],
    ) {
        match !self.fx.is_empty() {
            true => self.run::<FUSED, LOADED, DAMPED, true>(par, an, vn, partials),
            false => self.run::<FUSED, LOADED, DAMPED, false>(par, an, vn, partials),
        }
    }

    fn run<const FUSED: bool, const LOADED: bool, const DAMPED: bool, const EXTRA: bool>(
        &self,
        par: bool,
        an: &mut [f64],
        vn: &mut [f64],
        partials: &mut [EndSums],
    ) {
        for_chunks2(par, an, vn, partials, |start, an, vn, p| {
            *p = self.chunk_outlined::<FUSED, LOADED, DAMPED, EXTRA>(start, an, vn);
        });
    }

    /// [`chunk`](Self::chunk) as a function of its own: its output slices are then known not to
    /// overlap the inputs (inlined into the chunk iterator, that knowledge can be lost).
    #[inline(never)]
    fn chunk_outlined<
        const FUSED: bool,
        const LOADED: bool,
        const DAMPED: bool,
        const EXTRA: bool,
    >(
        &self,
        start: usize,
        an: &mut [f64],
        vn: &mut [f64],
    ) -> EndSums {
        self.chunk::<FUSED, LOADED, DAMPED, EXTRA>(start, an, vn)
    }

    /// One chunk, from entry `start`.
    #[inline(always)]
    fn chunk<const FUSED: bool, const LOADED: bool, const DAMPED: bool, const EXTRA: bool>(
        &self,
        start: usize,
        an: &mut [f64],
        vn: &mut [f64],
    ) -> EndSums {
        let len = an.len();
        let end = start + len;
        // Slices of exactly `len` (`len + 1` row pointers), so that the indexing below needs no
        // bounds checks.
        let vn = &mut vn[..len];
        let m = &self.m[start..end][..len];
        let minv = &self.minv[start..end][..len];
        let vh = &self.vh[start..end][..len];
        let empty: &[f64] = &[];
        let fi = if FUSED {
            empty
        } else {
            &self.fi[start..end][..len]
        };
        let fe = if LOADED {
            &self.fe[start..end][..len]
        } else {
            empty
        };
        let (fd, vf) = if DAMPED {
            (&self.fd[start..end][..len], &self.vf[start..end][..len])
        } else {
            (empty, empty)
        };
        // The matrix's arrays as plain slices held in locals (not re-read through the matrix
        // inside the loop: fewer loads and register moves per row).
        let (ptr, cols, vals): (&[usize], &[u32], &[f64]) = match self.stiffness {
            Some(k) if FUSED => {
                // Makes the unchecked products below sound (with CsrMatrix's invariant: row
                // pointers non-decreasing up to `nnz == indices.len() == data.len()`).
                assert!(k.ncols() <= self.u.len());
                (&k.indptr()[start..=end], k.indices(), k.data())
            }
            _ => (&[], &[], &[]),
        };
        let (u, half, d0, d1) = (self.u, self.half, self.d0, self.d1);
        let mut lo = ptr.first().copied().unwrap_or(0);
        let mut s = [0.0; 10];
        // The sums every variant has (`s[0], s[3], s[6], s[9]`) side by side, so that the
        // compiler can add them in pairs; each is still its own sum, term by term in order.
        let mut q = [0.0; 4];
        for j in 0..len {
            let f_int = if FUSED {
                debug_assert_eq!(ptr.len(), len + 1);
                // SAFETY: `ptr` holds `len + 1` row pointers (sliced so above) and `j < len`.
                let hi = unsafe { *ptr.get_unchecked(j + 1) };
                // The row product in stored order (as `CsrMatrix::row_dot`).
                let mut f = 0.0;
                for q in lo..hi {
                    // SAFETY: `lo..hi` is the range of row `start + j`, inside `0..=nnz` (the
                    // matrix's invariant), so `q` indexes `cols` and `vals`; the columns are
                    // below `k.ncols() <= u.len()` (asserted above).
                    unsafe {
                        let c = *cols.get_unchecked(q) as usize;
                        f += vals.get_unchecked(q) * u.get_unchecked(c);
                    }
                }
                lo = hi;
                f
            } else {
                fi[j]
            };
            let fdj = if DAMPED {
                d0 * m[j] * vf[j] + d1 * fd[j]
            } else {
                0.0
            };
            let mut f = (if LOADED { fe[j] } else { 0.0 }) - f_int;
            if DAMPED {
                f -= fdj;
            }
            if EXTRA {
                for x in self.fx {
                    f -= x[start + j];
                }
            }
            let a = f * minv[j];
            let v = vh[j] + half * a;
            an[j] = a;
            vn[j] = v;
            q[0] += vh[j] * f_int;
            q[1] += v * f_int;
            q[2] += a * f_int;
            q[3] += m[j] * v * v;
            if LOADED {
                s[1] += vh[j] * fe[j];
                s[4] += v * fe[j];
                s[7] += a * fe[j];
            }
            if DAMPED {
                s[2] += vh[j] * fdj;
                s[5] += v * fdj;
                s[8] += a * fdj;
            }
        }
        [s[0], s[3], s[6], s[9]] = q;
        s
    }
}

/// Loop A on one chunk: `vh = v + (dt/2) a`, `un = u + dt vh`; returns the sum of `un` (the
/// finiteness guard). All slices are of one length. Not inlined, so that the compiler knows the
/// output slices do not overlap the inputs.
#[inline(never)]
pub(super) fn loop_a_chunk(
    u: &[f64],
    v: &[f64],
    a: &[f64],
    un: &mut [f64],
    vh: &mut [f64],
    dt: f64,
    half: f64,
) -> f64 {
    let len = un.len();
    let (u, v, a, vh) = (&u[..len], &v[..len], &a[..len], &mut vh[..len]);
    let mut s = 0.0;
    for j in 0..len {
        let h = v[j] + half * a[j];
        let x = u[j] + dt * h;
        vh[j] = h;
        un[j] = x;
        s += x;
    }
    s
}

pub(super) fn first_non_finite(x: &[f64]) -> Option<usize> {
    x.iter().position(|v| !v.is_finite())
}
