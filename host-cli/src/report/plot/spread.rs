//! Spread against level on log–log axes: the residual SD of each level bin with its error
//! bar, the fitted exponent line `SD ∝ level^k`, the line of the exponent the chosen rung
//! assumes (`k = 1 − λ`), and in the note the transform that would make the scatter flat
//! (`λ = 1 − k`).

use anyhow::{anyhow, Result};
use plotters::prelude::*;

use super::{
    draw_line, draw_markers, render, short, Axis, Dash, Figure, Frame, Layer, Legend, Marker,
    Swatch, GREY, HEIGHT, INK, WIDTH,
};

/// One level bin.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SpreadBin {
    /// Representative level (geometric mean).
    pub level: f64,
    /// Residual SD.
    pub sd: f64,
    /// Standard error of the SD.
    pub se: f64,
    /// Residuals in the bin.
    pub count: f64,
}

/// What to draw.
#[derive(Clone, Debug)]
pub struct SpreadPlot {
    /// Bins with a usable SD.
    pub bins: Vec<SpreadBin>,
    /// Fitted exponent and its standard error, and where it comes from.
    pub exponent: Option<(f64, f64, String)>,
    /// The chosen rung's name and λ.
    pub rung: Option<(String, f64)>,
    /// Horizontal axis label.
    pub x_label: String,
}

/// Least-squares intercept of `ln sd − k ln level` weighted by `count − 1`.
fn anchor(bins: &[SpreadBin], k: f64) -> f64 {
    let (mut sum, mut weight) = (0.0, 0.0);
    for bin in bins {
        let w = (bin.count - 1.0).max(1.0);
        sum += w * (bin.sd.ln() - k * bin.level.ln());
        weight += w;
    }
    if weight > 0.0 {
        sum / weight
    } else {
        0.0
    }
}

/// Renders the plot.
pub fn plot(spec: &SpreadPlot) -> Result<Figure> {
    let bins: Vec<SpreadBin> = spec
        .bins
        .iter()
        .copied()
        .filter(|b| b.level > 0.0 && b.sd > 0.0 && b.level.is_finite() && b.sd.is_finite())
        .collect();
    let x = Axis::log(spec.x_label.clone(), bins.iter().map(|b| b.level));
    let y = Axis::log(
        "residual SD (raw units, log scale)",
        bins.iter()
            .flat_map(|b| [b.sd, (b.sd - b.se).max(b.sd * 0.2), b.sd + b.se]),
    );
    let frame = Frame {
        width: WIDTH,
        height: HEIGHT,
        caption: "Spread against level".into(),
        x,
        y,
        y_label_area: super::Y_LABEL_AREA,
    };
    let mut layers = Vec::new();
    {
        let (fx, fy) = (frame.x.clone(), frame.y.clone());
        let points: Vec<(f64, f64, f64)> = bins
            .iter()
            .filter_map(|b| {
                let px = fx.at(b.level)?;
                let py = fy.at(b.sd)?;
                let low = fy.clamp(fy.at((b.sd - b.se).max(b.sd * 0.2)).unwrap_or(py));
                let high = fy.clamp(fy.at(b.sd + b.se).unwrap_or(py));
                fx.contains(px).then_some((px, low.min(py), high.max(py)))
            })
            .collect();
        let centres: Vec<(f64, f64, RGBColor)> = bins
            .iter()
            .filter_map(|b| Some((fx.at(b.level)?, fy.at(b.sd)?, INK)))
            .filter(|p| fx.contains(p.0))
            .collect();
        let count = centres.len();
        layers.push(Layer {
            name: "bin SD".into(),
            points: count,
            legend: Legend {
                swatch: Swatch::Marker(Marker::Dot),
                text: format!("residual SD of each level bin, ± one standard error ({count} bins)"),
            },
            draw: Box::new(move |chart| {
                chart
                    .draw_series(points.iter().map(|&(x, low, high)| {
                        PathElement::new(vec![(x, low), (x, high)], INK.stroke_width(1))
                    }))
                    .map_err(|e| anyhow!("{e:?}"))?;
                draw_markers(chart, Marker::Dot, &centres)
            }),
        });
    }
    let mut note = String::from(
        "Each point is the SD of the raw residuals in one level bin; a flat row of points means constant scatter, a slope of 1 means scatter proportional to the level.",
    );
    let line = |k: f64| -> Vec<(f64, f64)> {
        let c = anchor(&bins, k);
        let (l0, l1) = frame.x.range;
        (0..=24)
            .map(|i| l0 + (l1 - l0) * i as f64 / 24.0)
            .filter_map(|lx| {
                let ly = (c + k * lx * std::f64::consts::LN_10) / std::f64::consts::LN_10;
                frame.y.contains(ly).then_some((lx, ly))
            })
            .collect()
    };
    if let Some((k, se, source)) = &spec.exponent {
        if k.is_finite() && !bins.is_empty() {
            let points = line(*k);
            let n = points.len();
            layers.push(Layer {
                name: "fitted exponent".into(),
                points: n,
                legend: Legend {
                    swatch: Swatch::Line(Dash::Solid),
                    text: format!(
                        "fitted SD ∝ level^k, k = {} ± {} ({source})",
                        short(*k),
                        short(*se)
                    ),
                },
                draw: Box::new(move |chart| draw_line(chart, &points, INK, 2, Dash::Solid)),
            });
            note.push_str(&format!(
                " Fitted k = {} ± {}: the power transform that would make the scatter flat is λ = 1 − k = {}.",
                short(*k),
                short(*se),
                short(1.0 - k)
            ));
        }
    }
    if let Some((name, lambda)) = &spec.rung {
        if !bins.is_empty() {
            let k = 1.0 - lambda;
            let points = line(k);
            let n = points.len();
            layers.push(Layer {
                name: format!("rung {name}"),
                points: n,
                legend: Legend {
                    swatch: Swatch::Line(Dash::Dashed),
                    text: format!(
                        "rung chosen: {name} (λ = {}), flat when k = {}",
                        short(*lambda),
                        short(k)
                    ),
                },
                draw: Box::new(move |chart| draw_line(chart, &points, GREY, 2, Dash::Dashed)),
            });
            note.push_str(&format!(
                " The rung chosen is {name} (λ = {}), which assumes k = {}.",
                short(*lambda),
                short(k)
            ));
        }
    }
    render("spread", "Spread against level", note, &frame, layers, None)
}
