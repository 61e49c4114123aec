//! An implicit run of a base-excited steel frame: HHT-alpha against average acceleration.
//!
//! A planar moment frame of our own invention (3 storeys of 3.2 m, 2 bays of 6 m, steel members
//! with invented sections, 24 t of added mass per floor) is clamped at its base and shaken by a
//! synthesised ground acceleration (a seeded sum of sines under a trapezoidal envelope, peak
//! 0.3 g). The members are two-node Euler-Bernoulli frame elements with consistent mass
//! (`model.rs`); the equations `M u'' + C u' + K u = -M r a_g(t)` in relative coordinates, with
//! Rayleigh damping of 5 % at modes 1 and 3, are stepped by stepgauge's implicit integrator with
//! HHT-alpha (alpha = -0.1) and with average acceleration.
//!
//! Writes `ground.csv`, `roof.csv`, `roof.svg` and `base_shear.svg` to `--out` (default
//! `target/examples/frame`) and prints the periods, the Rayleigh coefficients and the peaks.
//!
//! Run with `cargo run --release --example frame` (`--coarse` for 2 elements per member and a
//! 10 ms step instead of 8 elements and 5 ms).

mod model;
// The figures' look (colours, dash patterns, markers), shared with the command line's figures.
#[allow(dead_code)]
#[path = "../../src/cli/figure_style.rs"]
mod figure_style;

use std::error::Error;
use std::fmt::Write as _;
use std::path::PathBuf;
use std::time::Instant;

use figure_style::{SeriesStyle, draw_series};
use model::{
    FrameLayout, GroundMotion, Response, assemble, effective_masses, modes, peak, simulate,
};
use plotters::prelude::*;
use stepgauge::model::{Damping, TimeFunction};
use stepgauge::params::AlphaParams;

/// End of the run (s): the 12 s record and 3 s of free vibration.
const T_END: f64 = 15.0;
/// HHT's alpha (original sign convention; rho_inf = (1 + alpha) / (1 - alpha) = 0.818).
const HHT_ALPHA: f64 = -0.1;
/// Rayleigh damping ratio at the two anchor modes.
const XI: f64 = 0.05;

struct Args {
    coarse: bool,
    out: PathBuf,
}

fn parse_args() -> Result<Args, Box<dyn Error>> {
    let mut args = Args {
        coarse: false,
        out: PathBuf::from("target/examples/frame"),
    };
    let mut it = std::env::args().skip(1);
    while let Some(a) = it.next() {
        match a.as_str() {
            "--coarse" => args.coarse = true,
            "--out" => {
                args.out = PathBuf::from(it.next().ok_or("--out needs a directory")?);
            }
            "-h" | "--help" => {
                println!("usage: frame [--coarse] [--out DIR]");
                std::process::exit(0);
            }
            other => return Err(format!("unknown argument `{other}` (try --help)").into()),
        }
    }
    Ok(args)
}

