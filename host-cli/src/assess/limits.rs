//! Limit of detection, limit of quantification and working range from the calibration.
//!
//! Rule ([`RULE`]: the calibration-curve method of ICH Q2(R1), "Validation of analytical
//! procedures", 1994/2005, sections 6.3 and 7.3, also common in analytical chemistry):
//! `LOD = 3.3·σ / b` and `LOQ = 10·σ / b`, in reference units, with `b` the slope of the
//! calibration mean at the lowest standard and `σ` the standard deviation of one response at
//! the lowest standard. Two versions of σ are reported:
//!
//! - constant σ: the OLS residual SD `s_y/x`, one σ for the whole range;
//! - weighted: the SD the weighted fit's model of one reading gives at the lowest standard's
//!   fitted response (auto weights: `σ_low = s_w · (f(x_low) − o)^k`; known uncertainties:
//!   `u(raw)` there), with `b` the weighted slope there.
//!
//! When the scatter grows with the level, constant σ averages high-level scatter into the low
//! end and overstates the LOD. The headline `lod`/`loq` use the headline fit's σ
//! (`sigma_basis` says which). An LOD below the lowest standard is an extrapolation of the
//! calibration and flagged (`lod_extrapolated`). Working range: from the headline LOQ (or
//! the lowest standard, if higher) to the highest standard.
//!
//! The calibration-curve method of DIN 32645:2008 / ISO 11843-2 ([`Din32645`]) is reported
//! beside it for the straight line fitted by OLS: from the prediction interval of the blank,
//! with `s_x0 = s_y/x / b`, `f = n − 2`, `m` readings per determination, `x̄` and
//! `Q_x = Σ(xᵢ − x̄)²` of the standards,
//!
//! - critical value `x_c = s_x0 · t(1 − α; f) · √(1/m + 1/n + x̄²/Q_x)`,
//! - detection limit `x_d = s_x0 · (t(1 − α; f) + t(1 − β; f)) · √(1/m + 1/n + x̄²/Q_x)`
//!   (the standard's approximation; `2·x_c` for α = β),
//! - quantification limit `x_q = k · s_x0 · t(1 − α/2; f) · √(1/m + 1/n + (x_q − x̄)²/Q_x)`,
//!   solved by fixed-point iteration (relative uncertainty `1/k` of a result at `x_q`).
//!
//! These are the definitions of the R package chemCal's `lod(method = "din")` (critical
//! value with β = 0.5) and `loq()`; `tests/tests/assess_din32645.rs` reproduces the
//! standard's worked example as published there (0.07, 0.14, 0.212).
//!
//! The blank-value method of DIN 32645:2008 ([`Din32645Blank`], the standard's
//! *Leerwertmethode*) is reported when the run holds at least two readings of the blank
//! (reference exactly 0): from the SD `s_L` of the `n` blank readings, `f = n − 1`, and the
//! slope `b` of the OLS line,
//!
//! - critical value of the signal `y_c = ȳ_L + s_L · t(1 − α; f) · √(1/m + 1/n)`,
//! - critical value `x_c = s_L / b · t(1 − α; f) · √(1/m + 1/n)`,
//! - detection limit `x_d = s_L / b · (t(1 − α; f) + t(1 − β; f)) · √(1/m + 1/n)`.
//!
//! The blank method's quantification limit is not reported (no published value to check it
//! against could be reached). `tests/tests/assess_din32645.rs` reproduces the standard's
//! blank data as printed by the R package envalysis (critical value 0.053).

use serde::Serialize;

/// The multiplier of σ/b for the limit of detection.
pub const LOD_FACTOR: f64 = 3.3;
/// The multiplier of σ/b for the limit of quantification.
pub const LOQ_FACTOR: f64 = 10.0;
/// The convention, as printed in reports.
pub const CONVENTION: &str =
    "LOD = 3.3*sigma/b, LOQ = 10*sigma/b (reference units; b = slope at the lowest standard)";
/// The rule's name.
pub const RULE: &str = "ICH Q2(R1) calibration-curve method: LOD = 3.3 sigma/b, LOQ = 10 sigma/b, sigma the SD of one response at the lowest standard";

