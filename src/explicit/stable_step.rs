//! The stable step of the central-difference method (placeholder while written elsewhere).

use crate::error::{Error, Result};
use crate::model::Model;
use crate::state::State;

/// min L/c.
///
/// # Errors
/// Bad input.
pub fn element_stable_step(lengths: &[f64], speeds: &[f64]) -> Result<f64> {
    let _ = (lengths, speeds);
    Err(Error::EmptyModel)
}
/// Safety.
pub const DEFAULT_SAFETY: f64 = 0.9;
/// Options.
#[derive(Debug, Clone, Default)]
pub struct StableStepOptions {}
/// Estimate.
#[derive(Debug, Clone)]
pub struct StableStep {
    /// dt.
    pub dt_critical_damped: f64,
}
/// Estimate.
///
/// # Errors
/// Any.
pub fn estimate<M: Model + ?Sized>(
    model: &mut M,
    state: &State,
    options: &StableStepOptions,
) -> Result<StableStep> {
    let _ = (model, state, options);
    Err(Error::EmptyModel)
}
