//! SVG figures of spectral radius, algorithmic damping ratio and relative period error against
//! `Omega` on a log axis, one line per scheme.
//!
//! Lines break where a quantity is undefined (real principal roots) and are cut at the panel's
//! edge where a value leaves the plotted range; the plotted range follows the data within fixed
//! caps, so one explicit scheme's growing spectral radius does not flatten the others.

use plotters::prelude::*;
use stepgauge::spectral::Metrics;

use super::Failure;
use super::figure_style::{SeriesStyle, draw_series};

/// One scheme's curve.
pub struct Series<'a> {
    /// Legend text.
    pub label: &'a str,
    /// Its metrics, in any `Omega` order.
    pub points: &'a [Metrics],
}

const WIDTH: u32 = 960;
const PANEL_HEIGHT: u32 = 380;
const TITLE_HEIGHT: u32 = 40;

/// One panel: what it shows and how far its y axis may reach.
struct Panel {
    caption: &'static str,
    y_label: &'static str,
    value: fn(&Metrics) -> Option<f64>,
    /// Lowest and highest y the axis may show.
    floor: f64,
    cap: f64,
    /// Smallest span of the axis (so that a flat line is not blown up).
    min_span: f64,
}

const PANELS: [Panel; 3] = [
    Panel {
        caption: "Spectral radius",
        y_label: "spectral radius",
        value: |m| Some(m.spectral_radius),
        floor: 0.0,
        cap: 1.5,
        min_span: 1.05,
    },
    Panel {
        caption: "Algorithmic damping ratio",
        y_label: "damping ratio",
        value: |m| m.damping_ratio(),
        floor: -0.5,
        cap: 0.5,
        min_span: 0.02,
    },
    Panel {
        caption: "Relative period error",
        y_label: "period error",
        value: |m| m.period_error(),
        floor: -0.5,
        cap: 1.0,
        min_span: 0.02,
    },
];

/// The x-axis label of every panel.
pub const X_LABEL: &str = "Omega = omega dt (log scale)";

/// Renders the figure as an SVG document.
pub fn spectrum_svg(title: &str, series: &[Series]) -> Result<String, Failure> {
    let fail = |e: String| Failure::Runtime(format!("cannot draw the plot: {e}"));
    // Sorted copies, so that lines run left to right whatever order --omega gave.
    let sorted: Vec<Vec<Metrics>> = series
        .iter()
        .map(|s| {
            let mut v: Vec<Metrics> = s
                .points
                .iter()
                .filter(|m| m.omega.is_finite() && m.omega > 0.0)
                .copied()
                .collect();
            v.sort_by(|a, b| a.omega.total_cmp(&b.omega));
            v
        })
        .collect();
    let (x_lo, x_hi) = x_range(&sorted).ok_or_else(|| fail("no Omega values to plot".into()))?;

    let mut svg = String::new();
    {
        let height = TITLE_HEIGHT + PANEL_HEIGHT * PANELS.len() as u32;
        let root = SVGBackend::with_string(&mut svg, (WIDTH, height)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| fail(e.to_string()))?;
        let root = root
            .titled(title, ("sans-serif", 22))
            .map_err(|e| fail(e.to_string()))?;
        let areas = root.split_evenly((PANELS.len(), 1));
        for (k, (panel, area)) in PANELS.iter().zip(&areas).enumerate() {
            let (y_lo, y_hi) = y_range(panel, &sorted);
            let mut chart = ChartBuilder::on(area)
                .caption(panel.caption, ("sans-serif", 18))
                .margin(12)
                .x_label_area_size(45)
                .y_label_area_size(70)
                .build_cartesian_2d((x_lo..x_hi).log_scale(), y_lo..y_hi)
                .map_err(|e| fail(e.to_string()))?;
            chart
                .configure_mesh()
                .x_desc(X_LABEL)
                .y_desc(panel.y_label)
                .x_label_formatter(&|x| tick(*x))
                .y_label_formatter(&|y| tick(*y))
                .draw()
                .map_err(|e| fail(e.to_string()))?;
            for (i, (s, points)) in series.iter().zip(&sorted).enumerate() {
                // The legend, one entry per scheme, goes on the first panel.
                let label = (k == 0).then_some(s.label);
                let pieces = segments(points, panel.value, y_lo, y_hi);
                draw_series(&mut chart, &pieces, SeriesStyle::nth(i), label)
                    .map_err(|e| fail(e.to_string()))?;
            }
            if k == 0 {
                chart
                    .configure_series_labels()
                    .position(SeriesLabelPosition::LowerLeft)
                    .background_style(WHITE.mix(0.85))
                    .border_style(BLACK)
                    .draw()
                    .map_err(|e| fail(e.to_string()))?;
            }
        }
        root.present().map_err(|e| fail(e.to_string()))?;
    }
    Ok(svg)
}