/// Limits under one choice of σ.
#[derive(Debug, Clone, Serialize)]
pub struct DetectionLimits {
    /// σ of a response at the low end.
    pub sigma: f64,
    /// Slope of the calibration mean at the lowest standard.
    pub slope: f64,
    /// `3.3·σ/|b|`.
    pub lod: f64,
    /// `10·σ/|b|`.
    pub loq: f64,
}

impl DetectionLimits {
    /// Limits from σ and the slope.
    pub fn new(sigma: f64, slope: f64) -> DetectionLimits {
        DetectionLimits {
            sigma,
            slope,
            lod: LOD_FACTOR * sigma / slope.abs(),
            loq: LOQ_FACTOR * sigma / slope.abs(),
        }
    }
}

/// Which σ the headline limits use.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SigmaChoice {
    /// OLS residual SD.
    ConstantSigma,
    /// Spread model at the lowest standard.
    SpreadModel,
}

/// All limits of a run.
#[derive(Debug, Clone, Serialize)]
pub struct Limits {
    /// The rule of the headline limits (ICH Q2(R1) calibration-curve method).
    pub rule: &'static str,
    /// The convention used.
    pub convention: &'static str,
    /// Which σ the headline limits use.
    pub sigma_basis: String,
    /// True when the headline LOD lies below the lowest standard (an extrapolation).
    pub lod_extrapolated: bool,
    /// DIN 32645 / ISO 11843-2 calibration-curve limits (`null` unless the calibration mean
    /// is a straight line without a temperature term).
    pub din32645: Option<Din32645>,
    /// DIN 32645 blank-value limits (`null` unless the run holds two or more blank readings
    /// and the calibration mean is a straight line without a temperature term).
    pub din32645_blank: Option<Din32645Blank>,
    /// Limits with one constant σ.
    pub constant_sigma: DetectionLimits,
    /// Limits with σ from the spread model at the low end.
    pub spread_model: Option<DetectionLimits>,
    /// Which one the headline values use.
    pub chosen: SigmaChoice,
    /// Headline limit of detection.
    pub lod: f64,
    /// Headline limit of quantification.
    pub loq: f64,
    /// `[max(LOQ, lowest standard), highest standard]` in reference units.
    pub working_range: [f64; 2],
}

/// Assembles the limits; `spread_model` is `Some` only when a weighted fit exists.
pub fn limits(
    constant_sigma: DetectionLimits,
    spread_model: Option<DetectionLimits>,
    prefer_spread_model: bool,
    sigma_basis: String,
    standards: [f64; 2],
    din32645: Option<Din32645>,
    din32645_blank: Option<Din32645Blank>,
) -> Limits {
    let [lowest_standard, highest_standard] = standards;
    let (chosen, headline) = match (&spread_model, prefer_spread_model) {
        (Some(spread), true) => (SigmaChoice::SpreadModel, spread),
        _ => (SigmaChoice::ConstantSigma, &constant_sigma),
    };
    let (lod, loq) = (headline.lod, headline.loq);
    Limits {
        rule: RULE,
        convention: CONVENTION,
        sigma_basis,
        lod_extrapolated: lod < lowest_standard,
        din32645,
        din32645_blank,
        chosen,
        lod,
        loq,
        working_range: [loq.max(lowest_standard), highest_standard],
        constant_sigma,
        spread_model,
    }
}

/// The DIN 32645 / ISO 11843-2 calibration-curve limits (module docs).
#[derive(Debug, Clone, Serialize)]
pub struct Din32645 {
    /// Probability of a false positive α (one-sided).
    pub alpha: f64,
    /// Probability of a false negative β (one-sided).
    pub beta: f64,
    /// `1/k` is the relative uncertainty of a result at the quantification limit.
    pub k: f64,
    /// Readings averaged into one determination.
    pub readings_averaged: usize,
    /// Degrees of freedom `n − 2`.
    pub df: usize,
    /// `s_x0 = s_y/x / b`.
    pub s_x0: f64,
    /// Critical value of the net concentration `x_c` (decision limit).
    pub critical_value: f64,
    /// Detection limit `x_d`.
    pub detection_limit: f64,
    /// Quantification limit `x_q`.
    pub quantification_limit: f64,
}

