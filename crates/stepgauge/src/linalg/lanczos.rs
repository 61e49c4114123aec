//! The largest eigenvalue of `M^-1 K` (lumped `M`) from products with `K` alone: a thick-restart
//! Lanczos process with full reorthogonalisation on `D^-1/2 K D^-1/2` over the free DOFs, with a
//! probabilistic upper bound from the number of products ([`lanczos_margin`]). The explicit
//! scheme's stable step ([`stable_step`](crate::explicit::stable_step)) is its main user; the
//! process itself is general linear algebra.

use nalgebra::{DMatrix, SymmetricEigen};
use rayon::prelude::*;

use crate::error::{Error, Result};
use crate::linalg::{CHUNK, Execution, Parallelism, chunk_count, dot_with, global_sums};
use crate::validate::check_len;

/// Threshold on `beta / ||A v||` below which the Krylov subspace is taken to be invariant.
const INVARIANT_TOL: f64 = 64.0 * f64::EPSILON;

/// Rows per block when the basis is rotated onto the kept Ritz vectors at a restart.
const RESTART_BLOCK: usize = 256;

/// The probability, over the start vector, with which [`OmegaMaxEstimate::lambda_upper`] may
/// fall below the largest eigenvalue when it rests on [`lanczos_margin`]: `1e-9`.
pub const LANCZOS_FAILURE: f64 = 1e-9;

/// The relative margin `eps` such that the largest Ritz value of a Lanczos process of `products`
/// steps from a random start, on a symmetric positive semi-definite matrix with `n` rows, is at
/// least `(1 - eps) lambda_max` except with probability [`LANCZOS_FAILURE`]:
///
/// ```text
/// P(theta_k < (1 - eps) lambda_max) <= 1.648 sqrt(n) exp(-sqrt(eps) (2k - 1))
/// ```
///
/// solved for `eps` (capped at 1, where it says nothing). The bound needs no gap, so it holds in
/// clustered spectra where the Ritz gap of [`OmegaMaxEstimate::error_estimate`] misleads: with
/// `n = 1e6`, `eps` is 12.7 % of `lambda` (6.6 % of `omega`) after 40 products, 0.5 % after 200
/// and 0.02 % after 1000.
///
/// Stated for the plain Lanczos process from a start vector uniform on the sphere; here the
/// start is a fixed pseudo-random vector (for reproducible results) and the process is
/// thick-restarted (its space after `k` products lies in the Krylov space of dimension `k`, whose
/// largest Ritz value the kept Ritz vectors approach): the margin is applied to these as to the
/// plain process, an assumption this module states rather than proves.
///
/// # Reference
/// Kuczyński & Woźniakowski (1992), "Estimating the largest eigenvalue by the power and Lanczos
/// algorithms with a random start", *SIAM J. Matrix Anal. Appl.* 13(4), 1094-1122, theorem 4.2
/// (from memory).
pub fn lanczos_margin(products: usize, n: usize) -> f64 {
    let k = products as f64;
    if k < 1.0 {
        return 1.0;
    }
    let s = (1.648 * (n as f64).sqrt() / LANCZOS_FAILURE).ln() / (2.0 * k - 1.0);
    (s * s).min(1.0)
}

/// The Lanczos estimate goes on past its tolerance until [`lanczos_margin`] is at most this
/// (2 % of `lambda_max`, 1 % of `omega_max`), unless its space became exact: about 100 products
/// for 1e4 to 1e7 free DOFs, so that [`OmegaMaxEstimate::lambda_upper`] stays close to the
/// estimate.
pub const LANCZOS_MARGIN_TARGET: f64 = 0.02;