fn x_range(sorted: &[Vec<Metrics>]) -> Option<(f64, f64)> {
    let lo = sorted.iter().filter_map(|v| v.first()).map(|m| m.omega);
    let hi = sorted.iter().filter_map(|v| v.last()).map(|m| m.omega);
    let (lo, hi) = (lo.fold(f64::INFINITY, f64::min), hi.fold(0.0, f64::max));
    if !(lo.is_finite() && hi > 0.0) {
        return None;
    }
    // A single Omega still needs an axis: widen by a factor of two each way.
    Some(if hi > lo {
        (lo, hi)
    } else {
        (lo / 2.0, hi * 2.0)
    })
}

/// The y range: the data's range (with zero) within the panel's caps, at least `min_span` wide,
/// with a small margin.
fn y_range(panel: &Panel, sorted: &[Vec<Metrics>]) -> (f64, f64) {
    let values = sorted
        .iter()
        .flatten()
        .filter_map(panel.value)
        .filter(|v| v.is_finite());
    let (mut lo, mut hi) = values.fold((0.0f64, 0.0f64), |(lo, hi), v| (lo.min(v), hi.max(v)));
    lo = lo.max(panel.floor);
    hi = hi.min(panel.cap);
    if hi - lo < panel.min_span {
        if lo < 0.0 && hi <= 0.0 {
            lo = (hi - panel.min_span).max(panel.floor);
        } else {
            hi = lo + panel.min_span;
        }
    }
    let pad = 0.03 * (hi - lo);
    (
        if lo < 0.0 { lo - pad } else { lo },
        hi + if hi > 0.0 { pad } else { 0.0 },
    )
}

/// The drawable pieces of one curve: runs of defined values inside `[lo, hi]`, each cut where it
/// leaves the range at the interpolated crossing (linear in `ln Omega`).
fn segments(
    points: &[Metrics],
    value: fn(&Metrics) -> Option<f64>,
    lo: f64,
    hi: f64,
) -> Vec<Vec<(f64, f64)>> {
    let inside = |v: f64| (lo..=hi).contains(&v);
    let crossing = |(x0, y0): (f64, f64), (x1, y1): (f64, f64)| {
        let edge = if y0.max(y1) > hi { hi } else { lo };
        let t = ((edge - y0) / (y1 - y0)).clamp(0.0, 1.0);
        ((x0.ln() + t * (x1.ln() - x0.ln())).exp(), edge)
    };
    let mut out = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    let mut prev: Option<(f64, f64)> = None;
    for m in points {
        let here = value(m).filter(|v| v.is_finite()).map(|v| (m.omega, v));
        match (prev, here) {
            (_, Some(p)) if inside(p.1) => {
                if let Some(q) = prev
                    && current.is_empty()
                    && !inside(q.1)
                {
                    current.push(crossing(q, p));
                }
                current.push(p);
            }
            (Some(q), Some(p)) if inside(q.1) => {
                current.push(crossing(q, p));
                out.push(std::mem::take(&mut current));
            }
            _ => {
                if !current.is_empty() {
                    out.push(std::mem::take(&mut current));
                }
            }
        }
        prev = here;
    }
    if !current.is_empty() {
        out.push(current);
    }
    out
}

/// A tick label with three significant digits, trailing zeros trimmed.
fn tick(x: f64) -> String {
    if x == 0.0 || !x.is_finite() {
        return if x == 0.0 {
            "0".to_string()
        } else {
            format!("{x}")
        };
    }
    let e = x.abs().log10().floor() as i32;
    if !(-4..6).contains(&e) {
        return format!("{x:.1e}");
    }
    let decimals = (2 - e).max(0) as usize;
    let s = format!("{x:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" { "0".to_string() } else { s }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn m(omega: f64, rho: f64, d: Option<f64>) -> Metrics {
        let oscillation = match d {
            Some(d) => stepgauge::spectral::Oscillation::Pair {
                root: nalgebra::Complex::new(0.0, 1.0),
                damping_ratio: d,
                period_error: d,
            },
            None => stepgauge::spectral::Oscillation::Real,
        };
        Metrics {
            omega,
            spectral_radius: rho,
            oscillation,
        }
    }

    #[test]
    fn segments_break_at_gaps_and_cut_at_the_edge() {
        let pts = [
            m(1.0, 0.5, Some(0.1)),
            m(2.0, 1.0, Some(0.2)),
            m(3.0, 2.0, None),
            m(4.0, 0.9, Some(0.1)),
        ];
        let s = segments(&pts, |m| Some(m.spectral_radius), 0.0, 1.5);
        assert_eq!(s.len(), 2);
        assert_eq!(s[0].len(), 3);
        assert!((s[0][2].1 - 1.5).abs() < 1e-15);
        assert!(s[0][2].0 > 2.0 && s[0][2].0 < 3.0);
        assert_eq!(s[1].len(), 2);
        let d = segments(&pts, |m| m.damping_ratio(), -0.5, 0.5);
        assert_eq!(d.len(), 2);
        assert_eq!(d[1], vec![(4.0, 0.1)]);
    }

    #[test]
    fn ticks() {
        assert_eq!(tick(0.01), "0.01");
        assert_eq!(tick(0.3), "0.3");
        assert_eq!(tick(10.0), "10");
        assert_eq!(tick(1.05), "1.05");
        assert_eq!(tick(-0.25), "-0.25");
    }
}
