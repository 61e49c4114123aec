//! Sparse matrices in the Matrix Market exchange format.
//!
//! The format (Boisvert, Pozo & Remington 1996, *The Matrix Market Exchange Formats: Initial
//! Design*, NIST IR 5935) is plain text:
//!
//! ```text
//! %%MatrixMarket matrix coordinate real symmetric
//! % any number of comment lines
//! 3 3 4
//! 1 1 2.0
//! 2 1 -1.0
//! 2 2 2.0
//! 3 3 1e-3
//! ```
//!
//! - The header's words are case-insensitive. stepgauge reads `matrix coordinate` files whose
//!   values are `real` or `integer` and whose symmetry is `general` or `symmetric`; `array`,
//!   `complex`, `pattern`, `hermitian` and `skew-symmetric` files (and `vector` objects) are
//!   refused with [`Error::MatrixMarketUnsupported`].
//! - Lines starting with `%` (comments) and blank lines after the header are skipped.
//! - The size line is `rows cols entries`; then come `entries` lines `row col value` with 1-based
//!   indices, in any order.
//! - A `symmetric` file stores the lower triangle only (`row >= col`); the matrix returned has
//!   both triangles (each off-diagonal entry mirrored, the diagonal once). An entry above the
//!   diagonal in a symmetric file is refused, since its mirror may be stored as well.
//! - **Duplicate entries are summed**, as in the usual finite-element assembly (and in sprs's
//!   triplet conversion).
//! - Row and column counts are limited to `2^32 - 1` (stepgauge's
//!   [`CsrMatrix`](crate::linalg::CsrMatrix) stores 32-bit column indices).
//!
//! Every malformed input gives [`Error::MatrixMarket`] with the file name, the 1-based line and
//! what was expected; no input makes the parser panic.

use std::path::Path;

use sprs::{CsMat, TriMat};

use super::{Num, display_name, read_text, write_atomically};
use crate::error::{Error, Result};

/// The largest row or column count read (the 32-bit column indices of
/// [`CsrMatrix`](crate::linalg::CsrMatrix)).
const MAX_DIM: usize = u32::MAX as usize;

/// Reads a Matrix Market file into a CSR matrix (see the [module documentation](self) for what
/// is accepted). Duplicate entries are summed.
///
/// # Errors
/// [`Error::Io`] when the file cannot be read; [`Error::MatrixMarket`] for a malformed file
/// (with the line); [`Error::MatrixMarketUnsupported`] for a kind of file stepgauge does not read.
pub fn read_matrix_market(path: &Path) -> Result<CsMat<f64>> {
    let name = display_name(path);
    let text = read_text(path, |line| Error::MatrixMarket {
        file: name.clone(),
        line,
        problem: "the file is not UTF-8 (or ASCII) text".into(),
    })?;
    parse_matrix_market(&text, &name)
}

/// The symmetry declared in the header.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Symmetry {
    General,
    Symmetric,
}

