//! Settings and reports of the Newton-Raphson iterations of the implicit schemes.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};

/// How often the iteration matrix is rebuilt and refactored.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum NewtonVariant {
    /// Full Newton: a new tangent at every iteration (quadratic convergence near the solution).
    Full,
    /// Modified Newton: the tangent is rebuilt every `refresh_every` iterations
    /// (`0`: once per step, at the predictor).
    Modified {
        /// Refresh period in iterations (0: once per step).
        refresh_every: usize,
    },
}

/// Settings of the Newton-Raphson iterations, the step cut-back and its regrowth.
///
/// A step has converged when every enabled criterion holds (set a tolerance to `f64::INFINITY`
/// to disable it):
///
/// - residual: `||R|| <= residual_tolerance * F_ref`, with `F_ref` the largest norm seen so far in
///   the run (this iterate included) of the inertia, internal and external force terms of the
///   balance on the free DOFs and of the reactions at the constrained ones. A model at rest has
///   forces near zero (a round-off residual of its internal force may be all there is); the
///   run's largest forces keep the test meaningful there and after the forces have decayed;
/// - displacement: `||du|| <= displacement_tolerance * max(||u_{n+1} - u_n||, ||u_{n+1}||)`: a
///   model settled under a dead load takes steps of almost no increment, where a test on the
///   increment alone would ask a correction far below the rounding of `u`;
/// - energy: `|du . R| <= energy_tolerance * max(|du_1 . R_0|, ||u_{n+1}|| F_ref)` (relative to
///   the first iteration, with the floor of the forces' work on the displacement).
///
/// A stall at round-off also counts as converged: from the fourth evaluation on, when the last
/// four relative residuals lie within a factor 1.5 of each other (no trend) and below
/// `sqrt(residual_tolerance)` (1e-4 by default; never when the residual test is disabled), the
/// residual is taken to be at the rounding level of the model's forces, which further iterations
/// or a smaller step cannot lower (a Green-strain bar at rest computes its strain by cancellation;
/// at the start of a slow ramp its force round-off is large against the small loads). The rule
/// cannot tell such a plateau from an iteration converging linearly at a rate above
/// `1.5^(-1/3) = 0.87` per iteration, which it also accepts once below the `sqrt` bound: with the
/// default tolerances it then accepts a relative residual of up to 1e-4 instead of 1e-8. The bound
/// and the factor are this project's choice (not from a source).
///
/// New fields may be added in later versions: start from `NewtonOptions::default()` and set
/// fields.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[non_exhaustive]
pub struct NewtonOptions {
    /// Full or modified Newton. Default: full.
    pub variant: NewtonVariant,
    /// Backtracking line search on the residual norm (halving, up to 1/16). Default: off.
    pub line_search: bool,
    /// Iterations per attempt. Default 25.
    pub max_iterations: usize,
    /// Relative residual tolerance. Default 1e-8.
    pub residual_tolerance: f64,
    /// Relative displacement-increment tolerance. Default 1e-8.
    pub displacement_tolerance: f64,
    /// Relative energy-norm tolerance. Default 1e-14.
    pub energy_tolerance: f64,
    /// Divergence: the residual exceeds this multiple of the first one. Default 1e6.
    pub divergence_factor: f64,
    /// Halvings of the step allowed when an attempt fails. Default 6.
    pub max_cutbacks: u32,
    /// After this many consecutive easy sub-steps the sub-step doubles again. Default 3.
    pub regrow_after: u32,
    /// A sub-step is easy when it converged within this many iterations. Default 4.
    pub easy_iterations: usize,
}

impl Default for NewtonOptions {
    fn default() -> Self {
        NewtonOptions {
            variant: NewtonVariant::Full,
            line_search: false,
            max_iterations: 25,
            residual_tolerance: 1e-8,
            displacement_tolerance: 1e-8,
            energy_tolerance: 1e-14,
            divergence_factor: 1e6,
            max_cutbacks: 6,
            regrow_after: 3,
            easy_iterations: 4,
        }
    }
}

impl NewtonOptions {
    /// Checks the settings.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`] for a non-positive or NaN tolerance, a zero iteration limit or
    /// a divergence factor not above 1.
    pub fn validate(&self) -> Result<()> {
        for (name, v) in [
            ("residual_tolerance", self.residual_tolerance),
            ("displacement_tolerance", self.displacement_tolerance),
            ("energy_tolerance", self.energy_tolerance),
        ] {
            if v.is_nan() || v <= 0.0 {
                return Err(Error::InvalidParameter {
                    name,
                    value: v,
                    expected: "a positive tolerance (infinity disables the criterion)",
                });
            }
        }
        if self.max_iterations == 0 {
            return Err(Error::InvalidParameter {
                name: "max_iterations",
                value: 0.0,
                expected: "at least one iteration",
            });
        }
        if self.divergence_factor.is_nan() || self.divergence_factor <= 1.0 {
            return Err(Error::InvalidParameter {
                name: "divergence_factor",
                value: self.divergence_factor,
                expected: "a factor above 1",
            });
        }
        Ok(())
    }
}

/// What the iterations of the last step did.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct NewtonReport {
    /// Sub-steps taken to complete the step (1 without cut-back).
    pub substeps: u32,
    /// Step halvings during the step.
    pub cutbacks: u32,
    /// Iterations summed over all attempts of the step.
    pub iterations: usize,
    /// Relative residual norms `||R|| / F_ref` of the last sub-step, one per evaluation (the
    /// predictor first).
    pub residuals: Vec<f64>,
}
