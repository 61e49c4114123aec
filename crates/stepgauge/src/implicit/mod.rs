//! Implicit time integration: the generalised-alpha family (Newmark-beta, HHT-alpha, WBZ-alpha,
//! generalised-alpha) with Newton-Raphson iterations on sparse operators.

mod alpha_family;
mod newton;

pub use crate::error::Criterion;
pub use alpha_family::{AlphaIntegrator, ImplicitOptions};
pub use newton::{NewtonOptions, NewtonReport, NewtonVariant};
