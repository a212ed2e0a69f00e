//! Plots drawn with plotters' SVG backend, one module per plot, and what they share: the
//! layered chart ([`render`]), the marker shapes and line styles that carry meaning in print
//! (never colour alone), the time colour ramp and number formatting.
//!
//! # How a plot is put together
//! A plot is a [`Frame`] (size, caption, axes) and a list of [`Layer`]s, one per data series.
//! The frame's background, mesh and axis labels are drawn once; each layer is drawn by
//! plotters on a chart with the very same geometry (same size, margins, label areas and
//! ranges, the caption drawn transparent) and its elements are wrapped in
//! `<g class="series" data-series="NAME" data-points="N">`, so a reader of the SVG (a test,
//! a script) can find every series and count its points. Text is SVG `<text>` (plotters'
//! built-in text metrics, no font files).
//!
//! # Invariants
//! - The output depends only on the inputs (no time, no randomness): two runs are identical.
//! - Every value drawn is finite and inside the frame's ranges (callers filter; [`Frame`]
//!   ranges are widened when empty).

pub mod calibration;
pub mod drift;
pub mod residuals;
pub mod spread;
pub mod timeline;

use anyhow::{anyhow, Result};
use plotters::coord::types::RangedCoordf64;
use plotters::prelude::*;

use super::escape::escape;

/// The chart type every layer draws on.
pub type Chart<'a, 'b> =
    ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// One axis.
#[derive(Clone, Debug)]
pub struct Axis {
    /// Axis label (drawn as SVG text).
    pub label: String,
    /// Range of plotted values (for a log axis: of log10 of the values).
    pub range: (f64, f64),
    /// Values are log10 of the quantity; tick labels show the quantity.
    pub log: bool,
    /// Category names: integer coordinates are labelled with them (others are not labelled).
    pub categories: Option<Vec<String>>,
}

impl Axis {
    /// A linear axis over the finite values of `values` (padded by 5 %).
    pub fn linear(label: impl Into<String>, values: impl IntoIterator<Item = f64>) -> Self {
        Axis {
            label: label.into(),
            range: padded(span(values), 0.05),
            log: false,
            categories: None,
        }
    }
    /// A log axis over the positive finite values of `values` (padded by 5 % in log space).
    pub fn log(label: impl Into<String>, values: impl IntoIterator<Item = f64>) -> Self {
        let logs = values
            .into_iter()
            .filter(|v| v.is_finite() && *v > 0.0)
            .map(f64::log10);
        Axis {
            label: label.into(),
            range: padded(span(logs), 0.05),
            log: true,
            categories: None,
        }
    }
    /// The plotted coordinate of a value (log10 for a log axis), or `None` when it cannot
    /// be drawn on this axis.
    pub fn at(&self, value: f64) -> Option<f64> {
        let v = if self.log {
            if value > 0.0 {
                value.log10()
            } else {
                return None;
            }
        } else {
            value
        };
        v.is_finite().then_some(v)
    }
    /// The coordinate clamped into the range (for bands and lines that run off the plot).
    pub fn clamp(&self, coordinate: f64) -> f64 {
        coordinate.clamp(self.range.0, self.range.1)
    }
    /// True when a coordinate is inside the range.
    pub fn contains(&self, coordinate: f64) -> bool {
        coordinate >= self.range.0 && coordinate <= self.range.1
    }
}

/// The (min, max) of the finite values, `(0, 1)` when there are none.
pub fn span(values: impl IntoIterator<Item = f64>) -> (f64, f64) {
    let mut low = f64::INFINITY;
    let mut high = f64::NEG_INFINITY;
    for v in values.into_iter().filter(|v| v.is_finite()) {
        low = low.min(v);
        high = high.max(v);
    }
    if low > high {
        (0.0, 1.0)
    } else {
        (low, high)
    }
}

/// `(low, high)` widened by `fraction` of its width on each side (by 1 when empty).
pub fn padded((low, high): (f64, f64), fraction: f64) -> (f64, f64) {
    let width = high - low;
    if width > 0.0 && width.is_finite() {
        (low - fraction * width, high + fraction * width)
    } else {
        let pad = if low.abs() > 0.0 {
            low.abs() * 0.1
        } else {
            1.0
        };
        (low - pad, high + pad)
    }
}

