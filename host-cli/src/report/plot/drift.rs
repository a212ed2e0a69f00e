//! One calibration parameter (gain or offset) over time, with its ±2 standard-uncertainty
//! envelope, the baseline it is compared with, the engineering tolerance band around the
//! baseline (`detect.drift.gain_tolerance_percent`, `detect.drift.offset_tolerance`) and the
//! intervals during which a drift alarm was raised.

use anyhow::{anyhow, Result};
use plotters::prelude::*;

use super::{
    draw_line, render, short, Axis, Dash, Figure, Frame, Layer, Legend, Swatch, ALARM_FILL, BAND,
    GREY, HEIGHT, INK, WIDTH,
};

/// What to draw.
#[derive(Clone, Debug)]
pub struct DriftPlot {
    /// Identifier (`gain`, `offset`).
    pub id: &'static str,
    /// Parameter name.
    pub name: String,
    /// Vertical axis label.
    pub y_label: String,
    /// Horizontal axis label.
    pub x_label: String,
    /// Points `(time, value, standard uncertainty)` (time already in display units).
    pub points: Vec<(f64, f64, f64)>,
    /// Points before this index (the warm-up) do not set the vertical range (they are
    /// drawn clamped to it).
    pub settled_from: usize,
    /// Baseline value.
    pub baseline: Option<f64>,
    /// Tolerance band `(low, high)` around the baseline, and its description.
    pub tolerance: Option<(f64, f64, String)>,
    /// Alarm intervals `(start, end, label)` in display time.
    pub alarms: Vec<(f64, f64, String)>,
    /// Reading note.
    pub note: String,
}

/// Renders the plot.
pub fn plot(spec: &DriftPlot) -> Result<Figure> {
    let settled = if spec.settled_from < spec.points.len() {
        &spec.points[spec.settled_from..]
    } else {
        &spec.points[..]
    };
    let values = settled
        .iter()
        .flat_map(|p| [p.1, p.1 - 2.0 * p.2, p.1 + 2.0 * p.2])
        .chain(spec.baseline)
        .chain(spec.tolerance.iter().flat_map(|t| [t.0, t.1]));
    let times = spec
        .points
        .iter()
        .map(|p| p.0)
        .chain(spec.alarms.iter().flat_map(|a| [a.0, a.1]));
    let frame = Frame {
        width: WIDTH,
        height: 340,
        caption: format!("{} over time", spec.name),
        x: Axis::linear(spec.x_label.clone(), times),
        y: Axis::linear(spec.y_label.clone(), values),
        y_label_area: super::Y_LABEL_AREA,
    };
    let _ = HEIGHT;
    let (fx, fy) = (frame.x.clone(), frame.y.clone());
    let (t0, t1) = fx.range;
    let mut layers = Vec::new();
    {
        let spans: Vec<(f64, f64, String)> = spec
            .alarms
            .iter()
            .filter(|a| a.0.is_finite() && a.1.is_finite())
            .cloned()
            .collect();
        let n = spans.len();
        let (y0, y1) = fy.range;
        layers.push(Layer {
            name: "alarm intervals".into(),
            points: n,
            legend: Legend {
                swatch: Swatch::Span,
                text: format!("drift alarm raised ({n} intervals, outlined and labelled)"),
            },
            draw: Box::new(move |chart| {
                for (start, end, label) in &spans {
                    let (a, b) = (fx.clamp(*start), fx.clamp(end.max(*start)));
                    chart
                        .draw_series([
                            Rectangle::new([(a, y0), (b, y1)], ALARM_FILL.mix(0.5).filled()),
                            Rectangle::new([(a, y0), (b, y1)], INK.stroke_width(1)),
                        ])
                        .map_err(|e| anyhow!("{e:?}"))?;
                    chart
                        .draw_series(std::iter::once(Text::new(
                            label.clone(),
                            (a, y1 - 0.02 * (y1 - y0)),
                            ("sans-serif", 12).into_font().color(&INK),
                        )))
                        .map_err(|e| anyhow!("{e:?}"))?;
                }
                Ok(())
            }),
        });
    }
    if let Some((low, high, description)) = &spec.tolerance {
        let (low, high) = (fy.clamp(*low), fy.clamp(*high));
        layers.push(Layer {
            name: "tolerance band".into(),
            points: 1,
            legend: Legend {
                swatch: Swatch::Band,
                text: description.clone(),
            },
            draw: Box::new(move |chart| {
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(t0, low), (t1, high)],
                        BAND.mix(0.6).filled(),
                    )))
                    .map(|_| ())
                    .map_err(|e| anyhow!("{e:?}"))?;
                draw_line(chart, &[(t0, low), (t1, low)], GREY, 1, Dash::Dotted)?;
                draw_line(chart, &[(t0, high), (t1, high)], GREY, 1, Dash::Dotted)
            }),
        });
    }
    if let Some(baseline) = spec.baseline {
        layers.push(Layer {
            name: "baseline".into(),
            points: 1,
            legend: Legend {
                swatch: Swatch::Line(Dash::Dashed),
                text: format!(
                    "baseline {} = {}",
                    spec.name.to_lowercase(),
                    short(baseline)
                ),
            },
            draw: Box::new(move |chart| {
                draw_line(
                    chart,
                    &[(t0, baseline), (t1, baseline)],
                    INK,
                    1,
                    Dash::Dashed,
                )
            }),
        });
    }
    let line: Vec<(f64, f64)> = spec
        .points
        .iter()
        .filter(|p| p.0.is_finite() && p.1.is_finite())
        .map(|p| (p.0, fy.clamp(p.1)))
        .collect();
    let upper: Vec<(f64, f64)> = spec
        .points
        .iter()
        .filter(|p| p.0.is_finite() && (p.1 + 2.0 * p.2).is_finite())
        .map(|p| (p.0, fy.clamp(p.1 + 2.0 * p.2)))
        .collect();
    let lower: Vec<(f64, f64)> = spec
        .points
        .iter()
        .filter(|p| p.0.is_finite() && (p.1 - 2.0 * p.2).is_finite())
        .map(|p| (p.0, fy.clamp(p.1 - 2.0 * p.2)))
        .collect();
    layers.push(Layer {
        name: "±2u".into(),
        points: upper.len(),
        legend: Legend {
            swatch: Swatch::Line(Dash::Solid),
            text: "thin grey lines: value ± 2 standard uncertainties".into(),
        },
        draw: Box::new(move |chart| {
            draw_line(chart, &upper, GREY, 1, Dash::Solid)?;
            draw_line(chart, &lower, GREY, 1, Dash::Solid)
        }),
    });
    let n = line.len();
    layers.push(Layer {
        name: spec.id.into(),
        points: n,
        legend: Legend {
            swatch: Swatch::Line(Dash::Solid),
            text: format!(
                "{} of the active calibration after each check ({n} points drawn)",
                spec.name
            ),
        },
        draw: Box::new(move |chart| draw_line(chart, &line, INK, 2, Dash::Solid)),
    });
    render(
        spec.id,
        format!("{} over time", spec.name),
        spec.note.clone(),
        &frame,
        layers,
        None,
    )
}
