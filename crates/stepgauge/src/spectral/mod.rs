//! Stability and accuracy analysis of any parameter set: amplification matrices, spectral
//! radius, algorithmic damping, period error, high-frequency limit, critical step, order of
//! accuracy, verdicts with their reasons, inverse design and sweeps.
//!
//! Depends only on the parameter types ([`AlphaParams`](crate::params::AlphaParams) and
//! [`ForceVelocity`](crate::params::ForceVelocity)) that the integrators step with, so the
//! coefficients analysed are the coefficients stepped. Derivations are in `docs/spectral.md`.

mod amplification;
mod bounds;
mod compensated;
mod metrics;
mod prepared;
mod roots;
mod scheme;
mod stability;
mod sweep;

pub use crate::params::{Parameters, Scheme};
pub use amplification::{alpha_amplification, eigenvalues3};
pub use bounds::{
    CheckContext, SCAN_LIMIT, Stability, Verdict, bracket_check, check, omega_crit_closed_form,
};
pub use metrics::{
    INSTABILITY_MARGIN, Metrics, Oscillation, characteristic_polynomial, eigenvalues,
    largest_step_for_damping, largest_step_for_period_error, metrics, omega_crit_numeric,
    order_of_accuracy, rho_inf, spectral_radius,
};
pub use prepared::{Prepared, RootPath};
pub use roots::pairing_distance;
pub use roots::{CONDITION_LIMIT, eigenvalues_fast};
pub use scheme::cd_amplification;
pub use stability::{Boundary, BoundaryKind, StabilityRegion, StepStability};
pub use sweep::{log_space, newmark_stability_map, sweep};
