//! Reading and writing the files of a run: matrices, load tables, initial conditions, recorded
//! histories and checkpoints.
//!
//! - [`matrix_market`]: sparse matrices in the Matrix Market exchange format (NIST).
//! - [`csv`]: load tables and initial conditions in; recorded histories and energy histories out.
//! - [`checkpoint`]: a checksummed checkpoint of state, energy ledger and scheme description that
//!   a run resumes from bit for bit.
//! - [`atomic`]: the atomic write every writer here goes through: a reader never sees a
//!   half-written file, and a failed write leaves the previous file untouched.
//!
//! # Errors
//! Every reader reports a malformed input with a typed [`Error`] naming the file, the 1-based
//! line and what was expected ([`Error::MatrixMarket`], [`Error::Csv`],
//! [`Error::CheckpointCorrupt`]); no input makes a reader panic. Failures of the file system are
//! [`Error::Io`], naming the path.
//!
//! # Numbers
//! Writers print every `f64` with Rust's shortest round-trip formatting, so that the text reads
//! back to the same double, bit for bit: plain decimal (`{}`) for zero and magnitudes in
//! `[1e-5, 1e16)`, scientific (`{:e}`, e.g. `1.5e-300`) otherwise, so that very large and very
//! small values do not take hundreds of digits. Readers accept both forms.

pub mod atomic;
pub mod checkpoint;
pub mod csv;
pub mod matrix_market;

use std::fmt;
use std::path::Path;

use crate::error::{Error, Result};

pub use atomic::write_atomically;
pub use checkpoint::{Checkpoint, read_checkpoint, write_checkpoint};
pub use csv::{
    parse_initial, parse_load_table, read_initial, read_load_table, write_energy_csv,
    write_record_csv,
};
pub use matrix_market::{parse_matrix_market, read_matrix_market, write_matrix_market};

/// Displays an `f64` with the shortest text that reads back to the same double (see the module
/// documentation).
#[derive(Debug, Clone, Copy)]
pub(crate) struct Num(pub f64);

impl fmt::Display for Num {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let a = self.0.abs();
        if a == 0.0 || (1e-5..1e16).contains(&a) || !a.is_finite() {
            write!(f, "{}", self.0)
        } else {
            write!(f, "{:e}", self.0)
        }
    }
}

/// Reads a whole file as UTF-8 text. Invalid UTF-8 is reported by `bad_utf8(line)` with the
/// 1-based line of the first invalid byte.
pub(crate) fn read_text(path: &Path, bad_utf8: impl FnOnce(usize) -> Error) -> Result<String> {
    let bytes = std::fs::read(path).map_err(|source| Error::Io {
        action: "read",
        path: path.to_path_buf(),
        source,
    })?;
    String::from_utf8(bytes).map_err(|e| {
        let valid = &e.as_bytes()[..e.utf8_error().valid_up_to()];
        bad_utf8(valid.iter().filter(|&&b| b == b'\n').count() + 1)
    })
}

/// The name used for `path` in error messages.
pub(crate) fn display_name(path: &Path) -> String {
    path.display().to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_print_shortest_and_read_back_exactly() {
        // Exact by construction: Rust's float formatting is shortest round-trip (Ryu-like).
        for x in [
            0.0,
            -0.0,
            1.0,
            0.1,
            -2.5,
            1e-5,
            9.999e-6,
            1e16,
            123456789.125,
            f64::MAX,
            f64::MIN_POSITIVE,
            5e-324,
            std::f64::consts::PI,
            -1.0 / 3.0,
        ] {
            let s = Num(x).to_string();
            let y: f64 = s.parse().unwrap();
            assert_eq!(x.to_bits(), y.to_bits(), "{x} printed as {s}");
            assert!(s.len() <= 24, "{x} printed as {s}");
        }
        assert_eq!(Num(0.1).to_string(), "0.1");
        assert_eq!(Num(1e-300).to_string(), "1e-300");
        assert_eq!(Num(-0.0).to_string(), "-0");
    }
}
