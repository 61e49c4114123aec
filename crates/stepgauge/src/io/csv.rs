//! Comma-separated tables: load tables and initial conditions in, recorded histories out.
//!
//! # Reading
//! Fields are separated by commas and trimmed of surrounding white space; quoting is not
//! supported (every field is a number or a column name). Blank lines and lines whose first
//! non-blank character is `#` are skipped anywhere, including before the header. Numbers are
//! anything Rust's `f64` parser reads (`1`, `-2.5`, `1e-3`, ...) and must be finite.
//!
//! **Load table** ([`read_load_table`]): a header `time,<dof>,<dof>,...` naming 0-based DOF
//! indices, then one row per time point, times strictly increasing:
//!
//! ```text
//! # time, load on DOF 4, load on DOF 9
//! time,4,9
//! 0.0,0,0
//! 0.1,100,-50
//! 0.5,0,0
//! ```
//!
//! The load is piecewise-linear in time between rows, held at the first row before it and at the
//! last row after it, and zero on every DOF not listed (see
//! [`LoadTable`]). Whether the DOFs exist in the model is checked when
//! the table is given to [`LinearModel::with_load`](crate::model::LinearModel::with_load), or
//! earlier with [`validate_dofs`].
//!
//! **Initial conditions** ([`read_initial`]): a header `dof,u,v`, then one row per DOF with a
//! non-zero initial displacement or velocity; DOFs not listed start at rest at zero.
//!
//! Every malformed input gives [`Error::Csv`] with the file name, the 1-based line and what was
//! expected; no input makes a parser panic.
//!
//! # Writing
//! [`write_record_csv`] and [`write_energy_csv`] write one row per recorded instant, numbers with
//! the shortest text that reads back to the same double (see [the `io` module](super)),
//! atomically (see [`write_atomically`]).

use std::path::Path;

use super::matrix_market::excerpt;
use super::{Num, display_name, read_text, write_atomically};
use crate::error::{Error, Result};
use crate::model::LoadTable;
use crate::run::{EnergySample, Record};

/// The lines that carry data: `(1-based line number, trimmed text)`, without blank lines and
/// `#` comments.
fn data_lines(text: &str) -> impl Iterator<Item = (usize, &str)> {
    text.lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'))
}

/// One past the last line of `text` (where "the end of the file" is).
fn end_line(text: &str) -> usize {
    text.lines().count() + 1
}

/// An error builder for file `name`.
fn csv_err(name: &str) -> impl Fn(usize, String) -> Error + '_ {
    move |line, problem| Error::Csv {
        file: name.to_string(),
        line,
        problem,
    }
}

/// Parses a finite number; `what` names the column in the message.
fn number(field: &str, what: &str) -> std::result::Result<f64, String> {
    let v: f64 = field
        .parse()
        .map_err(|_| format!("{what}: `{}` is not a number", excerpt(field)))?;
    if v.is_finite() {
        Ok(v)
    } else {
        Err(format!("{what}: `{}` is not finite", excerpt(field)))
    }
}

/// Reads a load table (see the [module documentation](self) for the format).
///
/// # Errors
/// [`Error::Io`] when the file cannot be read; [`Error::Csv`] with the line for a malformed
/// file: a header whose first column is not `time`, whose DOF columns are not non-negative
/// integers or repeat a DOF; a row with the wrong number of fields, a non-numeric or non-finite
/// value, or a time not after the previous row's; no data rows.
pub fn read_load_table(path: &Path) -> Result<LoadTable> {
    let name = display_name(path);
    let text = read_text(path, |line| Error::Csv {
        file: name.clone(),
        line,
        problem: "the file is not UTF-8 (or ASCII) text".into(),
    })?;
    parse_load_table(&text, &name)
}