/// Settings of the Lanczos estimate of `lambda_max` ([`omega_max_lanczos`]).
///
/// New fields may be added in later versions: start from `EigenOptions::default()` and set
/// fields.
#[derive(Debug, Clone, Copy, PartialEq)]
#[non_exhaustive]
pub struct EigenOptions {
    /// Relative accuracy asked of `lambda_max`: the iteration stops when the error estimate
    /// `min(r, r^2 / gap)` is at most `tolerance * lambda` (see [`omega_max_lanczos`]).
    /// Default `1e-10`. Must be positive, finite and below 1.
    pub tolerance: f64,
    /// Largest number of stiffness products before giving up with
    /// [`Error::EigenNotConverged`]. Default 5000. Must be at least 1.
    pub max_products: usize,
    /// When `max_products` is spent before `tolerance` is met, the estimate is still returned
    /// (with its [`OmegaMaxEstimate::error_estimate`]) if that estimate is at most this; otherwise
    /// [`Error::EigenNotConverged`]. Default `1e-4`; `0` makes `tolerance` strict.
    ///
    /// Meshes with many equal elements have a cluster of eigenvalues at the top of the spectrum
    /// (a uniform chain of 10^4 DOFs: a relative gap of about 5e-8 between the two largest), where
    /// the residual of the top Ritz pair falls very slowly: the estimate stalls near a 3e-6
    /// relative residual for thousands of products although the Ritz value is already that
    /// close to the cluster. For a stable step, whose safety factor leaves a margin of several
    /// per cent, such an estimate is good; the reported bound says how good.
    pub tolerance_at_budget: f64,
    /// Largest dimension `m` of the Krylov basis (the memory is `m` vectors of the DOF count);
    /// capped at the number of free DOFs. Default 40. Must be at least 2.
    pub krylov_dim: usize,
}

impl Default for EigenOptions {
    fn default() -> Self {
        EigenOptions {
            tolerance: 1e-10,
            max_products: 5000,
            tolerance_at_budget: 1e-4,
            krylov_dim: 40,
        }
    }
}

impl EigenOptions {
    fn validate(&self) -> Result<()> {
        if !(self.tolerance.is_finite() && self.tolerance > 0.0 && self.tolerance < 1.0) {
            return Err(Error::InvalidParameter {
                name: "tolerance",
                value: self.tolerance,
                expected: "a relative tolerance in (0, 1), for example 1e-10",
            });
        }
        if !(self.tolerance_at_budget.is_finite()
            && self.tolerance_at_budget >= 0.0
            && self.tolerance_at_budget < 1.0)
        {
            return Err(Error::InvalidParameter {
                name: "tolerance_at_budget",
                value: self.tolerance_at_budget,
                expected: "a relative error bound in [0, 1), for example 1e-4 (0: strict)",
            });
        }
        if self.max_products == 0 {
            return Err(Error::InvalidParameter {
                name: "max_products",
                value: 0.0,
                expected: "at least one stiffness product",
            });
        }
        if self.krylov_dim < 2 {
            return Err(Error::InvalidParameter {
                name: "krylov_dim",
                value: self.krylov_dim as f64,
                expected: "a Krylov dimension of at least 2 (40 is a good default)",
            });
        }
        Ok(())
    }
}

/// The result of [`omega_max_lanczos`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OmegaMaxEstimate {
    /// `sqrt(max(lambda_max, 0))`: the highest circular frequency (rad per unit time).
    pub omega_max: f64,
    /// The largest Ritz value, the estimate of the largest eigenvalue of `M^-1 K` on the free DOFs.
    /// It never exceeds the true value (up to rounding).
    pub lambda_max: f64,
    /// A-posteriori estimate of `|lambda_max - lambda| / lambda`: `min(r, r^2 / gap) / lambda` with
    /// `r` the residual norm of the top Ritz pair and `gap` the distance to the next Ritz value
    /// (`r` alone bounds the distance to the nearest eigenvalue; the `r^2 / gap` bound holds with
    /// the true gap, which the Ritz gap only approximates: where the top of the spectrum is
    /// clustered this is an estimate, not a bound). At rounding level when the Krylov space
    /// became invariant.
    pub error_estimate: f64,
    /// An upper bound on the largest eigenvalue, for a safe stable step: exact to rounding when
    /// the Krylov space became invariant or spans every free DOF (the Ritz values are then the
    /// eigenvalues; `lambda_max` plus its residual and a few roundings of `||A||`); otherwise
    /// `lambda_max / (1 - eps)` with the margin `eps` of [`lanczos_margin`] for the products
    /// spent, which a Lanczos process from a random start undershoots `lambda_max` by more than
    /// only with probability [`LANCZOS_FAILURE`], and at least `lambda_max` plus its residual.
    /// Not a proof: the start vector here is a fixed pseudo-random one and the process restarts,
    /// while the probability bound is for the plain process from a random start; it is applied
    /// here as if it held (an assumption, stated in `docs/explicit.md`).
    pub lambda_upper: f64,
    /// Stiffness products used.
    pub products: usize,
    /// Thick restarts performed.
    pub restarts: usize,
}

