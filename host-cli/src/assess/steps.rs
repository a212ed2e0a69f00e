//! The steps of [`super::assess`], one per part of the assessment: the run's design, the
//! ordinary fit, the constant-scatter tests, the spread model, the power transform, the
//! advice, the weighted fit, the limits and the inverse table.
//!
//! Each step reads what the earlier ones produced and appends to `notes` why a part is
//! missing; none panics on data (errors are [`AssessError`]s).

use nalgebra::DMatrix;
use steadycal_core::transform::Rung;

use super::boxcox::{self, BoxCoxAnalysis};
use super::design::CalibrationModel;
use super::heteroscedasticity::{self, BreuschPagan, EndsOfRange, GoldfeldQuandt};
use super::inverse::{self, InverseModel, InverseTable};
use super::limits::{self, DetectionLimits, Limits};
use super::regression::{self, LeastSquaresFit};
use super::replicates::{self, ReplicateGroups};
use super::spread_model::{self, SpreadModel};
use super::weights::{ReadingSpread, WeightRule};
use super::{
    above, check_column, AssessError, AssessOptions, CalibrationData, FitReport, WlsReport,
};

/// The 0.975 quantile of the standard normal distribution.
const NORMAL_975: f64 = 1.959_963_984_540_054;

/// The run as the fits see it.
pub(super) struct Run {
    pub model: CalibrationModel,
    pub design: DMatrix<f64>,
    pub groups: ReplicateGroups,
    pub parameters: usize,
}

/// Checks the columns and builds the design (temperature term centred on the reference
/// temperature, by default the run's mean).
pub(super) fn prepare(data: &CalibrationData, options: &AssessOptions) -> Result<Run, AssessError> {
    let rows = data.raw.len();
    check_column("raw", &data.raw, rows)?;
    check_column("ref", &data.reference, rows)?;
    if let Some(u) = &data.raw_uncertainty {
        check_column("u(raw)", u, rows)?;
    }
    if let Some(u) = &data.reference_uncertainty {
        check_column("u(ref)", u, rows)?;
    }
    let temperature = match (&data.temperature, options.temperature_term) {
        (Some(t), true) => {
            check_column("temp", t, rows)?;
            Some(t.as_slice())
        }
        (None, true) => return Err(AssessError::MissingTemperature),
        _ => None,
    };
    let reference_temperature = temperature.map(|t| {
        options
            .reference_temperature
            .unwrap_or_else(|| t.iter().sum::<f64>() / t.len() as f64)
    });
    let model = CalibrationModel {
        basis: options.basis,
        reference_temperature,
    };
    let parameters = model.parameter_count();
    if rows < parameters + 2 {
        return Err(AssessError::TooFewObservations {
            needed: parameters + 2,
            got: rows,
        });
    }
    let groups = ReplicateGroups::from_reference(&data.reference);
    let power_count = parameters - usize::from(reference_temperature.is_some());
    if groups.groups.len() < power_count + 1 {
        return Err(AssessError::TooFewLevels {
            needed: power_count + 1,
            got: groups.groups.len(),
        });
    }
    let design = model.design(&data.reference, temperature);
    Ok(Run {
        model,
        design,
        groups,
        parameters,
    })
}

/// Ordinary least squares with its lack-of-fit test.
pub(super) fn ordinary_fit(
    run: &Run,
    data: &CalibrationData,
    options: &AssessOptions,
    notes: &mut Vec<String>,
) -> Result<FitReport, AssessError> {
    let fit = regression::least_squares(&run.design, &data.raw, None)?;
    let lack_of_fit = regression::lack_of_fit(
        &data.raw,
        &fit.weights,
        fit.residual_sum_of_squares,
        &run.groups,
        run.parameters,
        options.alpha,
    );
    if lack_of_fit.is_none() {
        notes.push(
            "no lack-of-fit test: it needs replicates and more levels than parameters".into(),
        );
    }
    Ok(FitReport { fit, lack_of_fit })
}

