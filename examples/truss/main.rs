//! A geometrically nonlinear truss of your own, stepped explicitly and implicitly from rest with
//! the default options: a Warren truss of Green-strain bars whose bottom chord takes a load
//! ramped from zero (see `model.rs`, all values invented).
//!
//! ```sh
//! cargo run --release --example truss              # 16 panels, 0.3 s
//! cargo run --release --example truss -- --coarse  # 8 panels, 0.1 s (CI)
//! ```

#[path = "model.rs"]
mod model;

use model::Truss;
use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions};
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::SparseCholesky;
use stepgauge::model::Model;
use stepgauge::params::AlphaParams;
use stepgauge::run::{Flow, RunOptions, RunOutcome, StepControl, run};
use stepgauge::{Result, State};

/// Runs both schemes on the truss to `t_end`; returns the two outcomes and final states.
pub fn both(panels: usize, t_end: f64) -> Result<[(RunOutcome, State); 2]> {
    let mut model = Truss::new(panels, -2e4, 0.05);
    let n = model.dofs();
    let mut s = State::at_rest(n, 0.0);
    let mut cd = CentralDifference::new(&mut model, &mut s, CentralDifferenceOptions::default())?;
    let auto = StepControl::Auto {
        safety: 0.9,
        reestimate_every: 0,
    };
    let opts = RunOptions::new(t_end, auto);
    let explicit = run(&mut cd, &mut model, &mut s, &opts, |_| Flow::Continue)?.into_result()?;
    let mut si = State::at_rest(n, 0.0);
    let hht = AlphaParams::hht(-0.1)?;
    let solver = Box::new(SparseCholesky::new());
    let mut it =
        AlphaIntegrator::new(&mut model, &mut si, hht, solver, ImplicitOptions::default())?;
    let opts = RunOptions::new(t_end, StepControl::Fixed(1e-3));
    let implicit = run(&mut it, &mut model, &mut si, &opts, |_| Flow::Continue)?.into_result()?;
    Ok([(explicit, s), (implicit, si)])
}

fn main() -> Result<()> {
    let coarse = std::env::args().any(|a| a == "--coarse");
    let (panels, t_end) = if coarse { (8, 0.1) } else { (16, 0.3) };
    let mid = 2 * (panels / 2) + 1; // the vertical DOF of the mid-span bottom node
    for (name, (outcome, state)) in ["central difference", "HHT-alpha -0.1"]
        .iter()
        .zip(both(panels, t_end)?)
    {
        println!(
            "{name:>18}: {} steps to t = {:.3} s, mid-span deflection {:.4e} m, largest relative balance error {:.2e}",
            outcome.steps, state.t, state.u[mid], outcome.max_relative_balance_error
        );
    }
    Ok(())
}
