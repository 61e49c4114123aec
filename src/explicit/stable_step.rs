//! The stable step of the central-difference method.

use crate::error::{Error, Result};

/// `min_e L_e / c_e` over elements with characteristic lengths `lengths` and wave speeds `speeds`.
///
/// # Errors
/// Mismatched lengths, an empty list, or a non-positive / non-finite entry.
pub fn element_stable_step(lengths: &[f64], speeds: &[f64]) -> Result<f64> {
    let _ = (lengths, speeds);
    Err(Error::EmptyModel)
}