/// A plot's size, caption and axes.
#[derive(Clone, Debug)]
pub struct Frame {
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
    /// Caption drawn at the top.
    pub caption: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// Width of the vertical axis' label area, pixels.
    pub y_label_area: u32,
}

/// Default width of the vertical axis' label area.
pub const Y_LABEL_AREA: u32 = 78;

/// Default plot size: fits a laptop screen (and an A4 page at 96 dpi with margins).
pub const WIDTH: u32 = 960;
/// Default plot height.
pub const HEIGHT: u32 = 420;

/// A drawing closure for one layer.
pub type Draw = Box<dyn for<'a, 'b> Fn(&mut Chart<'a, 'b>) -> Result<()>>;

/// One data series of a plot.
pub struct Layer {
    /// Series name (`data-series`).
    pub name: String,
    /// Number of data points (`data-points`): markers, bins, intervals or line vertices.
    pub points: usize,
    /// How it appears in the legend.
    pub legend: Legend,
    /// Draws it.
    pub draw: Draw,
}

/// A legend entry: the marker or line style and a description.
#[derive(Clone, Debug)]
pub struct Legend {
    /// The swatch.
    pub swatch: Swatch,
    /// The text (escaped when written).
    pub text: String,
}

/// What a legend swatch shows.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Swatch {
    /// A marker shape.
    Marker(Marker),
    /// A line with a dash pattern.
    Line(Dash),
    /// A filled band.
    Band,
    /// A hatched span (alarm interval).
    Span,
}

/// Marker shapes: each series of a scatter gets its own, so meaning survives print in grey.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Marker {
    /// Filled circle.
    Dot,
    /// Hollow triangle.
    Triangle,
    /// Diagonal cross.
    Cross,
    /// Hollow square.
    Square,
    /// Hollow circle.
    Ring,
}

impl Marker {
    /// The marker of the i-th series.
    pub fn nth(index: usize) -> Marker {
        [
            Marker::Dot,
            Marker::Triangle,
            Marker::Cross,
            Marker::Square,
            Marker::Ring,
        ][index % 5]
    }
    /// A word for the legend.
    pub fn word(self) -> &'static str {
        match self {
            Marker::Dot => "filled circles",
            Marker::Triangle => "triangles",
            Marker::Cross => "crosses",
            Marker::Square => "squares",
            Marker::Ring => "rings",
        }
    }
}

/// Line dash patterns.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Dash {
    /// Solid.
    Solid,
    /// Long dashes.
    Dashed,
    /// Short dots.
    Dotted,
}

/// Draws markers at plotted coordinates, each with its own colour.
pub fn draw_markers(
    chart: &mut Chart<'_, '_>,
    marker: Marker,
    points: &[(f64, f64, RGBColor)],
) -> Result<()> {
    let size = 3;
    let fail = |e| anyhow!("drawing markers: {e:?}");
    match marker {
        Marker::Dot => chart
            .draw_series(
                points
                    .iter()
                    .map(|&(x, y, c)| Circle::new((x, y), size, c.filled())),
            )
            .map(|_| ())
            .map_err(fail),
        Marker::Ring => chart
            .draw_series(
                points
                    .iter()
                    .map(|&(x, y, c)| Circle::new((x, y), size + 1, c.stroke_width(1))),
            )
            .map(|_| ())
            .map_err(fail),
        Marker::Triangle => chart
            .draw_series(
                points
                    .iter()
                    .map(|&(x, y, c)| TriangleMarker::new((x, y), size + 1, c.stroke_width(1))),
            )
            .map(|_| ())
            .map_err(fail),
        Marker::Cross => chart
            .draw_series(
                points
                    .iter()
                    .map(|&(x, y, c)| Cross::new((x, y), size, c.stroke_width(1))),
            )
            .map(|_| ())
            .map_err(fail),
        Marker::Square => chart
            .draw_series(points.iter().map(|&(x, y, c)| {
                EmptyElement::at((x, y))
                    + plotters::element::Rectangle::new(
                        [(-size, -size), (size, size)],
                        c.stroke_width(1),
                    )
            }))
            .map(|_| ())
            .map_err(fail),
    }
}

