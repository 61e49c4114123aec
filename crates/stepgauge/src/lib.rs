//! # stepgauge
//!
//! Time integration for structural dynamics. stepgauge advances
//!
//! ```text
//! M a + C v + f_int(t, u, v) = f_ext(t),      u(t0) = u0,  v(t0) = v0
//! ```
//!
//! in time for models with one to millions of degrees of freedom (DOFs), and tells its users
//! whether their time-integration settings are stable.
//!
//! - [`model`]: the [`Model`](model::Model) trait, the seam for a user's own element loop (with
//!   its [`Tangent`](model::Tangent) for implicit schemes, its [`Damping`](model::Damping) and
//!   [`Hints`](model::Hints)), and the ready [`LinearModel`](model::LinearModel) built from
//!   sparse matrices.
//! - [`explicit`]: the central-difference method on a lumped mass and the model's
//!   [stable step](explicit::stable_step).
//! - [`implicit`]: the generalised-alpha family (Newmark-beta, HHT-alpha, WBZ-alpha,
//!   generalised-alpha) with Newton-Raphson; its parameters are
//!   [`AlphaParams`](params::AlphaParams) (also at `implicit::AlphaParams`).
//! - [`params`]: every scheme's parameter type, shared by stepping and [`spectral`] analysis.
//! - [`spectral`]: stability and accuracy of a parameter set and step before a run.
//! - [`linalg`]: the sparse matrix, linear solvers, eigenvalue estimates, assembly help and
//!   the execution setting ([`Execution`](linalg::Execution): threads and global sums).
//! - [`energy`]: the energy ledger that guards a run.
//! - [`run`]: the time loop, with step control, recording and a progress callback.
//! - [`io`]: Matrix Market matrices, CSV load tables and initial conditions, CSV histories and
//!   checksummed checkpoints, all written atomically.
//! - [`reference`](mod@reference): reference problems with exact solutions, for tests, benchmarks
//!   and comparisons.
//!
//! ## Example
//!
//! A unit oscillator released from `u = 1`, stepped at 0.9 times its estimated stable step:
//!
//! ```
//! use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
//! use stepgauge::model::LinearModel;
//! use stepgauge::run::{Flow, RunOptions, StepControl, run};
//! use stepgauge::State;
//!
//! # fn main() -> stepgauge::Result<()> {
//! let eye = sprs::CsMat::<f64>::eye(1);
//! let mut model = LinearModel::new(&eye, &eye)?; // m = 1, k = 1
//! let mut state = State::new(0.0, vec![1.0], vec![0.0])?;
//! let mut cd = CentralDifference::new(&mut model, &mut state, CentralDifferenceOptions::default())?;
//! assert!((cd.stable_limit().unwrap() - 2.0).abs() < 1e-9); // 2 / omega_max
//! let auto = StepControl::Auto { safety: 0.9, reestimate_every: 0 };
//! let outcome = run(&mut cd, &mut model, &mut state, &RunOptions::new(6.0, auto), |_| Flow::Continue)?
//!     .into_result()?;
//! assert_eq!(state.t, 6.0);
//! assert!(cd.energy().relative_balance_error() < 0.25); // bounded by (omega dt)^2 / 4
//! # let _ = outcome;
//! # Ok(())
//! # }
//! ```
//!
//! For the allocation-free path, call [`CentralDifference::step`](explicit::CentralDifference::step)
//! in your own loop: a step allocates nothing.

#![deny(missing_docs)]
#![warn(clippy::float_cmp)]
// Unit tests compare exact values on purpose (bit-identical results, exactly representable values).
#![cfg_attr(test, allow(clippy::float_cmp))]
// Numerical kernels index several vectors with one loop variable; iterator chains over four or
// five zipped slices read worse than the index loop.
#![allow(clippy::needless_range_loop)]

pub mod energy;
pub mod error;
pub mod explicit;
pub mod implicit;
pub mod io;
pub mod linalg;
pub mod model;
pub mod params;
pub mod reference;
pub mod run;
mod setup;
pub mod spectral;
pub mod state;
mod validate;

pub use error::{Error, ModelError, Result};
/// The `sprs` crate at the version the library uses (its matrices are accepted by
/// [`LinearModel`](model::LinearModel), [`linalg::CsrMatrix::from_sprs`] and the Matrix Market
/// functions), so that users need not match its version by hand.
pub use sprs;
pub use state::State;
