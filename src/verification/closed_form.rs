//! Checks of kind [`Kind::ClosedForm`](super::Kind) (being written).

use super::Check;

/// The checks of this kind.
pub(crate) fn checks() -> Vec<Check> {
    Vec::new()
}