/// The largest eigenvalue of `M^-1 K` on the free DOFs, and `omega_max = sqrt(lambda_max)`, from
/// products with `K` only.
///
/// `apply_k(x, out)` must write `K x` into `out` (length `n = mass.len()`); `x` is always zero at
/// the `constrained` DOFs, and `out` is ignored there. The operator iterated on is the symmetric
/// `A = D^-1/2 K D^-1/2` restricted to the free DOFs (`D = diag(mass)`), which has the eigenvalues
/// of `M^-1 K`; `K` must be symmetric.
///
/// # Method
/// A Lanczos process with full reorthogonalisation (two passes of classical Gram-Schmidt against
/// the whole basis) builds an orthonormal basis `V` of up to `m = min(krylov_dim, n_free)` vectors
/// and the projected matrix `T = V^T A V`, kept dense and symmetric from the Gram-Schmidt
/// coefficients, with `A V = V T + beta v e_m^T`. The Ritz pairs `(theta, s)` of `T`
/// ([`nalgebra::SymmetricEigen`]) have residual norms `r = beta |s_m|`. When the basis is full it
/// is thick-restarted: the `m / 2` Ritz vectors `V s` with the largest Ritz values are kept (they
/// diagonalise the new projected matrix, `T = diag(theta)`), the residual direction `v` is
/// appended, and the coupling row of `T` is `beta s_m` (the last components of the kept
/// eigenvectors). The iteration stops when
///
/// ```text
/// min(r, r^2 / gap) <= tolerance * theta_1,    gap = theta_1 - theta_2 (when positive),
/// ```
///
/// or when `beta` vanishes (an invariant subspace: the Ritz values are exact), or when the basis
/// spans all free DOFs. The test is made every `(m - m / 2) / 2` expansions and when the basis is
/// full, so up to that many products more than strictly needed may be spent. The start vector is
/// a fixed pseudo-random sequence (a 64-bit linear congruential generator), so the result is
/// reproducible, and it does not depend on the thread count (`execution.parallelism`).
///
/// Memory: `m + 3` vectors of length `n`, all allocated before the iteration; inside it only the
/// small projected eigenproblem (at most `m x m`) allocates.
///
/// With no free DOF the result is `omega_max = 0` after no product.
///
/// Every dot product and norm (and the count of free DOFs) is a global sum through
/// `execution.reduce`; the vector updates run on rayon's pool as `execution.parallelism` says.
/// Results do not depend on the thread count.
///
/// # Errors
/// * [`Error::InvalidParameter`] for invalid [`EigenOptions`];
/// * [`Error::EmptyModel`] for an empty `mass`; [`Error::DimensionMismatch`] for a mask of the
///   wrong length; [`Error::NonPositiveMass`] for a zero, negative or non-finite mass on a free
///   DOF;
/// * [`Error::NonFiniteInput`] (`what` `"stiffness product"`) when `apply_k` returns a non-finite
///   value at a free DOF;
/// * [`Error::EigenNotConverged`] when the tolerance is not met within
///   [`EigenOptions::max_products`] products and the error estimate then reached is above
///   [`EigenOptions::tolerance_at_budget`] (the error carries the estimate reached);
/// * any error returned by `apply_k`, unchanged.
///
/// # Reference
/// Golub & Van Loan, *Matrix Computations*, 4th ed., ch. 10 (the Lanczos process, Ritz pairs and
/// their residuals); K. Wu & H. Simon (2000), "Thick-restart Lanczos method for large symmetric
/// eigenvalue problems", *SIAM J. Matrix Anal. Appl.* 22(2), 602-616.
pub fn omega_max_lanczos(
    mass: &[f64],
    constrained: Option<&[bool]>,
    apply_k: impl FnMut(&[f64], &mut [f64]) -> Result<()>,
    options: &EigenOptions,
    execution: &Execution,
) -> Result<OmegaMaxEstimate> {
    lanczos(
        mass,
        constrained,
        apply_k,
        options,
        execution,
        f64::INFINITY,
    )
}

