//! The implicit half of the "scale" section: an implicit linear run of a 1e6-DOF 2D five-point
//! stencil model (1000 x 1000 grid) with average acceleration and the sparse Cholesky solver;
//! times (model, analysis, first step with the factorisation, later steps), peak heap and peak
//! RSS, and the fill of the factor.

use std::fmt::Write as _;
use std::time::Instant;

use stepgauge::State;
use stepgauge::implicit::{AlphaIntegrator, ImplicitOptions};
use stepgauge::linalg::{LinearSolver, SparseCholesky};
use stepgauge::model::LinearModel;
use stepgauge::params::AlphaParams;

use crate::alloc;
use crate::implicit::{DT, initial_u, stencil_2d, sum_matrix, unit_mass};
use crate::{Settings, Target};

fn mib(bytes: usize) -> f64 {
    bytes as f64 / (1024.0 * 1024.0)
}

/// Runs the implicit scale test and returns its Markdown (a sub-section of "scale") and its
/// target row (the run completes).
pub fn implicit_scale(settings: Settings) -> (String, Vec<Target>) {
    let (m, steps) = if settings.quick {
        (100, 10)
    } else {
        (1000, 20)
    };
    let n = m * m;
    let heap_before = alloc::current();
    alloc::reset_peak();
    let t = Instant::now();
    let mut model = LinearModel::new(&unit_mass(n), &stencil_2d(m)).expect("stencil model");
    let t_model = t.elapsed().as_secs_f64();
    let heap_model = alloc::current() - heap_before;

    // The fill of the factor of the iteration matrix, from a separate analysis of the same
    // pattern (the integrator's solver is boxed behind the LinearSolver seam).
    let fill = {
        let p = AlphaParams::average_acceleration();
        let jac = sum_matrix(
            model.mass_matrix(),
            (1.0 - p.alpha_m()) / (p.beta() * DT * DT),
            model.stiffness_matrix(),
            1.0 - p.alpha_f(),
        );
        let mut chol = SparseCholesky::new();
        let t = Instant::now();
        let ok = chol.analyze(&jac).is_ok();
        let t_analyse = t.elapsed().as_secs_f64();
        (ok, chol.factor_len(), jac.nnz(), t_analyse)
    };
    alloc::reset_peak();
    let heap_base = alloc::current() - heap_before;

    let mut state = State::new(0.0, initial_u(n), vec![0.0; n]).expect("state");
    let t = Instant::now();
    let made = AlphaIntegrator::new(
        &mut model,
        &mut state,
        AlphaParams::average_acceleration(),
        Box::new(SparseCholesky::new()),
        ImplicitOptions::default(),
    );
    let t_new = t.elapsed().as_secs_f64();
    let mut outcome = Ok(());
    let mut t_first = f64::NAN;
    let mut step_times = Vec::new();
    match made {
        Ok(mut it) => {
            for k in 0..steps {
                let t = Instant::now();
                if let Err(e) = it.step(&mut model, &mut state, DT) {
                    outcome = Err(format!("step {k}: {e}"));
                    break;
                }
                let s = t.elapsed().as_secs_f64();
                if k == 0 {
                    t_first = s;
                } else {
                    step_times.push(s);
                }
            }
        }
        Err(e) => outcome = Err(format!("integrator: {e}")),
    }
    let peak_heap = alloc::peak() - heap_before;
    let peak_rss = alloc::peak_rss();
    step_times.sort_by(f64::total_cmp);
    let per_step = step_times
        .get(step_times.len() / 2)
        .copied()
        .unwrap_or(f64::NAN);
    let finite = state.u.iter().all(|x| x.is_finite());
    let completed = outcome.is_ok() && finite && step_times.len() + 1 == steps;

    let mut s = String::new();
    let _ = writeln!(
        s,
        "### Implicit: 2D five-point stencil, {m} x {m} = {n} DOFs\n\n\
         `LinearModel` (unit diagonal mass, five-point stencil stiffness with fixed edges), \
         {steps} steps of average acceleration (`AlphaIntegrator`, `SparseCholesky`) with \
         `dt = {DT}`. The integrator's creation analyses the iteration matrix (fill-reducing \
         ordering, symbolic factor, every buffer); the first step factors it; every later step \
         reuses the factor.\n"
    );
    let _ = writeln!(s, "| quantity | value |");
    let _ = writeln!(s, "|---|---|");
    let _ = writeln!(s, "| model built (s) | {t_model:.2} |");
    let _ = writeln!(s, "| model's matrices (MiB) | {:.0} |", mib(heap_model));
    let (ok, factor_len, nnz, t_analyse) = fill;
    if ok {
        let _ = writeln!(
            s,
            "| analysis alone: ordering + symbolic factor (s) | {t_analyse:.2} |"
        );
    }
    if let Some(len) = factor_len {
        let _ = writeln!(
            s,
            "| factor entries (fill): L / lower half of J | {len} / {} = {:.1} |",
            (nnz + n) / 2,
            len as f64 / ((nnz + n) / 2) as f64
        );
        let _ = writeln!(
            s,
            "| factor entries per DOF | {:.1} |",
            len as f64 / n as f64
        );
    }
    let _ = writeln!(
        s,
        "| integrator created: analysis + start (s) | {t_new:.2} |"
    );
    let _ = writeln!(
        s,
        "| first step: numeric factorisation + step (s) | {t_first:.2} |"
    );
    let _ = writeln!(
        s,
        "| later steps, median of {} (s) | {per_step:.3} |",
        step_times.len()
    );
    let _ = writeln!(
        s,
        "| peak heap of the run, beyond the model (MiB) | {:.0} ({:.1} doubles per DOF) |",
        mib(peak_heap.saturating_sub(heap_base)),
        peak_heap.saturating_sub(heap_base) as f64 / (8.0 * n as f64)
    );
    let _ = writeln!(
        s,
        "| peak heap, model included (MiB) | {:.0} |",
        mib(peak_heap)
    );
    if let Some(rss) = peak_rss {
        let _ = writeln!(
            s,
            "| peak RSS of the process so far (MiB) | {:.0} |",
            mib(rss)
        );
    }
    if let Err(e) = &outcome {
        let _ = writeln!(s, "\nThe run failed: {e}");
    }
    let targets = vec![Target {
        threads: rayon::current_num_threads().to_string(),
        what: format!("implicit linear run, 2D stencil, n = {n}, {steps} steps, completes"),
        measured: if completed {
            format!(
                "yes, {:.1} s",
                t_new + t_first + per_step * (steps - 1) as f64
            )
        } else {
            "no".to_string()
        },
        target: "completes".to_string(),
        met: completed,
    }];
    (s, targets)
}