/// The constant-scatter tests on the OLS residuals.
pub(super) struct ScatterTests {
    pub koenker: BreuschPagan,
    pub breusch_pagan: BreuschPagan,
    pub goldfeld_quandt: Option<GoldfeldQuandt>,
    pub ends_of_range: Option<EndsOfRange>,
}

/// Koenker, Breusch–Pagan, Goldfeld–Quandt and the ends-of-range F test.
pub(super) fn scatter_tests(
    run: &Run,
    data: &CalibrationData,
    ols: &LeastSquaresFit,
    options: &AssessOptions,
    notes: &mut Vec<String>,
) -> Result<ScatterTests, AssessError> {
    let koenker = heteroscedasticity::breusch_pagan(&ols.residuals, &ols.fitted, true)?;
    let breusch_pagan = heteroscedasticity::breusch_pagan(&ols.residuals, &ols.fitted, false)?;
    let goldfeld_quandt = match heteroscedasticity::goldfeld_quandt(
        &run.design,
        &data.raw,
        &data.reference,
        options.goldfeld_quandt_split,
        options.goldfeld_quandt_drop,
    ) {
        Ok(test) => Some(test),
        Err(error) => {
            notes.push(format!("no Goldfeld-Quandt test: {error}"));
            None
        }
    };
    let ends_of_range = heteroscedasticity::ends_of_range(&run.groups, &data.raw, options.alpha);
    if ends_of_range.is_none() {
        notes.push(
            "no ends-of-range F test: it needs two or more replicates at the lowest and highest standard"
                .into(),
        );
    }
    Ok(ScatterTests {
        koenker,
        breusch_pagan,
        goldfeld_quandt,
        ends_of_range,
    })
}

fn fitted_levels(ols: &LeastSquaresFit, origin: f64) -> Vec<f64> {
    ols.fitted.iter().map(|f| f - origin).collect()
}

/// The spread model `SD ∝ level^k` (replicate groups or binned residuals).
pub(super) fn spread(
    run: &Run,
    data: &CalibrationData,
    ols: &LeastSquaresFit,
    options: &AssessOptions,
    notes: &mut Vec<String>,
) -> Option<SpreadModel> {
    let levels = fitted_levels(ols, options.level_origin);
    let spread = spread_model::fit_spread_model(
        &run.groups,
        &data.raw,
        &levels,
        &ols.residuals,
        options.alpha,
    );
    if spread.is_none() {
        notes.push(
            "no spread model: fewer than three usable replicate groups or bins (binning needs 15 rows, at least 5 per bin)"
                .into(),
        );
    }
    spread
}

/// The transform-both-sides Box–Cox analysis.
pub(super) fn power_transform(
    run: &Run,
    data: &CalibrationData,
    ols: &LeastSquaresFit,
    options: &AssessOptions,
    notes: &mut Vec<String>,
) -> Option<BoxCoxAnalysis> {
    match boxcox::analyse(
        &run.design,
        &data.raw,
        options.level_origin,
        &ols.params,
        &run.groups,
        options.alpha,
    ) {
        Ok(analysis) => Some(analysis),
        Err(error) => {
            notes.push(format!("no Box-Cox analysis: {error}"));
            None
        }
    }
}

/// The recommended rung and whether weighting is advised (never with `identity`). Without
/// Box–Cox, Koenker's test at level α decides whether the scatter tracks the level and the
/// rung nearest to `λ = 1 − k` of the spread model is recommended.
pub(super) fn advice(
    boxcox: Option<&BoxCoxAnalysis>,
    koenker: &BreuschPagan,
    spread: Option<&SpreadModel>,
    alpha: f64,
    notes: &mut Vec<String>,
) -> (&'static str, bool) {
    let Some(analysis) = boxcox else {
        let rejected = koenker.p_value < alpha;
        let rung = match spread {
            Some(spread) if rejected => Rung::nearest(1.0 - spread.k),
            _ => Rung::Identity,
        };
        if rejected {
            notes.push(format!(
                "without Box-Cox the rung comes from the spread exponent: lambda = 1 - k = {:.3}, nearest rung {}",
                spread.map_or(f64::NAN, |s| 1.0 - s.k),
                rung.name()
            ));
        }
        return (rung.name(), rejected && rung != Rung::Identity);
    };
    if analysis.at_search_bound {
        notes.push("Box-Cox lambda sits on the end of the search range [-3, 3]".into());
    }
    if analysis.constant_scatter_rejected && !analysis.weighting_preferred {
        notes.push(format!(
            "Box-Cox lambda = {:.3} rejects constant scatter but is nearest to the identity rung (scatter growing more slowly than the level): no weighting is advised",
            analysis.lambda
        ));
    }
    if let Some(adequacy) = &analysis.mean_adequacy {
        if !adequacy.adequate {
            notes.push(format!(
                "the calibration mean misfits on the {} scale (lack-of-fit p = {:.3}): try the quadratic or the temperature term",
                analysis.recommended, adequacy.p_value
            ));
        }
    }
    (analysis.recommended, analysis.weighting_preferred)
}

