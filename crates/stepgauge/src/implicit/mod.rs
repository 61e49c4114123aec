//! Implicit time integration: the generalised-alpha family (Newmark-beta, HHT-alpha, WBZ-alpha,
//! generalised-alpha) with Newton-Raphson iterations on sparse operators.

mod alpha_family;
mod newton;
mod options;

pub use crate::error::Criterion;
pub use crate::params::AlphaParams;
pub use alpha_family::AlphaIntegrator;
pub use newton::{NewtonOptions, NewtonReport, NewtonVariant};
pub use options::ImplicitOptions;
