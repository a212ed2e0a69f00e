//! The weights of the weighted fit, and the model of one reading's scatter that the limits
//! and the inverse table use with the headline fit.
//!
//! Rules (`--weights`):
//! - `auto`: `wᵢ = (f_OLS(refᵢ) − o)^(−2k)` with `k` of the spread model `SD ∝ level^k`; the
//!   weighted fit is the headline only when weighting is advised (see `boxcox`);
//! - `none`: no weighted fit; ordinary least squares is the headline;
//! - `ref^P`: `wᵢ = refᵢ^P` (1/x is `ref^-1`, 1/x² is `ref^-2`: common practice in
//!   chromatography and bioanalysis); every reference must be above 0;
//! - `level^P`: `wᵢ = (f_OLS(refᵢ) − o)^P`; every fitted level must be above the origin.
//!
//! Explicit rules make the weighted fit the headline. Known uncertainties (`u(raw)`, and
//! optionally `u(ref)`) replace every rule: weights `1/u²`, covariance not rescaled.
//!
//! Invariant: weights `w ∝ 1/σ²`, so a rule `basis^P` models one reading's SD as
//! `s_w · basis^(−P/2)` ([`ReadingSpread`]).

use std::fmt;
use std::str::FromStr;

use serde::Serialize;

use super::design::CalibrationModel;
use super::inverse::solve_mean;

/// How the weighted fit is weighted.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum WeightRule {
    /// Weights from the estimated spread exponent; headline only when weighting is advised.
    #[default]
    Auto,
    /// No weighted fit.
    None,
    /// `ref^P`.
    Reference(f64),
    /// `(fitted level − origin)^P`.
    Level(f64),
}

impl FromStr for WeightRule {
    type Err = String;
    fn from_str(text: &str) -> Result<Self, Self::Err> {
        let text = text.trim();
        let power = |rest: &str| -> Result<f64, String> {
            let p: f64 = rest
                .parse()
                .map_err(|_| format!("`{rest}` is not a number (expected e.g. ref^-2)"))?;
            if p.is_finite() {
                Ok(p)
            } else {
                Err(format!("the power `{rest}` must be finite"))
            }
        };
        match text {
            "auto" => Ok(WeightRule::Auto),
            "none" => Ok(WeightRule::None),
            _ => {
                if let Some(rest) = text.strip_prefix("ref^") {
                    Ok(WeightRule::Reference(power(rest)?))
                } else if let Some(rest) = text.strip_prefix("level^") {
                    Ok(WeightRule::Level(power(rest)?))
                } else {
                    Err(format!(
                        "unknown weights `{text}`: expected auto, none, ref^P or level^P (P a number, e.g. ref^-2)"
                    ))
                }
            }
        }
    }
}

impl fmt::Display for WeightRule {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            WeightRule::Auto => write!(f, "auto"),
            WeightRule::None => write!(f, "none"),
            WeightRule::Reference(p) => write!(f, "ref^{p}"),
            WeightRule::Level(p) => write!(f, "level^{p}"),
        }
    }
}

/// The SD of one reading as the headline fit models it.
#[derive(Debug, Clone, Serialize, PartialEq)]
#[serde(tag = "model", rename_all = "snake_case")]
pub enum ReadingSpread {
    /// One SD everywhere (ordinary least squares: `s_y/x`).
    Constant {
        /// The SD.
        sd: f64,
    },
    /// `scale · (raw − origin)^exponent`.
    LevelPower {
        /// SD at level one.
        scale: f64,
        /// Exponent `k`.
        exponent: f64,
        /// Level origin.
        origin: f64,
    },
    /// `scale · ref^exponent`, at the calibrated value of the reading.
    ReferencePower {
        /// SD at reference one.
        scale: f64,
        /// Exponent.
        exponent: f64,
    },
    /// The known standard uncertainty of a response, interpolated linearly in the raw
    /// reading between the standards' mean responses (held constant beyond the ends).
    Known {
        /// Mean response of each standard, increasing.
        raw: Vec<f64>,
        /// Mean `u(raw)` of each standard.
        uncertainty: Vec<f64>,
    },
}

impl ReadingSpread {
    /// The SD of one reading `raw` (`NaN` where the model is undefined).
    pub fn sd(&self, model: &CalibrationModel, params: &[f64], range: [f64; 2], raw: f64) -> f64 {
        match self {
            ReadingSpread::Constant { sd } => *sd,
            ReadingSpread::LevelPower {
                scale,
                exponent,
                origin,
            } => {
                let level = raw - origin;
                if super::above(level, 0.0) {
                    scale * level.powf(*exponent)
                } else {
                    f64::NAN
                }
            }
            ReadingSpread::ReferencePower { scale, exponent } => {
                match solve_mean(model, params, raw, range) {
                    Some(value) if super::above(value, 0.0) => scale * value.powf(*exponent),
                    _ => f64::NAN,
                }
            }
            ReadingSpread::Known {
                raw: at,
                uncertainty,
            } => interpolate(at, uncertainty, raw),
        }
    }
}

/// Linear interpolation in `x` (increasing), constant beyond the ends.
fn interpolate(x: &[f64], y: &[f64], at: f64) -> f64 {
    match (x.first(), x.last(), y.first(), y.last()) {
        (Some(&x0), Some(&xn), Some(&y0), Some(&yn)) => {
            if at.is_nan() {
                return f64::NAN;
            }
            if at <= x0 {
                return y0;
            }
            if at >= xn {
                return yn;
            }
            let i = x.partition_point(|v| *v <= at).clamp(1, x.len() - 1);
            let (xa, xb, ya, yb) = (x[i - 1], x[i], y[i - 1], y[i]);
            if xb > xa {
                ya + (yb - ya) * (at - xa) / (xb - xa)
            } else {
                ya
            }
        }
        _ => f64::NAN,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rules_parse_and_print() {
        assert_eq!("auto".parse::<WeightRule>(), Ok(WeightRule::Auto));
        assert_eq!("none".parse::<WeightRule>(), Ok(WeightRule::None));
        assert_eq!(
            "ref^-1.5".parse::<WeightRule>(),
            Ok(WeightRule::Reference(-1.5))
        );
        assert_eq!(
            "level^-2".parse::<WeightRule>(),
            Ok(WeightRule::Level(-2.0))
        );
        assert_eq!(WeightRule::Reference(-2.0).to_string(), "ref^-2");
        for bad in ["ref^", "ref^x", "1/x", "level^inf", ""] {
            assert!(bad.parse::<WeightRule>().is_err(), "{bad}");
        }
    }

    #[test]
    fn interpolation_is_linear_and_flat_outside() {
        let x = [1.0, 3.0, 7.0];
        let y = [0.1, 0.3, 0.5];
        assert_eq!(interpolate(&x, &y, 0.0), 0.1);
        assert!((interpolate(&x, &y, 2.0) - 0.2).abs() < 1e-15);
        assert!((interpolate(&x, &y, 5.0) - 0.4).abs() < 1e-15);
        assert_eq!(interpolate(&x, &y, 9.0), 0.5);
        assert!(interpolate(&x, &y, f64::NAN).is_nan());
    }
}
