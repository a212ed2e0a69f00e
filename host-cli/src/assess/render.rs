//! The human-readable rendering of an [`Assessment`] for the screen.
//!
//! Plain text, one section per analysis, numbers to six significant digits (the JSON document
//! carries full precision). Always ends with the safety caution.

use std::fmt::Write;

use super::Assessment;

fn number(value: f64) -> String {
    if value.is_finite() {
        format!("{value:.6}")
            .trim_end_matches('0')
            .trim_end_matches('.')
            .to_string()
    } else {
        "n/a".into()
    }
}

fn significant(value: f64) -> String {
    if !value.is_finite() {
        return "n/a".into();
    }
    if value == 0.0 {
        return "0".into();
    }
    let magnitude = value.abs().log10().floor();
    if (-4.0..6.0).contains(&magnitude) {
        let decimals = (5.0 - magnitude).max(0.0) as usize;
        format!("{value:.decimals$}")
    } else {
        format!("{value:.5e}")
    }
}

fn optional(value: Option<f64>) -> String {
    value.map_or("n/a".into(), significant)
}

/// Key–value rows of the weighting, the headline fit and the named limits (for the report
/// page's summary table).
pub fn metrology_rows(a: &Assessment) -> Vec<(String, String)> {
    let mut rows = vec![("headline fit".to_string(), a.headline_fit.to_string())];
    if let Some(wls) = &a.wls {
        rows.push((
            "weights".into(),
            format!("{}: {}", wls.weights, wls.weights_formula),
        ));
        if let (Some(chi), Some(df), Some(p)) =
            (wls.chi_squared, wls.chi_squared_df, wls.chi_squared_p)
        {
            rows.push((
                "χ² (known uncertainties)".into(),
                format!("{} on {df} df, p = {}", significant(chi), significant(p)),
            ));
        }
    }
    rows.push(("limits rule".into(), a.limits.rule.to_string()));
    rows.push(("limits σ".into(), a.limits.sigma_basis.clone()));
    if a.limits.lod_extrapolated {
        rows.push((
            "LOD".into(),
            "below the lowest standard: an extrapolation of the calibration".into(),
        ));
    }
    if let Some(din) = &a.limits.din32645 {
        rows.push((
            format!("DIN 32645 (α = β = {}, k = {})", din.alpha, number(din.k)),
            format!(
                "critical value {}, detection limit {}, quantification limit {}",
                significant(din.critical_value),
                significant(din.detection_limit),
                significant(din.quantification_limit)
            ),
        ));
    }
    if let Some(blank) = &a.limits.din32645_blank {
        rows.push((
            format!(
                "DIN 32645 blank method (n = {}, α = β = {})",
                blank.blank_readings, blank.alpha
            ),
            format!(
                "critical value {}, detection limit {}",
                significant(blank.critical_value),
                significant(blank.detection_limit)
            ),
        ));
    }
    rows.push((
        "coverage".into(),
        format!(
            "k = {} ({})",
            number(a.inverse_prediction.coverage_factor),
            a.inverse_prediction.coverage
        ),
    ));
    rows
}

/// The level of the tests (the Box–Cox interval's complement; 0.05 without it).
fn a_alpha(a: &Assessment) -> f64 {
    a.boxcox.as_ref().map_or(0.05, |b| 1.0 - b.confidence)
}

/// Renders the assessment as plain text: one section per analysis, in the order below.
pub fn render_text(assessment: &Assessment) -> String {
    let mut out = String::new();
    let a = assessment;
    header(&mut out, a);
    fit_section(&mut out, a, "Ordinary least squares", &a.ols);
    weighted_section(&mut out, a);
    let _ = writeln!(
        out,
        "\nHeadline fit (limits and inverse table): {}",
        a.headline_fit.to_uppercase()
    );
    scatter_section(&mut out, a);
    power_transform_section(&mut out, a);
    limits_section(&mut out, a);
    inverse_section(&mut out, a);
    if !a.notes.is_empty() {
        let _ = writeln!(out, "\nNotes");
        for note in &a.notes {
            let _ = writeln!(out, "  - {note}");
        }
    }
    let _ = writeln!(out, "\nCaution: {}", a.caution);
    out
}

/// The title and the run's shape.
fn header(out: &mut String, a: &Assessment) {
    let _ = writeln!(out, "Calibration assessment");
    let _ = writeln!(
        out,
        "  {} observations at {} reference levels ({}), model: {} [{}]",
        a.observations,
        a.reference_levels,
        if a.replicates {
            "with replicates"
        } else {
            "no replicates"
        },
        a.model.basis.name(),
        a.model.parameter_names.join(", ")
    );
}