/// The weighted fit and the SD of one reading it models (`None` when there is none).
pub(super) fn weighted_fit(
    run: &Run,
    data: &CalibrationData,
    options: &AssessOptions,
    ols: &LeastSquaresFit,
    spread: Option<&SpreadModel>,
    notes: &mut Vec<String>,
) -> Result<Option<(WlsReport, ReadingSpread)>, AssessError> {
    let origin = options.level_origin;
    if let Some(u_raw) = &data.raw_uncertainty {
        if options.weights != WeightRule::Auto {
            return Err(AssessError::InvalidOption {
                name: "weights",
                reason: "known uncertainties fix the weights (1/u^2): leave the weights at auto",
            });
        }
        return known_uncertainty_fit(run, data, options, u_raw).map(Some);
    }
    if data.reference_uncertainty.is_some() {
        return Err(AssessError::InvalidOption {
            name: "reference uncertainty",
            reason: "needs the responses' uncertainties too (errors in both variables)",
        });
    }
    let levels = fitted_levels(ols, origin);
    let rule = options.weights;
    let (weights, exponent, formula, spread_of): (Vec<f64>, f64, String, ReadingSpread) = match rule
    {
        WeightRule::None => {
            notes.push("weights none: no weighted fit; OLS is the headline fit".into());
            return Ok(None);
        }
        WeightRule::Auto => {
            let Some(spread) = spread else {
                return Ok(None);
            };
            if let Some(row) = levels.iter().position(|l| !above(*l, 0.0)) {
                notes.push(format!(
                    "no WLS fit: the fitted level of data row {row} is not above the level origin"
                ));
                return Ok(None);
            }
            let k = spread.k;
            (
                levels.iter().map(|l| (-2.0 * k * l.ln()).exp()).collect(),
                k,
                "(fitted OLS level - origin)^(-2k), k from the spread model".into(),
                ReadingSpread::LevelPower {
                    scale: f64::NAN,
                    exponent: k,
                    origin,
                },
            )
        }
        WeightRule::Level(p) => {
            if let Some(row) = levels.iter().position(|l| !above(*l, 0.0)) {
                return Err(AssessError::WeightsUndefined {
                    rule: rule.to_string(),
                    row,
                    reason: "the fitted level is not above the level origin",
                });
            }
            (
                levels.iter().map(|l| l.powf(p)).collect(),
                -p / 2.0,
                format!("(fitted OLS level - origin)^{p}"),
                ReadingSpread::LevelPower {
                    scale: f64::NAN,
                    exponent: -p / 2.0,
                    origin,
                },
            )
        }
        WeightRule::Reference(p) => {
            if let Some(row) = data.reference.iter().position(|r| !above(*r, 0.0)) {
                return Err(AssessError::WeightsUndefined {
                    rule: rule.to_string(),
                    row,
                    reason: "the reference is not above 0",
                });
            }
            (
                data.reference.iter().map(|r| r.powf(p)).collect(),
                -p / 2.0,
                format!("ref^{p}"),
                ReadingSpread::ReferencePower {
                    scale: f64::NAN,
                    exponent: -p / 2.0,
                },
            )
        }
    };
    if let Some(row) = weights
        .iter()
        .position(|w| !(above(*w, 0.0) && w.is_finite()))
    {
        return Err(AssessError::WeightsUndefined {
            rule: rule.to_string(),
            row,
            reason: "the weight is not a positive finite number",
        });
    }
    let fit = match regression::least_squares(&run.design, &data.raw, Some(&weights)) {
        Ok(fit) => fit,
        Err(error) if rule == WeightRule::Auto => {
            notes.push(format!("no WLS fit: {error}"));
            return Ok(None);
        }
        Err(error) => return Err(error.into()),
    };
    let scale = fit.residual_sd;
    let spread_of = match spread_of {
        ReadingSpread::LevelPower {
            exponent, origin, ..
        } => ReadingSpread::LevelPower {
            scale,
            exponent,
            origin,
        },
        ReadingSpread::ReferencePower { exponent, .. } => {
            ReadingSpread::ReferencePower { scale, exponent }
        }
        other => other,
    };
    let lack_of_fit = regression::lack_of_fit(
        &data.raw,
        &fit.weights,
        fit.residual_sum_of_squares,
        &run.groups,
        run.parameters,
        options.alpha,
    );
    Ok(Some((
        WlsReport {
            weights: rule.to_string(),
            weights_formula: formula,
            exponent,
            covariance_rescaled: true,
            chi_squared: None,
            chi_squared_df: None,
            chi_squared_p: None,
            report: FitReport { fit, lack_of_fit },
        },
        spread_of,
    )))
}

