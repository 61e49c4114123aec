//! A linear solver of your own, plugged into stepgauge's implicit integrator.
//!
//! `solver.rs` writes a banded Cholesky factorisation with a reverse Cuthill-McKee ordering
//! against the `LinearSolver` seam (analyze / factor / solve_in_place / name). This program runs
//! the same invented scenario (`model.rs`: a tensioned membrane strip, 6 m x 0.6 m, under a
//! 20 ms pressure pulse) with HHT-alpha twice, once with stepgauge's built-in sparse Cholesky and
//! once with the banded solver, and prints the largest difference of the two displacement
//! histories relative to the largest displacement, the run times and the solver's name. Both
//! are direct solvers, backward stable, so the histories must agree to round-off.
//!
//! Run with `cargo run --release --example own_solver [-- --coarse] [--out DIR]`; writes
//! `history.csv` (default folder `target/examples/own_solver`).

#[path = "model.rs"]
mod model;
#[path = "solver.rs"]
mod solver;

use std::fmt::Write as _;
use std::path::PathBuf;
use std::sync::atomic::Ordering;
use std::time::Instant;

use stepgauge::State;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::{LinearSolver, SparseCholesky};
use stepgauge::params::AlphaParams;
use stepgauge::run::{Flow, Record, RecordOptions, RunOptions, StepControl, run};

use model::Strip;
use solver::{BandedCholesky, JacobiCg};

/// Time step (s) and end time (s) of both runs.
pub const DT: f64 = 5e-4;
/// End time: the front crosses the 5 m to the far end in about 0.12 s and comes back.
pub const T_END: f64 = 0.3;
/// HHT-alpha parameter (original sign convention): rho_inf = (1 + alpha)/(1 - alpha) = 0.905.
pub const HHT_ALPHA: f64 = -0.05;
/// Relative residual tolerance of the example's conjugate gradients.
pub const CG_TOLERANCE: f64 = 1e-12;

/// Runs the strip with `solver` from rest; returns the whole displacement history and the
/// wall time of the integrator's set-up plus the run.
pub fn simulate(
    strip: &Strip,
    solver: Box<dyn LinearSolver>,
) -> Result<(Record, f64), stepgauge::Error> {
    let mut model = strip.model()?;
    let n = strip.dofs();
    let mut state = State::at_rest(n, 0.0);
    let start = Instant::now();
    let mut it = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::hht(HHT_ALPHA)?,
        solver,
        ImplicitOptions::default(),
    )?;
    let mut options = RunOptions::new(T_END, StepControl::Fixed(DT));
    options.record = {
        let mut o = RecordOptions::default();
        o.dofs = None;
        o.energy = false;
        o
    };
    let outcome = run(&mut it, &mut model, &mut state, &options, |_| {
        Flow::Continue
    })?
    .into_result()?;
    Ok((outcome.record, start.elapsed().as_secs_f64()))
}

