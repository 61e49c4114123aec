//! The look every figure shares (the command line's and the examples'): line colours from a
//! published colour-blind-safe palette, and for each series a dash pattern and a marker of its
//! own, so that a figure still reads when printed in greyscale or seen without colour.
//!
//! The examples take this file in with `#[path]`; it depends on plotters only.

use plotters::coord::CoordTranslate;
use plotters::element::{Drawable, PointCollection};
use plotters::prelude::*;
use plotters_backend::{BackendCoord, DrawingErrorKind};

/// Series colours, used in this order and cycled.
///
/// The colours of the palette of Okabe, M. & Ito, K. (2008), "Color Universal Design (CUD): how
/// to make figures and presentations that are friendly to colorblind people",
/// <https://jfly.uni-koeln.de/color/> (first published 2002), with the RGB values published
/// there. The order is ours, and we leave out the palette's eighth colour, yellow
/// (240, 228, 66): too pale for thin lines on a white page.
pub const PALETTE: [RGBColor; 7] = [
    RGBColor(0, 114, 178),   // blue
    RGBColor(213, 94, 0),    // vermillion
    RGBColor(0, 158, 115),   // bluish green
    RGBColor(204, 121, 167), // reddish purple
    RGBColor(230, 159, 0),   // orange
    RGBColor(86, 180, 233),  // sky blue
    RGBColor(0, 0, 0),       // black
];

/// How a series' line is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Dash {
    /// A continuous line.
    Solid,
    /// Dashes `on` pixels long with gaps of `off` pixels (the pattern runs on along the curve).
    Dashed {
        /// Dash length in pixels.
        on: u32,
        /// Gap in pixels.
        off: u32,
    },
}

/// The dash patterns, cycled with period four (solid, long dash, short dash, dots).
pub const DASHES: [Dash; 4] = [
    Dash::Solid,
    Dash::Dashed { on: 10, off: 5 },
    Dash::Dashed { on: 4, off: 4 },
    Dash::Dashed { on: 1, off: 4 },
];

/// A marker drawn at intervals along a series.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Marker {
    /// An open circle.
    Circle,
    /// An open triangle.
    Triangle,
    /// An open square.
    Square,
    /// A diagonal cross.
    Cross,
    /// A filled circle.
    Dot,
    /// A filled triangle.
    FilledTriangle,
    /// A filled square.
    FilledSquare,
    /// An open diamond.
    Diamond,
}

/// The markers in series order, one shape each.
pub const MARKERS: [Marker; 8] = [
    Marker::Dot,
    Marker::Circle,
    Marker::Triangle,
    Marker::Square,
    Marker::Cross,
    Marker::FilledTriangle,
    Marker::FilledSquare,
    Marker::Diamond,
];

/// Markers along one series, about this many (staggered between series so they do not sit on
/// each other where curves coincide).
const MARKERS_PER_SERIES: usize = 10;

/// Half the size of a marker in pixels.
const MARKER_RADIUS: i32 = 4;

/// Length of the legend's line sample in pixels.
const LEGEND_LINE: i32 = 28;

/// The look of one series: colour, dash pattern and marker.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SeriesStyle {
    /// Line and marker colour.
    pub colour: RGBColor,
    /// Line pattern.
    pub dash: Dash,
    /// Marker shape.
    pub marker: Marker,
    /// Line width in pixels.
    pub width: u32,
    /// The series' index (staggers its markers against the others').
    index: usize,
}

impl SeriesStyle {
    /// The style of the `i`-th series of a figure: colour, dash pattern and marker each cycled
    /// (periods 7, 4 and 8), so that the first seven series differ in all three and the first
    /// eight in marker and dash pattern together, which is what greyscale print keeps.
    pub fn nth(i: usize) -> Self {
        Self {
            colour: PALETTE[i % PALETTE.len()],
            dash: DASHES[i % DASHES.len()],
            marker: MARKERS[i % MARKERS.len()],
            width: 2,
            index: i,
        }
    }

    /// The same style with another line width.
    pub fn width(mut self, width: u32) -> Self {
        self.width = width;
        self
    }

    fn line(&self) -> ShapeStyle {
        self.colour.stroke_width(self.width)
    }
}

