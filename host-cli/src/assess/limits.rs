//! Limit of detection, limit of quantification and working range from the calibration.
//!
//! Convention (the calibration-curve method of ICH Q2(R1), also common in analytical
//! chemistry): `LOD = 3.3·σ / b` and `LOQ = 10·σ / b`, in reference units, with `b` the slope
//! of the calibration mean at the lowest standard and `σ` the standard deviation of a response
//! at the low end. Two versions of σ are reported:
//!
//! - constant σ: the OLS residual SD `s_y/x`, one σ for the whole range;
//! - spread model: the WLS scale times the modelled growth, `σ_low = s_w · (f(x_low) − o)^k`,
//!   the SD the spread model `SD ∝ level^k` gives at the lowest standard's fitted level, with
//!   `b` the WLS slope there.
//!
//! When the scatter grows with the level, constant σ averages high-level scatter into the low
//! end and overstates the LOD. The headline `lod`/`loq` use the spread model when weighting is
//! preferable (see `boxcox`), constant σ otherwise. Working range: from the headline LOQ (or
//! the lowest standard, if higher) to the highest standard; no extrapolation.

use serde::Serialize;

/// The multiplier of σ/b for the limit of detection.
pub const LOD_FACTOR: f64 = 3.3;
/// The multiplier of σ/b for the limit of quantification.
pub const LOQ_FACTOR: f64 = 10.0;
/// The convention, as printed in reports.
pub const CONVENTION: &str =
    "LOD = 3.3*sigma/b, LOQ = 10*sigma/b (reference units; b = slope at the lowest standard)";

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
    /// The convention used.
    pub convention: &'static str,
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

/// Assembles the limits; `spread_model` is `Some` only when a WLS spread fit exists.
pub fn limits(
    constant_sigma: DetectionLimits,
    spread_model: Option<DetectionLimits>,
    prefer_spread_model: bool,
    lowest_standard: f64,
    highest_standard: f64,
) -> Limits {
    let (chosen, headline) = match (&spread_model, prefer_spread_model) {
        (Some(spread), true) => (SigmaChoice::SpreadModel, spread),
        _ => (SigmaChoice::ConstantSigma, &constant_sigma),
    };
    let (lod, loq) = (headline.lod, headline.loq);
    Limits {
        convention: CONVENTION,
        chosen,
        lod,
        loq,
        working_range: [loq.max(lowest_standard), highest_standard],
        constant_sigma,
        spread_model,
    }
}
