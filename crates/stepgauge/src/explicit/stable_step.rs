//! The stable step of the central-difference method.
//!
//! The central-difference method on a lumped (diagonal) mass `M` is conditionally stable. Without
//! damping the limit is
//!
//! ```text
//! dt <= dt_crit = 2 / omega_max,     omega_max^2 = lambda_max(M^-1 K)
//! ```
//!
//! where `lambda_max(M^-1 K)` equals the largest eigenvalue of the symmetric matrix
//! `D^-1/2 K D^-1/2`, `D = diag(M)`, on the subspace of free (unconstrained) DOFs. With a modal
//! damping ratio `xi` at `omega_max` and the damping force taken at the lagged half-step velocity,
//! the limit shrinks to
//!
//! ```text
//! dt <= (2 / omega_max) (sqrt(1 + xi^2) - xi).
//! ```
//!
//! This module gives three ways to the limit:
//!
//! * [`element_stable_step`]: the classical `min_e L_e / c_e` over elements (the model computes
//!   lengths and wave speeds; [`Model::element_stable_step`] hands the result over);
//! * [`omega_max_gershgorin`]: a cheap, guaranteed upper bound on `omega_max` from an assembled
//!   stiffness matrix (so a guaranteed *lower* bound on the stable step);
//! * [`omega_max_lanczos`]: an accurate estimate of `omega_max` from stiffness products alone, by a
//!   thick-restart Lanczos process with full reorthogonalisation.
//!
//! [`estimate`] ties them to a [`Model`]: the element step when the model gives one, otherwise
//! Lanczos on [`Model::stiffness_product`], or on central finite differences of
//! [`Model::internal_force`] when the model has no stiffness product.
//!
//! Note that a Lanczos Ritz value never exceeds the true `lambda_max` (it is a Rayleigh quotient),
//! so the Lanczos `omega_max` is approximated from below and the resulting step from above. The
//! estimate therefore also gives an upper bound, [`OmegaMaxEstimate::lambda_upper`] (see
//! [`lanczos_margin`]), and [`StableStep::dt_limit_damped`], the step the integrator refuses to
//! exceed, rests on an upper bound (that one, Gershgorin's, or the model's element step), never on
//! the estimate itself.

use nalgebra::{DMatrix, SymmetricEigen};
use rayon::prelude::*;

use crate::error::{Error, ModelError, Result};
use crate::linalg::{CHUNK, CsrMatrix, Parallelism, dot, norm2};
use crate::model::Model;
use crate::state::{State, check_finite, check_len};

/// The default fraction of the estimated critical step that a run uses: `0.9`.
///
/// Common practice in explicit dynamics codes is to run at 0.67 to 0.95 of the estimated limit.
/// The margin covers three things:
///
/// * the error of the estimate itself: a Lanczos estimate of `omega_max` converges from below, so
///   the step derived from it is slightly too large (the recommended step is also capped at the
///   enforced limit [`StableStep::dt_limit_damped`]), and element formulas `L / c` are only
///   approximations of `2 / omega_max` for distorted or higher-order elements;
/// * stiffening of nonlinear models between two estimates (the limit is recomputed only every so
///   many steps, while contact, hardening or large deformation can raise `omega_max` meanwhile);
/// * damping that the estimate does not account for (a damping force of unknown type,
///   [`Damping::Force`](crate::model::Damping::Force)), which lowers the limit by the factor
///   `sqrt(1 + xi^2) - xi ~ 1 - xi` for small `xi`.
///
/// A 10 % margin covers a few percent of each, and costs only about 11 % more steps than running
/// at the limit.
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6
/// (the critical step is multiplied by a reduction factor below 1 in practice).
pub const DEFAULT_SAFETY: f64 = 0.9;

/// Relative distance below a Gershgorin upper bound `g` on `lambda_max` at which a Lanczos Ritz
/// value `theta <= lambda_max` settles the estimate for a linear model ([`estimate`]): then
/// `lambda_max` lies in `[(1 - 1e-3) g, g]` and `g` is used, so `omega_max` is over-estimated by
/// at most 0.05 % and the step is never above the true limit (up to rounding). The value is
/// chosen against [`DEFAULT_SAFETY`] (a 10 % margin): a 0.05 % loss of step is negligible.
pub const GERSHGORIN_MATCH: f64 = 1e-3;

/// Threshold on `beta / ||A v||` below which the Krylov subspace is taken to be invariant.
const INVARIANT_TOL: f64 = 64.0 * f64::EPSILON;

/// Rows per block when the basis is rotated onto the kept Ritz vectors at a restart.
const RESTART_BLOCK: usize = 256;

/// Critical step of the central-difference method for the highest circular frequency
/// `omega_max` and the modal damping ratio `xi` at that frequency:
///
/// ```text
/// dt_crit = (2 / omega_max) (sqrt(1 + xi^2) - xi) = (2 / omega_max) / (sqrt(1 + xi^2) + xi)
/// ```
///
/// The second form, which is the one evaluated, is free of cancellation for large `xi`
/// (`sqrt(1 + xi^2)` is evaluated with [`f64::hypot`], so it does not overflow either). With
/// `xi = 0` it is the undamped limit `2 / omega_max`; `omega_max = 0` (nothing can vibrate)
/// gives `f64::INFINITY`.
///
/// # Errors
/// [`Error::InvalidParameter`] when `omega_max` or `xi` is negative or not finite.
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6
/// (stability of the central-difference method, with and without damping).
pub fn critical_step(omega_max: f64, xi: f64) -> Result<f64> {
    if !(omega_max.is_finite() && omega_max >= 0.0) {
        return Err(Error::InvalidParameter {
            name: "omega_max",
            value: omega_max,
            expected: "a non-negative, finite circular frequency",
        });
    }
    if !(xi.is_finite() && xi >= 0.0) {
        return Err(Error::InvalidParameter {
            name: "xi",
            value: xi,
            expected: "a non-negative, finite damping ratio",
        });
    }
    if omega_max == 0.0 {
        return Ok(f64::INFINITY);
    }
    Ok(2.0 / omega_max / (1.0_f64.hypot(xi) + xi))
}

/// The element estimate of the stable step, `min_e L_e / c_e`, over elements with characteristic
/// lengths `lengths` and dilatational wave speeds `speeds` (the time a wave needs to cross the
/// smallest element).
///
/// # Errors
/// * [`Error::DimensionMismatch`] when `speeds` and `lengths` differ in length;
/// * [`Error::InvalidParameter`] (`name` `"element count"`) when there is no element;
/// * [`Error::NonFiniteInput`] naming the first non-finite entry (NaN or infinity);
/// * [`Error::InvalidParameter`] (`name` `"element length"` or `"element wave speed"`) for an
///   entry that is zero or negative.
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6
/// (the element eigenvalue inequality and the Courant condition `dt <= L_e / c_e`).
pub fn element_stable_step(lengths: &[f64], speeds: &[f64]) -> Result<f64> {
    check_len("element wave speeds", lengths.len(), speeds.len())?;
    if lengths.is_empty() {
        return Err(Error::InvalidParameter {
            name: "element count",
            value: 0.0,
            expected: "at least one element (one length and one wave speed)",
        });
    }
    check_finite("element lengths", lengths)?;
    check_finite("element wave speeds", speeds)?;
    let mut dt = f64::INFINITY;
    for (&l, &c) in lengths.iter().zip(speeds) {
        if l <= 0.0 {
            return Err(Error::InvalidParameter {
                name: "element length",
                value: l,
                expected: "a positive characteristic length",
            });
        }
        if c <= 0.0 {
            return Err(Error::InvalidParameter {
                name: "element wave speed",
                value: c,
                expected: "a positive wave speed",
            });
        }
        dt = dt.min(l / c);
    }
    Ok(dt)
}