/// Draws one series: its pieces (each a run of points joined by lines; a gap between pieces
/// stays open) in its dash pattern, markers at regular intervals of the points, and, when
/// `label` is given, a legend entry showing the same line and marker.
pub fn draw_series<'a, DB, CT, P>(
    chart: &mut ChartContext<'a, DB, CT>,
    pieces: &[P],
    style: SeriesStyle,
    label: Option<&str>,
) -> Result<(), DrawingAreaErrorKind<DB::ErrorType>>
where
    DB: DrawingBackend + 'a,
    CT: CoordTranslate<From = (f64, f64)>,
    P: AsRef<[(f64, f64)]>,
{
    if let Some(label) = label {
        // An empty series carries the legend entry.
        chart
            .draw_series(std::iter::empty::<Glyph<(f64, f64)>>())?
            .label(label)
            .legend(move |at| Glyph::legend(at, style));
    }
    for piece in pieces.iter().map(P::as_ref).filter(|p| !p.is_empty()) {
        match style.dash {
            Dash::Solid => {
                chart.draw_series(LineSeries::new(piece.iter().copied(), style.line()))?;
            }
            Dash::Dashed { on, off } => {
                chart.draw_series(DashedLineSeries::new(
                    piece.iter().copied(),
                    on,
                    off,
                    style.line(),
                ))?;
            }
        }
    }
    let total: usize = pieces.iter().map(|p| p.as_ref().len()).sum();
    let stride = (total / MARKERS_PER_SERIES).max(1);
    let offset = (style.index * stride / 3) % stride;
    let at = pieces
        .iter()
        .flat_map(|p| p.as_ref())
        .skip(offset)
        .step_by(stride);
    chart.draw_series(at.map(|&p| Glyph::marker(p, style)))?;
    Ok(())
}

/// A series' marker at a point, or its legend sample (a short line in its pattern with the marker
/// in the middle) at a pixel: a plotters element of our own, drawn in pixels about the point.
struct Glyph<C> {
    at: C,
    style: SeriesStyle,
    line: bool,
}

impl<C> Glyph<C> {
    fn marker(at: C, style: SeriesStyle) -> Self {
        Self {
            at,
            style,
            line: false,
        }
    }
}

impl Glyph<BackendCoord> {
    fn legend(at: BackendCoord, style: SeriesStyle) -> Self {
        Self {
            at,
            style,
            line: true,
        }
    }
}

impl<'a, C: 'a> PointCollection<'a, C> for &'a Glyph<C> {
    type Point = &'a C;
    type IntoIter = std::iter::Once<&'a C>;
    fn point_iter(self) -> Self::IntoIter {
        std::iter::once(&self.at)
    }
}

impl<C, DB: DrawingBackend> Drawable<DB> for Glyph<C> {
    fn draw<I: Iterator<Item = BackendCoord>>(
        &self,
        mut pos: I,
        backend: &mut DB,
        _parent: (u32, u32),
    ) -> Result<(), DrawingErrorKind<DB::ErrorType>> {
        let Some((x, y)) = pos.next() else {
            return Ok(());
        };
        let style = self.style;
        let mut x_mark = x;
        if self.line {
            x_mark = x + LEGEND_LINE / 2;
            let line = style.line();
            match style.dash {
                Dash::Solid => backend.draw_line((x, y), (x + LEGEND_LINE, y), &line)?,
                Dash::Dashed { on, off } => {
                    // At least one repeat of the pattern must fit the sample.
                    let fit = |pixels: u32| (pixels as i32).clamp(1, LEGEND_LINE / 3);
                    let (on, off) = (fit(on), fit(off));
                    let mut s = 0;
                    while s < LEGEND_LINE {
                        let e = (s + on).min(LEGEND_LINE);
                        backend.draw_line((x + s, y), (x + e, y), &line)?;
                        s = e + off;
                    }
                }
            }
        }
        draw_marker(backend, style, (x_mark, y))
    }
}