/// Parses the text of a load table; `name` is the file name used in error messages.
///
/// ```
/// use stepgauge::model::{LinearModel, Load, Model};
/// let table = stepgauge::io::parse_load_table("time,1\n0,0\n2,10\n", "load.csv").unwrap();
/// let eye = sprs::CsMat::<f64>::eye(2);
/// let mut model = LinearModel::new(&eye, &eye).unwrap().with_load(Load::Table(table)).unwrap();
/// let mut f = vec![0.0; 2];
/// model.external_force(0.5, &mut f).unwrap();
/// assert_eq!(f, vec![0.0, 2.5]);
/// ```
///
/// # Errors
/// As for [`read_load_table`], without [`Error::Io`].
pub fn parse_load_table(text: &str, name: &str) -> Result<LoadTable> {
    let err = csv_err(name);
    let mut lines = data_lines(text);
    let Some((header_line, header)) = lines.next() else {
        return Err(err(
            end_line(text),
            "the file has no header; expected `time,<dof>,<dof>,...` (0-based DOF indices)".into(),
        ));
    };
    let names: Vec<&str> = header.split(',').map(str::trim).collect();
    if !names[0].eq_ignore_ascii_case("time") {
        return Err(err(
            header_line,
            format!(
                "the first column of a load table must be `time`, found `{}`; expected the \
                 header `time,<dof>,<dof>,...`",
                excerpt(names[0])
            ),
        ));
    }
    if names.len() == 1 {
        return Err(err(
            header_line,
            "the header names no DOF columns; expected `time,<dof>,<dof>,...`".into(),
        ));
    }
    let mut dofs: Vec<usize> = Vec::with_capacity(names.len() - 1);
    for (c, field) in names[1..].iter().enumerate() {
        let dof: usize = field.parse().map_err(|_| {
            err(
                header_line,
                format!(
                    "header column {}: `{}` is not a DOF index (a non-negative integer, 0-based)",
                    c + 2,
                    excerpt(field)
                ),
            )
        })?;
        if let Some(first) = dofs.iter().position(|&d| d == dof) {
            return Err(err(
                header_line,
                format!(
                    "DOF {dof} appears twice in the header (columns {} and {}); give each DOF \
                     one column",
                    first + 2,
                    c + 2
                ),
            ));
        }
        dofs.push(dof);
    }
    let m = dofs.len();
    let mut times: Vec<f64> = Vec::new();
    let mut values: Vec<f64> = Vec::new();
    let mut prev_line = 0;
    for (no, line) in lines {
        let fields: Vec<&str> = line.split(',').map(str::trim).collect();
        if fields.len() != m + 1 {
            return Err(err(
                no,
                format!(
                    "expected {} fields (the time and {m} DOF value{}, as in the header on line \
                     {header_line}), found {}",
                    m + 1,
                    if m == 1 { "" } else { "s" },
                    fields.len()
                ),
            ));
        }
        let t = number(fields[0], "time").map_err(|p| err(no, p))?;
        if let Some(&prev) = times.last()
            && t <= prev
        {
            return Err(err(
                no,
                format!(
                    "time {t} is not after the time {prev} on line {prev_line}; times must be \
                     strictly increasing"
                ),
            ));
        }
        for (field, dof) in fields[1..].iter().zip(&dofs) {
            values.push(number(field, &format!("DOF {dof}")).map_err(|p| err(no, p))?);
        }
        times.push(t);
        prev_line = no;
    }
    if times.is_empty() {
        return Err(err(
            end_line(text),
            format!("the load table has no data rows after the header on line {header_line}"),
        ));
    }
    LoadTable::new(times, dofs, values)
}

/// Checks that every DOF of `table` is below `n`, the model's DOF count (what
/// [`LinearModel::with_load`](crate::model::LinearModel::with_load) also checks).
///
/// # Errors
/// [`Error::DofOutOfRange`] naming the first DOF out of range.
pub fn validate_dofs(table: &LoadTable, n: usize) -> Result<()> {
    match table.dofs().iter().find(|&&d| d >= n) {
        Some(&dof) => Err(Error::DofOutOfRange {
            what: "load table",
            dof,
            n,
        }),
        None => Ok(()),
    }
}

