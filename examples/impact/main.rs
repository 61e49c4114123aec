//! Explicit impact of a plane-strain steel billet on a rigid floor.
//!
//! The scenario is our own, with invented dimensions: a 40 mm x 20 mm steel billet (plane strain,
//! 1 m thick; E = 200 GPa, nu = 0.3, rho = 7850 kg/m^3, yield 250 MPa, linear hardening modulus
//! 1 GPa) falls at 20 m/s onto a rigid floor from a gap of 0.2 mm. It is meshed with four-node
//! quadrilaterals with one-point integration, stiffness-based hourglass control, J2 plasticity by
//! radial return and penalty contact (see `model.rs`). The run is repeated with plasticity switched
//! off (the billet then leaves at about 85 % of its impact speed, the rest of the energy ringing
//! in it), and a slender rod (10 mm x 40 mm, landing on its end at 2 m/s) shows the elastic
//! rebound at nearly the impact speed. Section "Explicit impact" of `docs/examples.md` has the
//! method, the figures and the checks.
//!
//! Writes `energy.csv`, `energy.svg` and `mesh.svg` into `--out DIR` (default
//! `target/examples/impact`) and prints a summary.
//!
//! Run with `cargo run --release --example impact [-- --coarse] [--out DIR]`.

mod model;
// The figures' look (colours, dash patterns, markers), shared with the command line's figures.
#[allow(dead_code)]
#[path = "../../src/cli/figure_style.rs"]
mod figure_style;

use std::error::Error;
use std::fmt::Write as _;
use std::path::PathBuf;
use std::time::Instant;

use figure_style::{PALETTE, SeriesStyle, draw_series};
use model::{Outcome, Scenario, simulate};
use plotters::prelude::*;

fn main() -> Result<(), Box<dyn Error>> {
    let mut coarse = false;
    let mut out = PathBuf::from("target/examples/impact");
    let mut safety: Option<f64> = None;
    let mut smoothing: Option<f64> = None;
    let mut args = std::env::args().skip(1);
    while let Some(a) = args.next() {
        match a.as_str() {
            "--coarse" => coarse = true,
            "--out" => out = PathBuf::from(args.next().ok_or("--out needs a folder")?),
            "--safety" => safety = Some(args.next().ok_or("--safety needs a value")?.parse()?),
            "--contact-smoothing" => {
                smoothing = Some(
                    args.next()
                        .ok_or("--contact-smoothing needs metres")?
                        .parse()?,
                )
            }
            "-h" | "--help" => {
                println!(
                    "usage: impact [--coarse] [--out DIR] [--safety FRACTION] [--contact-smoothing METRES]"
                );
                return Ok(());
            }
            other => return Err(format!("unknown argument `{other}` (try --help)").into()),
        }
    }
    let (nx, ny) = if coarse { (8, 4) } else { (32, 16) };
    std::fs::create_dir_all(&out)?;

    let setting = |plastic: bool| {
        let mut s = Scenario::steel_billet(nx, ny, plastic);
        s.safety = safety.unwrap_or(s.safety);
        s.contact_smoothing = smoothing.unwrap_or(s.contact_smoothing);
        s
    };
    let plastic = setting(true);
    let start = Instant::now();
    let run = simulate(&plastic)?;
    let time_plastic = start.elapsed().as_secs_f64();
    let start = Instant::now();
    let elastic = simulate(&setting(false))?;
    let time_elastic = start.elapsed().as_secs_f64();
    let mut rod_case = Scenario::steel_rod(nx / 2, ny * 4);
    rod_case.safety = safety.unwrap_or(rod_case.safety);
    rod_case.contact_smoothing = smoothing.unwrap_or(rod_case.contact_smoothing);
    let start = Instant::now();
    let rod = simulate(&rod_case)?;
    let time_rod = start.elapsed().as_secs_f64();

    println!(
        "billet {} mm x {} mm, {nx} x {ny} quads, impact at {} m/s (c = {:.0} m/s)",
        plastic.width * 1e3,
        plastic.height * 1e3,
        plastic.speed,
        plastic.material.wave_speed()
    );
    summary("elastic-plastic", &run, time_plastic);
    summary("elastic (no yield)", &elastic, time_elastic);
    summary(
        &format!(
            "rod 10 mm x 40 mm, {} x {} quads, at 2 m/s (stays elastic)",
            nx / 2,
            ny * 4
        ),
        &rod,
        time_rod,
    );

    write_csv(&out.join("energy.csv"), &run)?;
    plot_energy(&out.join("energy.svg"), &run)?;
    plot_mesh(&out.join("mesh.svg"), &run)?;
    println!(
        "wrote energy.csv, energy.svg, mesh.svg in {}",
        out.display()
    );
    Ok(())
}