/// Draws the marker of `style` centred on pixel `(x, y)`.
fn draw_marker<DB: DrawingBackend>(
    backend: &mut DB,
    style: SeriesStyle,
    (x, y): BackendCoord,
) -> Result<(), DrawingErrorKind<DB::ErrorType>> {
    let r = MARKER_RADIUS;
    let open = style.colour.stroke_width(1);
    let full = open.filled();
    let triangle = [
        (x, y - r - 1),
        (x + r + 1, y + r),
        (x - r - 1, y + r),
        (x, y - r - 1),
    ];
    let diamond = [
        (x, y - r - 1),
        (x + r + 1, y),
        (x, y + r + 1),
        (x - r - 1, y),
        (x, y - r - 1),
    ];
    let corners = ((x - r, y - r), (x + r, y + r));
    match style.marker {
        Marker::Circle => backend.draw_circle((x, y), r as u32, &open, false),
        Marker::Dot => backend.draw_circle((x, y), r as u32, &full, true),
        Marker::Triangle => backend.draw_path(triangle, &open),
        Marker::FilledTriangle => backend.fill_polygon(triangle, &full),
        Marker::Square => backend.draw_rect(corners.0, corners.1, &open, false),
        Marker::FilledSquare => backend.draw_rect(corners.0, corners.1, &full, true),
        Marker::Diamond => backend.draw_path(diamond, &open),
        Marker::Cross => {
            let thick = style.colour.stroke_width(2);
            backend.draw_line((x - r, y - r), (x + r, y + r), &thick)?;
            backend.draw_line((x - r, y + r), (x + r, y - r), &thick)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The first eight series differ in dash pattern and marker together (what greyscale print
    /// keeps), the first seven in colour too, and every series differs from the next in all
    /// three.
    #[test]
    fn series_differ_in_greyscale_and_in_colour() {
        let styles: Vec<SeriesStyle> = (0..64).map(SeriesStyle::nth).collect();
        for (i, a) in styles[..8].iter().enumerate() {
            for b in &styles[i + 1..8] {
                assert!((a.dash, a.marker) != (b.dash, b.marker), "{a:?} {b:?}");
            }
        }
        for (i, a) in styles[..7].iter().enumerate() {
            assert!(styles[i + 1..7].iter().all(|b| b.colour != a.colour));
        }
        for w in styles.windows(2) {
            assert_ne!(w[0].colour, w[1].colour);
            assert_ne!(w[0].dash, w[1].dash);
            assert_ne!(w[0].marker, w[1].marker);
        }
    }

    fn hex(c: RGBColor) -> String {
        format!("#{:02X}{:02X}{:02X}", c.0, c.1, c.2)
    }

    /// A figure of four series: each drawn in its palette colour, the dashed ones in many short
    /// pieces, markers on the points, and a legend entry each with its line and marker.
    #[test]
    fn a_figure_carries_colours_dashes_markers_and_legend() {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, (400, 300)).into_drawing_area();
            let mut chart = ChartBuilder::on(&root)
                .build_cartesian_2d(0.0..1.0, 0.0..1.0)
                .unwrap();
            for i in 0..4 {
                let line: Vec<(f64, f64)> = (0..=40)
                    .map(|k| (k as f64 / 40.0, 0.2 * i as f64 + 0.1))
                    .collect();
                let label = format!("series {i}");
                draw_series(&mut chart, &[line], SeriesStyle::nth(i), Some(&label)).unwrap();
            }
            chart.configure_series_labels().draw().unwrap();
            root.present().unwrap();
        }
        // 41 points: a marker every 41 / MARKERS_PER_SERIES = 4 points from the series' offset
        // (0, 1, 2, 0 for series 0..3), plus one in the legend.
        let markers = |offset: usize| (41 - offset).div_ceil(4) + 1;
        let count = |needle: String| svg.matches(&needle).count();
        let [c0, c1, c2, c3] = [0, 1, 2, 3].map(|i| hex(PALETTE[i]));
        // Series 0, solid with filled circles: one polyline, the legend's line, the circles.
        assert_eq!(count(format!("fill=\"{c0}\" stroke=\"none\"")), markers(0));
        assert_eq!(
            count(format!(
                "<polyline fill=\"none\" opacity=\"1\" stroke=\"{c0}\""
            )),
            1
        );
        // Series 1, long dashes with open circles.
        assert_eq!(count(format!("fill=\"none\" stroke=\"{c1}\"")), markers(1));
        assert_eq!(svg.matches("<circle").count(), markers(0) + markers(1));
        // Series 2, short dashes with open triangles (closed polylines of four points).
        let dashes = count(format!("stroke=\"{c2}\" stroke-width=\"2\""));
        assert!(
            dashes > 40,
            "{dashes} dashes over 400 pixels of 4 on, 4 off"
        );
        assert_eq!(
            count(format!("stroke=\"{c2}\" stroke-width=\"1\"")),
            markers(2),
            "triangles"
        );
        // Series 3, dots with open squares.
        assert_eq!(svg.matches("<rect").count(), markers(0));
        assert_eq!(count(format!("fill=\"none\" stroke=\"{c3}\"")), markers(0));
        for i in 0..4 {
            assert!(svg.contains(&format!("series {i}")), "legend entry {i}");
        }
    }
}