/// `max |u_a - u_b| / max |u_a|` over every recorded DOF and time.
pub fn relative_difference(a: &Record, b: &Record) -> f64 {
    if a.u.len() != b.u.len() {
        return f64::INFINITY;
    }
    let scale = a.u.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    let diff =
        a.u.iter()
            .zip(&b.u)
            .fold(0.0f64, |m, (x, y)| m.max((x - y).abs()));
    diff / scale
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut coarse = false;
    let mut out = PathBuf::from("target/examples/own_solver");
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--coarse" => coarse = true,
            "--out" => out = args.next().ok_or("--out needs a folder")?.into(),
            other => {
                return Err(format!("unknown argument `{other}` (use --coarse, --out DIR)").into());
            }
        }
    }
    let strip = if coarse {
        Strip::coarse()
    } else {
        Strip::demo()
    };
    let n = strip.dofs();
    println!(
        "membrane strip {} m x {} m, {} x {} elements, {n} unknowns; c = {:.1} m/s, \
         first frequency {:.1} rad/s",
        strip.length,
        strip.width,
        strip.nx,
        strip.ny,
        strip.wave_speed(),
        strip.first_frequency()
    );
    println!(
        "HHT-alpha (alpha = {HHT_ALPHA}), dt = {DT} s, {} steps to t = {T_END} s",
        (T_END / DT).round()
    );

    // The ordering and band the example's solver finds.
    let mut probe = BandedCholesky::new();
    let model = strip.model()?;
    probe.analyze(model.stiffness_matrix())?;
    let (b_nat, b_rcm) = (
        probe.natural_bandwidth().unwrap_or(0),
        probe.bandwidth().unwrap_or(0),
    );
    println!(
        "half-bandwidth: {b_nat} in the model's numbering, {b_rcm} after reverse Cuthill-McKee \
         (band storage {} values)",
        n * (b_rcm + 1)
    );

    let builtin: Box<dyn LinearSolver> = Box::new(SparseCholesky::new());
    let own: Box<dyn LinearSolver> = Box::new(BandedCholesky::new());
    let (builtin_name, own_name) = (builtin.name(), own.name());
    let (rec_a, time_a) = simulate(&strip, builtin)?;
    let (rec_b, time_b) = simulate(&strip, own)?;
    let diff = relative_difference(&rec_a, &rec_b);
    let peak = rec_a.u.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    // A third run with the example's iterative solver, to a tight tolerance.
    let cg = JacobiCg::new(CG_TOLERANCE, 10_000);
    let (cg_iterations, cg_solves) = (cg.iterations.clone(), cg.solves.clone());
    let cg_name = cg.name();
    let (rec_c, time_c) = simulate(&strip, Box::new(cg))?;
    let diff_cg = relative_difference(&rec_a, &rec_c);
    let mean_iterations = cg_iterations.load(Ordering::Relaxed) as f64
        / cg_solves.load(Ordering::Relaxed).max(1) as f64;
    println!("built-in solver:  {builtin_name:<42} run {time_a:.3} s");
    println!("example's solver: {own_name:<42} run {time_b:.3} s");
    println!(
        "example's solver: {cg_name:<42} run {time_c:.3} s (tolerance {CG_TOLERANCE:.0e}, \
         {mean_iterations:.1} iterations per solve)"
    );
    println!(
        "largest deflection {:.3} mm ({} time rows x {n} DOFs); largest difference from the \
         built-in history, relative to it: banded Cholesky {diff:.2e}, CG {diff_cg:.2e}",
        1e3 * peak,
        rec_a.len()
    );

    // history.csv: deflection at the patch centre and at mid-length, both solvers.
    let (hx, mid_y) = (strip.length / strip.nx as f64, strip.ny / 2);
    let at_patch = strip
        .dof((strip.patch_centre / hx).round() as usize, mid_y)
        .ok_or("patch centre is not an interior node")?;
    let at_mid = strip
        .dof(strip.nx / 2, mid_y)
        .ok_or("mid-length is not an interior node")?;
    let mut csv = String::from(
        "t_s,w_patch_builtin_m,w_patch_banded_m,w_patch_cg_m,w_mid_builtin_m,w_mid_banded_m,w_mid_cg_m\n",
    );
    for (row, t) in rec_a.times.iter().enumerate() {
        let at = |r: &Record, dof: usize| r.u[row * n + dof];
        writeln!(
            csv,
            "{t:.6e},{:.9e},{:.9e},{:.9e},{:.9e},{:.9e},{:.9e}",
            at(&rec_a, at_patch),
            at(&rec_b, at_patch),
            at(&rec_c, at_patch),
            at(&rec_a, at_mid),
            at(&rec_b, at_mid),
            at(&rec_c, at_mid)
        )?;
    }
    std::fs::create_dir_all(&out)?;
    let path = out.join("history.csv");
    std::fs::write(&path, csv)?;
    println!("wrote {}", path.display());
    if !(diff <= 1e-10 && diff_cg <= 1e-8) {
        return Err(format!(
            "the histories differ by {diff:e} (banded, limit 1e-10) and {diff_cg:e} (CG, limit 1e-8)"
        )
        .into());
    }
    Ok(())
}
