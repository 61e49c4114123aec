//! The schemes the spectral analysis knows: the central difference as stepgauge steps it, and any
//! member of the generalised-alpha family.

use serde::{Deserialize, Serialize};

use super::amplification::alpha_amplification;
use crate::explicit::ForceVelocity;
use crate::params::{AlphaParams, Family};

/// A time-integration scheme to analyse.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Scheme {
    /// The central difference in half-step velocity form on a lumped mass, exactly as
    /// [`CentralDifference`](crate::explicit::CentralDifference) steps it, with its treatment of
    /// velocity-dependent forces.
    CentralDifference(ForceVelocity),
    /// A member of the generalised-alpha family (also `beta = 0`: explicit Newmark, with the
    /// damping force centred at `v_{n+1}`).
    Alpha(AlphaParams),
}

/// The four family parameters as reported (the central difference is shown as the
/// `beta = 0, gamma = 1/2` member it resembles, with its own amplification matrix).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Parameters {
    /// `alpha_m`.
    pub alpha_m: f64,
    /// `alpha_f`.
    pub alpha_f: f64,
    /// `beta`.
    pub beta: f64,
    /// `gamma`.
    pub gamma: f64,
}

impl Scheme {
    /// The scheme's name, as on the command line.
    pub fn name(&self) -> &'static str {
        match self {
            Scheme::CentralDifference(_) => "central-difference",
            Scheme::Alpha(p) => match p.family {
                Family::Newmark | Family::Custom if p.alpha_m == 0.0 && p.alpha_f == 0.0 => {
                    "newmark"
                }
                f => f.name(),
            },
        }
    }

    /// The parameters as reported.
    pub fn parameters(&self) -> Parameters {
        match self {
            Scheme::CentralDifference(_) => Parameters {
                alpha_m: 0.0,
                alpha_f: 0.0,
                beta: 0.0,
                gamma: 0.5,
            },
            Scheme::Alpha(p) => Parameters {
                alpha_m: p.alpha_m,
                alpha_f: p.alpha_f,
                beta: p.beta,
                gamma: p.gamma,
            },
        }
    }

    /// The amplification matrix on `(u, dt v, dt^2 a)` at `omega_dt`, `xi`.
    pub fn amplification(&self, omega_dt: f64, xi: f64) -> [[f64; 3]; 3] {
        match self {
            Scheme::CentralDifference(fv) => cd_amplification(*fv, omega_dt, xi),
            Scheme::Alpha(p) => alpha_amplification(p, omega_dt, xi),
        }
    }

    /// True for schemes whose step needs no solve (central difference, `beta = 0`).
    pub fn is_explicit(&self) -> bool {
        match self {
            Scheme::CentralDifference(_) => true,
            Scheme::Alpha(p) => p.beta == 0.0,
        }
    }
}

/// The central difference's amplification matrix on `(u, dt v, dt^2 a)` (integer-step `v`, `a`)
/// for one mode: with `V = dt v`, `A = dt^2 a`, the step
/// `V_h = V + A/2`, `U' = U + V_h`, `A' = -Omega^2 U' - 2 xi Omega W`, `V' = V_h + A'/2`, where the
/// damping velocity is `W = V_h` (lagged) or `W = V_h + A/2` (predicted).
pub fn cd_amplification(fv: ForceVelocity, omega_dt: f64, xi: f64) -> [[f64; 3]; 3] {
    let o2 = omega_dt * omega_dt;
    let z = 2.0 * xi * omega_dt;
    // W as a row over (U, V, A).
    let w = match fv {
        ForceVelocity::Lagged => [0.0, 1.0, 0.5],
        ForceVelocity::Predicted => [0.0, 1.0, 1.0],
    };
    let un = [1.0, 1.0, 0.5];
    let an = [
        -o2 * un[0] - z * w[0],
        -o2 * un[1] - z * w[1],
        -o2 * un[2] - z * w[2],
    ];
    let vh = [0.0, 1.0, 0.5];
    let vn = [
        vh[0] + 0.5 * an[0],
        vh[1] + 0.5 * an[1],
        vh[2] + 0.5 * an[2],
    ];
    [un, vn, an]
}