/// ISO/TS 28037 with known `u(raw)` (weighted least squares, any basis) or known `u(raw)` and
/// `u(ref)` (generalized distance regression, straight line only).
fn known_uncertainty_fit(
    run: &Run,
    data: &CalibrationData,
    options: &AssessOptions,
    u_raw: &[f64],
) -> Result<(WlsReport, ReadingSpread), AssessError> {
    if let Some(row) = u_raw.iter().position(|u| !above(*u, 0.0)) {
        return Err(AssessError::WeightsUndefined {
            rule: "known u(raw)".into(),
            row,
            reason: "the standard uncertainty is not above 0",
        });
    }
    let (fit, name, formula) = match &data.reference_uncertainty {
        None => {
            let weights: Vec<f64> = u_raw.iter().map(|u| 1.0 / (u * u)).collect();
            (
                regression::least_squares_known_variance(&run.design, &data.raw, &weights)?,
                "known u(raw)",
                "1/u(raw)^2 (ISO/TS 28037 weighted least squares; covariance not rescaled)",
            )
        }
        Some(u_ref) => {
            if run.parameters != 2 {
                return Err(AssessError::InvalidOption {
                    name: "reference uncertainty",
                    reason:
                        "errors in both variables need the straight line without a temperature term",
                });
            }
            if let Some(row) = u_ref.iter().position(|u| *u < 0.0) {
                return Err(AssessError::WeightsUndefined {
                    rule: "known u(raw), u(ref)".into(),
                    row,
                    reason: "the standard uncertainty of the reference is negative",
                });
            }
            let fit = super::errors_in_both::fit_line(&data.reference, &data.raw, u_ref, u_raw)?
                .ok_or(AssessError::InvalidOption {
                    name: "reference uncertainty",
                    reason: "the errors-in-both-variables fit did not converge",
                })?;
            (
                fit,
                "known u(raw), u(ref)",
                "1/(u(raw)^2 + b^2 u(ref)^2) (ISO/TS 28037 generalized distance regression, errors in both variables; covariance not rescaled)",
            )
        }
    };
    let chi_squared = fit.residual_sum_of_squares;
    let df = fit.df_resid;
    let p = super::distributions::chi_squared_upper_tail(chi_squared, df as f64);
    let lack_of_fit = regression::lack_of_fit(
        &data.raw,
        &fit.weights,
        fit.residual_sum_of_squares,
        &run.groups,
        run.parameters,
        options.alpha,
    );
    // u(raw) as a function of the raw reading: each standard's mean response and mean u.
    let mut points: Vec<(f64, f64)> = run
        .groups
        .groups
        .iter()
        .map(|g| {
            let count = g.members.len() as f64;
            (
                g.members.iter().map(|&i| data.raw[i]).sum::<f64>() / count,
                g.members.iter().map(|&i| u_raw[i]).sum::<f64>() / count,
            )
        })
        .collect();
    points.sort_by(|a, b| a.0.total_cmp(&b.0));
    Ok((
        WlsReport {
            weights: name.into(),
            weights_formula: formula.into(),
            exponent: f64::NAN,
            covariance_rescaled: false,
            chi_squared: Some(chi_squared),
            chi_squared_df: Some(df),
            chi_squared_p: p,
            report: FitReport { fit, lack_of_fit },
        },
        ReadingSpread::Known {
            raw: points.iter().map(|p| p.0).collect(),
            uncertainty: points.iter().map(|p| p.1).collect(),
        },
    ))
}

