//! The calibration curve (raw output against reference, in reference units on the horizontal
//! axis) over the working range, with its expanded-uncertainty band drawn horizontally
//! (each raw output read back as `value ± U`), the checks or lab standards it was fitted to,
//! and for a lab assessment the limits of detection and quantification.

use anyhow::{anyhow, Result};
use plotters::prelude::*;

use super::{
    draw_line, draw_markers, render, short, Axis, Dash, Figure, Frame, Layer, Legend, Marker,
    Swatch, BAND, GREY, HEIGHT, INK, WIDTH,
};

/// What to draw.
#[derive(Clone, Debug)]
pub struct CalibrationPlot {
    /// Data `(reference, raw)`.
    pub points: Vec<(f64, f64)>,
    /// What the data points are (`checks`, `standards`).
    pub points_name: String,
    /// The curve `(reference, raw)` over the working range.
    pub curve: Vec<(f64, f64)>,
    /// The band: `(raw, value, expanded uncertainty)` ascending in raw.
    pub band: Vec<(f64, f64, f64)>,
    /// Coverage factor of the band.
    pub coverage_factor: f64,
    /// Limit of detection and of quantification (reference units).
    pub limits: Option<(f64, f64)>,
    /// Reference unit label.
    pub x_label: String,
    /// Raw unit label.
    pub y_label: String,
    /// Reading note.
    pub note: String,
}

/// Renders the plot.
pub fn plot(spec: &CalibrationPlot) -> Result<Figure> {
    let finite = |p: &(f64, f64)| p.0.is_finite() && p.1.is_finite();
    let band: Vec<(f64, f64, f64)> = spec
        .band
        .iter()
        .copied()
        .filter(|b| b.0.is_finite() && b.1.is_finite() && b.2.is_finite())
        .collect();
    let xs = spec
        .curve
        .iter()
        .filter(|p| finite(p))
        .map(|p| p.0)
        .chain(band.iter().flat_map(|b| [b.1 - b.2, b.1 + b.2]))
        .chain(spec.points.iter().filter(|p| finite(p)).map(|p| p.0))
        .chain(spec.limits.iter().flat_map(|l| [l.0, l.1]));
    let ys = spec
        .curve
        .iter()
        .filter(|p| finite(p))
        .map(|p| p.1)
        .chain(spec.points.iter().filter(|p| finite(p)).map(|p| p.1));
    let frame = Frame {
        width: WIDTH,
        height: HEIGHT,
        caption: "Calibration curve with expanded-uncertainty band".into(),
        x: Axis::linear(spec.x_label.clone(), xs),
        y: Axis::linear(spec.y_label.clone(), ys),
        y_label_area: super::Y_LABEL_AREA,
    };
    let (fx, fy) = (frame.x.clone(), frame.y.clone());
    let mut layers = Vec::new();
    if band.len() >= 2 {
        let mut polygon: Vec<(f64, f64)> = band
            .iter()
            .map(|b| (fx.clamp(b.1 - b.2), fy.clamp(b.0)))
            .collect();
        polygon.extend(
            band.iter()
                .rev()
                .map(|b| (fx.clamp(b.1 + b.2), fy.clamp(b.0))),
        );
        let n = band.len();
        layers.push(Layer {
            name: "uncertainty band".into(),
            points: n,
            legend: Legend {
                swatch: Swatch::Band,
                text: format!(
                    "expanded uncertainty of a reading, value ± U (k = {}), at {n} levels",
                    short(spec.coverage_factor)
                ),
            },
            draw: Box::new(move |chart| {
                chart
                    .draw_series(std::iter::once(Polygon::new(
                        polygon.clone(),
                        BAND.filled(),
                    )))
                    .map(|_| ())
                    .map_err(|e| anyhow!("{e:?}"))
            }),
        });
    }
    let points: Vec<(f64, f64, RGBColor)> = spec
        .points
        .iter()
        .filter(|p| finite(p) && fx.contains(p.0) && fy.contains(p.1))
        .map(|p| (p.0, p.1, GREY))
        .collect();
    let n = points.len();
    layers.push(Layer {
        name: spec.points_name.clone(),
        points: n,
        legend: Legend {
            swatch: Swatch::Marker(Marker::Ring),
            text: format!("{} ({n} drawn)", spec.points_name),
        },
        draw: Box::new(move |chart| draw_markers(chart, Marker::Ring, &points)),
    });
    let curve: Vec<(f64, f64)> = spec
        .curve
        .iter()
        .copied()
        .filter(|p| finite(p) && fx.contains(p.0) && fy.contains(p.1))
        .collect();
    let n = curve.len();
    layers.push(Layer {
        name: "calibration curve".into(),
        points: n,
        legend: Legend {
            swatch: Swatch::Line(Dash::Solid),
            text: "calibration curve (mean raw output at each reference value)".into(),
        },
        draw: Box::new(move |chart| draw_line(chart, &curve, INK, 2, Dash::Solid)),
    });
    if let Some((lod, loq)) = spec.limits {
        for (name, value, dash) in [("LOD", lod, Dash::Dashed), ("LOQ", loq, Dash::Dotted)] {
            if !(value.is_finite() && fx.contains(value)) {
                continue;
            }
            let line = vec![(value, fy.range.0), (value, fy.range.1)];
            let drop = if name == "LOD" { 0.06 } else { 0.12 };
            let label_y = fy.range.1 - drop * (fy.range.1 - fy.range.0);
            layers.push(Layer {
                name: name.into(),
                points: 1,
                legend: Legend {
                    swatch: Swatch::Line(dash),
                    text: format!(
                        "{} = {} (reference units)",
                        if name == "LOD" {
                            "limit of detection"
                        } else {
                            "limit of quantification"
                        },
                        short(value)
                    ),
                },
                draw: Box::new(move |chart| {
                    draw_line(chart, &line, INK, 1, dash)?;
                    chart
                        .draw_series(std::iter::once(Text::new(
                            name,
                            (value, label_y),
                            ("sans-serif", 13).into_font().color(&INK),
                        )))
                        .map(|_| ())
                        .map_err(|e| anyhow!("{e:?}"))
                }),
            });
        }
    }
    render(
        "calibration",
        "Calibration curve",
        spec.note.clone(),
        &frame,
        layers,
        None,
    )
}