/// One fit: its parameters with standard errors, residual SD, R² and lack-of-fit test.
fn fit_section(out: &mut String, a: &Assessment, title: &str, fit: &super::FitReport) {
    let _ = writeln!(out, "\n{title}");
    for ((name, value), se) in a
        .model
        .parameter_names
        .iter()
        .zip(&fit.fit.params)
        .zip(&fit.fit.param_se)
    {
        let _ = writeln!(
            out,
            "  {name:<12} {:>14}  (SE {})",
            significant(*value),
            significant(*se)
        );
    }
    let _ = writeln!(
        out,
        "  residual SD  {}  (df {}), R² {}",
        significant(fit.fit.residual_sd),
        fit.fit.df_resid,
        number(fit.fit.r_squared)
    );
    match &fit.lack_of_fit {
        Some(test) => {
            let _ = writeln!(
                out,
                "  lack of fit  F = {} on ({}, {}) df, p = {} -> {}",
                significant(test.statistic),
                test.lack_of_fit_df,
                test.pure_error_df,
                significant(test.p_value),
                if test.adequate {
                    "mean adequate"
                } else {
                    "mean misfits"
                }
            );
        }
        None => {
            let _ = writeln!(out, "  lack of fit  not testable (no replicates)");
        }
    }
}

/// The weighted fit with its rule and, for known uncertainties, the χ² check.
fn weighted_section(out: &mut String, a: &Assessment) {
    let Some(wls) = &a.wls else {
        return;
    };
    fit_section(
        out,
        a,
        &format!(
            "Weighted least squares (weights {}: {}{})",
            wls.weights,
            wls.weights_formula,
            if wls.exponent.is_finite() {
                format!("; SD exponent k = {}", significant(wls.exponent))
            } else {
                String::new()
            }
        ),
        &wls.report,
    );
    if let (Some(chi), Some(df), Some(p)) = (wls.chi_squared, wls.chi_squared_df, wls.chi_squared_p)
    {
        let _ = writeln!(
            out,
            "  chi-squared  {} on {df} df, p = {} -> {}",
            significant(chi),
            significant(p),
            if p >= a_alpha(a) {
                "consistent with the stated uncertainties"
            } else {
                "the data scatter more than the stated uncertainties allow"
            }
        );
    }
}

/// The spread model and the tests of scatter against level.
fn scatter_section(out: &mut String, a: &Assessment) {
    let _ = writeln!(out, "\nScatter against level");
    if let Some(spread) = &a.spread {
        let _ = writeln!(
            out,
            "  spread exponent k = {} (SE {}), CI [{}, {}] from {} points ({})",
            significant(spread.k),
            significant(spread.k_se),
            significant(spread.k_ci[0]),
            significant(spread.k_ci[1]),
            spread.points.len(),
            match spread.source {
                super::spread_model::SpreadSource::ReplicateGroups => "replicate groups",
                super::spread_model::SpreadSource::BinnedResiduals => "binned residuals",
            }
        );
    }
    let _ = writeln!(
        out,
        "  Koenker            LM = {}, p = {}",
        significant(a.koenker.statistic),
        significant(a.koenker.p_value)
    );
    let _ = writeln!(
        out,
        "  Breusch-Pagan      LM = {}, p = {}",
        significant(a.breusch_pagan.statistic),
        significant(a.breusch_pagan.p_value)
    );
    if let Some(gq) = &a.goldfeld_quandt {
        let _ = writeln!(
            out,
            "  Goldfeld-Quandt    F = {} on ({}, {}) df, p = {}",
            significant(gq.statistic),
            gq.df_high,
            gq.df_low,
            significant(gq.p_value)
        );
    }
    if let Some(test) = &a.ends_of_range {
        let _ = writeln!(
            out,
            "  ends of range      F = s²(high)/s²(low) = {} on ({}, {}) df, accept [{}, {}] at alpha {} -> {}",
            significant(test.statistic),
            test.df_high,
            test.df_low,
            significant(test.critical_lower),
            significant(test.critical_upper),
            test.alpha,
            if test.homogeneous { "homogeneous" } else { "not homogeneous" }
        );
    }
}

