//! Checks of kind [`Kind::Convergence`](super::Kind) (being written).

use super::Check;

/// The checks of this kind.
pub(crate) fn checks() -> Vec<Check> {
    Vec::new()
}
