//! The settings of the implicit integrator: [`ImplicitOptions`], its defaults and checks.

use std::fmt;
use std::sync::Arc;

use super::newton::NewtonOptions;
use crate::error::Result;
use crate::linalg::{GlobalReduce, Parallelism, Serial};
use crate::validate::check_growth_limit;

// For the documentation's links only.
#[cfg(doc)]
use super::AlphaIntegrator;

/// Settings of [`AlphaIntegrator`].
#[derive(Clone)]
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
    /// When matrix products run in parallel.
    pub parallel: Parallelism,
    /// Completes global sums (the seam for distributed runs). Default: [`Serial`].
    pub reduce: Arc<dyn GlobalReduce>,
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
            parallel: Parallelism::default(),
            reduce: Arc::new(Serial),
        }
    }
}

impl fmt::Debug for ImplicitOptions {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("ImplicitOptions")
            .field("newton", &self.newton)
            .field("growth_limit", &self.growth_limit)
            .field("growth_patience", &self.growth_patience)
            .field("refine_linear", &self.refine_linear)
            .field("parallel", &self.parallel)
            .finish_non_exhaustive()
    }
}