fn summary(name: &str, o: &Outcome, seconds: f64) {
    let first = o.samples[0];
    let last = o.samples[o.samples.len() - 1];
    let max_balance = o.samples.iter().map(|s| s.balance).fold(0.0, f64::max);
    let peak_internal = o.samples.iter().map(|s| s.internal).fold(0.0, f64::max);
    // Hourglass over internal energy where the internal energy is not tiny.
    let hg_ratio = o
        .samples
        .iter()
        .filter(|s| s.internal > 0.01 * first.kinetic)
        .map(|s| s.hourglass / s.internal)
        .fold(0.0, f64::max);
    let split = (last.elastic + last.plastic - last.internal).abs() / first.kinetic;
    // Free flight: every step before the first contact.
    let flight = o
        .samples
        .iter()
        .take_while(|s| s.in_contact == 0 && s.contact == 0.0);
    let (mut dp, mut dk, mut steps) = (0.0f64, 0.0f64, 0);
    for s in flight {
        dp = dp.max(((s.momentum[1] - first.momentum[1]) / first.momentum[1]).abs());
        dp = dp.max((s.momentum[0] / first.momentum[1]).abs());
        dk = dk.max(((s.kinetic - first.kinetic) / first.kinetic).abs());
        steps += 1;
    }
    println!("{name}:");
    println!(
        "  steps {}, dt {:.3e} .. {:.3e} s, run time {:.3} s",
        o.steps, o.dt_range.0, o.dt_range.1, seconds
    );
    println!(
        "  impact speed {:.3} m/s, rebound speed {:.3} m/s (centre of mass, {:.1} %), {} nodes on the floor at the end, max penetration {:.1} um",
        -first.vy,
        last.vy,
        100.0 * last.vy / -first.vy,
        last.in_contact,
        o.samples.iter().map(|s| s.penetration).fold(0.0, f64::max) * 1e6
    );
    println!(
        "  initial kinetic {:.2} J; at the end: kinetic {:.2} J, elastic {:.3} J, plastic {:.2} J, hourglass {:.4} J, contact {:.4} J",
        first.kinetic, last.kinetic, last.elastic, last.plastic, last.hourglass, last.contact
    );
    println!(
        "  max balance error {:.2e}, max hourglass / internal {:.2e}, peak internal {:.2} J, |elastic + plastic - internal| / T0 = {:.1e}",
        max_balance, hg_ratio, peak_internal, split
    );
    println!(
        "  free flight ({} samples): momentum drift {:.1e}, kinetic energy drift {:.1e} (relative)",
        steps, dp, dk
    );
}

fn write_csv(path: &std::path::Path, o: &Outcome) -> std::io::Result<()> {
    let mut s = String::from(
        "t,kinetic,internal,elastic,plastic,hourglass,contact,external,balance_error\n",
    );
    for r in &o.samples {
        let _ = writeln!(
            s,
            "{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e},{:e}",
            r.t,
            r.kinetic,
            r.internal,
            r.elastic,
            r.plastic,
            r.hourglass,
            r.contact,
            r.external,
            r.balance
        );
    }
    std::fs::write(path, s)
}