/// [`omega_max_lanczos`], also stopping as soon as the top Ritz value reaches `accept_at` (used
/// with a guaranteed upper bound just below it: the caller then knows `lambda_max` to within
/// the gap).
pub(crate) fn lanczos(
    mass: &[f64],
    constrained: Option<&[bool]>,
    mut apply_k: impl FnMut(&[f64], &mut [f64]) -> Result<()>,
    options: &EigenOptions,
    execution: &Execution,
    accept_at: f64,
) -> Result<OmegaMaxEstimate> {
    options.validate()?;
    let n = mass.len();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    // scale[i] = 1 / sqrt(m_i) on free DOFs and exactly 0 on constrained ones.
    let scale = inverse_sqrt_mass(mass, constrained)?;
    let mut partials = vec![0.0; chunk_count(n)];
    // The free DOFs over all processes (a count, exact in binary64 up to 2^53).
    let [n_free] = global_sums(execution, n, &mut partials, |i, c| {
        if scale[i] > 0.0 {
            c[0] += 1.0;
        }
    });
    let n_free = n_free as usize;
    if n_free == 0 {
        return Ok(OmegaMaxEstimate {
            omega_max: 0.0,
            lambda_max: 0.0,
            error_estimate: 0.0,
            lambda_upper: 0.0,
            products: 0,
            restarts: 0,
        });
    }
    let par = execution.parallelism;
    let m = options.krylov_dim.min(n_free);
    let keep = (m / 2).max(1);
    // The projected eigenproblem (O(j^3) work) is solved every `stride` expansions (twice per
    // restart cycle) and whenever the basis is full.
    let stride = ((m - keep) / 2).max(1);

    // All workspace, allocated once.
    let mut basis = vec![0.0; m * n];
    let mut w = vec![0.0; n];
    let mut x = vec![0.0; n];
    let mut t = vec![0.0; m * m];
    let mut coef = vec![0.0; m];
    let mut h = vec![0.0; m];
    let mut order: Vec<usize> = Vec::with_capacity(m);
    let mut kept_vectors = vec![0.0; m * keep];
    let mut block = vec![0.0; keep * RESTART_BLOCK];

    start_vector(&mut basis[..n], &scale, execution, &mut partials);

    let mut j = 0; // index of the basis vector being expanded
    let mut kept = 0; // Ritz vectors kept at the last restart
    let mut products = 0;
    let mut restarts = 0;
    let mut a_norm = 0.0_f64;
    loop {
        // w = A v_j = D^-1/2 K D^-1/2 v_j on the free DOFs, zero on the constrained ones.
        for ((xi, &vi), &si) in x.iter_mut().zip(&basis[j * n..(j + 1) * n]).zip(&scale) {
            *xi = if si > 0.0 { si * vi } else { 0.0 };
        }
        apply_k(&x, &mut w)?;
        products += 1;
        for (i, (wi, &si)) in w.iter_mut().zip(&scale).enumerate() {
            if si > 0.0 {
                if !wi.is_finite() {
                    return Err(Error::NonFiniteInput {
                        what: "stiffness product",
                        index: i,
                        value: *wi,
                    });
                }
                *wi *= si;
            } else {
                *wi = 0.0;
            }
        }
        a_norm = a_norm.max(dot_with(&w, &w, execution, &mut partials).sqrt());

        // Two passes of classical Gram-Schmidt against v_0 .. v_j; the summed coefficients are
        // column j of T = V^T A V.
        let js = j + 1;
        h[..js].fill(0.0);
        for _ in 0..2 {
            for (i, c) in coef[..js].iter_mut().enumerate() {
                *c = dot_with(&basis[i * n..(i + 1) * n], &w, execution, &mut partials);
            }
            for (i, (&c, hi)) in coef[..js].iter().zip(&mut h[..js]).enumerate() {
                axpy(-c, &basis[i * n..(i + 1) * n], &mut w, par);
                *hi += c;
            }
        }
        for (i, &hi) in h[..js].iter().enumerate() {
            t[i * m + j] = hi;
            t[j * m + i] = hi;
        }
        let beta = dot_with(&w, &w, execution, &mut partials).sqrt();

        let invariant = beta <= INVARIANT_TOL * a_norm;
        let full = js == m;
        let out_of_budget = products >= options.max_products;
        // Before the first restart T is tridiagonal (to rounding): a Sturm count tells in O(j)
        // whether a Ritz value has reached `accept_at`, so that test is made every product.
        let reached =
            accept_at.is_finite() && kept == 0 && tridiagonal_exceeds(&t, m, js, accept_at);
        // In that first cycle the Sturm test replaces the periodic test (the tolerance is
        // tested when the basis is full).
        let periodic = (js - kept) % stride == 0 && !(accept_at.is_finite() && kept == 0);
        if invariant || full || out_of_budget || reached || periodic {
            let projected = DMatrix::from_fn(js, js, |a, b| t[a * m + b]);
            let Some(eig) = SymmetricEigen::try_new(projected, f64::EPSILON, 1000 * js) else {
                return Err(Error::EigenNotConverged {
                    iterations: products,
                    residual: f64::NAN,
                });
            };
            order.clear();
            order.extend(0..js);
            order.sort_unstable_by(|&a, &b| eig.eigenvalues[b].total_cmp(&eig.eigenvalues[a]));
            let theta1 = eig.eigenvalues[order[0]];
            let r = beta * eig.eigenvectors[(j, order[0])].abs();
            let err = match order.get(1).map(|&i| theta1 - eig.eigenvalues[i]) {
                Some(gap) if gap > 0.0 => r.min(r * r / gap),
                _ => r,
            };
            let relative = if err == 0.0 {
                0.0
            } else if theta1 != 0.0 {
                err / theta1.abs()
            } else if invariant {
                0.0
            } else {
                f64::INFINITY
            };
            let exact = invariant || (full && m == n_free);
            // Converged, and enough products spent for a useful upper bound (see
            // `lanczos_margin`).
            let bounded = exact || lanczos_margin(products, n_free) <= LANCZOS_MARGIN_TARGET;
            if exact
                || (relative <= options.tolerance && bounded)
                || theta1 >= accept_at
                || (out_of_budget && relative <= options.tolerance_at_budget)
            {
                let lambda_upper = if exact {
                    theta1 + r + 8.0 * f64::EPSILON * a_norm
                } else {
                    let eps = lanczos_margin(products, n_free);
                    let upper = if eps < 1.0 {
                        theta1 / (1.0 - eps)
                    } else {
                        f64::INFINITY
                    };
                    upper.max(theta1 + r)
                };
                return Ok(OmegaMaxEstimate {
                    omega_max: theta1.max(0.0).sqrt(),
                    lambda_max: theta1,
                    error_estimate: relative,
                    lambda_upper,
                    products,
                    restarts,
                });
            }
            if out_of_budget {
                return Err(Error::EigenNotConverged {
                    iterations: products,
                    residual: relative,
                });
            }
            if full {
                // Thick restart: keep the Ritz vectors of the `keep` largest Ritz values ...
                for (c, &col) in order[..keep].iter().enumerate() {
                    for row in 0..m {
                        kept_vectors[row * keep + c] = eig.eigenvectors[(row, col)];
                    }
                }
                rotate_basis(&mut basis, n, m, keep, &kept_vectors, &mut block);
                // ... which diagonalise the projected matrix, coupled to the residual direction
                // through beta times their last components.
                t.fill(0.0);
                for (c, &col) in order[..keep].iter().enumerate() {
                    t[c * m + c] = eig.eigenvalues[col];
                    let coupling = beta * eig.eigenvectors[(j, col)];
                    t[c * m + keep] = coupling;
                    t[keep * m + c] = coupling;
                }
                let inv = 1.0 / beta;
                for (v, &wi) in basis[keep * n..(keep + 1) * n].iter_mut().zip(&w) {
                    *v = wi * inv;
                }
                j = keep;
                kept = keep;
                restarts += 1;
                continue;
            }
        }
        // Extend the basis with the normalised residual.
        let inv = 1.0 / beta;
        for (v, &wi) in basis[(j + 1) * n..(j + 2) * n].iter_mut().zip(&w) {
            *v = wi * inv;
        }
        j += 1;
    }
}

