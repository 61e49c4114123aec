//! The settings of [`CentralDifference`](super::CentralDifference): the stable-limit guard, the
//! treatment of velocity-dependent forces, the guards' thresholds and the execution settings.

use std::fmt;
use std::sync::Arc;

use crate::explicit::stable_step::StableStepOptions;
use crate::linalg::{GlobalReduce, Parallelism, Serial};
use crate::params::ForceVelocity;

/// How the integrator guards against a step above the stability limit.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum StableLimit {
    /// Estimate the stable step of the model when the integrator is created (see
    /// [`stable_step::estimate`](crate::explicit::stable_step::estimate)) and refuse larger steps.
    #[default]
    Estimate,
    /// Refuse steps above this value (the user knows the model's stable step).
    Given(f64),
    /// Do not check (an explicit override: the run may go unstable; the instability guard still
    /// stops it before values overflow).
    Unchecked,
}

/// Settings of [`CentralDifference`](super::CentralDifference).
#[derive(Clone)]
pub struct CentralDifferenceOptions {
    /// Guard against steps above the stable limit. Default: [`StableLimit::Estimate`].
    pub stable_limit: StableLimit,
    /// How the stable step is estimated when `stable_limit` is `Estimate`.
    pub stable_step: StableStepOptions,
    /// Reject a step whose relative energy-balance error exceeds this value. Default: `None` (the
    /// balance is reported, not enforced). Values of 0.01 to 0.05 are common practice; note that a
    /// stable run's error can reach `(omega dt)^2 / 4` of the energy held in modes near the
    /// stability limit.
    pub energy_tolerance: Option<f64>,
    /// Reject a step whose kinetic energy exceeds this multiple of all the energy put into the model
    /// (initial kinetic and stored energy plus the absolute work of external and constraint
    /// forces): a passive model cannot do that, an unstable run soon does. Default 10; set
    /// `f64::INFINITY` to disable. The guard is inactive while no energy has been put in.
    pub growth_limit: f64,
    /// Velocity passed to velocity-dependent forces. Default: [`ForceVelocity::Lagged`].
    pub force_velocity: ForceVelocity,
    /// When vector loops run in parallel. Results do not depend on it.
    pub parallel: Parallelism,
    /// Completes global sums (the seam for distributed runs). Default: [`Serial`].
    pub reduce: Arc<dyn GlobalReduce>,
}

impl Default for CentralDifferenceOptions {
    fn default() -> Self {
        CentralDifferenceOptions {
            stable_limit: StableLimit::Estimate,
            stable_step: StableStepOptions::default(),
            energy_tolerance: None,
            growth_limit: 10.0,
            force_velocity: ForceVelocity::Lagged,
            parallel: Parallelism::default(),
            reduce: Arc::new(Serial),
        }
    }
}

impl fmt::Debug for CentralDifferenceOptions {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("CentralDifferenceOptions")
            .field("stable_limit", &self.stable_limit)
            .field("stable_step", &self.stable_step)
            .field("energy_tolerance", &self.energy_tolerance)
            .field("growth_limit", &self.growth_limit)
            .field("force_velocity", &self.force_velocity)
            .field("parallel", &self.parallel)
            .finish_non_exhaustive()
    }
}
