//! Spectral analysis of the time-integration schemes: amplification matrices and their
//! eigenvalues. Depends only on the parameter type, so the coefficients analysed are the
//! coefficients stepped.

mod amplification;

pub use amplification::{alpha_amplification, eigenvalues3, spectral_radius};