fn main() -> Result<(), Box<dyn Error>> {
    let args = parse_args()?;
    let start = Instant::now();
    let (per_member, dt) = if args.coarse { (2, 0.01) } else { (8, 0.005) };
    let layout = FrameLayout::example(per_member);
    let (mesh, roof_node) = layout.mesh()?;
    let asm = assemble(&mesh)?;
    let roof_dof = asm.dof(roof_node, 0).ok_or("the roof node is fixed")?;
    println!(
        "frame: {} storeys x {} m, {} bays x {} m, {} elements per member, {} elements, {} free DOFs",
        layout.storeys,
        layout.storey_height,
        layout.bays,
        layout.bay_width,
        per_member,
        mesh.elements.len(),
        asm.dofs()
    );
    println!(
        "mass: total {:.1} t (members + {} t added per floor), horizontal on the free DOFs r^T M r = {:.1} t",
        mesh.total_mass() / 1e3,
        layout.floor_mass / 1e3,
        asm.horizontal_mass() / 1e3
    );

    let (omegas, shapes) = modes(&asm.k, &asm.m)?;
    let eff = effective_masses(&asm, &shapes);
    let m_h = asm.horizontal_mass();
    println!("mode  period (s)  frequency (Hz)  horizontal effective mass  translations mostly");
    for i in 0..6.min(omegas.len()) {
        // Which translations dominate the shape (sum of squares of u against v).
        let (mut sx, mut sy) = (0.0, 0.0);
        for (k, g) in asm.free.iter().enumerate() {
            match g % 3 {
                0 => sx += shapes[(k, i)].powi(2),
                1 => sy += shapes[(k, i)].powi(2),
                _ => {}
            }
        }
        println!(
            "{:>4}  {:>10.4}  {:>14.3}  {:>24.1} %  {}",
            i + 1,
            2.0 * std::f64::consts::PI / omegas[i],
            omegas[i] / (2.0 * std::f64::consts::PI),
            100.0 * eff[i] / m_h,
            if sx > sy { "horizontal" } else { "vertical" }
        );
    }
    if omegas.len() < 3 {
        return Err("the model has fewer than 3 modes".into());
    }
    let damping = Damping::rayleigh_from_modes(omegas[0], XI, omegas[2], XI)?;
    let Damping::Rayleigh { a0, a1 } = damping else {
        return Err("Rayleigh damping expected".into());
    };
    println!(
        "Rayleigh damping {:.0} % at modes 1 and 3: a0 = {a0:.4} 1/s, a1 = {a1:.4e} s; ratio at the sway modes 2 and 4: {:.2} % and {:.2} %",
        100.0 * XI,
        100.0 * damping.ratio_at(omegas[1]).unwrap_or(f64::NAN),
        100.0
            * damping
                .ratio_at(omegas[3.min(omegas.len() - 1)])
                .unwrap_or(f64::NAN)
    );
    println!(
        "step {dt} s: Omega = omega dt = {:.3} at mode 1, {:.3} at mode 3, {:.1} at the highest mode",
        omegas[0] * dt,
        omegas[2] * dt,
        omegas[omegas.len() - 1] * dt
    );

    let ground = GroundMotion::example();
    let g = ground.clone();
    let ground_fn = TimeFunction::function(move |t| g.accel(t));

    let schemes = [
        ("HHT-alpha", AlphaParams::hht(HHT_ALPHA)?),
        ("average acceleration", AlphaParams::average_acceleration()),
    ];
    let mut responses: Vec<Response> = Vec::new();
    for (name, params) in schemes {
        let t0 = Instant::now();
        let r = simulate(
            &asm,
            damping,
            ground_fn.clone(),
            params,
            dt,
            T_END,
            roof_dof,
        )?;
        println!(
            "{name:>20}: {} steps in {:.2} s; peak roof displacement {:.2} mm, peak base shear {:.1} kN ({:.3} of the total weight); max energy-balance error {:.1e}",
            r.times.len() - 1,
            t0.elapsed().as_secs_f64(),
            1e3 * peak(&r.roof),
            1e-3 * peak(&r.base_shear),
            peak(&r.base_shear) / (mesh.total_mass() * model::G),
            r.max_balance_error
        );
        responses.push(r);
    }
    let (h, t) = (&responses[0], &responses[1]);
    let (pr_h, pr_t) = (peak(&h.roof), peak(&t.roof));
    let (pv_h, pv_t) = (peak(&h.base_shear), peak(&t.base_shear));
    let diff_roof = h.roof.iter().zip(&t.roof).map(|(a, b)| (a - b).abs());
    let diff_roof = diff_roof.fold(0.0, f64::max);
    println!(
        "HHT - average acceleration: peak roof {:+.3} %, peak base shear {:+.3} %, largest roof difference over the history {:.3} mm ({:.2} % of the peak)",
        100.0 * (pr_h - pr_t) / pr_t,
        100.0 * (pv_h - pv_t) / pv_t,
        1e3 * diff_roof,
        100.0 * diff_roof / pr_t
    );

    std::fs::create_dir_all(&args.out)?;
    let mut csv = String::from("t,a_g\n");
    for (i, tt) in h.times.iter().enumerate() {
        if i % ((0.01 / dt).round() as usize).max(1) == 0 {
            writeln!(csv, "{tt:.6},{:.8e}", ground.accel(*tt))?;
        }
    }
    std::fs::write(args.out.join("ground.csv"), csv)?;
    let mut csv = String::from("t,roof_hht,roof_avg,base_shear_hht,base_shear_avg\n");
    for i in 0..h.times.len() {
        writeln!(
            csv,
            "{:.6},{:.8e},{:.8e},{:.8e},{:.8e}",
            h.times[i], h.roof[i], t.roof[i], h.base_shear[i], t.base_shear[i]
        )?;
    }
    std::fs::write(args.out.join("roof.csv"), csv)?;
    plot(
        &args.out.join("roof.svg"),
        "Roof displacement (relative to the ground)",
        "roof displacement (mm)",
        &h.times,
        &[
            (&h.roof, "HHT-alpha, alpha = -0.1"),
            (&t.roof, "average acceleration"),
        ],
        1e3,
    )?;
    plot(
        &args.out.join("base_shear.svg"),
        "Elastic base shear",
        "base shear (kN)",
        &h.times,
        &[
            (&h.base_shear, "HHT-alpha, alpha = -0.1"),
            (&t.base_shear, "average acceleration"),
        ],
        1e-3,
    )?;
    println!(
        "wrote ground.csv, roof.csv, roof.svg, base_shear.svg to {}; total run time {:.2} s",
        args.out.display(),
        start.elapsed().as_secs_f64()
    );
    Ok(())
}

