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
    /// A user function with its first and second derivatives (a prescribed displacement then
    /// starts with the exact velocity and acceleration; see [`TimeFunction::rates`]).
    Smooth {
        /// The value.
        value: Arc<dyn Fn(f64) -> f64 + Send + Sync>,
        /// Its first derivative.
        rate: Arc<dyn Fn(f64) -> f64 + Send + Sync>,
        /// Its second derivative.
        rate2: Arc<dyn Fn(f64) -> f64 + Send + Sync>,
    },
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
            TimeFunction::Smooth { .. } => write!(f, "Smooth(..)"),
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

    /// A closure with its first and second derivatives, `t -> (value, d/dt, d^2/dt^2)` as three
    /// closures: for a prescribed displacement whose start must be exact (a base motion
    /// `A sin(w t)` starts with velocity `A w`).
    pub fn with_derivatives(
        value: impl Fn(f64) -> f64 + Send + Sync + 'static,
        rate: impl Fn(f64) -> f64 + Send + Sync + 'static,
        rate2: impl Fn(f64) -> f64 + Send + Sync + 'static,
    ) -> Self {
        TimeFunction::Smooth {
            value: Arc::new(value),
            rate: Arc::new(rate),
            rate2: Arc::new(rate2),
        }
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
            TimeFunction::Smooth { value, .. } => value(t),
        }
    }

    /// The first and second derivatives at `t`, looking forward in time (the rates a motion
    /// starting at `t` has): zero for a constant; for a table the slope of the segment that
    /// starts at or contains `t` (zero outside the table) and no curvature; exact for
    /// [`TimeFunction::with_derivatives`]; for a plain [`TimeFunction::function`], central
    /// differences extrapolated to zero step (Ridders' method: the step shrinks by 1.4 over 20
    /// levels from `0.1 max(1, |t|)`, and the estimate with the smallest extrapolation error is
    /// kept; 60 evaluations), accurate to about `1e-9` of the derivative's size for functions
    /// that vary on scales down to about a thousandth of `max(1, |t|)` (tested on `sin(w t)` for
    /// `w` up to 1000); give the derivatives where that is not enough.
    pub fn rates(&self, t: f64) -> (f64, f64) {
        match self {
            TimeFunction::Constant(_) => (0.0, 0.0),
            TimeFunction::Table { times, values } => {
                let last = times.len() - 1;
                if t < times[0] || t >= times[last] || t.is_nan() {
                    return (0.0, 0.0);
                }
                // The segment [times[i], times[i + 1]) containing t.
                let i = times.partition_point(|&x| x <= t) - 1;
                let slope = (values[i + 1] - values[i]) / (times[i + 1] - times[i]);
                (slope, 0.0)
            }
            TimeFunction::Function(f) => {
                let h0 = 0.1 * t.abs().max(1.0);
                (
                    ridders(|h| (f(t + h) - f(t - h)) / (2.0 * h), h0),
                    ridders(|h| (f(t + h) - 2.0 * f(t) + f(t - h)) / (h * h), h0),
                )
            }
            TimeFunction::Smooth { rate, rate2, .. } => (rate(t), rate2(t)),
        }
    }
}

/// The limit as `h -> 0` of a central-difference estimate `d(h)` whose error is a series in
/// `h^2`: Neville's tableau over `h = h0 / 1.4^i`, `i < 20`, keeping the entry with the smallest
/// error estimate (Ridders 1982,
/// *Adv. Eng. Software* 4(2); as in Press et al. 2007, *Numerical Recipes*, 3rd ed., sec. 5.7;
/// from memory). Written here: a few lines, where a crate would bring a dependency for one
/// function.
fn ridders(d: impl Fn(f64) -> f64, h0: f64) -> f64 {
    const LEVELS: usize = 20;
    const SHRINK: f64 = 1.4;
    let fac = SHRINK * SHRINK;
    let mut table = [[0.0f64; LEVELS]; LEVELS];
    let mut h = h0;
    table[0][0] = d(h);
    let mut best = table[0][0];
    let mut err = f64::INFINITY;
    for i in 1..LEVELS {
        h /= SHRINK;
        table[0][i] = d(h);
        let mut f = fac;
        for j in 1..=i {
            table[j][i] = (table[j - 1][i] * f - table[j - 1][i - 1]) / (f - 1.0);
            f *= fac;
            let e = (table[j][i] - table[j - 1][i])
                .abs()
                .max((table[j][i] - table[j - 1][i - 1]).abs());
            if e <= err {
                err = e;
                best = table[j][i];
            }
        }
    }
    best
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

    /// Rates: a table's forward slope (zero outside), a constant's zero, the exact derivatives
    /// given, and Ridders' extrapolation of a plain function against the derivatives of
    /// `sin(w t)` and `1 - cos(w t)` (exact: `w cos`, `-w^2 sin`; `w sin`, `w^2 cos`) to `1e-9`
    /// of the derivative's amplitude for `w` from 1 to 1000.
    #[test]
    fn rates_of_every_kind() {
        let f = TimeFunction::table(vec![0.0, 1.0, 3.0], vec![0.0, 2.0, 0.0]).unwrap();
        assert_eq!(f.rates(-1.0), (0.0, 0.0));
        assert_eq!(f.rates(0.0), (2.0, 0.0));
        assert_eq!(f.rates(1.0), (-1.0, 0.0));
        assert_eq!(f.rates(3.0), (0.0, 0.0));
        assert_eq!(TimeFunction::Constant(4.0).rates(2.0), (0.0, 0.0));
        let g = TimeFunction::with_derivatives(|t| t * t, |t| 2.0 * t, |_| 2.0);
        assert_eq!((g.value(3.0), g.rates(3.0)), (9.0, (6.0, 2.0)));
        for w in [1.0f64, 10.0, 100.0, 1000.0] {
            for t in [0.0f64, 0.37, 2.5] {
                let s = TimeFunction::function(move |t| (w * t).sin());
                let (d1, d2) = s.rates(t);
                assert!(
                    (d1 - w * (w * t).cos()).abs() <= 1e-9 * w,
                    "w {w} t {t}: {d1}"
                );
                assert!(
                    (d2 + w * w * (w * t).sin()).abs() <= 1e-9 * w * w,
                    "w {w} t {t}: {d2}"
                );
                let c = TimeFunction::function(move |t| 1.0 - (w * t).cos());
                let (d1, d2) = c.rates(t);
                assert!(
                    (d1 - w * (w * t).sin()).abs() <= 1e-9 * w,
                    "w {w} t {t}: {d1}"
                );
                assert!(
                    (d2 - w * w * (w * t).cos()).abs() <= 1e-9 * w * w,
                    "w {w} t {t}: {d2}"
                );
            }
        }
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