/// A guaranteed upper bound on `omega_max` from the assembled stiffness `k`, the lumped `mass` and
/// the optional mask of `constrained` DOFs (`true` = constrained; such rows and columns are left
/// out, and their mass may be zero).
///
/// Two Gershgorin bounds on `lambda_max` are formed over the free rows and columns: on the
/// symmetric scaling `D^-1/2 K D^-1/2` and on `M^-1 K` (the two matrices are similar, so both
/// bound the same eigenvalues). Each is the largest right end of a Gershgorin disc:
///
/// ```text
/// b_sym = max_i ( K_ii / m_i + sum_{j != i} |K_ij| / sqrt(m_i m_j) )
/// b_inv = max_i ( K_ii / m_i + sum_{j != i} |K_ij| / m_i )
/// omega_max <= sqrt(max(0, min(b_sym, b_inv)))
/// ```
///
/// (with `K_ii >= 0`, the usual case, these are `max_i sum_j |K_ij| / sqrt(m_i m_j)` and
/// `max_i sum_j |K_ij| / m_i`). The step `2 / bound` is therefore always stable for the
/// undamped scheme, at the price of being pessimistic (for the uniform spring chain the bound is
/// `sqrt(4 k / m)`, the limit of the exact value for many masses). With no free DOF the result
/// is `0`.
///
/// # Errors
/// * [`Error::EmptyModel`] for an empty `mass`;
/// * [`Error::DimensionMismatch`] when `k` is not `n x n` or the mask does not have `n` entries;
/// * [`Error::NonFiniteInput`] for a non-finite stored entry of `k`;
/// * [`Error::NonPositiveMass`] for a zero, negative or non-finite mass on a free DOF.
///
/// # Reference
/// Gershgorin circle theorem (S. Gershgorin, 1931; e.g. Golub & Van Loan, *Matrix Computations*,
/// 4th ed., § 7.2).
pub fn omega_max_gershgorin(
    k: &CsrMatrix,
    mass: &[f64],
    constrained: Option<&[bool]>,
) -> Result<f64> {
    let n = mass.len();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    check_len("stiffness matrix rows", n, k.nrows())?;
    check_len("stiffness matrix columns", n, k.ncols())?;
    // The checked constructors keep entries finite, but `from_diagonal` and `data_mut` do not,
    // and `f64::max` below would drop a NaN bound silently.
    check_finite("stiffness matrix", k.data())?;
    let scale = inverse_sqrt_mass(mass, constrained)?;
    let mut b_sym = f64::NEG_INFINITY;
    let mut b_inv = f64::NEG_INFINITY;
    for i in (0..n).filter(|&i| scale[i] > 0.0) {
        let inv_m = 1.0 / mass[i];
        let (mut diag, mut r_sym, mut r_inv) = (0.0, 0.0, 0.0);
        for (j, v) in k.row(i) {
            if scale[j] == 0.0 {
                continue;
            }
            if j == i {
                diag += v * inv_m;
            } else {
                r_sym += v.abs() * scale[i] * scale[j];
                r_inv += v.abs() * inv_m;
            }
        }
        b_sym = b_sym.max(diag + r_sym);
        b_inv = b_inv.max(diag + r_inv);
    }
    if b_sym == f64::NEG_INFINITY {
        // No free DOF.
        return Ok(0.0);
    }
    Ok(b_sym.min(b_inv).max(0.0).sqrt())
}

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
#[derive(Debug, Clone, Copy, PartialEq)]
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
    /// When the vector operations (dot products, updates) run in parallel. Results do not depend
    /// on it.
    pub parallel: Parallelism,
}

