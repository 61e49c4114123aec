//! Explicit time integration: the central-difference method on a lumped mass, and its stable step.

pub mod stable_step;

pub use stable_step::element_stable_step;
