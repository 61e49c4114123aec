//! [`Execution`]: how the crate's loops run, one setting shared by the integrators, the linear
//! solvers and the eigenvalue estimates.

use std::fmt;
use std::sync::Arc;

use super::{GlobalReduce, Parallelism, Serial};

/// How the vector loops run and how global sums are completed: the one execution setting of a
/// run. [`CentralDifferenceOptions`](crate::explicit::CentralDifferenceOptions) and
/// [`ImplicitOptions`](crate::implicit::ImplicitOptions) hold one; the integrators hand it to
/// their stable-step estimates and to their linear solver
/// ([`LinearSolver::set_execution`](super::LinearSolver::set_execution)), and the stand-alone
/// estimates ([`stable_step::estimate`](crate::explicit::stable_step::estimate),
/// [`omega_max_lanczos`](super::lanczos::omega_max_lanczos)) take one as an argument.
///
/// Results do not depend on `parallelism` (see the [module documentation](super)); with a
/// distributed `reduce`, they do not depend on the number of processes either, provided every
/// process owns whole chunks (see [`GlobalReduce`]).
///
/// New fields may be added in later versions: start from [`Execution::default`] and set fields.
#[derive(Clone)]
#[non_exhaustive]
pub struct Execution {
    /// When vector loops and matrix products run on rayon's thread pool. Default:
    /// [`Parallelism::default`].
    pub parallelism: Parallelism,
    /// Completes global sums and maxima (the seam for distributed runs). Default: [`Serial`].
    pub reduce: Arc<dyn GlobalReduce>,
}

impl Default for Execution {
    fn default() -> Self {
        Execution {
            parallelism: Parallelism::default(),
            reduce: Arc::new(Serial),
        }
    }
}

impl Execution {
    /// Everything on the calling thread, one process.
    pub fn serial() -> Self {
        Execution {
            parallelism: Parallelism::serial(),
            reduce: Arc::new(Serial),
        }
    }

    /// The same setting with `parallelism`.
    #[must_use]
    pub fn with_parallelism(mut self, parallelism: Parallelism) -> Self {
        self.parallelism = parallelism;
        self
    }

    /// The same setting with the reducer `reduce`.
    #[must_use]
    pub fn with_reduce(mut self, reduce: Arc<dyn GlobalReduce>) -> Self {
        self.reduce = reduce;
        self
    }
}

impl fmt::Debug for Execution {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("Execution")
            .field("parallelism", &self.parallelism)
            .field("reduce", &self.reduce.name())
            .finish()
    }
}
