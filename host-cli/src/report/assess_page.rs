//! The report page of a lab assessment (`assess --report`): one function per section and per
//! figure, composed by [`assess_report`].

use anyhow::Result;

use super::plot::calibration::CalibrationPlot;
use super::plot::residuals::{ResidualPlot, ScatterSeries};
use super::plot::spread::{SpreadBin, SpreadPlot};
use super::plot::{short, Dash, Figure};
use super::{base_cautions, display, html, plot, rung_lambda};
use crate::assess::{self, Assessment, CalibrationData};

/// The report page of a lab assessment of `data` (from `file`).
pub fn assess_report(
    file: &str,
    data: &CalibrationData,
    assessment: &Assessment,
    options: &assess::AssessOptions,
) -> Result<String> {
    let mut figures: Vec<(Figure, bool)> = vec![
        (calibration_figure(data, assessment, options)?, false),
        (residual_figure(data, assessment)?, true),
    ];
    if let Some(figure) = spread_figure(assessment)? {
        figures.push((figure, false));
    }
    let mut cautions = base_cautions();
    cautions.extend(assessment.notes.iter().cloned());
    let mut plots_body = String::new();
    for (figure, ramp) in &figures {
        plots_body.push_str(&html::figure(figure, *ramp));
    }
    let sections = vec![
        ("Plots".to_string(), plots_body),
        (
            "Summary".to_string(),
            html::key_values("summary", &summary_rows(file, assessment)?),
        ),
        ("Inverse prediction".to_string(), inverse_table(assessment)),
        (
            "Configuration used".to_string(),
            configuration(assessment, options),
        ),
    ];
    Ok(html::page(
        &format!("steadycal lab assessment report: {file}"),
        &format!(
            "{} observations at {} reference levels; recommended rung {}",
            assessment.observations, assessment.reference_levels, assessment.recommended
        ),
        &cautions,
        &sections,
    ))
}

/// The headline fit over the standards' range with the expanded uncertainty of a single
/// reading read back through it, and the limits marked.
fn calibration_figure(
    data: &CalibrationData,
    assessment: &Assessment,
    options: &assess::AssessOptions,
) -> Result<Figure> {
    let model = assess::CalibrationModel {
        basis: assessment.model.basis,
        reference_temperature: assessment.model.reference_temperature,
    };
    let fit = assessment.headline();
    let range = assessment.limits.working_range;
    let reading_sd = |y: f64| assessment.reading_spread.sd(&model, &fit.params, range, y);
    let inverse = assess::inverse::InverseModel {
        model: &model,
        params: &fit.params,
        covariance: &fit.covariance,
        reading_sd: &reading_sd,
        range,
    };
    let curve: Vec<(f64, f64)> = (0..=64)
        .map(|i| range[0] + (range[1] - range[0]) * i as f64 / 64.0)
        .map(|r| (r, model.mean(&fit.params, r, 0.0)))
        .collect();
    let band: Vec<(f64, f64, f64)> = curve
        .iter()
        .filter_map(|&(_, raw)| {
            let row = assess::inverse::inverse_row(
                &inverse,
                raw,
                options.readings_averaged,
                assessment.inverse_prediction.coverage_factor,
            );
            Some((raw, row.value?, row.expanded_uncertainty?))
        })
        .collect();
    plot::calibration::plot(&CalibrationPlot {
        points: data.reference.iter().copied().zip(data.raw.iter().copied()).collect(),
        points_name: "standards".into(),
        curve,
        band,
        coverage_factor: assessment.inverse_prediction.coverage_factor,
        limits: Some((assessment.lod, assessment.loq)),
        x_label: "reference value (reference units)".into(),
        y_label: "raw output (raw units)".into(),
        note: format!(
            "The {} fit over the range of the standards, {}–{} reference units, with the expanded uncertainty (k = {}) of a single reading read back through it, drawn horizontally; LOD and LOQ ({}) marked.",
            assessment.inverse_prediction.fit.to_uppercase(),
            short(range[0]),
            short(range[1]),
            short(assessment.inverse_prediction.coverage_factor),
            assessment.limits.convention
        ),
    })
}

