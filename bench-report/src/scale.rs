//! Section "Scale": large runs complete on the machine, with their time and memory.
//!
//! * [`explicit_scale`]: an explicit central-difference run of a 1e7-DOF spring chain (quick
//!   mode: 1e5) through `stepgauge::run::run`, 200 steps at 0.9 of the stable step;
//! * [`implicit_scale`](crate::scale_implicit::implicit_scale): the implicit linear run of a
//!   1e6-DOF 2D stencil model.

use std::fmt::Write as _;
use std::time::Instant;

use stepgauge::explicit::{CentralDifference, CentralDifferenceOptions, StableLimit};
use stepgauge::run::{RecordOptions, RunOptions, StepControl, StopReason, run};

use stepgauge::State;

use crate::explicit::{chain_model, csr_bytes, safe_step};
use crate::{Section, Settings, Target, alloc};

/// Steps of the explicit run.
const STEPS: u64 = 200;

/// Measures and renders the section.
pub fn section(settings: Settings) -> Section {
    let (mut body, mut targets) = explicit_scale(settings);
    let (b, t) = crate::scale_implicit::implicit_scale(settings);
    body.push('\n');
    body.push_str(&b);
    targets.extend(t);
    Section {
        title: "Scale".to_string(),
        body,
        targets,
    }
}

/// Resets the process's peak resident set size (`VmHWM`), so that the next reading covers only
/// what follows; false when the kernel does not allow it.
fn reset_peak_rss() -> bool {
    std::fs::write("/proc/self/clear_refs", "5").is_ok()
}

/// Two smooth modes of the chain, at rest: a run whose energy balance closes to a small error (a
/// rough start would load the modes near the stability limit, where the central difference's
/// energy-balance error reaches `(omega dt)^2 / 4` of their energy).
fn smooth_state(n: usize) -> State {
    let u0: Vec<f64> = (0..n)
        .map(|i| {
            let x = (i as f64 + 1.0) / (n as f64 + 1.0) * std::f64::consts::PI;
            1e-3 * (x.sin() + 0.3 * (7.0 * x).sin())
        })
        .collect();
    State::new(0.0, u0, vec![0.0; n]).expect("finite initial state")
}

fn gib(bytes: usize) -> f64 {
    bytes as f64 / (1024.0 * 1024.0 * 1024.0)
}