/// DIN 32645 limits of a straight line `raw = a + b·ref` fitted by OLS to `reference`
/// (module docs); `None` when the line or the quantiles are undefined.
pub fn din32645(
    reference: &[f64],
    residual_sd: f64,
    slope: f64,
    alpha: f64,
    beta: f64,
    k: f64,
    readings_averaged: usize,
) -> Option<Din32645> {
    let n = reference.len();
    if n < 3 || readings_averaged == 0 || !(slope != 0.0 && slope.is_finite()) {
        return None;
    }
    let df = n - 2;
    let mean = reference.iter().sum::<f64>() / n as f64;
    let q_x: f64 = reference.iter().map(|x| (x - mean).powi(2)).sum();
    if !super::above(q_x, 0.0) {
        return None;
    }
    let t_alpha = super::distributions::t_quantile(1.0 - alpha, df as f64)?;
    let t_beta = super::distributions::t_quantile(1.0 - beta, df as f64)?;
    let t_two_sided = super::distributions::t_quantile(1.0 - alpha / 2.0, df as f64)?;
    let s_x0 = residual_sd / slope.abs();
    let base = 1.0 / readings_averaged as f64 + 1.0 / n as f64;
    let blank = (base + mean * mean / q_x).sqrt();
    let critical_value = s_x0 * t_alpha * blank;
    let detection_limit = s_x0 * (t_alpha + t_beta) * blank;
    let mut quantification_limit = k * critical_value;
    for _ in 0..200 {
        let next =
            k * s_x0 * t_two_sided * (base + (quantification_limit - mean).powi(2) / q_x).sqrt();
        let settled = (next - quantification_limit).abs() <= 1e-15 * next.abs();
        quantification_limit = next;
        if settled {
            break;
        }
    }
    Some(Din32645 {
        alpha,
        beta,
        k,
        readings_averaged,
        df,
        s_x0,
        critical_value,
        detection_limit,
        quantification_limit,
    })
}

/// The DIN 32645 blank-value method (module docs).
#[derive(Debug, Clone, Serialize)]
pub struct Din32645Blank {
    /// Probability of a false positive α (one-sided).
    pub alpha: f64,
    /// Probability of a false negative β (one-sided).
    pub beta: f64,
    /// Readings averaged into one determination.
    pub readings_averaged: usize,
    /// Blank readings `n` (reference exactly 0).
    pub blank_readings: usize,
    /// Degrees of freedom `n − 1`.
    pub df: usize,
    /// Mean blank reading `ȳ_L`.
    pub blank_mean: f64,
    /// SD of the blank readings `s_L`.
    pub blank_sd: f64,
    /// Critical value of the reading `y_c`.
    pub critical_signal: f64,
    /// Critical value of the net concentration `x_c` (decision limit).
    pub critical_value: f64,
    /// Detection limit `x_d`.
    pub detection_limit: f64,
}

/// DIN 32645 blank-value limits from the blank readings and the calibration slope (module
/// docs); `None` with fewer than two blank readings, a zero slope or undefined quantiles.
pub fn din32645_blank(
    blanks: &[f64],
    slope: f64,
    alpha: f64,
    beta: f64,
    readings_averaged: usize,
) -> Option<Din32645Blank> {
    let n = blanks.len();
    if n < 2 || readings_averaged == 0 || !(slope != 0.0 && slope.is_finite()) {
        return None;
    }
    let df = n - 1;
    let blank_mean = blanks.iter().sum::<f64>() / n as f64;
    let blank_sd =
        (blanks.iter().map(|y| (y - blank_mean).powi(2)).sum::<f64>() / df as f64).sqrt();
    if !blank_sd.is_finite() {
        return None;
    }
    let t_alpha = super::distributions::t_quantile(1.0 - alpha, df as f64)?;
    let t_beta = super::distributions::t_quantile(1.0 - beta, df as f64)?;
    let root = (1.0 / readings_averaged as f64 + 1.0 / n as f64).sqrt();
    let s_x = blank_sd / slope.abs();
    Some(Din32645Blank {
        alpha,
        beta,
        readings_averaged,
        blank_readings: n,
        df,
        blank_mean,
        blank_sd,
        critical_signal: blank_mean + blank_sd * t_alpha * root,
        critical_value: s_x * t_alpha * root,
        detection_limit: s_x * (t_alpha + t_beta) * root,
    })
}
