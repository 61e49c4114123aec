//! [`Hints`]: facts a model declares once about its forces, which let the integrators take
//! faster paths, and [`check_hints`], which tests them against the forces themselves.

use super::Model;
use crate::error::{Error, Result};
use crate::linalg::CsrMatrix;

/// Whether the internal force is linear in the displacement.
#[derive(Debug, Clone, Copy, Default)]
pub enum Linearity<'a> {
    /// No claim (the default): Newton iterations in implicit schemes.
    #[default]
    Nonlinear,
    /// `internal_force(t, u, v)` is `K u` with a constant `K` (the tangent), for every `t` and
    /// `v`: implicit schemes solve each step once, with a matrix factored once per step size
    /// (when the model has no extra forces and its damping is in the iteration matrix). Extra
    /// forces are not part of the claim. (Gershgorin's bound in the stable-step estimate needs the
    /// matrix itself: [`Stiffness`](Linearity::Stiffness).)
    Linear,
    /// As [`Linear`](Linearity::Linear), and `K` itself: `internal_force` is exactly `K u`,
    /// summed row by row in stored order as [`spmv`](crate::linalg::spmv) does. The explicit
    /// scheme then forms `K u` inside its update loop (one pass over the vectors instead of two)
    /// and the implicit linear path forms it in its own passes, with results bit for bit those of
    /// `internal_force`; the stable-step estimate may take Gershgorin's bound on `K` (a
    /// guaranteed upper bound on the highest frequency, so the limit can differ slightly from the
    /// Lanczos estimate of a model without the hint).
    Stiffness(&'a CsrMatrix),
}

impl Linearity<'_> {
    /// True unless [`Nonlinear`](Linearity::Nonlinear).
    pub fn is_linear(&self) -> bool {
        !matches!(self, Linearity::Nonlinear)
    }
}

/// Facts a model states about its forces once ([`Model::hints`]), so that the integrators can
/// leave out work. A hint that disagrees with the forces changes results silently, so every
/// integrator checks the hints with [`check_hints`] when it is created (in every build: the check
/// costs a few force evaluations, before the integrator allocates its vectors), and tests should
/// call it on their models. The check samples; a claim that fails only elsewhere goes unseen.
///
/// New fields may be added in later versions: start from [`Hints::default`] (no claims) and use
/// the builder methods.
#[derive(Debug, Clone, Copy, Default)]
#[non_exhaustive]
pub struct Hints<'a> {
    /// Whether the internal force is linear, and its matrix when the model hands it over.
    pub linearity: Linearity<'a>,
    /// `external_force` is zero at every time: the explicit scheme neither calls it nor reads an
    /// external-force vector in its update loop.
    pub unloaded: bool,
}

impl<'a> Hints<'a> {
    /// The internal force is `K u` with a constant `K` ([`Linearity::Linear`]).
    #[must_use]
    pub fn linear(mut self) -> Self {
        self.linearity = Linearity::Linear;
        self
    }

    /// The internal force is exactly `K u` with this `K` ([`Linearity::Stiffness`]).
    #[must_use]
    pub fn stiffness(mut self, k: &'a CsrMatrix) -> Self {
        self.linearity = Linearity::Stiffness(k);
        self
    }

    /// The external force is zero at every time.
    #[must_use]
    pub fn unloaded(mut self) -> Self {
        self.unloaded = true;
        self
    }

    /// The matrix of [`Linearity::Stiffness`] when it is `n x n` (the fused loops need that).
    pub(crate) fn stiffness_of_size(&self, n: usize) -> Option<&'a CsrMatrix> {
        match self.linearity {
            Linearity::Stiffness(k) if k.nrows() == n && k.ncols() == n => Some(k),
            _ => None,
        }
    }
}