/// OLS residuals and, with a weighted fit, its scaled residuals against the fitted level.
fn residual_figure(data: &CalibrationData, assessment: &Assessment) -> Result<Figure> {
    let origin = assessment.model.level_origin;
    let n = data.raw.len().max(2) as f64;
    let order = |i: usize| i as f64 / (n - 1.0);
    let mut series = vec![ScatterSeries {
        name: "ols".into(),
        description: "ordinary least squares residuals (constant scatter assumed)".into(),
        points: assessment
            .ols
            .fit
            .fitted
            .iter()
            .zip(&assessment.ols.fit.residuals)
            .enumerate()
            .map(|(i, (f, r))| (f - origin, *r, order(i)))
            .collect(),
    }];
    if let Some(wls) = &assessment.wls {
        series.push(ScatterSeries {
            name: "wls".into(),
            description: format!(
                "weighted residuals × √weight, rescaled to the OLS SD (SD ∝ level^{})",
                short(wls.exponent)
            ),
            points: {
                let f = &wls.report.fit;
                let scale = assessment.ols.fit.residual_sd / f.residual_sd.max(f64::MIN_POSITIVE);
                f.fitted
                    .iter()
                    .zip(&f.residuals)
                    .zip(&f.weights)
                    .enumerate()
                    .map(|(i, ((fit, r), w))| (fit - origin, r * w.sqrt() * scale, order(i)))
                    .collect()
            },
        });
    }
    plot::residuals::plot(&ResidualPlot {
        id: "residuals",
        title: "Residuals against fitted level".into(),
        note: "Residuals of each standard against its fitted level, coloured by row order. OLS residuals that fan out to the right mean the scatter tracks the level; the weighted residuals should be flat.".into(),
        caption: "Residuals against fitted level".into(),
        x_label: "fitted level (raw units, log scale)".into(),
        y_label: "residual (raw units)".into(),
        series: &series,
        guides: vec![(0.0, Dash::Solid)],
    })
}

/// The spread model's points and exponent (none without a spread model).
fn spread_figure(assessment: &Assessment) -> Result<Option<Figure>> {
    let Some(spread) = &assessment.spread else {
        return Ok(None);
    };
    let bins = spread
        .points
        .iter()
        .map(|p| SpreadBin {
            level: p.level,
            sd: p.sd,
            se: p.sd / (2.0 * (p.count as f64 - 1.0).max(1.0)).sqrt(),
            count: p.count as f64,
        })
        .collect();
    plot::spread::plot(&SpreadPlot {
        bins,
        exponent: Some((
            spread.k,
            spread.k_se,
            "weighted fit of ln SD on ln level".into(),
        )),
        rung: rung_lambda(assessment.recommended).map(|l| (assessment.recommended.to_string(), l)),
        x_label: "level (raw units above the origin, log scale)".into(),
    })
    .map(Some)
}

/// The summary table: the run, the JSON's headline keys, both fits, the spread, Box–Cox,
/// Koenker and the metrology rows of the text report.
fn summary_rows(file: &str, assessment: &Assessment) -> Result<Vec<(String, String)>> {
    let value = serde_json::to_value(assessment)?;
    let mut rows: Vec<(String, String)> = vec![("run".into(), file.to_string())];
    for key in [
        "observations",
        "reference_levels",
        "replicates",
        "recommended",
        "weighting_preferred",
        "lod",
        "loq",
    ] {
        if let Some(v) = value.get(key) {
            rows.push((key.into(), display(v)));
        }
    }
    for (name, fit) in [
        ("ols", Some(&assessment.ols.fit)),
        ("wls", assessment.wls.as_ref().map(|w| &w.report.fit)),
    ] {
        if let Some(fit) = fit {
            for (i, p) in fit.params.iter().enumerate() {
                let pname = assessment
                    .model
                    .parameter_names
                    .get(i)
                    .copied()
                    .unwrap_or("?");
                rows.push((
                    format!("{name}.{pname}"),
                    format!("{} ± {}", short(*p), short(fit.param_se[i])),
                ));
            }
            rows.push((format!("{name}.residual_sd"), short(fit.residual_sd)));
        }
    }
    if let Some(spread) = &assessment.spread {
        rows.push((
            "spread k".into(),
            format!("{} ± {}", short(spread.k), short(spread.k_se)),
        ));
    }
    if let Some(b) = &assessment.boxcox {
        rows.push(("Box–Cox λ".into(), short(b.lambda)));
    }
    rows.push(("Koenker p".into(), short(assessment.koenker.p_value)));
    rows.extend(assess::render::metrology_rows(assessment));
    Ok(rows)
}

/// The inverse-prediction table.
fn inverse_table(assessment: &Assessment) -> String {
    let rows: Vec<Vec<String>> = assessment
        .inverse_prediction
        .rows
        .iter()
        .map(|r| {
            vec![
                short(r.raw),
                r.readings_averaged.to_string(),
                r.value.map(short).unwrap_or_else(|| "-".into()),
                r.standard_uncertainty
                    .map(short)
                    .unwrap_or_else(|| "-".into()),
                r.expanded_uncertainty
                    .map(short)
                    .unwrap_or_else(|| "-".into()),
                r.within_range.to_string(),
            ]
        })
        .collect();
    html::table(
        "inverse",
        &[
            "raw",
            "m (readings averaged)",
            "value",
            "standard uncertainty",
            "expanded uncertainty",
            "within range",
        ],
        &rows,
    )
}

/// The options the assessment ran with.
fn configuration(assessment: &Assessment, options: &assess::AssessOptions) -> String {
    html::key_values(
        "config",
        &[
            ("basis".into(), assessment.model.basis.name().to_string()),
            ("level origin".into(), short(assessment.model.level_origin)),
            ("alpha".into(), short(options.alpha)),
            (
                "coverage factor".into(),
                short(assessment.inverse_prediction.coverage_factor),
            ),
        ],
    )
}
