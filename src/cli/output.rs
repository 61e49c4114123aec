//! Output helpers: format options, number formatting for tables and CSV, standard output and
//! atomic file writes.
//!
//! Numbers in JSON and CSV carry full round-trip precision: CSV uses Rust's `{}` display of
//! `f64` (the shortest text that reads back to the same double), JSON uses serde_json's
//! shortest round-trip form (the same digits, with an exponent for very large or small values).
//! Tables are for reading and show seven significant digits.

use std::fs::{self, OpenOptions};
use std::io::{self, Write};
use std::path::Path;

use clap::Args;

use super::Failure;

/// `--json` or `--csv` (default: a human-readable text).
#[derive(Debug, Clone, Args)]
pub struct FormatArgs {
    /// Print JSON instead of text.
    #[arg(long, conflicts_with = "csv")]
    pub json: bool,
    /// Print CSV (header row, then data) instead of text.
    #[arg(long)]
    pub csv: bool,
}

/// A CSV field, quoted when it holds a comma, quote or line break (quotes doubled).
pub fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// A CSV number: the shortest round-trip text, empty for none or a non-finite value.
pub fn csv_num(x: Option<f64>) -> String {
    match x {
        Some(v) if v.is_finite() => format!("{v}"),
        _ => String::new(),
    }
}

/// A number for a table: seven significant digits, fixed-point between 1e-4 and 1e7, otherwise
/// with an exponent; `-` for none.
pub fn table_num(x: Option<f64>) -> String {
    match x {
        None => "-".to_string(),
        Some(v) if !v.is_finite() => format!("{v}"),
        Some(0.0) => "0".to_string(),
        Some(v) => {
            let e = v.abs().log10().floor() as i32;
            if (-4..7).contains(&e) {
                let decimals = (6 - e).max(0) as usize;
                format!("{v:.decimals$}")
            } else {
                format!("{v:.6e}")
            }
        }
    }
}

/// A number for prose: the shortest round-trip text, or `none`.
pub fn plain(x: Option<f64>) -> String {
    match x {
        Some(v) => format!("{v}"),
        None => "none".to_string(),
    }
}

/// Writes `text` to standard output. A closed pipe (`| head`) ends output quietly; any other
/// error is a failure.
pub fn print_stdout(text: &str) -> Result<(), Failure> {
    let mut out = io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(Failure::Runtime(format!(
            "cannot write to standard output: {e}"
        ))),
    }
}

/// Writes `contents` to `path` atomically: into a new scratch file in the same directory,
/// synced, then renamed over `path`. On failure the scratch file is removed and `path` is left
/// as it was.
pub fn write_atomically(path: &Path, contents: &[u8]) -> io::Result<()> {
    let name = path.file_name().ok_or_else(|| {
        io::Error::new(io::ErrorKind::InvalidInput, "the path does not name a file")
    })?;
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let mut attempt = 0u32;
    let (tmp, mut file) = loop {
        let tmp = dir.join(format!(
            ".{}.{}.{attempt}.tmp",
            name.to_string_lossy(),
            std::process::id()
        ));
        match OpenOptions::new().write(true).create_new(true).open(&tmp) {
            Ok(f) => break (tmp, f),
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists && attempt < 100 => attempt += 1,
            Err(e) => return Err(e),
        }
    };
    let result = file
        .write_all(contents)
        .and_then(|()| file.sync_all())
        .and_then(|()| {
            drop(file);
            fs::rename(&tmp, path)
        });
    if result.is_err() {
        let _ = fs::remove_file(&tmp);
    }
    result
}

/// Writes a plot file, mapping an I/O error to a failure naming the file.
pub fn write_plot(path: &Path, svg: &str) -> Result<(), Failure> {
    write_atomically(path, svg.as_bytes()).map_err(|e| {
        Failure::Runtime(format!(
            "cannot write the plot to `{}`: {e}",
            path.display()
        ))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn csv_quoting_and_numbers() {
        assert_eq!(csv_field("plain"), "plain");
        assert_eq!(csv_field("a, b"), "\"a, b\"");
        assert_eq!(csv_field("say \"x\""), "\"say \"\"x\"\"\"");
        assert_eq!(csv_num(None), "");
        assert_eq!(csv_num(Some(f64::NAN)), "");
        let x = 0.1 + 0.2;
        assert_eq!(
            csv_num(Some(x)).parse::<f64>().unwrap().to_bits(),
            x.to_bits()
        );
    }

    #[test]
    fn table_numbers() {
        assert_eq!(table_num(None), "-");
        assert_eq!(table_num(Some(0.0)), "0");
        assert_eq!(table_num(Some(1.0)), "1.000000");
        assert_eq!(table_num(Some(0.01)), "0.01000000");
        assert_eq!(table_num(Some(1.5e-9)), "1.500000e-9");
    }
}