/// Parses the text of a Matrix Market file; `name` is the file name used in error messages.
///
/// ```
/// let text = "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 4\n2 1 -1\n";
/// let m = stepgauge::io::parse_matrix_market(text, "k.mtx").unwrap();
/// assert_eq!(m.get(0, 1), Some(&-1.0)); // mirrored from (2, 1)
/// assert_eq!(m.nnz(), 3);
/// ```
///
/// # Errors
/// As for [`read_matrix_market`], without [`Error::Io`].
pub fn parse_matrix_market(text: &str, name: &str) -> Result<CsMat<f64>> {
    let err = |line: usize, problem: String| Error::MatrixMarket {
        file: name.to_string(),
        line,
        problem,
    };
    if text.trim().is_empty() {
        return Err(err(
            1,
            "the file is empty; expected the header `%%MatrixMarket matrix coordinate real \
             general` (or `symmetric`) on line 1"
                .into(),
        ));
    }
    let mut lines = text.lines().enumerate().map(|(i, l)| (i + 1, l));
    let mut last_line = 0;
    // `text` is not blank, so there is a first line.
    let (integer, symmetry) = match lines.next() {
        Some((_, header)) => {
            last_line = 1;
            parse_header(header, name)?
        }
        None => (false, Symmetry::General),
    };

    // The size line: the first line that is neither a comment nor blank.
    let mut size = None;
    for (no, line) in lines.by_ref() {
        last_line = no;
        let t = line.trim();
        if t.is_empty() || t.starts_with('%') {
            continue;
        }
        size = Some((no, t));
        break;
    }
    let Some((size_line, size_text)) = size else {
        return Err(err(
            last_line + 1,
            "the file ends before the size line `rows cols entries`".into(),
        ));
    };
    let fields: Vec<&str> = size_text.split_whitespace().collect();
    if fields.len() != 3 {
        return Err(err(
            size_line,
            format!(
                "expected the size line `rows cols entries` (3 non-negative integers), found {} \
                 field{}: `{}`",
                fields.len(),
                if fields.len() == 1 { "" } else { "s" },
                excerpt(size_text)
            ),
        ));
    }
    let mut dims = [0usize; 3];
    for (k, what) in ["rows", "cols", "entries"].iter().enumerate() {
        dims[k] = fields[k].parse().map_err(|_| {
            err(
                size_line,
                format!(
                    "size line: `{}` ({what}) is not a non-negative integer; expected `rows cols \
                     entries`",
                    excerpt(fields[k])
                ),
            )
        })?;
    }
    let [rows, cols, nnz] = dims;
    if rows > MAX_DIM || cols > MAX_DIM {
        return Err(err(
            size_line,
            format!("size line: {rows} x {cols} exceeds the largest supported dimension {MAX_DIM}"),
        ));
    }
    if symmetry == Symmetry::Symmetric && rows != cols {
        return Err(err(
            size_line,
            format!("size line: a symmetric matrix must be square, but it is {rows} x {cols}"),
        ));
    }

    // Every entry line holds at least 6 bytes (`1 1 1\n`): never reserve more than the text holds.
    let cap = nnz.min(text.len() / 6 + 1);
    let factor = if symmetry == Symmetry::Symmetric {
        2
    } else {
        1
    };
    let mut tri = TriMat::with_capacity((rows, cols), cap * factor);
    let mut count = 0usize;
    for (no, line) in lines {
        last_line = no;
        let t = line.trim();
        if t.is_empty() || t.starts_with('%') {
            continue;
        }
        if count == nnz {
            return Err(err(
                no,
                format!(
                    "more entries than the {nnz} announced on line {size_line}; correct the \
                     count on the size line or remove the extra lines"
                ),
            ));
        }
        let fields: Vec<&str> = t.split_whitespace().collect();
        if fields.len() != 3 {
            return Err(err(
                no,
                format!(
                    "expected an entry `row col value` (3 fields), found {} field{}: `{}`",
                    fields.len(),
                    if fields.len() == 1 { "" } else { "s" },
                    excerpt(t)
                ),
            ));
        }
        let i = parse_index(fields[0], "row", rows, size_line).map_err(|p| err(no, p))?;
        let j = parse_index(fields[1], "column", cols, size_line).map_err(|p| err(no, p))?;
        let value = parse_value(fields[2], integer).map_err(|p| err(no, p))?;
        match symmetry {
            Symmetry::General => tri.add_triplet(i, j, value),
            Symmetry::Symmetric => {
                if i < j {
                    return Err(err(
                        no,
                        format!(
                            "entry ({}, {}) is above the diagonal, but a symmetric file stores \
                             only the lower triangle (row >= col); write it as ({}, {}) or \
                             declare the matrix `general`",
                            i + 1,
                            j + 1,
                            j + 1,
                            i + 1
                        ),
                    ));
                }
                tri.add_triplet(i, j, value);
                if i != j {
                    tri.add_triplet(j, i, value);
                }
            }
        }
        count += 1;
    }
    if count < nnz {
        return Err(err(
            last_line + 1,
            format!(
                "the file ends after {count} of the {nnz} entries announced on line {size_line}; \
                 the file may be truncated"
            ),
        ));
    }
    Ok(tri.to_csr())
}