/// A curve of the energy plot: its name and value.
type Series = (&'static str, fn(&model::Sample) -> f64);

fn plot_energy(path: &std::path::Path, o: &Outcome) -> Result<(), Box<dyn Error>> {
    let root = SVGBackend::new(path, (900, 520)).into_drawing_area();
    root.fill(&WHITE)?;
    let t_max = o.samples.last().map_or(1.0, |s| s.t) * 1e6;
    let e_max = o.samples[0].kinetic * 1.1;
    let mut chart = ChartBuilder::on(&root)
        .caption(
            "Billet impact: energy history (elastic-plastic run)",
            ("sans-serif", 20),
        )
        .margin(10)
        .x_label_area_size(40)
        .y_label_area_size(60)
        .build_cartesian_2d(0.0..t_max, 0.0..e_max)?;
    chart
        .configure_mesh()
        .x_desc("t (us)")
        .y_desc("energy (J)")
        .draw()?;
    let t0 = o.samples[0].kinetic;
    let series: [Series; 8] = [
        ("kinetic", |s| s.kinetic),
        ("internal (ledger)", |s| s.internal),
        ("elastic", |s| s.elastic),
        ("plastic", |s| s.plastic),
        ("hourglass", |s| s.hourglass),
        ("contact", |s| s.contact),
        ("external work", |s| s.external),
        ("balance error (relative x initial kinetic)", |s| s.balance),
    ];
    for (i, (name, f)) in series.into_iter().enumerate() {
        // The balance error is relative in the samples; drawn in joules against the impact energy.
        let scale = if i == 7 { t0 } else { 1.0 };
        let curve: Vec<(f64, f64)> = o
            .samples
            .iter()
            .map(|s| (s.t * 1e6, f(s) * scale))
            .collect();
        draw_series(&mut chart, &[curve], SeriesStyle::nth(i), Some(name))?;
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .draw()?;
    root.present()?;
    Ok(())
}

fn plot_mesh(path: &std::path::Path, o: &Outcome) -> Result<(), Box<dyn Error>> {
    // Deformation relative to the centre-of-mass translation, magnified to be visible.
    let magnify = 10.0;
    let b = &o.billet;
    let panels = o.snapshots.len() as f64;
    let w = 60.0;
    let root = SVGBackend::new(path, (300 * o.snapshots.len() as u32, 320)).into_drawing_area();
    root.fill(&WHITE)?;
    let caption = format!(
        "Billet outline: undeformed (grey, thin), deformed x{magnify} about the centre of mass \
         (blue, thick)"
    );
    let mut chart = ChartBuilder::on(&root)
        .caption(caption, ("sans-serif", 16))
        .margin(10)
        .x_label_area_size(30)
        .y_label_area_size(40)
        .build_cartesian_2d(-10.0..panels * w, -5.0..30.0)?;
    chart
        .configure_mesh()
        .x_desc("x (mm)")
        .y_desc("y (mm)")
        .draw()?;
    let m = {
        let mut m = vec![0.0; 2 * b.nodes.len()];
        stepgauge::model::Model::lumped_mass(b, &mut m);
        m
    };
    let total: f64 = m.iter().step_by(2).sum();
    for (k, (label, t, u)) in o.snapshots.iter().enumerate() {
        let dx = k as f64 * w;
        let mut mean = [0.0; 2];
        for (n, _) in b.nodes.iter().enumerate() {
            mean[0] += m[2 * n] * u[2 * n] / total;
            mean[1] += m[2 * n] * u[2 * n + 1] / total;
        }
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(dx - 5.0, 0.0), (dx + 45.0, 0.0)],
            BLACK.stroke_width(2),
        )))?;
        for conn in &b.elements {
            let undeformed: Vec<(f64, f64)> = conn
                .iter()
                .chain(std::iter::once(&conn[0]))
                .map(|&n| (dx + b.nodes[n][0] * 1e3, b.nodes[n][1] * 1e3))
                .collect();
            chart.draw_series(std::iter::once(PathElement::new(
                undeformed,
                RGBColor(190, 190, 190),
            )))?;
            let deformed: Vec<(f64, f64)> = conn
                .iter()
                .chain(std::iter::once(&conn[0]))
                .map(|&n| {
                    let ux = mean[0] + magnify * (u[2 * n] - mean[0]);
                    let uy = mean[1] + magnify * (u[2 * n + 1] - mean[1]);
                    (dx + (b.nodes[n][0] + ux) * 1e3, (b.nodes[n][1] + uy) * 1e3)
                })
                .collect();
            chart.draw_series(std::iter::once(PathElement::new(
                deformed,
                PALETTE[0].stroke_width(2),
            )))?;
        }
        chart.draw_series(std::iter::once(Text::new(
            format!("{label}, t = {:.1} us", t * 1e6),
            (dx, 27.0),
            ("sans-serif", 13),
        )))?;
    }
    root.present()?;
    Ok(())
}
