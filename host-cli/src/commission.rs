//! `assess LAB.csv --commission monitor.toml`: the monitor configuration a lab run
//! commissions, and `assess --config FILE`'s acceptance criteria judged on the run.
//!
//! The commissioned file is the given `--config` (or an empty one) with, from the lab run:
//! - `range.origin` the assessment's level origin; `range.low`/`range.high` the lowest and
//!   highest fitted level of the standards above it (the lowest at least a thousandth of the
//!   highest);
//! - `basis` the assessment's (quadratic term, temperature term and its T₀), and
//!   `basis.reference_scale` the largest reference;
//! - `ladder.initial_rung` the recommended rung;
//! - `[baseline]` the calibration the monitor's own fit estimates under that rung: weighted
//!   least squares with the rung's weights `u^(2λ−2)`, `u` the fitted level over the level
//!   scale `√(low·high)` (floored at `low`, as the monitor floors it), reweighted from the
//!   OLS fit until the parameters settle (the linearized transform-both-sides fit); its
//!   physical parameters, their covariance `σ²(XᵀWX)⁻¹` and the residual scale σ (raw units
//!   at the level scale);
//!
//! and every other key set to the value in force, each with its comment.

use nalgebra::{DMatrix, DVector};
use steadycal_config::acceptance::{Figures, Verdict};
use steadycal_config::{BaselineSection, Commissioned, ConfigFile, Finite, Positive, RungName};
use steadycal_core::transform::Rung;

use crate::assess::{AssessOptions, Assessment, Basis, CalibrationData};

/// The commissioned configuration of a lab run (module docs).
pub fn commission(
    base: &ConfigFile,
    lab_file: &str,
    data: &CalibrationData,
    assessment: &Assessment,
    options: &AssessOptions,
) -> anyhow::Result<ConfigFile> {
    let rung = Rung::ALL
        .into_iter()
        .find(|rung| rung.name() == assessment.recommended)
        .ok_or_else(|| anyhow::anyhow!("unknown recommended rung `{}`", assessment.recommended))?;
    let origin = options.level_origin;
    let levels: Vec<f64> = assessment
        .ols
        .fit
        .fitted
        .iter()
        .map(|f| f - origin)
        .collect();
    let high = levels.iter().cloned().fold(f64::NAN, f64::max);
    if high.is_nan() || high <= 0.0 {
        anyhow::bail!(
            "{lab_file}: no fitted level above the level origin {origin}: nothing to commission"
        );
    }
    let low = levels
        .iter()
        .cloned()
        .filter(|l| *l > 0.0)
        .fold(f64::INFINITY, f64::min)
        .max(high / 1000.0);
    let scale = (low * high).sqrt();
    let temperature = match (options.temperature_term, &data.temperature) {
        (true, Some(t)) => Some((
            t.as_slice(),
            assessment.model.reference_temperature.unwrap_or(20.0),
        )),
        _ => None,
    };
    let quadratic = matches!(options.basis, Basis::Quadratic);
    let fit = rung_fit(data, quadratic, temperature, rung, origin, low, scale)?;

    let mut file = base.clone();
    file.range.low = Some(Positive(low));
    file.range.high = Some(Positive(high));
    file.range.origin = Some(Finite(origin));
    file.basis.quadratic = Some(quadratic);
    file.basis.temperature = Some(temperature.is_some());
    if let Some((_, t0)) = temperature {
        file.basis.temperature_reference = Some(Finite(t0));
    }
    let largest = data
        .reference
        .iter()
        .cloned()
        .fold(0.0f64, |a, r| a.max(r.abs()));
    if largest > 0.0 {
        file.basis.reference_scale = Some(Positive(largest));
    }
    file.ladder.initial_rung = Some(RungName::of(rung));
    let basis = file
        .monitor_config(lab_file)
        .map_err(|e| anyhow::anyhow!("commissioned configuration: {e}"))?
        .basis;
    file.baseline = Some(BaselineSection::of(
        &Commissioned {
            parameters: fit.parameters,
            covariance: Some(fit.covariance),
            residual_sd: Some(fit.residual_sd),
            source: Some(format!(
                "{lab_file}: {} points, {} rung, weighted least squares",
                data.raw.len(),
                rung.name()
            )),
        },
        &basis,
    ));
    // The file must read back: every key checked by the same code as any other file.
    let text = file
        .to_commented_toml("")
        .map_err(|p| anyhow::anyhow!("commissioned configuration: `{}`: {}", p.key, p.message))?;
    ConfigFile::parse("(commissioned)", &text)?.channel("(commissioned)")?;
    Ok(file)
}

/// A calibration fitted under a rung's weights.
struct RungFit {
    parameters: [f64; 4],
    covariance: [[f64; 4]; 4],
    residual_sd: f64,
}