/// Draws a polyline with a dash pattern.
pub fn draw_line(
    chart: &mut Chart<'_, '_>,
    points: &[(f64, f64)],
    colour: RGBColor,
    width: u32,
    dash: Dash,
) -> Result<()> {
    let style = colour.stroke_width(width);
    let fail = |e| anyhow!("drawing a line: {e:?}");
    match dash {
        Dash::Solid => chart
            .draw_series(LineSeries::new(points.iter().copied(), style))
            .map(|_| ())
            .map_err(fail),
        Dash::Dashed => chart
            .draw_series(DashedLineSeries::new(points.iter().copied(), 9, 6, style))
            .map(|_| ())
            .map_err(fail),
        Dash::Dotted => chart
            .draw_series(DashedLineSeries::new(points.iter().copied(), 2, 5, style))
            .map(|_| ())
            .map_err(fail),
    }
}

/// Ink for lines and text: black and dark greys read in print.
pub const INK: RGBColor = RGBColor(0, 0, 0);
/// A mid grey for secondary lines.
pub const GREY: RGBColor = RGBColor(96, 96, 96);
/// Light grey fill for bands.
pub const BAND: RGBColor = RGBColor(200, 200, 200);
/// Fill of alarm intervals.
pub const ALARM_FILL: RGBColor = RGBColor(230, 170, 150);

/// A time colour ramp (dark violet → blue → green → yellow, lightness increasing
/// monotonically, so it reads as dark = early, light = late in grey print too). Sampled from
/// the viridis colour map (matplotlib's default): each channel within one unit of the eight
/// control points of plotters 0.3.7 `colormaps::ViridisRGB`.
pub const RAMP: [RGBColor; 8] = [
    RGBColor(68, 1, 84),
    RGBColor(70, 50, 127),
    RGBColor(54, 92, 141),
    RGBColor(39, 127, 142),
    RGBColor(31, 161, 135),
    RGBColor(74, 193, 109),
    RGBColor(160, 218, 57),
    RGBColor(253, 231, 37),
];

/// The ramp colour for a time fraction in [0, 1].
pub fn ramp(fraction: f64) -> RGBColor {
    let f = if fraction.is_finite() {
        fraction.clamp(0.0, 1.0)
    } else {
        0.0
    };
    RAMP[((f * RAMP.len() as f64) as usize).min(RAMP.len() - 1)]
}

/// A number in a few significant digits, no exponent for everyday magnitudes.
pub fn short(value: f64) -> String {
    if !value.is_finite() {
        return "-".into();
    }
    let magnitude = value.abs();
    if magnitude == 0.0 {
        "0".into()
    } else if !(1e-3..1e6).contains(&magnitude) {
        format!("{value:.2e}")
    } else {
        let decimals = (3 - magnitude.log10().floor() as i32).clamp(0, 6) as usize;
        let text = format!("{value:.decimals$}");
        if text.contains('.') {
            text.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            text
        }
    }
}

fn tick_label(axis: &Axis, value: f64) -> String {
    if let Some(names) = &axis.categories {
        let index = value.round();
        return if (value - index).abs() < 1e-9 && index >= 0.0 {
            names.get(index as usize).cloned().unwrap_or_default()
        } else {
            String::new()
        };
    }
    if axis.log {
        short(10f64.powf(value))
    } else {
        short(value)
    }
}

fn build<'a, 'b>(
    root: &'a DrawingArea<SVGBackend<'b>, plotters::coord::Shift>,
    frame: &Frame,
    caption_colour: RGBAColor,
) -> Result<Chart<'a, 'b>> {
    let caption_style = TextStyle::from(("sans-serif", 18).into_font()).color(&caption_colour);
    ChartBuilder::on(root)
        .margin(12)
        .caption(&frame.caption, caption_style)
        .x_label_area_size(48)
        .y_label_area_size(frame.y_label_area)
        .build_cartesian_2d(
            frame.x.range.0..frame.x.range.1,
            frame.y.range.0..frame.y.range.1,
        )
        .map_err(|e| anyhow!("building a chart: {e:?}"))
}

