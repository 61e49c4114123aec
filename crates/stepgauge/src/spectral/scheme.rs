//! The amplification matrices of the schemes the spectral analysis knows ([`Scheme`], defined in
//! [`params`](crate::params) with the other parameter types): the central difference as stepgauge
//! steps it, and any member of the generalised-alpha family.

use super::amplification::alpha_amplification;
use crate::params::{ForceVelocity, Scheme};

impl Scheme {
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