/// True when the weighted fit is the headline: weights chosen or known, or (auto) weighting
/// advised.
pub(super) fn headline_is_weighted(
    options: &AssessOptions,
    data: &CalibrationData,
    weighting_preferred: bool,
    weighted: &Option<(WlsReport, ReadingSpread)>,
) -> bool {
    weighted.is_some()
        && (data.raw_uncertainty.is_some()
            || options.weights != WeightRule::Auto
            || weighting_preferred)
}

/// The limits: ICH Q2(R1) under constant σ and under the weighted fit's model of one reading,
/// and DIN 32645 on the OLS straight line.
pub(super) fn detection_limits(
    run: &Run,
    data: &CalibrationData,
    options: &AssessOptions,
    ols: &LeastSquaresFit,
    weighted: Option<&(WlsReport, ReadingSpread)>,
    use_wls: bool,
) -> Limits {
    let lowest = run.groups.groups.first().map_or(f64::NAN, |g| g.reference);
    let highest = run.groups.groups.last().map_or(f64::NAN, |g| g.reference);
    let model = &run.model;
    let constant_sigma = DetectionLimits::new(ols.residual_sd, model.slope(&ols.params, lowest));
    let weighted_limits = weighted.map(|(wls, spread)| {
        let fit = &wls.report.fit;
        let response = model.mean(&fit.params, lowest, 0.0);
        let sigma = spread.sd(model, &fit.params, [lowest, highest], response);
        DetectionLimits::new(sigma, model.slope(&fit.params, lowest))
    });
    let sigma_basis = match (weighted, use_wls) {
        (Some((wls, spread)), true) => match spread {
            ReadingSpread::Known { .. } => {
                "known u(raw) at the lowest standard's fitted response".to_string()
            }
            _ => format!(
                "SD of one response at the lowest standard under the weighted fit ({}, SD = s_w * basis^{:.4})",
                wls.weights, wls.exponent
            ),
        },
        _ => "constant sigma: the OLS residual SD s_y/x".to_string(),
    };
    let (din, din_blank) = if run.parameters == 2 {
        let alpha = options.din32645_alpha;
        let blanks: Vec<f64> = data
            .reference
            .iter()
            .zip(&data.raw)
            .filter(|(reference, _)| **reference == 0.0)
            .map(|(_, raw)| *raw)
            .collect();
        (
            limits::din32645(
                &data.reference,
                ols.residual_sd,
                ols.params[1],
                alpha,
                alpha,
                3.0,
                options.readings_averaged,
            ),
            limits::din32645_blank(
                &blanks,
                ols.params[1],
                alpha,
                alpha,
                options.readings_averaged,
            ),
        )
    } else {
        (None, None)
    };
    limits::limits(
        constant_sigma,
        weighted_limits,
        use_wls,
        sigma_basis,
        [lowest, highest],
        din,
        din_blank,
    )
}

