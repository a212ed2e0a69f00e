//! Timeline of events and alarms: one row per event kind; alarm intervals as outlined bars,
//! raises as triangles, clears as rings, other events as crosses.

use anyhow::{anyhow, Result};
use plotters::prelude::*;

use super::{
    draw_markers, render, Axis, Figure, Frame, Layer, Legend, Marker, Swatch, ALARM_FILL, INK,
    WIDTH,
};

/// What to draw.
#[derive(Clone, Debug)]
pub struct TimelinePlot {
    /// Row names (event kinds), top row first.
    pub rows: Vec<String>,
    /// Alarm intervals `(row, start, end)` in display time.
    pub intervals: Vec<(usize, f64, f64)>,
    /// Raises `(row, time)`.
    pub raises: Vec<(usize, f64)>,
    /// Clears `(row, time)`.
    pub clears: Vec<(usize, f64)>,
    /// Other events `(row, time)`.
    pub others: Vec<(usize, f64)>,
    /// Time axis label.
    pub x_label: String,
    /// Time span to show.
    pub span: (f64, f64),
    /// Reading note.
    pub note: String,
}

/// Renders the plot.
pub fn plot(spec: &TimelinePlot) -> Result<Figure> {
    let rows = spec.rows.len().max(1);
    // Rows are drawn top to bottom: row i at y = rows − 1 − i.
    let names: Vec<String> = (0..rows)
        .map(|y| spec.rows.get(rows - 1 - y).cloned().unwrap_or_default())
        .collect();
    let y_of = move |row: usize| (rows - 1 - row.min(rows - 1)) as f64;
    let frame = Frame {
        width: WIDTH,
        height: (90 + 34 * rows as u32).max(180),
        caption: "Timeline of events and alarms".into(),
        x: Axis::linear(spec.x_label.clone(), [spec.span.0, spec.span.1]),
        y: Axis {
            label: "event kind".into(),
            range: (-0.6, rows as f64 - 0.4),
            log: false,
            categories: Some(names),
        },
        y_label_area: 150,
    };
    let fx = frame.x.clone();
    let mut layers = Vec::new();
    let intervals: Vec<(f64, f64, f64)> = spec
        .intervals
        .iter()
        .filter(|i| i.1.is_finite() && i.2.is_finite())
        .map(|&(row, a, b)| (y_of(row), fx.clamp(a), fx.clamp(b.max(a))))
        .collect();
    let n = intervals.len();
    layers.push(Layer {
        name: "alarm intervals".into(),
        points: n,
        legend: Legend {
            swatch: Swatch::Span,
            text: format!("alarm raised ({n} intervals)"),
        },
        draw: Box::new(move |chart| {
            for &(y, a, b) in &intervals {
                chart
                    .draw_series([
                        Rectangle::new([(a, y - 0.3), (b, y + 0.3)], ALARM_FILL.filled()),
                        Rectangle::new([(a, y - 0.3), (b, y + 0.3)], INK.stroke_width(1)),
                    ])
                    .map_err(|e| anyhow!("{e:?}"))?;
            }
            Ok(())
        }),
    });
    for (name, marker, list, text) in [
        (
            "raises",
            Marker::Triangle,
            &spec.raises,
            "alarm raised (triangles)",
        ),
        (
            "clears",
            Marker::Ring,
            &spec.clears,
            "alarm cleared (rings)",
        ),
        (
            "events",
            Marker::Cross,
            &spec.others,
            "other events (crosses)",
        ),
    ] {
        let points: Vec<(f64, f64, RGBColor)> = list
            .iter()
            .filter(|p| p.1.is_finite())
            .map(|&(row, t)| (fx.clamp(t), y_of(row), INK))
            .collect();
        let n = points.len();
        layers.push(Layer {
            name: name.into(),
            points: n,
            legend: Legend {
                swatch: Swatch::Marker(marker),
                text: format!("{text}, {n} drawn"),
            },
            draw: Box::new(move |chart| draw_markers(chart, marker, &points)),
        });
    }
    render(
        "timeline",
        "Timeline of events and alarms",
        spec.note.clone(),
        &frame,
        layers,
        None,
    )
}
