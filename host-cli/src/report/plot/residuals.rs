//! Residuals against fitted level (log axis), coloured by time, one marker shape per rung
//! segment: the picture that shows whether the scatter tracks the level, before and after
//! the transform switch.

use anyhow::Result;

use super::{
    draw_line, draw_markers, ramp, render, Axis, Dash, Draw, Figure, Frame, Layer, Legend, Marker,
    Swatch, GREY, HEIGHT, WIDTH,
};

/// One series: points `(level, value, time fraction in [0, 1])`.
#[derive(Clone, Debug)]
pub struct ScatterSeries {
    /// Name (`data-series`), e.g. `rung identity`.
    pub name: String,
    /// What the legend says.
    pub description: String,
    /// Points.
    pub points: Vec<(f64, f64, f64)>,
}

/// What to draw.
pub struct ResidualPlot<'a> {
    /// Identifier.
    pub id: &'static str,
    /// Heading.
    pub title: String,
    /// Reading note.
    pub note: String,
    /// Caption inside the SVG.
    pub caption: String,
    /// Horizontal axis label.
    pub x_label: String,
    /// Vertical axis label.
    pub y_label: String,
    /// Series in order.
    pub series: &'a [ScatterSeries],
    /// Horizontal reference lines `(y, dash)`.
    pub guides: Vec<(f64, Dash)>,
}

/// Renders the plot.
pub fn plot(spec: &ResidualPlot<'_>) -> Result<Figure> {
    let all = || spec.series.iter().flat_map(|s| s.points.iter());
    let x = Axis::log(spec.x_label.clone(), all().map(|p| p.0));
    let mut y = Axis::linear(
        spec.y_label.clone(),
        all().map(|p| p.1).chain(spec.guides.iter().map(|g| g.0)),
    );
    if !x.range.0.is_finite() {
        y.range = (0.0, 1.0);
    }
    let frame = Frame {
        width: WIDTH,
        height: HEIGHT,
        caption: spec.caption.clone(),
        x,
        y,
        y_label_area: super::Y_LABEL_AREA,
    };
    let guides = spec.guides.clone();
    let (x0, x1) = frame.x.range;
    let extra: Draw = Box::new(move |chart| {
        for &(value, dash) in &guides {
            draw_line(chart, &[(x0, value), (x1, value)], GREY, 1, dash)?;
        }
        Ok(())
    });
    let mut layers = Vec::new();
    for (index, series) in spec.series.iter().enumerate() {
        let marker = Marker::nth(index);
        let points: Vec<(f64, f64, plotters::style::RGBColor)> = series
            .points
            .iter()
            .filter_map(|&(level, value, time)| {
                let px = frame.x.at(level)?;
                (value.is_finite() && frame.y.contains(value) && frame.x.contains(px))
                    .then(|| (px, value, ramp(time)))
            })
            .collect();
        layers.push(Layer {
            name: series.name.clone(),
            points: points.len(),
            legend: Legend {
                swatch: Swatch::Marker(marker),
                text: format!(
                    "{} ({}, {} points drawn)",
                    series.description,
                    marker.word(),
                    points.len()
                ),
            },
            draw: Box::new(move |chart| draw_markers(chart, marker, &points)),
        });
    }
    render(
        spec.id,
        spec.title.clone(),
        spec.note.clone(),
        &frame,
        layers,
        Some(extra),
    )
}