/// The inverse-prediction table under the headline fit (module docs of `inverse`).
pub(super) fn inverse_table(
    run: &Run,
    data: &CalibrationData,
    options: &AssessOptions,
    fit: &LeastSquaresFit,
    spread: &ReadingSpread,
    name: &'static str,
) -> InverseTable {
    let lowest = run.groups.groups.first().map_or(f64::NAN, |g| g.reference);
    let highest = run.groups.groups.last().map_or(f64::NAN, |g| g.reference);
    let range = [lowest, highest];
    let readings: Vec<(f64, usize)> = match &options.inverse_readings {
        Some(readings) => readings
            .iter()
            .map(|&r| (r, options.readings_averaged))
            .collect(),
        None => run
            .groups
            .groups
            .iter()
            .map(|g| {
                (
                    replicates::mean_and_sd(&data.raw, &g.members).0,
                    g.members.len(),
                )
            })
            .collect(),
    };
    let known = matches!(spread, ReadingSpread::Known { .. });
    let (coverage_factor, coverage) = match options.coverage_factor {
        Some(k) => (k, format!("fixed k = {k}")),
        None if known => (
            NORMAL_975,
            "95 % coverage, normal quantile (known uncertainties)".to_string(),
        ),
        None => (
            super::distributions::t_quantile(0.975, fit.df_resid as f64).unwrap_or(f64::NAN),
            format!(
                "95 % coverage, Student t on {} degrees of freedom of the {name} fit",
                fit.df_resid
            ),
        ),
    };
    let model = &run.model;
    let reading_sd = |raw: f64| spread.sd(model, &fit.params, range, raw);
    let inverse_model = InverseModel {
        model,
        params: &fit.params,
        covariance: &fit.covariance,
        reading_sd: &reading_sd,
        range,
    };
    InverseTable {
        fit: name,
        coverage_factor,
        coverage,
        readings_averaged: options.readings_averaged,
        uncertainty_sources: if data.reference_uncertainty.is_some() {
            "one reading's SD / m and the calibration parameters' covariance, which carries the references' uncertainties (GUM propagation)"
        } else {
            "one reading's SD / m and the calibration parameters' covariance (GUM propagation)"
        },
        rows: readings
            .iter()
            .map(|&(raw, m)| inverse::inverse_row(&inverse_model, raw, m, coverage_factor))
            .collect(),
    }
}

#[cfg(test)]
mod tests {
    use proptest::prelude::*;

    use super::super::{assess, AssessOptions, CalibrationData, WeightRule};

    fn rule(index: u8, power: f64) -> WeightRule {
        match index % 4 {
            0 => WeightRule::Auto,
            1 => WeightRule::None,
            2 => WeightRule::Reference(power),
            _ => WeightRule::Level(power),
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        /// Any run and any rule: an assessment or an error, never a panic; the advice never
        /// pairs weighting with the identity rung; the headline is the weighted fit exactly
        /// when a weighted fit exists and (auto) weighting is advised or the rule was chosen.
        #[test]
        fn any_run_and_rule_is_consistent(
            rows in proptest::collection::vec((-5.0f64..1000.0, 0u8..8, -3.0f64..3.0), 3..40),
            rule_index in 0u8..4,
            power in -3.0f64..1.0,
            origin in -10.0f64..10.0,
            known in any::<bool>(),
        ) {
            let mut data = CalibrationData::default();
            for (i, (x, replicate, noise)) in rows.iter().enumerate() {
                let x = (x / 10.0).round() * 10.0 + f64::from(*replicate % 2);
                data.reference.push(x);
                data.raw.push(20.0 + 1.5 * x + noise * (1.0 + 0.05 * x.abs()) + i as f64 * 1e-3);
            }
            if known {
                data.raw_uncertainty = Some(data.reference.iter().map(|x| 0.5 + 0.01 * x.abs()).collect());
            }
            let options = AssessOptions {
                weights: if known { WeightRule::Auto } else { rule(rule_index, power) },
                level_origin: origin,
                ..AssessOptions::default()
            };
            if let Ok(a) = assess(&data, &options) {
                if a.weighting_preferred {
                    prop_assert_ne!(a.recommended, "identity");
                }
                let chosen = known || options.weights != WeightRule::Auto;
                prop_assert_eq!(
                    a.headline_fit == "wls",
                    a.wls.is_some() && (chosen || a.weighting_preferred)
                );
                for row in &a.inverse_prediction.rows {
                    prop_assert!(row.readings_averaged >= 1);
                }
            }
        }
    }
}