/// Reads initial conditions for a model with `n` DOFs: returns the initial displacements and
/// velocities, each of length `n` (see the [module documentation](self) for the format).
///
/// # Errors
/// [`Error::Io`] when the file cannot be read; [`Error::Csv`] with the line for a header other
/// than `dof,u,v`, a row with the wrong number of fields, a DOF that is not an integer, is out
/// of range (`0..n`) or given twice, or a non-numeric or non-finite value;
/// [`Error::InvalidParameter`] (`n`) for a DOF count whose vectors do not fit in memory.
pub fn read_initial(path: &Path, n: usize) -> Result<(Vec<f64>, Vec<f64>)> {
    let name = display_name(path);
    let text = read_text(path, |line| Error::Csv {
        file: name.clone(),
        line,
        problem: "the file is not UTF-8 (or ASCII) text".into(),
    })?;
    parse_initial(&text, &name, n)
}

/// `n` zeros, or `None` when they do not fit in memory.
fn zeros<T: Clone + Default>(n: usize) -> Option<Vec<T>> {
    let mut v = Vec::new();
    v.try_reserve_exact(n).ok()?;
    v.resize(n, T::default());
    Some(v)
}

/// Parses the text of an initial-conditions file for `n` DOFs; `name` is the file name used in
/// error messages.
///
/// ```
/// let (u, v) = stepgauge::io::parse_initial("dof,u,v\n2,0.5,0\n0,0,-1\n", "init.csv", 3).unwrap();
/// assert_eq!(u, vec![0.0, 0.0, 0.5]);
/// assert_eq!(v, vec![-1.0, 0.0, 0.0]);
/// ```
///
/// # Errors
/// As for [`read_initial`], without [`Error::Io`].
pub fn parse_initial(text: &str, name: &str, n: usize) -> Result<(Vec<f64>, Vec<f64>)> {
    let err = csv_err(name);
    let mut lines = data_lines(text);
    let Some((header_line, header)) = lines.next() else {
        return Err(err(
            end_line(text),
            "the file has no header; expected `dof,u,v`".into(),
        ));
    };
    let names: Vec<&str> = header.split(',').map(str::trim).collect();
    let expected = ["dof", "u", "v"];
    if names.len() != 3
        || names
            .iter()
            .zip(expected)
            .any(|(a, b)| !a.eq_ignore_ascii_case(b))
    {
        return Err(err(
            header_line,
            format!("expected the header `dof,u,v`, found `{}`", excerpt(header)),
        ));
    }
    // A DOF count too large for memory is refused rather than aborting the allocation.
    let (mut u, mut v, mut given) = match (zeros(n), zeros(n), zeros::<usize>(n)) {
        (Some(u), Some(v), Some(g)) => (u, v, g),
        _ => {
            return Err(Error::InvalidParameter {
                name: "n",
                value: n as f64,
                expected: "a DOF count whose vectors fit in memory",
            });
        }
    };
    for (no, line) in lines {
        let fields: Vec<&str> = line.split(',').map(str::trim).collect();
        if fields.len() != 3 {
            return Err(err(
                no,
                format!(
                    "expected 3 fields `dof,u,v`, found {}: `{}`",
                    fields.len(),
                    excerpt(line)
                ),
            ));
        }
        let dof: usize = fields[0].parse().map_err(|_| {
            err(
                no,
                format!(
                    "dof: `{}` is not a DOF index (a non-negative integer, 0-based)",
                    excerpt(fields[0])
                ),
            )
        })?;
        if dof >= n {
            return Err(err(
                no,
                format!("DOF {dof} is out of range for a model with {n} DOFs (valid: 0..{n})"),
            ));
        }
        if given[dof] != 0 {
            return Err(err(
                no,
                format!(
                    "DOF {dof} is given twice (first on line {}); give each DOF one row",
                    given[dof]
                ),
            ));
        }
        u[dof] = number(fields[1], "u").map_err(|p| err(no, p))?;
        v[dof] = number(fields[2], "v").map_err(|p| err(no, p))?;
        given[dof] = no;
    }
    Ok((u, v))
}

