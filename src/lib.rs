//! # tempora
//!
//! Time integration for structural dynamics: advance `M a + C v + f_int(t, u, v) = f_ext(t)` in time
//! and know, before a long run, whether the time-integration settings are stable and accurate.
//!
//! Placeholder crate documentation; completed below.

#![deny(missing_docs)]
#![warn(clippy::float_cmp)]

pub mod energy;
pub mod error;
pub mod explicit;
pub mod linalg;
pub mod model;
pub mod run;
pub mod state;

pub use error::{Error, ModelError, Result};
pub use state::State;
