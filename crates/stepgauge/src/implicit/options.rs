//! The settings of the implicit integrator: [`ImplicitOptions`], its defaults and checks.

use super::newton::NewtonOptions;
use crate::error::Result;
use crate::linalg::Execution;
use crate::validate::check_growth_limit;

// For the documentation's links only.
#[cfg(doc)]
use super::AlphaIntegrator;

/// Settings of [`AlphaIntegrator`].
///
/// New fields may be added in later versions: start from [`ImplicitOptions::default`] and set
/// fields.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct ImplicitOptions {
    /// Newton iterations, cut-back and regrowth.
    pub newton: NewtonOptions,
    /// Reject a step whose kinetic energy exceeds this multiple of all the energy put into the
    /// model (see [`CentralDifferenceOptions::growth_limit`](crate::explicit::CentralDifferenceOptions::growth_limit)).
    /// Default 10.
    pub growth_limit: f64,
    /// The growth guard trips only when the kinetic energy, while above the limit, sets this many
    /// new highs: after a start with high-frequency content, dissipative members overshoot in
    /// velocity for a step and then decay (Hilber & Hughes 1978, "Collocation, dissipation and
    /// 'overshoot' for time integration schemes in structural dynamics", *Earthquake Eng. Struct.
    /// Dyn.* 6), which is not an instability, while an unstable mode keeps setting new highs.
    /// Default 3.
    pub growth_patience: u32,
    /// Linear path: refine each solution once with the residual of the assembled matrix (one
    /// more evaluation and solve per step). A factor reused for many steps carries the same
    /// rounding into every solve, which makes the trapezoidal rule drift in energy by about one
    /// ulp per step (about 7e-12 relative over 10^4 steps at `omega dt = 5` with the sparse
    /// Cholesky); one refinement makes the rounding vary from step to step again. Default: off.
    pub refine_linear: bool,
    /// Threads and global sums, for the integrator and its linear solver (handed over by
    /// [`LinearSolver::set_execution`](crate::linalg::LinearSolver::set_execution)). Results do
    /// not depend on the thread count. Default: [`Execution::default`].
    pub execution: Execution,
}

impl ImplicitOptions {
    /// Checks the Newton options and the growth limit.
    ///
    /// # Errors
    /// [`Error::InvalidParameter`](crate::Error::InvalidParameter) for a setting outside its range.
    pub(super) fn validate(&self) -> Result<()> {
        self.newton.validate()?;
        check_growth_limit(self.growth_limit)
    }
}

impl Default for ImplicitOptions {
    fn default() -> Self {
        ImplicitOptions {
            newton: NewtonOptions::default(),
            growth_limit: 10.0,
            growth_patience: 3,
            refine_linear: false,
            execution: Execution::default(),
        }
    }
}
