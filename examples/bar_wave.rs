//! Embedding the explicit engine in an element loop of your own.
//!
//! A steel rod (our own dimensions: 1.5 m long, 20 mm diameter) meshed with two-node bar
//! elements is struck at its left end by a rigid impactor moving at 4 m/s. The model below is a
//! user's `Model`: it loops over its elements for the internal force and reports the stable step
//! from element lengths and wave speeds. The example prints when the stress wave reaches the free
//! far end, against the one-dimensional wave-theory value L / c with c = sqrt(E / rho), and the
//! stress behind the front against rho c v0.
//!
//! Run with `cargo run --release --example bar_wave`.

use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, element_stable_step};
use stepgauge::model::{Constraints, Model, TimeFunction};
use stepgauge::run::{Flow, RecordOptions, RunOptions, StepControl, StopReason, run};
use stepgauge::{ModelError, State};

/// A straight bar of two-node elements along x, one DOF (axial displacement) per node.
struct Rod {
    /// Element lengths.
    lengths: Vec<f64>,
    /// Element wave speeds sqrt(E / rho).
    speeds: Vec<f64>,
    modulus: f64,
    area: f64,
    density: f64,
    constraints: Constraints,
}

impl Rod {
    fn new(length: f64, elements: usize, modulus: f64, density: f64, area: f64) -> Self {
        let h = length / elements as f64;
        Rod {
            lengths: vec![h; elements],
            speeds: vec![(modulus / density).sqrt(); elements],
            modulus,
            area,
            density,
            constraints: Constraints::new(),
        }
    }
}

impl Model for Rod {
    fn dofs(&self) -> usize {
        self.lengths.len() + 1
    }

    fn lumped_mass(&self, out: &mut [f64]) {
        out.fill(0.0);
        for (e, h) in self.lengths.iter().enumerate() {
            let m = self.density * self.area * h;
            out[e] += 0.5 * m;
            out[e + 1] += 0.5 * m;
        }
    }

    fn internal_force(
        &mut self,
        _t: f64,
        u: &[f64],
        _v: &[f64],
        out: &mut [f64],
    ) -> Result<(), ModelError> {
        out.fill(0.0);
        for (e, h) in self.lengths.iter().enumerate() {
            let axial = self.modulus * self.area * (u[e + 1] - u[e]) / h;
            out[e] -= axial;
            out[e + 1] += axial;
        }
        Ok(())
    }

    fn constraints(&self) -> &Constraints {
        &self.constraints
    }

    fn element_stable_step(&mut self, _t: f64, _u: &[f64]) -> Option<f64> {
        element_stable_step(&self.lengths, &self.speeds).ok()
    }

    fn stored_energy(&self, u: &[f64]) -> Option<f64> {
        Some(
            self.lengths
                .iter()
                .enumerate()
                .map(|(e, h)| 0.5 * self.modulus * self.area * (u[e + 1] - u[e]).powi(2) / h)
                .sum(),
        )
    }
}

fn main() -> Result<(), stepgauge::Error> {
    let (length, elements, modulus, density) = (1.5, 300, 210e9, 7850.0);
    let area = std::f64::consts::PI * 0.01f64.powi(2);
    let v0 = 4.0;
    let mut rod = Rod::new(length, elements, modulus, density, area);
    rod.constraints = Constraints::new().prescribe_velocity(0, TimeFunction::Constant(v0));
    let n = rod.dofs();
    let c = (modulus / density).sqrt();

    let mut state = State::at_rest(n, 0.0);
    let mut cd = CentralDifference::new(&mut rod, &mut state, CentralDifferenceOptions::default())?;
    let dt_stable = cd.stable_limit().expect("the rod reports its stable step");
    println!("rod: L = {length} m, {elements} elements, c = {c:.1} m/s");
    println!("stable step from elements: {dt_stable:.4e} s (L_e / c)");

    let mut options = RunOptions::new(
        1.2 * length / c,
        StepControl::Auto {
            safety: 0.9,
            reestimate_every: 0,
        },
    );
    options.record = {
        let mut o = RecordOptions::default();
        o.dofs = Some(vec![n / 2, n - 1]);
        o.velocity = true;
        o
    };
    let mut arrival = None;
    let outcome = run(&mut cd, &mut rod, &mut state, &options, |_| Flow::Continue)?;
    if let StopReason::Failed(e) = outcome.stop {
        return Err(e);
    }
    // The far end jumps from rest to 2 v0; the front has arrived when it passes v0.
    let rec = &outcome.record;
    for (row, t) in rec.times.iter().enumerate() {
        if rec.v[row * 2 + 1] >= v0 {
            arrival = Some(*t);
            break;
        }
    }
    let exact = length / c;
    match arrival {
        Some(t) => println!(
            "wave arrival at the free end: {t:.4e} s, wave theory L/c = {exact:.4e} s ({:+.2} %)",
            100.0 * (t - exact) / exact
        ),
        None => println!("the wave did not arrive within the run"),
    }
    // Particle velocity at mid-length after the front passed it: v0 (wave theory).
    let mid_v = rec.v[(rec.len() - 1) * 2];
    println!(
        "particle velocity at mid-length: {mid_v:.3} m/s (wave theory: {v0} m/s before the reflection returns)"
    );
    println!(
        "stress behind the front, wave theory rho c v0 = {:.2} MPa",
        density * c * v0 / 1e6
    );
    let l = cd.energy();
    println!(
        "steps {}, energy put in by the impactor {:.4e} J, kinetic {:.4e} J, internal {:.4e} J, balance error {:.2e}",
        outcome.steps,
        l.constraint_work,
        l.kinetic,
        l.internal(),
        l.relative_balance_error()
    );
    Ok(())
}