/// Checks `model`'s [`Hints`] against its forces at time `t`, on pseudo-random vectors:
///
/// - [`Linearity::Stiffness`]: `K` is `n x n`, and `internal_force(t, x, v) = K x` for a random
///   `x` and a random velocity `v`;
/// - [`Linearity::Linear`]: `f(x + y) = f(x) + f(y)` and `f(x)` does not change with the
///   velocity or with the time (`t` and `t + 1`);
/// - `unloaded`: `external_force` is zero at `t + s` for `s` in `0, 1e-3, 0.01, 0.1, 0.5, 1, 2,
///   5, 10, 100, 1000` (a load that starts later than that, or only between the samples, goes
///   unseen: the explicit scheme then never applies it).
///
/// Comparisons allow rounding: `1e-10` times the magnitudes that make the entry (for `K x`,
/// `sum_j |K_ij x_j|`; for a bare linear claim, the largest entries of the forces compared), so
/// that a model may sum its force in another order than the matrix product; a hint that is
/// wrong by more is refused. Force evaluations are trial
/// evaluations (see the [module documentation](super)), so the check leaves the model as it
/// was. Allocates (it is meant for construction time and tests).
///
/// # Errors
/// [`Error::HintMismatch`] naming the hint and the first DOF where it fails;
/// [`Error::Model`] when the model cannot evaluate a force at the random vectors.
pub fn check_hints<M: Model + ?Sized>(model: &mut M, t: f64) -> Result<()> {
    let hints = model.hints();
    let n = model.dofs();
    let unloaded = hints.unloaded;
    let linearity = match hints.linearity {
        Linearity::Nonlinear => None,
        Linearity::Linear => Some(None),
        Linearity::Stiffness(k) => {
            if k.nrows() != n || k.ncols() != n {
                return Err(Error::HintMismatch {
                    hint: "Linearity::Stiffness",
                    dof: None,
                    detail: format!(
                        "the matrix is {} x {}, but the model has {n} DOFs",
                        k.nrows(),
                        k.ncols()
                    ),
                });
            }
            // K x and the magnitudes that make each entry, formed now (no copy of K is kept
            // while the model evaluates its force).
            let x = pseudo_random(n, 1);
            let mut kx = vec![0.0; n];
            k.mul_vec(&x, &mut kx, crate::linalg::Parallelism::serial());
            let scale: Vec<f64> = (0..n)
                .map(|i| k.row(i).map(|(j, a)| (a * x[j]).abs()).sum())
                .collect();
            Some(Some((x, kx, scale)))
        }
    };
    let err = |source| Error::Model { step: 0, t, source };
    // At most five vectors of `n` at a time for a stiffness, seven for a linear claim (the
    // integrators run the check before they allocate their own).
    if let Some(k) = linearity {
        let mut f = vec![0.0; n];
        match k {
            Some((x, kx, scale)) => {
                // One evaluation at a random displacement and a random velocity against K x.
                let v = pseudo_random(n, 3);
                model.internal_force(t, &x, &v, &mut f).map_err(err)?;
                compare("Linearity::Stiffness", "K u", &f, &kx, |i| scale[i])?;
            }
            None => {
                let x = pseudo_random(n, 1);
                let zero = vec![0.0; n];
                let mut y = pseudo_random(n, 2);
                let (mut fy, mut g) = (vec![0.0; n], vec![0.0; n]);
                model.internal_force(t, &x, &zero, &mut f).map_err(err)?;
                model.internal_force(t, &y, &zero, &mut fy).map_err(err)?;
                for (yi, xi) in y.iter_mut().zip(&x) {
                    *yi += xi;
                }
                model.internal_force(t, &y, &zero, &mut g).map_err(err)?;
                for (gi, fyi) in g.iter_mut().zip(&fy) {
                    *gi -= fyi;
                }
                // f(x + y) - f(y) against f(x). Without the matrix the size of the terms that
                // make an entry is unknown, and an entry of a random force can be small by
                // cancellation: the rounding allowed is relative to the largest entries.
                let big = |v: &[f64]| v.iter().fold(0.0_f64, |m, a| m.max(a.abs()));
                let (fx_max, fy_max) = (big(&f), big(&fy));
                let scale = |_: usize| fx_max + fy_max;
                compare("Linearity::Linear", "f(x) + f(y)", &g, &f, scale)?;
                let abs = |_: usize| fx_max;
                let mut v = y;
                fill_pseudo_random(&mut v, 3);
                model.internal_force(t, &x, &v, &mut g).map_err(err)?;
                compare(
                    "Linearity::Linear",
                    "the force at zero velocity",
                    &g,
                    &f,
                    abs,
                )?;
                model
                    .internal_force(t + 1.0, &x, &zero, &mut g)
                    .map_err(err)?;
                compare(
                    "Linearity::Linear",
                    "the force at another time",
                    &g,
                    &f,
                    abs,
                )?;
            }
        }
    }
    if unloaded {
        let mut f = vec![0.0; n];
        for s in [0.0, 1e-3, 0.01, 0.1, 0.5, 1.0, 2.0, 5.0, 10.0, 100.0, 1e3].map(|s| t + s) {
            model.external_force(s, &mut f).map_err(err)?;
            if let Some(dof) = f.iter().position(|x| *x != 0.0) {
                return Err(Error::HintMismatch {
                    hint: "unloaded",
                    dof: Some(dof),
                    detail: format!("the external force at t = {s} is {:e}, not zero", f[dof]),
                });
            }
        }
    }
    Ok(())
}

/// `found` against `expected` entry by entry, within `1e-10 * scale(i)` (and exactly where the
/// scale is zero).
fn compare(
    hint: &'static str,
    what: &str,
    found: &[f64],
    expected: &[f64],
    scale: impl Fn(usize) -> f64,
) -> Result<()> {
    let bad = (0..found.len()).find(|&i| {
        let d = (found[i] - expected[i]).abs();
        // A NaN difference fails too.
        d.is_nan() || d > 1e-10 * scale(i)
    });
    match bad {
        Some(i) => Err(Error::HintMismatch {
            hint,
            dof: Some(i),
            detail: format!(
                "the internal force is {:e} where {what} gives {:e}",
                found[i], expected[i]
            ),
        }),
        None => Ok(()),
    }
}

/// `n` entries of [`fill_pseudo_random`].
fn pseudo_random(n: usize, seed: u64) -> Vec<f64> {
    let mut v = vec![0.0; n];
    fill_pseudo_random(&mut v, seed);
    v
}

/// Entries in `[-1, 1)` from a 64-bit linear congruential generator (fixed seeds, so that a
/// failure reproduces).
fn fill_pseudo_random(out: &mut [f64], seed: u64) {
    let mut state = seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) ^ 0x853c_49e6_748f_ea9b;
    for o in out {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        *o = 2.0 * ((state >> 11) as f64 / (1_u64 << 53) as f64) - 1.0;
    }
}