/// True when the symmetric tridiagonal part of the leading `js x js` block of `t` (row-major,
/// row length `m`) has an eigenvalue above `x`: fewer than `js` negative pivots of `T - x I`
/// (Sylvester's law of inertia; Golub & Van Loan, *Matrix Computations*, 4th ed., § 8.4).
fn tridiagonal_exceeds(t: &[f64], m: usize, js: usize, x: f64) -> bool {
    let mut below = 0;
    let mut d = 1.0;
    for i in 0..js {
        let b2 = if i == 0 {
            0.0
        } else {
            let b = t[(i - 1) * m + i];
            b * b
        };
        d = t[i * m + i] - x - b2 / d;
        if d == 0.0 {
            // A zero pivot: perturb it to the rounding level (the count is then that of a
            // nearby shift).
            d = -f64::EPSILON * (x.abs() + b2.sqrt()).max(f64::MIN_POSITIVE);
        }
        if d < 0.0 {
            below += 1;
        }
    }
    below < js
}

/// `1 / sqrt(m_i)` on free DOFs and `0` on constrained ones, after checking the mask length and
/// that every free DOF has a positive, finite mass.
pub(crate) fn inverse_sqrt_mass(mass: &[f64], constrained: Option<&[bool]>) -> Result<Vec<f64>> {
    let n = mass.len();
    if let Some(c) = constrained {
        check_len("constraint mask", n, c.len())?;
    }
    let mut scale = vec![0.0; n];
    for (i, (s, &m)) in scale.iter_mut().zip(mass).enumerate() {
        if constrained.is_some_and(|c| c[i]) {
            continue;
        }
        if !(m.is_finite() && m > 0.0) {
            return Err(Error::NonPositiveMass { dof: i, value: m });
        }
        *s = 1.0 / m.sqrt();
    }
    Ok(scale)
}

