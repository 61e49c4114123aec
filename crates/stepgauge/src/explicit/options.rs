//! The settings of [`CentralDifference`](super::CentralDifference): the stable-limit guard, the
//! treatment of velocity-dependent forces, the guards' thresholds and the execution settings.

use crate::explicit::stable_step::StableStepOptions;
use crate::linalg::Execution;
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
///
/// New fields may be added in later versions: start from [`CentralDifferenceOptions::default`]
/// and set fields.
#[derive(Debug, Clone)]
#[non_exhaustive]
pub struct CentralDifferenceOptions {
    /// Guard against steps above the stable limit. Default: [`StableLimit::Estimate`].
    pub stable_limit: StableLimit,
    /// How the stable step is estimated when `stable_limit` is `Estimate`.
    pub stable_step: StableStepOptions,
    /// Reject a step whose relative energy-balance error exceeds this value. Default: `None` (the
    /// balance is reported, not enforced). Values of 0.01 to 0.05 are common practice; note that a
    /// stable run's error can reach `(omega dt)^2 / 4` of the energy held in modes near the
    /// stability limit, and that the error includes the scheme's own lag of the integer-step
    /// kinetic energy, `dt^2/8 (a_n . M a_n - a_0 . M a_0)` (see [`EnergyLedger`](crate::energy::EnergyLedger)),
    /// which reads exactly 1/4 at the first step of a load ramp from rest: a tolerance below that
    /// refuses such a start (start with `None` and set it once the run is under way, with
    /// [`CentralDifference::set_balance_tolerance`](super::CentralDifference::set_balance_tolerance)).
    pub balance_tolerance: Option<f64>,
    /// Reject a step whose kinetic energy exceeds this multiple of all the energy put into the model
    /// (initial kinetic and stored energy plus the absolute work of external and constraint
    /// forces): a passive model cannot do that, an unstable run soon does. Default 10; set
    /// `f64::INFINITY` to disable. The guard is inactive while no energy has been put in.
    pub growth_limit: f64,
    /// Velocity passed to velocity-dependent forces. Default: [`ForceVelocity::Lagged`].
    pub force_velocity: ForceVelocity,
    /// Threads and global sums, for the steps and the stable-step estimates alike. Results do not
    /// depend on it. Default: [`Execution::default`].
    pub execution: Execution,
}

impl Default for CentralDifferenceOptions {
    fn default() -> Self {
        CentralDifferenceOptions {
            stable_limit: StableLimit::Estimate,
            stable_step: StableStepOptions::default(),
            balance_tolerance: None,
            growth_limit: 10.0,
            force_velocity: ForceVelocity::Lagged,
            execution: Execution::default(),
        }
    }
}