/// Parses the header line; returns (integer field, symmetry).
fn parse_header(line: &str, name: &str) -> Result<(bool, Symmetry)> {
    let garbled = |problem: String| Error::MatrixMarket {
        file: name.to_string(),
        line: 1,
        problem,
    };
    let unsupported = |word: &str| Error::MatrixMarketUnsupported {
        file: name.to_string(),
        qualifier: word.to_string(),
    };
    let words: Vec<&str> = line.split_whitespace().collect();
    if words
        .first()
        .is_none_or(|w| !w.eq_ignore_ascii_case("%%MatrixMarket"))
    {
        return Err(garbled(format!(
            "expected the header `%%MatrixMarket matrix coordinate real general` (or \
             `symmetric`) on line 1, found `{}`",
            excerpt(line)
        )));
    }
    if words.len() != 5 {
        return Err(garbled(format!(
            "the header has {} words, expected 5: `%%MatrixMarket matrix coordinate real \
             general` (or `symmetric`)",
            words.len()
        )));
    }
    let lower: Vec<String> = words.iter().map(|w| w.to_ascii_lowercase()).collect();
    match lower[1].as_str() {
        "matrix" => {}
        "vector" => return Err(unsupported(words[1])),
        _ => {
            return Err(garbled(format!(
                "unknown object `{}` in the header; expected `matrix`",
                excerpt(words[1])
            )));
        }
    }
    match lower[2].as_str() {
        "coordinate" => {}
        "array" => return Err(unsupported(words[2])),
        _ => {
            return Err(garbled(format!(
                "unknown format `{}` in the header; expected `coordinate`",
                excerpt(words[2])
            )));
        }
    }
    let integer = match lower[3].as_str() {
        "real" => false,
        "integer" => true,
        "complex" | "pattern" => return Err(unsupported(words[3])),
        _ => {
            return Err(garbled(format!(
                "unknown field `{}` in the header; expected `real` or `integer`",
                excerpt(words[3])
            )));
        }
    };
    let symmetry = match lower[4].as_str() {
        "general" => Symmetry::General,
        "symmetric" => Symmetry::Symmetric,
        "hermitian" | "skew-symmetric" => return Err(unsupported(words[4])),
        _ => {
            return Err(garbled(format!(
                "unknown symmetry `{}` in the header; expected `general` or `symmetric`",
                excerpt(words[4])
            )));
        }
    };
    Ok((integer, symmetry))
}

/// Parses a 1-based index in `1..=size` into a 0-based one.
fn parse_index(
    token: &str,
    what: &str,
    size: usize,
    size_line: usize,
) -> std::result::Result<usize, String> {
    let plural = if what == "row" { "rows" } else { "columns" };
    match token.parse::<usize>() {
        Err(_) => Err(format!(
            "{what} index `{}` is not a positive integer",
            excerpt(token)
        )),
        Ok(0) => Err(format!(
            "{what} index is 0, but Matrix Market indices are 1-based (valid: 1..={size})"
        )),
        Ok(k) if k > size => Err(format!(
            "{what} index {k} is out of range for the {size} {plural} announced on line \
             {size_line} (valid: 1..={size})"
        )),
        Ok(k) => Ok(k - 1),
    }
}

/// Parses an entry's value: a finite real number, or an integer in an `integer` file.
fn parse_value(token: &str, integer: bool) -> std::result::Result<f64, String> {
    let value = if integer {
        token.parse::<i64>().map(|v| v as f64).map_err(|_| {
            format!(
                "value `{}` is not an integer (the header declares `integer` values)",
                excerpt(token)
            )
        })?
    } else {
        token
            .parse::<f64>()
            .map_err(|_| format!("value `{}` is not a number", excerpt(token)))?
    };
    if !value.is_finite() {
        return Err(format!(
            "value `{}` is not finite; every entry must be a finite number",
            excerpt(token)
        ));
    }
    Ok(value)
}

/// At most 60 characters of `s`, for error messages.
pub(crate) fn excerpt(s: &str) -> String {
    let mut out: String = s.chars().take(60).collect();
    if out.len() < s.len() {
        out.push_str("...");
    }
    out
}

