//! Fixed DOFs and DOFs with a prescribed motion (an impactor, a support motion).

use std::fmt;
use std::sync::Arc;

use crate::error::{Error, Result};

/// A scalar function of time: a prescribed motion or a load factor.
///
/// Either a piecewise-linear table (held constant before the first and after the last point) or
/// any closure. Cloning is cheap (the closure is shared).
#[derive(Clone)]
pub enum TimeFunction {
    /// The same value at every time.
    Constant(f64),
    /// Piecewise-linear interpolation between `(time, value)` points with strictly increasing
    /// times; constant extrapolation outside.
    Table {
        /// Strictly increasing times.
        times: Vec<f64>,
        /// Values at those times.
        values: Vec<f64>,
    },
    /// A user function.
    Function(Arc<dyn Fn(f64) -> f64 + Send + Sync>),
}

impl fmt::Debug for TimeFunction {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            TimeFunction::Constant(c) => write!(f, "Constant({c})"),
            TimeFunction::Table { times, values } => f
                .debug_struct("Table")
                .field("times", times)
                .field("values", values)
                .finish(),
            TimeFunction::Function(_) => write!(f, "Function(..)"),
        }
    }
}

impl TimeFunction {
    /// A piecewise-linear table.
    ///
    /// # Errors
    /// [`Error::InvalidTable`] when the table is empty, the lengths differ, a value is not finite,
    /// or the times are not strictly increasing.
    pub fn table(times: Vec<f64>, values: Vec<f64>) -> Result<Self> {
        validate_times("time function", &times)?;
        if values.len() != times.len() {
            return Err(Error::InvalidTable {
                what: "time function",
                row: times.len().min(values.len()),
                problem: "times and values differ in length",
            });
        }
        if let Some(row) = values.iter().position(|v| !v.is_finite()) {
            return Err(Error::InvalidTable {
                what: "time function",
                row,
                problem: "value is not finite",
            });
        }
        Ok(TimeFunction::Table { times, values })
    }

    /// A closure `t -> value`.
    pub fn function(f: impl Fn(f64) -> f64 + Send + Sync + 'static) -> Self {
        TimeFunction::Function(Arc::new(f))
    }

    /// The value at time `t`.
    pub fn value(&self, t: f64) -> f64 {
        match self {
            TimeFunction::Constant(c) => *c,
            TimeFunction::Table { times, values } => {
                let (i, w) = locate(times, t);
                if w == 0.0 {
                    values[i]
                } else {
                    values[i] + w * (values[i + 1] - values[i])
                }
            }
            TimeFunction::Function(f) => f(t),
        }
    }
}

/// Checks that a time column is non-empty, finite and strictly increasing.
pub(crate) fn validate_times(what: &'static str, times: &[f64]) -> Result<()> {
    if times.is_empty() {
        return Err(Error::InvalidTable {
            what,
            row: 0,
            problem: "the table has no rows",
        });
    }
    for (row, t) in times.iter().enumerate() {
        if !t.is_finite() {
            return Err(Error::InvalidTable {
                what,
                row,
                problem: "time is not finite",
            });
        }
        if row > 0 && *t <= times[row - 1] {
            return Err(Error::InvalidTable {
                what,
                row,
                problem: "times must be strictly increasing",
            });
        }
    }
    Ok(())
}

/// For strictly increasing `times`, returns `(i, w)` such that the interpolated value at `t` is
/// `values[i] + w (values[i+1] - values[i])`, with `w == 0` (and `i` the end row) outside the
/// table: constant extrapolation.
pub(crate) fn locate(times: &[f64], t: f64) -> (usize, f64) {
    let last = times.len() - 1;
    if t <= times[0] || t.is_nan() {
        return (0, 0.0);
    }
    if t >= times[last] {
        return (last, 0.0);
    }
    // First index with times[i] > t; t lies in [times[i-1], times[i]).
    let i = times.partition_point(|&x| x <= t);
    let (t0, t1) = (times[i - 1], times[i]);
    (i - 1, (t - t0) / (t1 - t0))
}

/// What a constrained DOF does.
#[derive(Debug, Clone)]
pub enum Motion {
    /// Held at its initial displacement, with zero velocity.
    Fixed,
    /// Displacement follows the function of time.
    Displacement(TimeFunction),
    /// Velocity follows the function of time; the displacement is its integral from the initial one.
    Velocity(TimeFunction),
}

/// One constrained DOF.
#[derive(Debug, Clone)]
pub struct Constraint {
    /// The DOF index.
    pub dof: usize,
    /// What it does.
    pub motion: Motion,
}