/// A deterministic, normalised start vector on the free DOFs (`scale > 0`): uniform
/// pseudo-random entries in `[-1, 1)` from Knuth's 64-bit MMIX linear congruential generator.
fn start_vector(v: &mut [f64], scale: &[f64], execution: &Execution, partials: &mut [f64]) {
    let mut state: u64 = 0x853c_49e6_748f_ea9b;
    for (vi, &si) in v.iter_mut().zip(scale) {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let r = (state >> 11) as f64 / (1_u64 << 53) as f64;
        *vi = if si > 0.0 { 2.0 * r - 1.0 } else { 0.0 };
    }
    let mut norm = dot_with(v, v, execution, partials).sqrt();
    if norm == 0.0 {
        for (vi, &si) in v.iter_mut().zip(scale) {
            *vi = if si > 0.0 { 1.0 } else { 0.0 };
        }
        norm = dot_with(v, v, execution, partials).sqrt();
    }
    let inv = 1.0 / norm;
    v.iter_mut().for_each(|vi| *vi *= inv);
}

/// `y += alpha x`, in parallel chunks when `par` says so (element-wise, hence deterministic).
fn axpy(alpha: f64, x: &[f64], y: &mut [f64], par: Parallelism) {
    let kernel = |(yc, xc): (&mut [f64], &[f64])| {
        for (yi, &xi) in yc.iter_mut().zip(xc) {
            *yi += alpha * xi;
        }
    };
    if par.parallel_for(y.len()) {
        y.par_chunks_mut(CHUNK)
            .zip(x.par_chunks(CHUNK))
            .for_each(kernel);
    } else {
        kernel((y, x));
    }
}

/// Replaces the first `keep` basis vectors (stored one after another, `n` entries each) by
/// `V S`, `S` the `m x keep` matrix `s` (row-major), working on blocks of rows so that the
/// rotation is done in place with a `keep x RESTART_BLOCK` buffer.
fn rotate_basis(basis: &mut [f64], n: usize, m: usize, keep: usize, s: &[f64], block: &mut [f64]) {
    let mut r0 = 0;
    while r0 < n {
        let len = (n - r0).min(RESTART_BLOCK);
        block.fill(0.0);
        for row in 0..m {
            let src = &basis[row * n + r0..row * n + r0 + len];
            for c in 0..keep {
                let coeff = s[row * keep + c];
                let dst = &mut block[c * RESTART_BLOCK..c * RESTART_BLOCK + len];
                for (d, &v) in dst.iter_mut().zip(src) {
                    *d += coeff * v;
                }
            }
        }
        for c in 0..keep {
            basis[c * n + r0..c * n + r0 + len]
                .copy_from_slice(&block[c * RESTART_BLOCK..c * RESTART_BLOCK + len]);
        }
        r0 += len;
    }
}