/// Two panels against time: the two schemes' series on top, their difference (first minus
/// second) below; values multiplied by `scale`.
fn plot(
    path: &std::path::Path,
    title: &str,
    y_label: &str,
    times: &[f64],
    series: &[(&Vec<f64>, &str); 2],
    scale: f64,
) -> Result<(), Box<dyn Error>> {
    let t_max = times.last().copied().unwrap_or(1.0);
    let difference: Vec<f64> = series[0]
        .0
        .iter()
        .zip(series[1].0)
        .map(|(a, b)| a - b)
        .collect();
    let root = SVGBackend::new(path, (960, 720)).into_drawing_area();
    root.fill(&WHITE)?;
    let root = root.titled(title, ("sans-serif", 22))?;
    let (top, bottom) = root.split_vertically(420);
    let span = |x: f64| (x * scale * 1.1).max(1e-12);
    let y_max = span(peak(series[0].0).max(peak(series[1].0)));
    let mut chart = ChartBuilder::on(&top)
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(70)
        .build_cartesian_2d(0.0..t_max, -y_max..y_max)?;
    chart
        .configure_mesh()
        .x_desc("t (s)")
        .y_desc(y_label)
        .draw()?;
    for (i, (s, label)) in series.iter().enumerate() {
        let curve: Vec<(f64, f64)> = times
            .iter()
            .zip(s.iter())
            .map(|(t, v)| (*t, v * scale))
            .collect();
        let style = SeriesStyle::nth(i).width(if i == 0 { 3 } else { 1 });
        draw_series(&mut chart, &[curve], style, Some(label))?;
    }
    chart
        .configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .draw()?;
    let d_max = span(peak(&difference));
    let mut chart = ChartBuilder::on(&bottom)
        .caption(
            format!("difference: {} minus {}", series[0].1, series[1].1),
            ("sans-serif", 16),
        )
        .margin(12)
        .x_label_area_size(40)
        .y_label_area_size(70)
        .build_cartesian_2d(0.0..t_max, -d_max..d_max)?;
    chart
        .configure_mesh()
        .x_desc("t (s)")
        .y_desc(y_label)
        .draw()?;
    chart.draw_series(LineSeries::new(
        times.iter().zip(&difference).map(|(t, v)| (*t, v * scale)),
        BLACK.stroke_width(1),
    ))?;
    root.present()?;
    Ok(())
}