/// Writes a recorded history as CSV, atomically: a header `time,u_<dof>,...` followed by
/// `v_<dof>,...` when `velocity` and `a_<dof>,...` when `acceleration`, then one row per recorded
/// instant. Ask only for what the run recorded ([`RecordOptions`](crate::run::RecordOptions)).
///
/// # Errors
/// [`Error::DimensionMismatch`] when the record's displacements (or the velocities or
/// accelerations asked for) do not have one value per recorded row and DOF, as when asking for
/// velocities the run did not record; [`Error::Io`] when the file cannot be written (an existing
/// file is then left untouched).
pub fn write_record_csv(
    path: &Path,
    record: &Record,
    velocity: bool,
    acceleration: bool,
) -> Result<()> {
    let rows = record.times.len();
    let w = record.dofs.len();
    let mut columns: Vec<(&str, &[f64])> = vec![("u", &record.u)];
    if velocity {
        columns.push(("v", &record.v));
    }
    if acceleration {
        columns.push(("a", &record.a));
    }
    for (prefix, data) in &columns {
        let what = match *prefix {
            "u" => "recorded displacements",
            "v" => "recorded velocities (record them with RecordOptions::velocity)",
            _ => "recorded accelerations (record them with RecordOptions::acceleration)",
        };
        crate::validate::check_len(what, rows * w, data.len())?;
    }
    write_atomically(path, |out| {
        write!(out, "time")?;
        for (prefix, _) in &columns {
            for d in &record.dofs {
                write!(out, ",{prefix}_{d}")?;
            }
        }
        writeln!(out)?;
        for r in 0..rows {
            write!(out, "{}", Num(record.times[r]))?;
            for (_, data) in &columns {
                for x in &data[r * w..(r + 1) * w] {
                    write!(out, ",{}", Num(*x))?;
                }
            }
            writeln!(out)?;
        }
        Ok(())
    })
}

/// The header of [`write_energy_csv`].
pub const ENERGY_HEADER: &str =
    "time,kinetic,internal,external,damping,constraint,extra,balance_error,relative_balance_error";

