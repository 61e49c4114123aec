//! The kinematic state of a model at one instant.

use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::validate::check_finite;

/// Displacement, velocity and acceleration of every DOF at time `t`, after `step` steps.
///
/// All vectors have the model's DOF count and are allocated once; integrators update them in
/// place (by swapping buffers they own), so a failed step leaves the state exactly as it was.
///
/// For the explicit central-difference scheme the velocity stored here is the integer-step
/// velocity `v_n = v_{n-1/2} + (dt/2) a_n`; the half-step velocity of the next step is derived from
/// it (`v_{n+1/2} = v_n + (dt_{n+1/2}/2) a_n`), so the state needs no scheme-specific history and a
/// restart from a saved state reproduces the run bit for bit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct State {
    /// Time.
    pub t: f64,
    /// Number of steps taken to reach this state.
    pub step: u64,
    /// Displacements.
    pub u: Vec<f64>,
    /// Velocities.
    pub v: Vec<f64>,
    /// Accelerations.
    pub a: Vec<f64>,
}

impl State {
    /// A state at rest (all zeros) at time `t0` for `n` DOFs.
    pub fn at_rest(n: usize, t0: f64) -> Self {
        State {
            t: t0,
            step: 0,
            u: vec![0.0; n],
            v: vec![0.0; n],
            a: vec![0.0; n],
        }
    }

    /// A state from initial displacements and velocities; the acceleration is left at zero until
    /// an integrator computes the consistent one from the force balance.
    ///
    /// # Errors
    /// [`Error::DimensionMismatch`] when `u0` and `v0` differ in length,
    /// [`Error::NonFiniteInput`] when a value or `t0` is not finite.
    pub fn new(t0: f64, u0: Vec<f64>, v0: Vec<f64>) -> Result<Self> {
        if u0.len() != v0.len() {
            return Err(Error::DimensionMismatch {
                what: "initial velocity",
                expected: u0.len(),
                found: v0.len(),
            });
        }
        check_finite("initial time", &[t0])?;
        check_finite("initial displacement", &u0)?;
        check_finite("initial velocity", &v0)?;
        let n = u0.len();
        Ok(State {
            t: t0,
            step: 0,
            u: u0,
            v: v0,
            a: vec![0.0; n],
        })
    }

    /// Number of DOFs.
    pub fn dofs(&self) -> usize {
        self.u.len()
    }
}