/// The inside of an `<svg>` document written by plotters (without the outer element).
fn inner(svg: &str) -> &str {
    let start = svg.find('>').map_or(0, |i| i + 1);
    let end = svg.rfind("</svg>").unwrap_or(svg.len());
    svg[start..end].trim_matches('\n')
}

/// A rendered plot: the SVG element (no XML declaration) and its legend.
#[derive(Clone, Debug)]
pub struct Figure {
    /// Identifier (`data-plot`).
    pub id: &'static str,
    /// Heading shown above it.
    pub title: String,
    /// The SVG element.
    pub svg: String,
    /// Legend entries.
    pub legend: Vec<Legend>,
    /// What the plot shows and how to read it (plain text, escaped when written).
    pub note: String,
    /// Series names and point counts.
    pub series: Vec<(String, usize)>,
}

/// Renders a frame and its layers into a [`Figure`].
pub fn render(
    id: &'static str,
    title: impl Into<String>,
    note: impl Into<String>,
    frame: &Frame,
    layers: Vec<Layer>,
    extra: Option<Draw>,
) -> Result<Figure> {
    let size = (frame.width, frame.height);
    let mut base = String::new();
    {
        let root = SVGBackend::with_string(&mut base, size).into_drawing_area();
        root.fill(&WHITE).map_err(|e| anyhow!("{e:?}"))?;
        let mut chart = build(&root, frame, INK.to_rgba())?;
        let (x, y) = (frame.x.clone(), frame.y.clone());
        let x_format = move |v: &f64| tick_label(&x, *v);
        let y_format = move |v: &f64| tick_label(&y, *v);
        chart
            .configure_mesh()
            .x_desc(frame.x.label.as_str())
            .y_desc(frame.y.label.as_str())
            .x_labels(8)
            .y_labels(7)
            .x_label_formatter(&x_format)
            .y_label_formatter(&y_format)
            .label_style(("sans-serif", 13))
            .axis_desc_style(("sans-serif", 15))
            .light_line_style(RGBColor(235, 235, 235))
            .bold_line_style(RGBColor(215, 215, 215))
            .draw()
            .map_err(|e| anyhow!("drawing the mesh: {e:?}"))?;
        if let Some(extra) = &extra {
            extra(&mut chart)?;
        }
        root.present().map_err(|e| anyhow!("{e:?}"))?;
    }
    let mut groups = String::new();
    let mut series = Vec::new();
    let mut legend = Vec::new();
    for layer in &layers {
        let mut svg = String::new();
        {
            let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
            let mut chart = build(&root, frame, RGBAColor(0, 0, 0, 0.0))?;
            (layer.draw)(&mut chart)?;
            root.present().map_err(|e| anyhow!("{e:?}"))?;
        }
        groups.push_str(&format!(
            "<g class=\"series\" data-series=\"{}\" data-points=\"{}\">\n{}\n</g>\n",
            escape(&layer.name),
            layer.points,
            inner(&svg)
        ));
        series.push((layer.name.clone(), layer.points));
        legend.push(layer.legend.clone());
    }
    let open_end = base.find('>').map_or(0, |i| i + 1);
    let svg = format!(
        "<svg class=\"plot\" data-plot=\"{id}\" role=\"img\" aria-label=\"{}\" data-x-label=\"{}\" data-y-label=\"{}\"{}\n<g class=\"frame\">\n{}\n</g>\n{}</svg>",
        escape(&frame.caption),
        escape(&frame.x.label),
        escape(&frame.y.label),
        &base[4..open_end],
        inner(&base),
        groups
    );
    Ok(Figure {
        id,
        title: title.into(),
        svg,
        legend,
        note: note.into(),
        series,
    })
}