/// The explicit run of a large chain: wall time, steps per second, peak heap and peak RSS.
pub fn explicit_scale(settings: Settings) -> (String, Vec<Target>) {
    let n = if settings.quick { 100_000 } else { 10_000_000 };
    let mut body = String::new();
    let mut targets = Vec::new();

    let rss_reset = reset_peak_rss();
    let heap_before = alloc::current();
    alloc::reset_peak();
    let t_build = Instant::now();
    let mut model = chain_model(n);
    let build_secs = t_build.elapsed().as_secs_f64();
    let model_bytes = alloc::current().saturating_sub(heap_before);
    let matrix_bytes = csr_bytes(model.stiffness_matrix()) + csr_bytes(model.mass_matrix());

    // The stable step from the Gershgorin bound (for the uniform chain it is 2 / omega_max with
    // omega_max -> 2; the Lanczos estimate with its default tolerance does not converge on a
    // chain this long, see the explicit section), the run at 0.9 of it.
    let after_model = alloc::current();
    alloc::reset_peak();
    let t_setup = Instant::now();
    let dt = safe_step(&model);
    let mut state = smooth_state(n);
    let mut opts = CentralDifferenceOptions::default();
    opts.stable_limit = StableLimit::Given(dt / 0.9);
    let created = CentralDifference::new(&mut model, &mut state, opts);
    let setup_secs = t_setup.elapsed().as_secs_f64();
    let mut cd = match created {
        Ok(cd) => cd,
        Err(e) => {
            let _ = writeln!(body, "The explicit run could not start: {e}.");
            targets.push(Target {
                threads: rayon::current_num_threads().to_string(),
                what: format!("explicit run of a {n}-DOF chain completes"),
                measured: format!("failed: {e}"),
                target: "completes".into(),
                met: false,
            });
            return (body, targets);
        }
    };
    let mut options = RunOptions::new(state.t + STEPS as f64 * dt, StepControl::Fixed(dt));
    options.record = {
        let mut o = RecordOptions::default();
        o.dofs = Some(vec![0, n / 2, n - 1]);
        o.every = 10;
        o.velocity = false;
        o.acceleration = false;
        o.energy = true;
        o
    };
    options.max_steps = Some(STEPS);
    let t_run = Instant::now();
    let outcome = run(&mut cd, &mut model, &mut state, &options, |_| {
        stepgauge::run::Flow::Continue
    });
    let run_secs = t_run.elapsed().as_secs_f64();
    let peak_heap = alloc::peak();
    let run_heap = peak_heap.saturating_sub(after_model);
    let peak_rss = alloc::peak_rss();
    let (steps, stop, balance) = match &outcome {
        Ok(o) => (
            o.steps,
            match &o.stop {
                StopReason::EndTime => "end time reached".to_string(),
                StopReason::MaxSteps => "step count reached".to_string(),
                StopReason::Callback => "stopped by the callback".to_string(),
                StopReason::Failed(e) => format!("failed: {e}"),
            },
            o.max_relative_balance_error,
        ),
        Err(e) => (0, format!("failed: {e}"), f64::NAN),
    };
    let completed = matches!(
        &outcome,
        Ok(o) if o.steps == STEPS && !matches!(o.stop, StopReason::Failed(_))
    );
    let per_dof = run_heap as f64 / (8.0 * n as f64);
    let steps_per_sec = steps as f64 / run_secs;

    let _ = writeln!(
        body,
        "An explicit run of a spring chain of n = {n} DOFs (`K = tridiag(-1, 2, -1)`, unit \
         lumped masses, held at both ends; two smooth modes of initial displacement, at rest) through `stepgauge::run::run`: \
         {STEPS} fixed steps at 0.9 of the Gershgorin stable step, recording three DOFs and the \
         energy every 10 steps, default options (stepgauge's parallel loops over rayon's pool). \
         The run's heap is the counting allocator's peak from the creation of the state on, \
         beyond the model; the peak RSS (`VmHWM`) is the whole process's{}.\n",
        if rss_reset {
            ", reset before the model is built"
        } else {
            " since it started (the kernel refused to reset it)"
        }
    );
    let _ = writeln!(body, "| quantity | value |");
    let _ = writeln!(body, "|---|---|");
    let _ = writeln!(body, "| DOFs | {n} |");
    let _ = writeln!(body, "| steps | {steps} ({stop}) |");
    let _ = writeln!(body, "| step size | {dt:.4} (stable limit 2 / 2 = 1) |");
    let _ = writeln!(body, "| model built | {build_secs:.2} s |");
    let _ = writeln!(
        body,
        "| integrator created (stable step, state, initial acceleration) | {setup_secs:.2} s |"
    );
    let _ = writeln!(body, "| run wall time | {run_secs:.2} s |");
    let _ = writeln!(body, "| steps per second | {steps_per_sec:.1} |");
    let _ = writeln!(
        body,
        "| DOF-steps per second | {:.2e} |",
        steps as f64 * n as f64 / run_secs
    );
    let _ = writeln!(
        body,
        "| model heap (matrices {:.2} GiB, lumped mass and the rest) | {:.2} GiB |",
        gib(matrix_bytes),
        gib(model_bytes)
    );
    let _ = writeln!(
        body,
        "| run heap beyond the model (state, integrator, record) | {:.2} GiB = {per_dof:.2} doubles per DOF |",
        gib(run_heap)
    );
    let _ = writeln!(
        body,
        "| peak heap of the process during the run | {:.2} GiB |",
        gib(peak_heap)
    );
    let _ = writeln!(
        body,
        "| peak RSS | {} |",
        peak_rss.map_or("unknown".to_string(), |b| format!("{:.2} GiB", gib(b)))
    );
    let _ = writeln!(
        body,
        "| largest relative energy-balance error | {balance:.2e} |"
    );

    targets.push(Target {
        threads: rayon::current_num_threads().to_string(),
        what: format!("explicit run of a chain of n = {n} completes ({STEPS} steps)"),
        measured: if completed {
            format!("{run_secs:.1} s, {steps_per_sec:.1} steps/s")
        } else {
            stop.clone()
        },
        target: "completes".into(),
        met: completed,
    });
    targets.push(Target {
        threads: rayon::current_num_threads().to_string(),
        what: format!("peak heap of the n = {n} explicit run beyond the model"),
        measured: format!("{per_dof:.2} doubles per DOF"),
        target: "<= 10".into(),
        met: per_dof <= 10.0,
    });
    (body, targets)
}