/// Box–Cox of both sides, the ladder's rungs and the advice.
fn power_transform_section(out: &mut String, a: &Assessment) {
    let _ = writeln!(
        out,
        "\nPower transform (Box-Cox, both sides through the mean)"
    );
    if let Some(boxcox) = &a.boxcox {
        let _ = writeln!(
            out,
            "  lambda = {}, {}% CI [{}, {}]",
            significant(boxcox.lambda),
            number(100.0 * boxcox.confidence),
            optional(boxcox.ci[0]),
            optional(boxcox.ci[1])
        );
        for rung in &boxcox.rungs {
            let _ = writeln!(
                out,
                "    {:<9} lambda {:>4}  log-likelihood {}",
                rung.name,
                number(rung.lambda),
                significant(rung.log_likelihood)
            );
        }
        if let Some(test) = &boxcox.mean_adequacy {
            let _ = writeln!(
                out,
                "  mean on the {} scale: lack-of-fit F = {}, p = {} -> {}",
                boxcox.recommended,
                significant(test.statistic),
                significant(test.p_value),
                if test.adequate { "adequate" } else { "misfits" }
            );
        }
    }
    let _ = writeln!(
        out,
        "  recommended rung: {}; weighting preferable: {}",
        a.recommended,
        if a.weighting_preferred { "yes" } else { "no" }
    );
}

/// The named limits: the 3.3σ/b and 10σ/b rule under both σ, and DIN 32645.
fn limits_section(out: &mut String, a: &Assessment) {
    let _ = writeln!(out, "\nLimits: {}", a.limits.rule);
    let _ = writeln!(out, "  headline sigma: {}", a.limits.sigma_basis);
    let _ = writeln!(
        out,
        "  constant sigma: sigma {} -> LOD {}, LOQ {}",
        significant(a.limits.constant_sigma.sigma),
        significant(a.limits.constant_sigma.lod),
        significant(a.limits.constant_sigma.loq)
    );
    if let Some(spread) = &a.limits.spread_model {
        let _ = writeln!(
            out,
            "  weighted fit (sigma at the lowest standard): sigma {} -> LOD {}, LOQ {}",
            significant(spread.sigma),
            significant(spread.lod),
            significant(spread.loq)
        );
    }
    let _ = writeln!(
        out,
        "  reported: LOD {}, LOQ {}; working range {} to {}{}",
        significant(a.lod),
        significant(a.loq),
        significant(a.limits.working_range[0]),
        significant(a.limits.working_range[1]),
        if a.limits.lod_extrapolated {
            "  (LOD below the lowest standard: an extrapolation of the calibration)"
        } else {
            ""
        }
    );
    if let Some(din) = &a.limits.din32645 {
        let _ = writeln!(
            out,
            "  DIN 32645 / ISO 11843-2 (OLS line, alpha = beta = {}, m = {}, k = {}): critical value {}, detection limit {}, quantification limit {}",
            din.alpha,
            din.readings_averaged,
            number(din.k),
            significant(din.critical_value),
            significant(din.detection_limit),
            significant(din.quantification_limit)
        );
    }
    if let Some(blank) = &a.limits.din32645_blank {
        let _ = writeln!(
            out,
            "  DIN 32645 blank method ({} blank readings, alpha = beta = {}, m = {}): critical reading {}, critical value {}, detection limit {}",
            blank.blank_readings,
            blank.alpha,
            blank.readings_averaged,
            significant(blank.critical_signal),
            significant(blank.critical_value),
            significant(blank.detection_limit)
        );
    }
}

/// The inverse-prediction table.
fn inverse_section(out: &mut String, a: &Assessment) {
    let table = &a.inverse_prediction;
    let _ = writeln!(
        out,
        "\nInverse prediction ({} fit; U = k u with k = {}: {}; u from {})",
        table.fit,
        number(table.coverage_factor),
        table.coverage,
        table.uncertainty_sources
    );
    let _ = writeln!(
        out,
        "  {:>14} {:>4} {:>14} {:>14} {:>14}",
        "raw", "m", "value", "u", "U"
    );
    for row in &table.rows {
        let _ = writeln!(
            out,
            "  {:>14} {:>4} {:>14} {:>14} {:>14}{}",
            significant(row.raw),
            row.readings_averaged,
            optional(row.value),
            optional(row.standard_uncertainty),
            optional(row.expanded_uncertainty),
            if row.within_range {
                ""
            } else {
                "  (outside the calibrated range)"
            }
        );
    }
}