/// Writes an energy history as CSV, atomically: the header [`ENERGY_HEADER`], then one row per
/// sample.
///
/// # Errors
/// [`Error::Io`] when the file cannot be written (an existing file is then left untouched).
pub fn write_energy_csv(path: &Path, samples: &[EnergySample]) -> Result<()> {
    write_atomically(path, |out| {
        writeln!(out, "{ENERGY_HEADER}")?;
        for s in samples {
            writeln!(
                out,
                "{},{},{},{},{},{},{},{},{}",
                Num(s.t),
                Num(s.kinetic),
                Num(s.internal),
                Num(s.external),
                Num(s.damping),
                Num(s.constraint),
                Num(s.extra),
                Num(s.balance_error),
                Num(s.relative_balance_error)
            )?;
        }
        Ok(())
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table_fails(text: &str) -> (usize, String) {
        match parse_load_table(text, "load.csv") {
            Err(Error::Csv {
                file,
                line,
                problem,
            }) => {
                assert_eq!(file, "load.csv");
                (line, problem)
            }
            other => panic!("expected a Csv error for {text:?}, got {other:?}"),
        }
    }

    fn initial_fails(text: &str, n: usize) -> (usize, String) {
        match parse_initial(text, "init.csv", n) {
            Err(Error::Csv {
                file,
                line,
                problem,
            }) => {
                assert_eq!(file, "init.csv");
                (line, problem)
            }
            other => panic!("expected a Csv error for {text:?}, got {other:?}"),
        }
    }

    #[test]
    fn a_load_table_is_read_with_comments_and_blank_lines() {
        let t = parse_load_table(
            "# comment\n\n Time , 3 ,1\n0,1,2\n  # more\n0.5, 3e0 ,-4\n\n",
            "x",
        )
        .unwrap();
        let expected = LoadTable::new(vec![0.0, 0.5], vec![3, 1], vec![1.0, 2.0, 3.0, -4.0]);
        assert_eq!(t, expected.unwrap());
        assert!(validate_dofs(&t, 4).is_ok());
        assert!(matches!(
            validate_dofs(&t, 3),
            Err(Error::DofOutOfRange { dof: 3, n: 3, .. })
        ));
    }

    #[test]
    fn malformed_load_tables_report_their_line() {
        let cases: &[(&str, usize, &str)] = &[
            ("", 1, "no header"),
            ("# only a comment\n\n", 3, "no header"),
            ("t,1\n0,1\n", 1, "must be `time`"),
            ("time\n0\n", 1, "no DOF columns"),
            ("time,1,x\n", 1, "column 3: `x` is not a DOF index"),
            ("time,1,-2\n", 1, "`-2` is not a DOF index"),
            ("time,1,\n", 1, "column 3: `` is not a DOF index"),
            ("time,1,2.5\n", 1, "`2.5`"),
            (
                "time,4,2,4\n",
                1,
                "DOF 4 appears twice in the header (columns 2 and 4)",
            ),
            ("time,1\n", 2, "no data rows"),
            ("# c\ntime,1\n\n# c\n", 5, "no data rows"),
            ("time,1\n0,1,2\n", 2, "expected 2 fields"),
            ("time,1,2\n0,1\n", 2, "expected 3 fields"),
            ("time,1\n0,1\n1\n", 3, "found 1"),
            ("time,1\nzero,1\n", 2, "time: `zero` is not a number"),
            ("time,7\n0,abc\n", 2, "DOF 7: `abc` is not a number"),
            ("time,7\n0,NaN\n", 2, "DOF 7: `NaN` is not finite"),
            ("time,7\ninf,1\n", 2, "time: `inf` is not finite"),
            ("time,7\n0,1e999\n", 2, "not finite"),
            (
                "time,1\n0,1\n# c\n1,2\n1,3\n",
                5,
                "time 1 is not after the time 1 on line 4",
            ),
            ("time,1\n0,1\n-1,2\n", 3, "strictly increasing"),
        ];
        for &(text, line, needle) in cases {
            let (l, p) = table_fails(text);
            assert_eq!(l, line, "{text:?}: {p}");
            assert!(p.contains(needle), "{text:?}: `{p}` lacks `{needle}`");
        }
    }

    #[test]
    fn initial_conditions_are_read() {
        let (u, v) = parse_initial("# c\nDOF, U, V\n3,1.5,-2\n\n0,0,7\n", "init.csv", 4).unwrap();
        assert_eq!(u, vec![0.0, 0.0, 0.0, 1.5]);
        assert_eq!(v, vec![7.0, 0.0, 0.0, -2.0]);
        let (u, v) = parse_initial("dof,u,v\n", "init.csv", 2).unwrap();
        assert_eq!((u, v), (vec![0.0; 2], vec![0.0; 2]));
    }

    #[test]
    fn malformed_initial_conditions_report_their_line() {
        let cases: &[(&str, usize, &str)] = &[
            ("", 1, "no header"),
            ("dof,u\n", 1, "expected the header `dof,u,v`"),
            ("dof,v,u\n", 1, "expected the header"),
            ("dof,u,v\n1,2\n", 2, "expected 3 fields"),
            ("dof,u,v\n1,2,3,4\n", 2, "found 4"),
            ("dof,u,v\nx,1,2\n", 2, "`x` is not a DOF index"),
            ("dof,u,v\n-1,1,2\n", 2, "`-1` is not a DOF index"),
            (
                "dof,u,v\n3,1,2\n",
                2,
                "DOF 3 is out of range for a model with 3 DOFs",
            ),
            (
                "dof,u,v\n1,1,2\n\n1,0,0\n",
                4,
                "DOF 1 is given twice (first on line 2)",
            ),
            ("dof,u,v\n1,one,2\n", 2, "u: `one` is not a number"),
            ("dof,u,v\n1,1,inf\n", 2, "v: `inf` is not finite"),
        ];
        for &(text, line, needle) in cases {
            let (l, p) = initial_fails(text, 3);
            assert_eq!(l, line, "{text:?}: {p}");
            assert!(p.contains(needle), "{text:?}: `{p}` lacks `{needle}`");
        }
    }
}