/// The set of constrained DOFs of a model. Every other DOF is free.
///
/// ```
/// use stepgauge::model::{Constraints, TimeFunction};
/// let c = Constraints::new()
///     .fix(0)
///     .prescribe_velocity(9, TimeFunction::Constant(-5.0));
/// assert_eq!(c.len(), 2);
/// ```
#[derive(Debug, Clone, Default)]
pub struct Constraints {
    list: Vec<Constraint>,
}

static NO_CONSTRAINTS: Constraints = Constraints { list: Vec::new() };

impl Constraints {
    /// No constraints.
    pub fn new() -> Self {
        Self::default()
    }

    /// A shared empty set, for models without constraints.
    pub fn none() -> &'static Constraints {
        &NO_CONSTRAINTS
    }

    /// Adds a constraint.
    pub fn with(mut self, dof: usize, motion: Motion) -> Self {
        self.list.push(Constraint { dof, motion });
        self
    }

    /// Fixes `dof` at its initial displacement.
    pub fn fix(self, dof: usize) -> Self {
        self.with(dof, Motion::Fixed)
    }

    /// Fixes every DOF in `dofs`.
    pub fn fix_all(mut self, dofs: impl IntoIterator<Item = usize>) -> Self {
        for dof in dofs {
            self = self.fix(dof);
        }
        self
    }

    /// Prescribes the displacement history of `dof`.
    pub fn prescribe_displacement(self, dof: usize, f: TimeFunction) -> Self {
        self.with(dof, Motion::Displacement(f))
    }

    /// Prescribes the velocity history of `dof`.
    pub fn prescribe_velocity(self, dof: usize, f: TimeFunction) -> Self {
        self.with(dof, Motion::Velocity(f))
    }

    /// The constraints, in the order they were added.
    pub fn as_slice(&self) -> &[Constraint] {
        &self.list
    }

    /// Number of constrained DOFs.
    pub fn len(&self) -> usize {
        self.list.len()
    }

    /// True when no DOF is constrained.
    pub fn is_empty(&self) -> bool {
        self.list.is_empty()
    }

    /// Checks the constraints against a model with `n` DOFs and returns a mask: `true` for every
    /// constrained DOF.
    ///
    /// # Errors
    /// [`Error::DofOutOfRange`] or [`Error::DuplicateConstraint`].
    pub fn validate(&self, n: usize) -> Result<Vec<bool>> {
        let mut mask = vec![false; n];
        for c in &self.list {
            if c.dof >= n {
                return Err(Error::DofOutOfRange {
                    what: "constraint",
                    dof: c.dof,
                    n,
                });
            }
            if mask[c.dof] {
                return Err(Error::DuplicateConstraint { dof: c.dof });
            }
            mask[c.dof] = true;
        }
        Ok(mask)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_interpolates_and_holds_ends() {
        let f = TimeFunction::table(vec![0.0, 1.0, 3.0], vec![0.0, 2.0, 0.0]).unwrap();
        assert_eq!(f.value(-1.0), 0.0);
        assert_eq!(f.value(0.5), 1.0);
        assert_eq!(f.value(1.0), 2.0);
        assert_eq!(f.value(2.0), 1.0);
        assert_eq!(f.value(10.0), 0.0);
    }

    #[test]
    fn bad_tables_are_refused_with_their_row() {
        let e = TimeFunction::table(vec![0.0, 1.0, 1.0], vec![0.0; 3]).unwrap_err();
        assert!(matches!(e, Error::InvalidTable { row: 2, .. }), "{e}");
        let e = TimeFunction::table(vec![0.0, f64::NAN], vec![0.0; 2]).unwrap_err();
        assert!(matches!(e, Error::InvalidTable { row: 1, .. }), "{e}");
        let e = TimeFunction::table(vec![], vec![]).unwrap_err();
        assert!(matches!(e, Error::InvalidTable { row: 0, .. }), "{e}");
    }

    #[test]
    fn constraints_are_validated() {
        let c = Constraints::new().fix(1).fix(1);
        assert!(matches!(
            c.validate(3),
            Err(Error::DuplicateConstraint { dof: 1 })
        ));
        let c = Constraints::new().fix(3);
        assert!(matches!(
            c.validate(3),
            Err(Error::DofOutOfRange { dof: 3, n: 3, .. })
        ));
        let mask = Constraints::new().fix(2).validate(3).unwrap();
        assert_eq!(mask, vec![false, false, true]);
    }
}
