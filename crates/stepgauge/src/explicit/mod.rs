//! Explicit time integration: the central-difference method on a lumped mass, and its stable step.

mod central_difference;
mod kernels;
mod options;
pub mod stable_step;

pub use crate::params::ForceVelocity;
pub use central_difference::CentralDifference;
pub use options::{CentralDifferenceOptions, StableLimit};
pub use stable_step::{
    DEFAULT_SAFETY, EigenOptions, OmegaMaxEstimate, StableStep, StableStepMethod,
    StableStepOptions, critical_step, element_stable_step, omega_max_gershgorin, omega_max_lanczos,
};