impl Default for EigenOptions {
    fn default() -> Self {
        EigenOptions {
            tolerance: 1e-10,
            max_products: 5000,
            tolerance_at_budget: 1e-4,
            krylov_dim: 40,
            parallel: Parallelism::default(),
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
/// reproducible, and it does not depend on [`EigenOptions::parallel`].
///
/// Memory: `m + 3` vectors of length `n`, all allocated before the iteration; inside it only the
/// small projected eigenproblem (at most `m x m`) allocates.
///
/// With no free DOF the result is `omega_max = 0` after no product.
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
) -> Result<OmegaMaxEstimate> {
    lanczos(mass, constrained, apply_k, options, f64::INFINITY)
}

/// [`omega_max_lanczos`], also stopping as soon as the top Ritz value reaches `accept_at` (used
/// with a guaranteed upper bound just below it: the caller then knows `lambda_max` to within
/// the gap).
fn lanczos(
    mass: &[f64],
    constrained: Option<&[bool]>,
    mut apply_k: impl FnMut(&[f64], &mut [f64]) -> Result<()>,
    options: &EigenOptions,
    accept_at: f64,
) -> Result<OmegaMaxEstimate> {
    options.validate()?;
    let n = mass.len();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    // scale[i] = 1 / sqrt(m_i) on free DOFs and exactly 0 on constrained ones.
    let scale = inverse_sqrt_mass(mass, constrained)?;
    let n_free = scale.iter().filter(|&&s| s > 0.0).count();
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
    let par = options.parallel;
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

    start_vector(&mut basis[..n], &scale, par);

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
        a_norm = a_norm.max(norm2(&w, par));

        // Two passes of classical Gram-Schmidt against v_0 .. v_j; the summed coefficients are
        // column j of T = V^T A V.
        let js = j + 1;
        h[..js].fill(0.0);
        for _ in 0..2 {
            for (i, c) in coef[..js].iter_mut().enumerate() {
                *c = dot(&basis[i * n..(i + 1) * n], &w, par);
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
        let beta = norm2(&w, par);

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

/// Which way a [`StableStep`] was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StableStepMethod {
    /// From the model's element estimate ([`Model::element_stable_step`]).
    Elements,
    /// Lanczos on the model's stiffness product ([`Model::stiffness_product`]).
    Lanczos,
    /// A linear model's Gershgorin bound ([`omega_max_gershgorin`] on its assembled stiffness),
    /// confirmed by a Lanczos Ritz value within [`GERSHGORIN_MATCH`] below it: `omega_max` is a
    /// guaranteed upper bound, at most 0.05 % above the true value.
    LanczosGershgorin,
    /// Lanczos on central finite differences of the model's internal force (the model has no
    /// stiffness product).
    FiniteDifferenceLanczos,
}

/// The stable step of the central-difference method for a model in a given state.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StableStep {
    /// The highest circular frequency, when it was computed (`None` for the element estimate).
    pub omega_max: Option<f64>,
    /// The modal damping ratio at `omega_max`, when the model's damping determines it.
    pub xi: Option<f64>,
    /// The undamped critical step `2 / omega_max`, or the element step (`f64::INFINITY` when
    /// nothing can vibrate: no free DOF, or no stiffness on them).
    pub dt_critical: f64,
    /// The damped limit `(2 / omega_max) (sqrt(1 + xi^2) - xi)` when `xi` is known and positive
    /// (the limit with the damping force at the lagged half-step velocity); otherwise equal to
    /// `dt_critical`. [`CentralDifference`](crate::explicit::CentralDifference) replaces it by the
    /// limit of its own treatment ([`ForceVelocity`](crate::explicit::ForceVelocity)) and applies
    /// the damping of an element estimate at `omega = 2 / dt`.
    pub dt_critical_damped: f64,
    /// An upper bound on the highest circular frequency, when one was computed: Gershgorin's
    /// bound for [`StableStepMethod::LanczosGershgorin`] (guaranteed), the Lanczos estimate's
    /// [`OmegaMaxEstimate::lambda_upper`] (capped by Gershgorin's bound for a linear model)
    /// otherwise, with a margin of `1e-6` for finite-difference products.
    pub omega_max_upper: Option<f64>,
    /// The step limit this estimate vouches for, undamped: `2 / omega_max_upper`, or the element
    /// step. As sure as its upper bound: certain for Gershgorin's; for the Lanczos bound, missed
    /// only with a probability of about `1e-9` under the assumptions stated at
    /// [`OmegaMaxEstimate::lambda_upper`]; for an element step, a bound for two-node bars with
    /// lumped mass and as good as the model's element formula otherwise.
    pub dt_limit: f64,
    /// The same with the damping ratio at `omega_max_upper` (lagged damping velocity, as
    /// `dt_critical_damped`): the step above which
    /// [`CentralDifference`](crate::explicit::CentralDifference) refuses to go.
    pub dt_limit_damped: f64,
    /// The safety fraction applied by [`recommended`](StableStep::recommended).
    pub safety: f64,
    /// How the estimate was made.
    pub method: StableStepMethod,
}

impl StableStep {
    /// The step to use: `safety * dt_critical_damped`, and never above `dt_limit_damped`.
    ///
    /// The damped limit is used because the explicit scheme takes the damping force at the lagged
    /// half-step velocity, which lowers the stability limit below `2 / omega_max`.
    ///
    /// # Reference
    /// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*,
    /// ch. 6.
    pub fn recommended(&self) -> f64 {
        (self.safety * self.dt_critical_damped).min(self.dt_limit_damped)
    }
}

/// Settings of [`estimate`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StableStepOptions {
    /// Settings of the Lanczos estimate.
    pub eigen: EigenOptions,
    /// Safety fraction of the critical step, in `(0, 1]`. Default [`DEFAULT_SAFETY`].
    pub safety: f64,
    /// Use the model's element estimate when it gives one. Default `true`.
    pub prefer_elements: bool,
    /// For a linear model, take the Gershgorin bound as `omega_max^2` once a Lanczos Ritz value
    /// is within [`GERSHGORIN_MATCH`] below it ([`StableStepMethod::LanczosGershgorin`]: a
    /// guaranteed upper bound, found in far fewer products). Default `true`; set `false` when
    /// `omega_max` itself is wanted to the Lanczos tolerance (a frequency report).
    pub accept_gershgorin: bool,
}

impl Default for StableStepOptions {
    fn default() -> Self {
        StableStepOptions {
            eigen: EigenOptions::default(),
            safety: DEFAULT_SAFETY,
            prefer_elements: true,
            accept_gershgorin: true,
        }
    }
}

/// The stable step of the central-difference method for `model` in `state`.
///
/// 1. When `options.prefer_elements` and [`Model::element_stable_step`] gives a step, that step
///    ([`StableStepMethod::Elements`]; no frequency, no damping correction).
/// 2. Otherwise `omega_max` by [`omega_max_lanczos`] on the model's lumped mass and constraints,
///    with products `K x` from [`Model::stiffness_product`] at `(state.t, state.u)`
///    ([`StableStepMethod::Lanczos`]).
/// 3. When the model does not provide the stiffness product ([`ModelError::NotProvided`]), the
///    products are central finite differences of the internal force around `state.u` at velocity
///    `state.v` ([`StableStepMethod::FiniteDifferenceLanczos`]):
///
///    ```text
///    K x ~ (f_int(u + h x) - f_int(u - h x)) / (2 h),   h = sqrt(eps) (1 + max|u|) / max|x|
///    ```
///
///    (two internal-force evaluations per product, into buffers allocated once).
///
/// The damping ratio is `model.damping().ratio_at(omega_max)` (for `omega_max > 0`); the damped
/// limit is [`critical_step`]`(omega_max, xi)`.
///
/// # Errors
/// * [`Error::EmptyModel`], [`Error::DimensionMismatch`] (state of the wrong size),
///   [`Error::NonFiniteInput`] (non-finite state, its time included);
/// * [`Error::InvalidParameter`] for a safety fraction outside `(0, 1]`, an element step that is
///   not positive and finite, invalid [`EigenOptions`], or a negative damping ratio at
///   `omega_max`;
/// * constraint errors of [`Constraints::validate`](crate::model::Constraints::validate);
///   [`Error::NonPositiveMass`] for a free DOF without positive mass;
/// * [`Error::Model`] (with `state.step` and `state.t`) when the model fails;
/// * the errors of [`omega_max_lanczos`], in particular [`Error::EigenNotConverged`].
///
/// # Reference
/// Belytschko, Liu & Moran (2000), *Nonlinear Finite Elements for Continua and Structures*, ch. 6.
pub fn estimate<M: Model + ?Sized>(
    model: &mut M,
    state: &State,
    options: &StableStepOptions,
) -> Result<StableStep> {
    let safety = options.safety;
    if !(safety.is_finite() && safety > 0.0 && safety <= 1.0) {
        return Err(Error::InvalidParameter {
            name: "safety",
            value: safety,
            expected: "a fraction of the critical step in (0, 1], for example 0.9",
        });
    }
    let n = model.dofs();
    if n == 0 {
        return Err(Error::EmptyModel);
    }
    check_len("state displacement", n, state.u.len())?;
    check_len("state velocity", n, state.v.len())?;
    check_finite("state time", &[state.t])?;
    check_finite("state displacement", &state.u)?;
    check_finite("state velocity", &state.v)?;
    let (t, step) = (state.t, state.step);

    if options.prefer_elements
        && let Some(dt) = model.element_stable_step(t, &state.u)
    {
        if !(dt.is_finite() && dt > 0.0) {
            return Err(Error::InvalidParameter {
                name: "element stable step",
                value: dt,
                expected: "a positive, finite step from Model::element_stable_step",
            });
        }
        return Ok(StableStep {
            omega_max: None,
            xi: None,
            dt_critical: dt,
            dt_critical_damped: dt,
            omega_max_upper: None,
            dt_limit: dt,
            dt_limit_damped: dt,
            safety,
            method: StableStepMethod::Elements,
        });
    }

    let mask = model.constraints().validate(n)?;
    let mut mass = vec![0.0; n];
    model.lumped_mass(&mut mass);
    let wrap = |source: ModelError| Error::Model { step, t, source };

    // For a linear model, Gershgorin's bound on the assembled stiffness is a guaranteed upper
    // bound `g` on lambda_max; once the Lanczos Ritz value (a lower bound) is within
    // GERSHGORIN_MATCH of it, `g` itself is taken.
    let upper = if options.accept_gershgorin && model.is_linear() {
        gershgorin_lambda(model, state, &mass, &mask)
    } else {
        None
    };
    let accept_at = upper.map_or(f64::INFINITY, |g| (1.0 - GERSHGORIN_MATCH) * g);
    let mut not_provided = false;
    let first = lanczos(
        &mass,
        Some(&mask),
        |x, out| match model.stiffness_product(t, &state.u, x, out) {
            Ok(()) => Ok(()),
            Err(ModelError::NotProvided(what)) => {
                not_provided = true;
                Err(wrap(ModelError::NotProvided(what)))
            }
            Err(e) => Err(wrap(e)),
        },
        &options.eigen,
        accept_at,
    );
    let (found, method) = match first {
        Ok(found) => (found, StableStepMethod::Lanczos),
        Err(_) if not_provided => {
            let u = &state.u;
            let v = &state.v;
            let u_max = u.iter().fold(0.0_f64, |a, &b| a.max(b.abs()));
            let mut probe = vec![0.0; n];
            let mut f_plus = vec![0.0; n];
            let found = omega_max_lanczos(
                &mass,
                Some(&mask),
                |x, out| {
                    let x_max = x.iter().fold(0.0_f64, |a, &b| a.max(b.abs()));
                    if x_max == 0.0 {
                        out.fill(0.0);
                        return Ok(());
                    }
                    let h = f64::EPSILON.sqrt() * (1.0 + u_max) / x_max;
                    for ((p, &ui), &xi) in probe.iter_mut().zip(u).zip(x) {
                        *p = ui + h * xi;
                    }
                    model
                        .internal_force(t, &probe, v, &mut f_plus)
                        .map_err(wrap)?;
                    for ((p, &ui), &xi) in probe.iter_mut().zip(u).zip(x) {
                        *p = ui - h * xi;
                    }
                    model.internal_force(t, &probe, v, out).map_err(wrap)?;
                    let inv = 0.5 / h;
                    for (o, &fp) in out.iter_mut().zip(&f_plus) {
                        *o = (fp - *o) * inv;
                    }
                    Ok(())
                },
                &options.eigen,
            )?;
            (found, StableStepMethod::FiniteDifferenceLanczos)
        }
        Err(e) => return Err(e),
    };

    let (omega, method, lambda_upper) = match upper {
        Some(g) if found.lambda_max >= accept_at => {
            (g.sqrt(), StableStepMethod::LanczosGershgorin, g)
        }
        _ => {
            // Finite-difference products carry a relative error of about sqrt(eps); the
            // margin covers it.
            let fd = if method == StableStepMethod::FiniteDifferenceLanczos {
                1.0 + 1e-6
            } else {
                1.0
            };
            let bound = (found.lambda_upper * fd).min(upper.unwrap_or(f64::INFINITY));
            (found.omega_max, method, bound)
        }
    };
    let damping = model.damping();
    let damped = |w: f64| -> Result<f64> {
        let xi = if w > 0.0 { damping.ratio_at(w) } else { None };
        match xi {
            Some(xi) => critical_step(w, xi),
            None => critical_step(w, 0.0),
        }
    };
    let xi = if omega > 0.0 {
        damping.ratio_at(omega)
    } else {
        None
    };
    let dt_critical = critical_step(omega, 0.0)?;
    let dt_critical_damped = damped(omega)?;
    let omega_upper = lambda_upper.max(0.0).sqrt();
    let (dt_limit, dt_limit_damped) = if omega_upper.is_finite() {
        (critical_step(omega_upper, 0.0)?, damped(omega_upper)?)
    } else {
        (0.0, 0.0)
    };
    Ok(StableStep {
        omega_max: Some(omega),
        xi,
        dt_critical,
        dt_critical_damped,
        omega_max_upper: Some(omega_upper),
        dt_limit,
        dt_limit_damped,
        safety,
        method,
    })
}

/// Gershgorin's upper bound on `lambda_max(M^-1 K)` over the free DOFs for a linear model that
/// hands over its stiffness matrix (`None` when it does not, or cannot evaluate it).
fn gershgorin_lambda<M: Model + ?Sized>(
    model: &mut M,
    state: &State,
    mass: &[f64],
    mask: &[bool],
) -> Option<f64> {
    let mut k = model.tangent_pattern()?.clone();
    model
        .tangent_stiffness(state.t, &state.u, &state.v, &mut k)
        .ok()?;
    let omega = omega_max_gershgorin(&k, mass, Some(mask)).ok()?;
    // omega^2 may round below the bound it came from by an ulp or two: step it up.
    let g = omega * omega * (1.0 + 4.0 * f64::EPSILON);
    (g.is_finite() && g > 0.0).then_some(g)
}

/// `1 / sqrt(m_i)` on free DOFs and `0` on constrained ones, after checking the mask length and
/// that every free DOF has a positive, finite mass.
fn inverse_sqrt_mass(mass: &[f64], constrained: Option<&[bool]>) -> Result<Vec<f64>> {
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
fn start_vector(v: &mut [f64], scale: &[f64], par: Parallelism) {
    let mut state: u64 = 0x853c_49e6_748f_ea9b;
    for (vi, &si) in v.iter_mut().zip(scale) {
        state = state
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        let r = (state >> 11) as f64 / (1_u64 << 53) as f64;
        *vi = if si > 0.0 { 2.0 * r - 1.0 } else { 0.0 };
    }
    let mut norm = norm2(v, par);
    if norm == 0.0 {
        for (vi, &si) in v.iter_mut().zip(scale) {
            *vi = if si > 0.0 { 1.0 } else { 0.0 };
        }
        norm = norm2(v, par);
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::model::{Constraints, LinearModel};
    use proptest::prelude::*;
    use sprs::{CsMat, TriMat};
    use std::f64::consts::PI;

    /// Relative difference `|a - b| / |b|`.
    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    /// Stiffness of a chain of `n = springs.len() - 1` masses as a sprs matrix: `springs[0]` ties
    /// mass 0 to the left wall, `springs[i]` (0 < i < n) couples masses `i - 1` and `i`, and
    /// `springs[n]` ties mass `n - 1` to the right wall (a zero spring means no wall).
    fn chain_sprs(springs: &[f64]) -> CsMat<f64> {
        let n = springs.len() - 1;
        let mut t = TriMat::new((n, n));
        for (s, &k) in springs.iter().enumerate() {
            if s > 0 {
                t.add_triplet(s - 1, s - 1, k);
            }
            if s < n {
                t.add_triplet(s, s, k);
            }
            if s > 0 && s < n {
                t.add_triplet(s - 1, s, -k);
                t.add_triplet(s, s - 1, -k);
            }
        }
        t.to_csr()
    }

    fn chain(springs: &[f64]) -> CsrMatrix {
        CsrMatrix::from_sprs("K", &chain_sprs(springs)).unwrap()
    }

    fn diag_sprs(v: &[f64]) -> CsMat<f64> {
        let mut t = TriMat::new((v.len(), v.len()));
        for (i, &x) in v.iter().enumerate() {
            t.add_triplet(i, i, x);
        }
        t.to_csr()
    }

    fn lanczos(
        k: &CsrMatrix,
        mass: &[f64],
        mask: Option<&[bool]>,
        options: &EigenOptions,
    ) -> Result<OmegaMaxEstimate> {
        omega_max_lanczos(
            mass,
            mask,
            |x, y| {
                k.mul_vec(x, y, Parallelism::serial());
                Ok(())
            },
            options,
        )
    }

    /// Largest eigenvalue of `D^-1/2 K D^-1/2` on the free DOFs by a dense solve.
    fn dense_lambda_max(k: &CsrMatrix, mass: &[f64], mask: Option<&[bool]>) -> f64 {
        let free: Vec<usize> = (0..mass.len())
            .filter(|&i| !mask.is_some_and(|c| c[i]))
            .collect();
        let pos = |i: usize| free.iter().position(|&f| f == i);
        let mut a = DMatrix::<f64>::zeros(free.len(), free.len());
        for (r, &i) in free.iter().enumerate() {
            for (j, v) in k.row(i) {
                if let Some(c) = pos(j) {
                    a[(r, c)] += v / (mass[i] * mass[j]).sqrt();
                }
            }
        }
        SymmetricEigen::new(a).eigenvalues.max()
    }

    /// A deterministic sequence in `[lo, hi)` (the generator of `start_vector` with another seed).
    fn lcg_values(seed: u64, len: usize, lo: f64, hi: f64) -> Vec<f64> {
        let mut s = seed;
        (0..len)
            .map(|_| {
                s = s
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                lo + (hi - lo) * ((s >> 11) as f64 / (1_u64 << 53) as f64)
            })
            .collect()
    }

    /// The uniform fixed-fixed chain of `n` masses `m` and `n + 1` springs `k`: Lanczos against
    /// the closed form, and the Gershgorin bound between the exact value and `sqrt(4k/m)`.
    fn check_fixed_fixed_chain(n: usize) {
        let (k, m) = (1000.0, 2.0);
        let kmat = chain(&vec![k; n + 1]);
        let mass = vec![m; n];
        // Closed form for the tridiagonal Toeplitz matrix tridiag(-k, 2k, -k) / m:
        // lambda_j = (4k/m) sin^2(j pi / (2(n+1))), j = 1..n (Strang, Introduction to Applied
        // Mathematics, 1986; or any text on tridiagonal Toeplitz matrices).
        let lambda_n = 4.0 * k / m * (n as f64 * PI / (2.0 * (n + 1) as f64)).sin().powi(2);
        let omega_exact = lambda_n.sqrt();
        let est = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap();
        let err = rel(est.omega_max, omega_exact);
        eprintln!(
            "fixed-fixed chain n = {n}: omega = {:.15e}, exact {omega_exact:.15e}, relative error \
             {err:.2e}, error bound (lambda) {:.2e}, products {}, restarts {}",
            est.omega_max, est.error_estimate, est.products, est.restarts
        );
        assert!(err < 1e-9, "n = {n}: relative error {err:e}");
        assert!(est.error_estimate <= 1e-10);
        // A Ritz value never exceeds the eigenvalue it approximates.
        assert!(est.lambda_max <= lambda_n * (1.0 + 1e-14));
        let bound = omega_max_gershgorin(&kmat, &mass, None).unwrap();
        assert!(bound >= omega_exact, "{bound} < {omega_exact}");
        // For the uniform chain every row sums to at most 4k, so the bound is sqrt(4k/m).
        assert!(bound <= (4.0 * k / m).sqrt(), "{bound}");
        eprintln!(
            "  Gershgorin bound {bound:.6e} = {:.4} x exact",
            bound / omega_exact
        );
    }

    #[test]
    fn fixed_fixed_chain_200_matches_closed_form() {
        check_fixed_fixed_chain(200);
    }

    #[test]
    fn fixed_fixed_chain_1000_matches_closed_form() {
        check_fixed_fixed_chain(1000);
    }

    #[test]
    fn free_free_and_non_uniform_chains_gershgorin_is_an_upper_bound() {
        let n = 120;
        let cases = [
            // Free-free uniform chain (no walls; lambda_min = 0).
            (vec![1.0; n], {
                let mut s = vec![3.0; n + 1];
                s[0] = 0.0;
                s[n] = 0.0;
                s
            }),
            // Non-uniform masses and springs, fixed-fixed.
            (lcg_values(1, n, 0.1, 10.0), lcg_values(2, n + 1, 0.1, 10.0)),
            // Non-uniform, free at the right end.
            (lcg_values(3, n, 0.1, 10.0), {
                let mut s = lcg_values(4, n + 1, 0.1, 10.0);
                s[n] = 0.0;
                s
            }),
            // Masses over four decades, free-free.
            (lcg_values(5, n, 1e-2, 1e2), {
                let mut s = lcg_values(6, n + 1, 0.1, 10.0);
                s[0] = 0.0;
                s[n] = 0.0;
                s
            }),
        ];
        for (case, (mass, springs)) in cases.iter().enumerate() {
            let kmat = chain(springs);
            let dense = dense_lambda_max(&kmat, mass, None);
            let est = lanczos(&kmat, mass, None, &EigenOptions::default()).unwrap();
            let bound = omega_max_gershgorin(&kmat, mass, None).unwrap();
            let err = rel(est.lambda_max, dense);
            eprintln!(
                "case {case}: lambda rel. error {err:.2e}, products {}, Gershgorin / omega = {:.3}",
                est.products,
                bound / est.omega_max
            );
            assert!(err < 1e-10, "case {case}: {err:e}");
            assert!(bound >= est.omega_max, "case {case}");
            assert!(bound >= dense.sqrt() * (1.0 - 1e-12), "case {case}");
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(32))]
        /// Random chains: Lanczos agrees with a dense solve, and Gershgorin is never below it.
        #[test]
        fn random_chains_match_dense_solve(
            (mass, mut springs) in (2usize..60).prop_flat_map(|n| (
                prop::collection::vec(0.1f64..10.0, n),
                prop::collection::vec(0.1f64..10.0, n + 1),
            )),
            left_wall in any::<bool>(),
            right_wall in any::<bool>(),
        ) {
            let n = mass.len();
            if !left_wall {
                springs[0] = 0.0;
            }
            if !right_wall {
                springs[n] = 0.0;
            }
            let kmat = chain(&springs);
            let dense = dense_lambda_max(&kmat, &mass, None);
            let est = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap();
            prop_assert!(rel(est.lambda_max, dense) <= 1e-8, "{} vs {}", est.lambda_max, dense);
            let bound = omega_max_gershgorin(&kmat, &mass, None).unwrap();
            prop_assert!(bound >= dense.sqrt() * (1.0 - 1e-12), "{} < {}", bound, dense.sqrt());
        }
    }

    #[test]
    fn constrained_dofs_are_excluded() {
        // A free-free chain of n + 1 masses coupled by n springs k, with DOF 0 fixed (and given
        // zero mass, which a constrained DOF may have): the other n masses form a fixed-free chain.
        let (n, k, m) = (150, 500.0, 0.25);
        let mut springs = vec![k; n + 2];
        springs[0] = 0.0;
        springs[n + 1] = 0.0;
        let kmat = chain(&springs);
        let mut mass = vec![m; n + 1];
        mass[0] = 0.0;
        let mut mask = vec![false; n + 1];
        mask[0] = true;
        // Fixed-free chain: lambda_j = (4k/m) sin^2((2j - 1) pi / (2(2n + 1))), j = 1..n
        // (the tridiagonal matrix with last diagonal entry k instead of 2k; e.g. Yueh, "Eigenvalues
        // of several tridiagonal matrices", Appl. Math. E-Notes 5 (2005) 66-74).
        let lambda_n = 4.0 * k / m
            * ((2 * n - 1) as f64 * PI / (2.0 * (2 * n + 1) as f64))
                .sin()
                .powi(2);
        let est = omega_max_lanczos(
            &mass,
            Some(&mask),
            |x, y| {
                assert!(x[0] == 0.0, "a constrained entry reached the product");
                kmat.mul_vec(x, y, Parallelism::serial());
                y[0] = f64::NAN; // ignored: constrained
                Ok(())
            },
            &EigenOptions::default(),
        )
        .unwrap();
        let err = rel(est.lambda_max, lambda_n);
        eprintln!(
            "fixed-free chain n = {n}: lambda rel. error {err:.2e}, products {}",
            est.products
        );
        assert!(err < 1e-10, "{err:e}");
        let dense = dense_lambda_max(&kmat, &mass, Some(&mask));
        assert!(rel(dense, lambda_n) < 1e-12);
        let bound = omega_max_gershgorin(&kmat, &mass, Some(&mask)).unwrap();
        assert!(bound >= est.omega_max);
        // Without the mask the zero mass at DOF 0 is refused.
        let e = omega_max_gershgorin(&kmat, &mass, None).unwrap_err();
        assert!(matches!(e, Error::NonPositiveMass { dof: 0, .. }), "{e}");
        let e = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap_err();
        assert!(matches!(e, Error::NonPositiveMass { dof: 0, .. }), "{e}");
        // A mask of the wrong length.
        let e = lanczos(&kmat, &mass, Some(&mask[..n]), &EigenOptions::default()).unwrap_err();
        assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
    }

    #[test]
    fn gershgorin_takes_the_smaller_of_its_two_bounds() {
        // M = diag(2, 1), K = [[6, -2], [-2, 4]]: M^-1 K has eigenvalues 5 and 2.
        // Symmetric scaling: rows 3 + 2/sqrt(2) and 4 + 2/sqrt(2), so b_sym = 4 + sqrt(2);
        // M^-1 K: rows (6 + 2)/2 = 4 and (4 + 2)/1 = 6, so b_inv = 6.
        let mut t = TriMat::new((2, 2));
        for (i, j, v) in [(0, 0, 6.0), (0, 1, -2.0), (1, 0, -2.0), (1, 1, 4.0)] {
            t.add_triplet(i, j, v);
        }
        let kmat = CsrMatrix::from_sprs("K", &t.to_csr()).unwrap();
        let bound = omega_max_gershgorin(&kmat, &[2.0, 1.0], None).unwrap();
        assert!(rel(bound * bound, 4.0 + 2.0_f64.sqrt()) < 1e-15);
        assert!(bound * bound >= 5.0);
        // Wrong sizes and an empty model.
        let e = omega_max_gershgorin(&kmat, &[1.0; 3], None).unwrap_err();
        assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
        let e = omega_max_gershgorin(&kmat, &[], None).unwrap_err();
        assert!(matches!(e, Error::EmptyModel), "{e}");
        // Everything constrained: nothing vibrates.
        let bound = omega_max_gershgorin(&kmat, &[0.0, 0.0], Some(&[true, true])).unwrap();
        assert!(bound == 0.0);
    }

    #[test]
    fn critical_step_formula_and_invalid_inputs() {
        let omega = 1234.5;
        let undamped = critical_step(omega, 0.0).unwrap();
        assert!(rel(undamped, 2.0 / omega) < 1e-15);
        for xi in [1e-3_f64, 0.05, 0.2, 0.5, 1.0, 3.0] {
            // Belytschko, Liu & Moran (2000), ch. 6: dt = (2/omega)(sqrt(1 + xi^2) - xi).
            let direct = 2.0 / omega * ((1.0 + xi * xi).sqrt() - xi);
            let dt = critical_step(omega, xi).unwrap();
            assert!(rel(dt, direct) < 1e-13, "xi = {xi}: {dt} vs {direct}");
            assert!(dt < undamped);
        }
        // Large xi: the direct form cancels, the evaluated one keeps full accuracy
        // (sqrt(1 + xi^2) - xi = 1/(2 xi) - 1/(8 xi^3) + ...).
        let xi = 1e8;
        let dt = critical_step(omega, xi).unwrap();
        assert!(rel(dt, 2.0 / omega * (0.5 / xi)) < 1e-15);
        // No frequency: any step is stable.
        assert!(critical_step(0.0, 0.3).unwrap().is_infinite());
        for (w, xi, name) in [
            (-1.0, 0.0, "omega_max"),
            (f64::NAN, 0.0, "omega_max"),
            (f64::INFINITY, 0.0, "omega_max"),
            (1.0, -0.1, "xi"),
            (1.0, f64::NAN, "xi"),
            (1.0, f64::INFINITY, "xi"),
        ] {
            let e = critical_step(w, xi).unwrap_err();
            assert!(
                matches!(e, Error::InvalidParameter { name: n, .. } if n == name),
                "{w}, {xi}: {e}"
            );
        }
    }

    #[test]
    fn element_stable_step_is_min_length_over_speed_and_refuses_bad_input() {
        let dt = element_stable_step(&[1.0, 0.5, 2.0], &[10.0, 20.0, 5.0]).unwrap();
        assert!(rel(dt, 0.025) < 1e-15);
        let e = element_stable_step(&[1.0, 2.0], &[1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::DimensionMismatch {
                    expected: 2,
                    found: 1,
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[], &[]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "element count",
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, f64::NAN], &[1.0, 1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NonFiniteInput {
                    what: "element lengths",
                    index: 1,
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, 1.0], &[f64::INFINITY, 1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::NonFiniteInput {
                    what: "element wave speeds",
                    index: 0,
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, 0.0], &[1.0, 1.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "element length",
                    ..
                }
            ),
            "{e}"
        );
        let e = element_stable_step(&[1.0, 1.0], &[1.0, -3.0]).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "element wave speed",
                    ..
                }
            ),
            "{e}"
        );
    }

    /// A fixed-fixed spring chain that only gives its internal force (no stiffness product), and
    /// optionally an element stable step or a failure.
    struct ForceOnlyChain {
        k: f64,
        m: f64,
        n: usize,
        element_dt: Option<f64>,
        fail: bool,
    }

    impl Model for ForceOnlyChain {
        fn dofs(&self) -> usize {
            self.n
        }

        fn lumped_mass(&self, out: &mut [f64]) {
            out.fill(self.m);
        }

        fn internal_force(
            &mut self,
            _t: f64,
            u: &[f64],
            _v: &[f64],
            out: &mut [f64],
        ) -> std::result::Result<(), ModelError> {
            if self.fail {
                return Err(ModelError::failed("element 3 is inverted"));
            }
            for i in 0..self.n {
                let left = if i > 0 { u[i - 1] } else { 0.0 };
                let right = if i + 1 < self.n { u[i + 1] } else { 0.0 };
                out[i] = self.k * (2.0 * u[i] - left - right);
            }
            Ok(())
        }

        fn element_stable_step(&mut self, _t: f64, _u: &[f64]) -> Option<f64> {
            self.element_dt
        }
    }

    #[test]
    fn loose_gershgorin_bound_leaves_the_estimate_to_lanczos() {
        // Unit springs, masses alternating 1 and 100: lambda_max is close to the diatomic
        // chain's 2 (1 / 1 + 1 / 100) = 2.02, Gershgorin's bound 2 / 1 + 2 / sqrt(100) = 2.2 is
        // 9 % above it (constructed), so the estimate must come from Lanczos at its tolerance.
        let n = 60;
        let mass: Vec<f64> = (0..n)
            .map(|i| if i % 2 == 0 { 1.0 } else { 100.0 })
            .collect();
        let springs = vec![1.0; n + 1];
        let mut model = LinearModel::new(&diag_sprs(&mass), &chain_sprs(&springs)).unwrap();
        let s = estimate(&mut model, &State::at_rest(n, 0.0), &Default::default()).unwrap();
        assert_eq!(s.method, StableStepMethod::Lanczos);
        let dense = dense_lambda_max(&chain(&springs), &mass, None).sqrt();
        let omega = s.omega_max.unwrap();
        assert!(rel(omega, dense) < 1e-9, "{omega} vs {dense}");
        let g = omega_max_gershgorin(&chain(&springs), &mass, None).unwrap();
        assert!(g * g * (1.0 - GERSHGORIN_MATCH) > omega * omega);
    }

    #[test]
    fn estimate_on_linear_model_with_rayleigh_damping() {
        let (n, k, m) = (60, 1000.0, 2.0);
        let (a0, a1) = (0.5, 1e-4);
        let mut model = LinearModel::new(&diag_sprs(&vec![m; n]), &chain_sprs(&vec![k; n + 1]))
            .unwrap()
            .with_rayleigh(a0, a1)
            .unwrap();
        let state = State::at_rest(n, 0.0);
        let s = estimate(&mut model, &state, &StableStepOptions::default()).unwrap();
        // Fixed-fixed chain closed form (Strang, Introduction to Applied Mathematics, 1986).
        let omega_exact =
            (4.0 * k / m * (n as f64 * PI / (2.0 * (n + 1) as f64)).sin().powi(2)).sqrt();
        let omega = s.omega_max.unwrap();
        // A uniform chain: Gershgorin's bound 4 k / m is within 1e-3 of lambda_max, so the linear model's estimate is that guaranteed upper bound.
        assert_eq!(s.method, StableStepMethod::LanczosGershgorin);
        let gershgorin = omega_max_gershgorin(&chain(&vec![k; n + 1]), &vec![m; n], None).unwrap();
        assert!(rel(omega, gershgorin) < 1e-15, "{omega} vs {gershgorin}");
        assert!(omega >= omega_exact, "{omega} vs {omega_exact}");
        assert!(rel(omega, omega_exact) < 0.5 * GERSHGORIN_MATCH);
        // Rayleigh damping ratio (Chopra, Dynamics of Structures, § 11.4).
        let xi = a0 / (2.0 * omega) + a1 * omega / 2.0;
        assert!(rel(s.xi.unwrap(), xi) < 1e-15);
        assert!(rel(s.dt_critical, 2.0 / omega) < 1e-15);
        let damped = 2.0 / omega * ((1.0 + xi * xi).sqrt() - xi);
        assert!(rel(s.dt_critical_damped, damped) < 1e-13);
        assert!(rel(s.recommended(), DEFAULT_SAFETY * damped) < 1e-13);

        // The same chain built free-free with one more mass and DOF 0 fixed (zero mass there):
        // the fixed-free closed form (Yueh, Appl. Math. E-Notes 5 (2005) 66-74).
        let mut springs = vec![k; n + 2];
        springs[0] = 0.0;
        springs[n + 1] = 0.0;
        let mut mass = vec![m; n + 1];
        mass[0] = 0.0;
        let mut model = LinearModel::new(&diag_sprs(&mass), &chain_sprs(&springs))
            .unwrap()
            .with_constraints(Constraints::new().fix(0))
            .unwrap();
        let s = estimate(&mut model, &State::at_rest(n + 1, 0.0), &Default::default()).unwrap();
        let lambda = 4.0 * k / m
            * ((2 * n - 1) as f64 * PI / (2.0 * (2 * n + 1) as f64))
                .sin()
                .powi(2);
        assert_eq!(s.method, StableStepMethod::LanczosGershgorin);
        assert!(s.omega_max.unwrap() >= lambda.sqrt());
        assert!(rel(s.omega_max.unwrap(), lambda.sqrt()) < 0.5 * GERSHGORIN_MATCH);
        assert_eq!(s.xi, Some(0.0));
        assert!(rel(s.dt_critical_damped, s.dt_critical) < 1e-15);

        // Without the constraint the zero mass is refused.
        let mut model = LinearModel::new(&diag_sprs(&mass), &chain_sprs(&springs)).unwrap();
        let e = estimate(&mut model, &State::at_rest(n + 1, 0.0), &Default::default()).unwrap_err();
        assert!(matches!(e, Error::NonPositiveMass { dof: 0, .. }), "{e}");
    }

    #[test]
    fn estimate_falls_back_to_finite_differences_and_prefers_elements() {
        let (n, k, m) = (40, 1000.0, 2.0);
        let mut linear =
            LinearModel::new(&diag_sprs(&vec![m; n]), &chain_sprs(&vec![k; n + 1])).unwrap();
        // A deformed, moving state, so that the finite-difference step is scaled by max|u|.
        let u: Vec<f64> = (0..n).map(|i| 0.05 * (i as f64 * 0.3).sin()).collect();
        let v: Vec<f64> = (0..n).map(|i| (i as f64).cos()).collect();
        let mut state = State::new(0.25, u, v).unwrap();
        state.step = 7;
        let options = StableStepOptions::default();
        let reference = estimate(&mut linear, &state, &options).unwrap();

        let mut chain_model = ForceOnlyChain {
            k,
            m,
            n,
            element_dt: Some(1.5e-3),
            fail: false,
        };
        // The element step is used when preferred ...
        let s = estimate(&mut chain_model, &state, &options).unwrap();
        assert_eq!(s.method, StableStepMethod::Elements);
        assert!(s.omega_max.is_none() && s.xi.is_none());
        assert!(rel(s.dt_critical, 1.5e-3) < 1e-15 && rel(s.dt_critical_damped, 1.5e-3) < 1e-15);
        assert!(rel(s.recommended(), 0.9 * 1.5e-3) < 1e-15);
        // ... and otherwise the finite-difference Lanczos estimate.
        let no_elements = StableStepOptions {
            prefer_elements: false,
            ..options
        };
        let s = estimate(&mut chain_model, &state, &no_elements).unwrap();
        assert_eq!(s.method, StableStepMethod::FiniteDifferenceLanczos);
        let err = rel(s.omega_max.unwrap(), reference.omega_max.unwrap());
        eprintln!("finite-difference Lanczos: omega relative error {err:.2e}");
        assert!(err < 1e-6, "{err:e}");

        // An element step that is not positive and finite is refused.
        for bad in [0.0, -1.0, f64::NAN, f64::INFINITY] {
            chain_model.element_dt = Some(bad);
            let e = estimate(&mut chain_model, &state, &options).unwrap_err();
            assert!(
                matches!(
                    e,
                    Error::InvalidParameter {
                        name: "element stable step",
                        ..
                    }
                ),
                "{e}"
            );
        }
        // A failing model is reported with the step and time.
        chain_model.element_dt = None;
        chain_model.fail = true;
        let e = estimate(&mut chain_model, &state, &options).unwrap_err();
        match e {
            Error::Model { step, t, source } => {
                assert_eq!(step, 7);
                assert!(rel(t, 0.25) < 1e-15);
                assert!(matches!(source, ModelError::Failed { .. }));
            }
            e => panic!("{e}"),
        }
        // Invalid safety fractions and states of the wrong size.
        for safety in [0.0, 1.5, f64::NAN] {
            let o = StableStepOptions { safety, ..options };
            let e = estimate(&mut linear, &state, &o).unwrap_err();
            assert!(
                matches!(e, Error::InvalidParameter { name: "safety", .. }),
                "{e}"
            );
        }
        let e = estimate(&mut linear, &State::at_rest(n + 1, 0.0), &options).unwrap_err();
        assert!(matches!(e, Error::DimensionMismatch { .. }), "{e}");
    }

    /// An isolated top eigenvalue is found to rounding at once; the process then goes on only as
    /// far as the upper bound needs (`lanczos_margin` at most `LANCZOS_MARGIN_TARGET`), and stops
    /// within one test interval of that.
    #[test]
    fn isolated_top_eigenvalue_converges_and_stops_at_the_margin() {
        // K = diag(d) with d in [0, 1) and one entry 10, unit masses: lambda_max = 10.
        let n = 500;
        let mut d = lcg_values(9, n, 0.0, 1.0);
        d[123] = 10.0;
        let est = omega_max_lanczos(
            &vec![1.0; n],
            None,
            |x, y| {
                for ((yi, xi), di) in y.iter_mut().zip(x).zip(&d) {
                    *yi = di * xi;
                }
                Ok(())
            },
            &EigenOptions::default(),
        )
        .unwrap();
        eprintln!(
            "isolated eigenvalue: products {}, lambda rel. error {:.2e}, bound {:.2e}",
            est.products,
            rel(est.lambda_max, 10.0),
            est.error_estimate
        );
        assert!(rel(est.lambda_max, 10.0) < 1e-12);
        assert!(lanczos_margin(est.products, n) <= LANCZOS_MARGIN_TARGET);
        // The test interval is at most (krylov_dim - krylov_dim / 2) / 2 = 10 products.
        assert!(
            lanczos_margin(est.products - 10, n) > LANCZOS_MARGIN_TARGET,
            "{}",
            est.products
        );
        // The upper bound lies above the eigenvalue, within the margin.
        assert!(est.lambda_upper >= 10.0);
        assert!(est.lambda_upper <= 10.0 / (1.0 - LANCZOS_MARGIN_TARGET) * (1.0 + 1e-12));
    }

    #[test]
    fn tiny_problems_and_no_free_dof() {
        let opts = EigenOptions::default();
        // 1 x 1: lambda = 6 / 2 = 3.
        let est = omega_max_lanczos(
            &[2.0],
            None,
            |x, y| {
                y[0] = 6.0 * x[0];
                Ok(())
            },
            &opts,
        )
        .unwrap();
        assert!(rel(est.lambda_max, 3.0) < 1e-15 && est.products == 1);
        assert!(rel(est.omega_max, 3.0_f64.sqrt()) < 1e-15);
        // 2 x 2: M = diag(2, 1), K = [[6, -2], [-2, 4]]; M^-1 K has eigenvalues 5 and 2.
        let est = omega_max_lanczos(
            &[2.0, 1.0],
            None,
            |x, y| {
                y[0] = 6.0 * x[0] - 2.0 * x[1];
                y[1] = -2.0 * x[0] + 4.0 * x[1];
                Ok(())
            },
            &opts,
        )
        .unwrap();
        assert!(rel(est.lambda_max, 5.0) < 1e-14, "{}", est.lambda_max);
        assert!(est.products == 2);
        // 3 DOFs of which two are fixed: the 1 x 1 problem of the free one.
        let est = omega_max_lanczos(
            &[0.0, 4.0, 0.0],
            Some(&[true, false, true]),
            |x, y| {
                y.fill(f64::NAN);
                y[1] = 8.0 * x[1] + 100.0 * (x[0] + x[2]);
                Ok(())
            },
            &opts,
        )
        .unwrap();
        assert!(rel(est.lambda_max, 2.0) < 1e-15);
        // All DOFs fixed: omega 0 without a single product.
        let est = omega_max_lanczos(
            &[1.0, 1.0],
            Some(&[true, true]),
            |_, _| panic!("no product expected"),
            &opts,
        )
        .unwrap();
        assert!(est.omega_max == 0.0 && est.products == 0);
        // Zero stiffness: an invariant subspace at once, omega 0.
        let est = omega_max_lanczos(
            &[1.0; 5],
            None,
            |_, y| {
                y.fill(0.0);
                Ok(())
            },
            &opts,
        )
        .unwrap();
        assert!(est.omega_max == 0.0 && est.products == 1);
        // An empty model.
        let e = omega_max_lanczos(&[], None, |_, _| Ok(()), &opts).unwrap_err();
        assert!(matches!(e, Error::EmptyModel), "{e}");
    }

    #[test]
    fn lanczos_errors_and_determinism() {
        let n = 200;
        let kmat = chain(&vec![1.0; n + 1]);
        let mass = vec![1.0; n];
        // Not converged within the product budget.
        let few = EigenOptions {
            max_products: 12,
            ..Default::default()
        };
        let e = lanczos(&kmat, &mass, None, &few).unwrap_err();
        match e {
            Error::EigenNotConverged {
                iterations,
                residual,
            } => {
                assert_eq!(iterations, 12);
                assert!(residual > few.tolerance && residual.is_finite());
            }
            e => panic!("{e}"),
        }
        // Invalid options.
        for (opts, name) in [
            (
                EigenOptions {
                    tolerance: 0.0,
                    ..Default::default()
                },
                "tolerance",
            ),
            (
                EigenOptions {
                    tolerance: f64::NAN,
                    ..Default::default()
                },
                "tolerance",
            ),
            (
                EigenOptions {
                    max_products: 0,
                    ..Default::default()
                },
                "max_products",
            ),
            (
                EigenOptions {
                    krylov_dim: 1,
                    ..Default::default()
                },
                "krylov_dim",
            ),
        ] {
            let e = lanczos(&kmat, &mass, None, &opts).unwrap_err();
            assert!(
                matches!(e, Error::InvalidParameter { name: n, .. } if n == name),
                "{e}"
            );
        }
        // A non-finite product and a failing product.
        let e = omega_max_lanczos(
            &mass,
            None,
            |_, y| {
                y.fill(0.0);
                y[5] = f64::NAN;
                Ok(())
            },
            &few,
        )
        .unwrap_err();
        assert!(matches!(e, Error::NonFiniteInput { index: 5, .. }), "{e}");
        let e = omega_max_lanczos(&mass, None, |_, _| Err(Error::EmptyModel), &few).unwrap_err();
        assert!(matches!(e, Error::EmptyModel), "{e}");
        // A small Krylov dimension still converges (with more restarts), to the same value.
        let small = EigenOptions {
            krylov_dim: 6,
            ..Default::default()
        };
        let a = lanczos(&kmat, &mass, None, &small).unwrap();
        let b = lanczos(&kmat, &mass, None, &EigenOptions::default()).unwrap();
        assert!(a.restarts > b.restarts);
        assert!(rel(a.lambda_max, b.lambda_max) < 1e-9);
        // The parallel vector kernels give the same bits as the serial ones (a diagonal operator
        // over several reduction chunks; one entry isolated at the top, so it converges quickly).
        let n = 5 * CHUNK + 17;
        let mut d = lcg_values(11, n, 0.0, 1.0);
        d[4321] = 3.0;
        let diag_op = |x: &[f64], y: &mut [f64]| {
            for ((yi, xi), di) in y.iter_mut().zip(x).zip(&d) {
                *yi = di * xi;
            }
            Ok(())
        };
        let serial = EigenOptions {
            parallel: Parallelism::serial(),
            ..Default::default()
        };
        let parallel = EigenOptions {
            parallel: Parallelism { threshold: 1 },
            ..Default::default()
        };
        let mass = vec![1.0; n];
        let s = omega_max_lanczos(&mass, None, diag_op, &serial).unwrap();
        let p = omega_max_lanczos(&mass, None, diag_op, &parallel).unwrap();
        assert_eq!(s.lambda_max.to_bits(), p.lambda_max.to_bits());
        assert_eq!(s.products, p.products);
        assert!(rel(s.lambda_max, 3.0) < 1e-12);
    }
}

#[cfg(test)]
mod budget_tests {
    use super::*;
    use sprs::TriMat;

    /// `tridiag(-1, 2, -1)` of size `n` (unit springs, both ends fixed).
    fn uniform_chain(n: usize) -> CsrMatrix {
        let mut t = TriMat::new((n, n));
        for i in 0..n {
            t.add_triplet(i, i, 2.0);
            if i + 1 < n {
                t.add_triplet(i, i + 1, -1.0);
                t.add_triplet(i + 1, i, -1.0);
            }
        }
        CsrMatrix::from_sprs("K", &t.to_csr()).unwrap()
    }

    /// A uniform chain has a cluster of eigenvalues at the top of its spectrum (relative gap
    /// about `(pi / (n + 1))^2 / 4` between the two largest), where the residual falls very
    /// slowly. Out of budget, the estimate is returned when its bound is within
    /// `tolerance_at_budget`, and it is right to that bound against the closed form
    /// `lambda_max = 4 sin^2(n pi / (2 (n + 1)))` (the fixed-fixed chain's eigenvalues
    /// `4 sin^2(k pi / (2 (n + 1)))`, common practice); with `tolerance_at_budget = 0` the same run
    /// is an error.
    #[test]
    fn clustered_top_is_accepted_at_budget_within_its_bound() {
        let n = 1500;
        let k = uniform_chain(n);
        let mass = vec![1.0; n];
        let apply = |x: &[f64], y: &mut [f64]| {
            k.mul_vec(x, y, Parallelism::serial());
            Ok(())
        };
        let options = EigenOptions {
            max_products: 150,
            tolerance_at_budget: 1e-3,
            ..Default::default()
        };
        let est = omega_max_lanczos(&mass, None, apply, &options).unwrap();
        assert_eq!(est.products, 150, "the budget was spent");
        assert!(
            est.error_estimate > options.tolerance
                && est.error_estimate <= options.tolerance_at_budget,
            "{}",
            est.error_estimate
        );
        let exact = 4.0
            * (n as f64 * std::f64::consts::PI / (2.0 * (n + 1) as f64))
                .sin()
                .powi(2);
        let rel = (exact - est.lambda_max) / exact;
        assert!(
            rel >= -1e-14 && rel <= est.error_estimate,
            "{rel} vs {}",
            est.error_estimate
        );

        let strict = EigenOptions {
            tolerance_at_budget: 0.0,
            ..options
        };
        let e = omega_max_lanczos(&mass, None, apply, &strict).unwrap_err();
        match e {
            Error::EigenNotConverged {
                iterations,
                residual,
            } => {
                assert_eq!(iterations, 150);
                assert!((residual - est.error_estimate).abs() <= 1e-12 * est.error_estimate);
            }
            e => panic!("{e}"),
        }
        let bad = EigenOptions {
            tolerance_at_budget: f64::NAN,
            ..options
        };
        let e = omega_max_lanczos(&mass, None, apply, &bad).unwrap_err();
        assert!(
            matches!(
                e,
                Error::InvalidParameter {
                    name: "tolerance_at_budget",
                    ..
                }
            ),
            "{e}"
        );
    }
}