fn rung_fit(
    data: &CalibrationData,
    quadratic: bool,
    temperature: Option<(&[f64], f64)>,
    rung: Rung,
    origin: f64,
    low: f64,
    scale: f64,
) -> anyhow::Result<RungFit> {
    let n = data.raw.len();
    let mut slots = vec![0usize, 1];
    if quadratic {
        slots.push(2);
    }
    if temperature.is_some() {
        slots.push(3);
    }
    let p = slots.len();
    let design = DMatrix::from_fn(n, p, |i, j| {
        let r = data.reference[i];
        match slots[j] {
            0 => 1.0,
            1 => r,
            2 => r * r,
            _ => temperature.map_or(0.0, |(t, t0)| t[i] - t0),
        }
    });
    let raw = DVector::from_column_slice(&data.raw);
    let power = 2.0 * rung.lambda_f64() - 2.0;
    let floor = low / scale;
    let mut weights = DVector::from_element(n, 1.0);
    let mut theta = DVector::zeros(p);
    for _ in 0..50 {
        let root = weights.map(f64::sqrt);
        let weighted = DMatrix::from_fn(n, p, |i, j| design[(i, j)] * root[i]);
        let target = raw.component_mul(&root);
        let next = weighted
            .clone()
            .svd(true, true)
            .solve(&target, 1e-12)
            .map_err(|e| anyhow::anyhow!("commissioning fit: {e}"))?;
        let settled = (&next - &theta).amax() <= 1e-12 * next.amax();
        theta = next;
        let fitted = &design * &theta;
        weights = fitted.map(|f| ((f - origin) / scale).max(floor).powf(power));
        if settled {
            break;
        }
    }
    let residuals = &raw - &design * &theta;
    let dof = n.saturating_sub(p).max(1) as f64;
    let variance = residuals
        .iter()
        .zip(weights.iter())
        .map(|(r, w)| w * r * r)
        .sum::<f64>()
        / dof;
    let information = DMatrix::from_fn(p, p, |a, b| {
        (0..n)
            .map(|i| weights[i] * design[(i, a)] * design[(i, b)])
            .sum::<f64>()
    });
    let inverse = information
        .try_inverse()
        .ok_or_else(|| anyhow::anyhow!("commissioning fit: the design is singular"))?;
    let mut parameters = [0.0; 4];
    let mut covariance = [[0.0; 4]; 4];
    for (a, &slot_a) in slots.iter().enumerate() {
        parameters[slot_a] = theta[a];
        for (b, &slot_b) in slots.iter().enumerate() {
            // Symmetric by construction: the average of the two triangles.
            covariance[slot_a][slot_b] = variance * 0.5 * (inverse[(a, b)] + inverse[(b, a)]);
        }
    }
    Ok(RungFit {
        parameters,
        covariance,
        residual_sd: variance.sqrt(),
    })
}

/// The figures `[acceptance]` judges, from the lab run and its assessment (see
/// `steadycal_config::acceptance`).
pub fn figures(data: &CalibrationData, assessment: &Assessment) -> Figures {
    let fit = &assessment.ols.fit;
    let n = data.raw.len() as f64;
    let squares: f64 = data
        .raw
        .iter()
        .zip(&data.reference)
        .map(|(raw, reference)| (raw - reference).powi(2))
        .sum();
    let rmse = (squares / n).sqrt();
    let mean_reference = data.reference.iter().sum::<f64>() / n;
    let finite = |v: f64| v.is_finite().then_some(v);
    Figures {
        intercept: fit.params.first().copied(),
        slope: fit.params.get(1).copied(),
        r_squared: finite(fit.r_squared),
        residual_sd: finite(fit.residual_sd),
        rmse: finite(rmse),
        nrmse_percent: finite(100.0 * rmse / mean_reference),
        lod: finite(assessment.lod),
        loq: finite(assessment.loq),
    }
}

fn value_text(verdict: &Verdict) -> String {
    verdict
        .value
        .map(|x| format!("{x:.6}"))
        .unwrap_or_else(|| "not available".into())
}

/// The verdicts as text lines for the screen.
pub fn verdict_lines(source: Option<&str>, verdicts: &[Verdict]) -> String {
    let mut out = String::from("\nAcceptance criteria");
    if let Some(source) = source {
        out.push_str(&format!(" ({source})"));
    }
    out.push('\n');
    for v in verdicts {
        let value = value_text(v);
        out.push_str(&format!(
            "  {:<4} {:<18} {:<28} value {value}\n",
            if v.pass { "pass" } else { "FAIL" },
            v.criterion,
            v.requirement
        ));
    }
    let failed = verdicts.iter().filter(|v| !v.pass).count();
    out.push_str(&if failed == 0 {
        format!("  all {} criteria met\n", verdicts.len())
    } else {
        format!("  {failed} of {} criteria not met\n", verdicts.len())
    });
    out
}

/// The verdicts as an HTML section (escaped), for the assessment's report page.
pub fn verdict_html(source: Option<&str>, verdicts: &[Verdict]) -> String {
    let escape = crate::report::escape::escape;
    let mut out = String::from("<section id=\"acceptance\"><h2>Acceptance criteria</h2>");
    if let Some(source) = source {
        out.push_str(&format!("<p>Source: {}</p>", escape(source)));
    }
    out.push_str("<table><thead><tr><th>criterion</th><th>requirement</th><th>value</th><th>result</th></tr></thead><tbody>");
    for v in verdicts {
        let value = v
            .value
            .map(|x| format!("{x:.6}"))
            .unwrap_or_else(|| "not available".into());
        out.push_str(&format!(
            "<tr><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
            escape(v.criterion),
            escape(&v.requirement),
            escape(&value),
            if v.pass {
                "pass"
            } else {
                "<strong>FAIL</strong>"
            }
        ));
    }
    out.push_str("</tbody></table></section>");
    out
}