/// Writes `m` (CSR or CSC) as a Matrix Market `coordinate real` file, atomically (see
/// [`write_atomically`]). With `symmetric`, only the lower triangle is written and the header
/// says `symmetric`; the matrix must then be exactly symmetric. Values are written with the
/// shortest text that reads back to the same double, so [`read_matrix_market`] returns the
/// same matrix bit for bit (stored zeros included).
///
/// # Errors
/// [`Error::InvalidMatrix`] for a non-finite entry, or, with `symmetric`, a matrix that is not
/// square or not exactly symmetric (naming the first offending entry); [`Error::Io`] when the
/// file cannot be written (an existing file is then left untouched).
pub fn write_matrix_market(path: &Path, m: &CsMat<f64>, symmetric: bool) -> Result<()> {
    let owned;
    let csr = if m.is_csr() {
        m
    } else {
        owned = m.to_csr();
        &owned
    };
    let invalid = |problem: String| Error::InvalidMatrix {
        what: "matrix to write",
        problem,
    };
    if symmetric && csr.rows() != csr.cols() {
        return Err(invalid(format!(
            "it is {} x {}, but a symmetric Matrix Market file needs a square matrix",
            csr.rows(),
            csr.cols()
        )));
    }
    let mut count = 0usize;
    for (i, row) in csr.outer_iterator().enumerate() {
        for (j, &v) in row.iter() {
            if !v.is_finite() {
                return Err(invalid(format!(
                    "entry ({i}, {j}) is {v}; only finite values can be written"
                )));
            }
            if symmetric {
                let t = csr.get(j, i).copied().unwrap_or(0.0);
                // Exact comparison on purpose: the file stores one triangle for both.
                #[allow(clippy::float_cmp)]
                if t != v {
                    return Err(invalid(format!(
                        "entry ({i}, {j}) = {v:e} but ({j}, {i}) = {t:e}: it is not exactly \
                         symmetric; write it as general"
                    )));
                }
                if i >= j {
                    count += 1;
                }
            } else {
                count += 1;
            }
        }
    }
    write_atomically(path, |w| {
        writeln!(
            w,
            "%%MatrixMarket matrix coordinate real {}",
            if symmetric { "symmetric" } else { "general" }
        )?;
        writeln!(w, "% written by stepgauge {}", env!("CARGO_PKG_VERSION"))?;
        writeln!(w, "{} {} {}", csr.rows(), csr.cols(), count)?;
        for (i, row) in csr.outer_iterator().enumerate() {
            for (j, &v) in row.iter() {
                if !symmetric || i >= j {
                    writeln!(w, "{} {} {}", i + 1, j + 1, Num(v))?;
                }
            }
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn mm(text: &str) -> Result<CsMat<f64>> {
        parse_matrix_market(text, "t.mtx")
    }

    /// The line and problem of a `MatrixMarket` error.
    fn fails(text: &str) -> (usize, String) {
        match mm(text) {
            Err(Error::MatrixMarket {
                file,
                line,
                problem,
            }) => {
                assert_eq!(file, "t.mtx");
                (line, problem)
            }
            other => panic!("expected a MatrixMarket error for {text:?}, got {other:?}"),
        }
    }

    const HDR: &str = "%%MatrixMarket matrix coordinate real general\n";

    #[test]
    fn general_and_symmetric_files_give_their_dense_values() {
        let m = mm("%%matrixmarket MATRIX Coordinate Real General\n% c\n\n2 3 3\n1 1 1.5\n2 3 -2\n1 2 3e-1\n").unwrap();
        assert!(m.is_csr());
        assert_eq!(dense(&m), vec![vec![1.5, 0.3, 0.0], vec![0.0, 0.0, -2.0]]);
        let s = mm("%%MatrixMarket matrix coordinate integer symmetric\n3 3 4\n1 1 2\n2 1 -1\n3 2 -1\n3 3 2\n").unwrap();
        assert_eq!(
            dense(&s),
            vec![
                vec![2.0, -1.0, 0.0],
                vec![-1.0, 0.0, -1.0],
                vec![0.0, -1.0, 2.0]
            ]
        );
        assert_eq!(s.nnz(), 6);
    }

    /// The dense values of `m`, row by row.
    pub(crate) fn dense(m: &CsMat<f64>) -> Vec<Vec<f64>> {
        (0..m.rows())
            .map(|i| {
                (0..m.cols())
                    .map(|j| m.get(i, j).copied().unwrap_or(0.0))
                    .collect()
            })
            .collect()
    }

    #[test]
    fn duplicates_are_summed() {
        let m = mm(&format!("{HDR}1 1 2\n1 1 1\n1 1 0.5\n")).unwrap();
        assert_eq!(m.get(0, 0), Some(&1.5));
        assert_eq!(m.nnz(), 1);
    }

    #[test]
    fn unsupported_kinds_name_the_word() {
        for (hdr, word) in [
            ("matrix array real general", "array"),
            ("matrix coordinate complex general", "complex"),
            ("matrix coordinate Pattern general", "Pattern"),
            ("matrix coordinate real hermitian", "hermitian"),
            ("matrix coordinate real skew-symmetric", "skew-symmetric"),
            ("vector coordinate real general", "vector"),
        ] {
            match mm(&format!("%%MatrixMarket {hdr}\n1 1 0\n")) {
                Err(e @ Error::MatrixMarketUnsupported { .. }) => {
                    let Error::MatrixMarketUnsupported { qualifier, .. } = &e else {
                        unreachable!()
                    };
                    assert_eq!(qualifier, word);
                    assert!(e.to_string().contains(word), "{e}");
                }
                other => panic!("{hdr}: {other:?}"),
            }
        }
    }

    #[test]
    fn malformed_files_report_their_line() {
        let cases: &[(&str, usize, &str)] = &[
            ("", 1, "empty"),
            ("  \n\n", 1, "empty"),
            ("1 1 1\n", 1, "expected the header"),
            ("%%MatrixMarket matrix coordinate real\n", 1, "4 words"),
            (
                "%%MatrixMarket tensor coordinate real general\n",
                1,
                "object",
            ),
            ("%%MatrixMarket matrix sparse real general\n", 1, "format"),
            (
                "%%MatrixMarket matrix coordinate float general\n",
                1,
                "field",
            ),
            (
                "%%MatrixMarket matrix coordinate real upper\n",
                1,
                "symmetry",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n% only\n",
                3,
                "size line",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n% c\n2 2\n",
                3,
                "2 fields",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 x 1\n",
                2,
                "`x` (cols)",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 -1\n",
                2,
                "entries",
            ),
            (
                "%%MatrixMarket matrix coordinate real symmetric\n2 3 0\n",
                2,
                "square",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n5000000000 1 0\n",
                2,
                "largest",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1\n",
                3,
                "2 fields",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 1 1\n",
                3,
                "4 fields",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 abc\n",
                3,
                "`abc` is not a number",
            ),
            (
                "%%MatrixMarket matrix coordinate integer general\n2 2 1\n1 1 1.5\n",
                3,
                "not an integer",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 NaN\n",
                3,
                "not finite",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 inf\n",
                3,
                "not finite",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 1e400\n",
                3,
                "not finite",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n3 1 1\n",
                3,
                "row index 3 is out of range for the 2 rows",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 4 1\n1 5 1\n",
                3,
                "column index 5 is out of range for the 4 columns",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n0 1 1\n",
                3,
                "row index is 0",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 0 1\n",
                3,
                "column index is 0",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n-1 1 1\n",
                3,
                "`-1` is not a positive integer",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 2\n1 1 1\n",
                4,
                "after 1 of the 2 entries",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 2\n1 1 1\n\n% c\n",
                6,
                "after 1 of the 2",
            ),
            (
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 1\n2 2 1\n",
                4,
                "more entries than the 1",
            ),
            (
                "%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n1 2 1\n",
                3,
                "above the diagonal",
            ),
        ];
        for &(text, line, needle) in cases {
            let (l, p) = fails(text);
            assert_eq!(l, line, "{text:?}: {p}");
            assert!(p.contains(needle), "{text:?}: `{p}` lacks `{needle}`");
        }
    }

    #[test]
    fn an_empty_matrix_is_read() {
        let m = mm(&format!("{HDR}0 0 0\n")).unwrap();
        assert_eq!((m.rows(), m.cols(), m.nnz()), (0, 0, 0));
        let m = mm(&format!("{HDR}3 2 0")).unwrap();
        assert_eq!((m.rows(), m.cols(), m.nnz()), (3, 2, 0));
    }

    #[test]
    fn a_huge_announced_count_reserves_no_memory() {
        let (line, p) = fails(&format!("{HDR}2 2 18446744073709551615\n1 1 1\n"));
        assert_eq!(line, 4);
        assert!(p.contains("after 1 of the"), "{p}");
    }

    #[test]
    fn excerpts_cut_on_character_boundaries() {
        let s = "é".repeat(100);
        assert_eq!(excerpt(&s).chars().count(), 63);
    }
}
