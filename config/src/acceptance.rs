//! `[acceptance]`: criteria a lab calibration run must meet, judged by
//! `steadycal assess --config FILE` (each printed with its value and pass/fail; a failure
//! makes the exit code 1).
//!
//! The figures are those of the ordinary least-squares line `raw = intercept + slope·ref`
//! of the lab run (the regression the published sensor targets use), except the limits of
//! detection and quantification, which are `assess`'s headline limits:
//! - `slope_range`, `intercept_range`: `[low, high]`, inclusive;
//! - `r_squared_min`: coefficient of determination of that line;
//! - `residual_sd_max`: residual standard deviation of that line, raw units;
//! - `rmse_max`: root mean square of `raw − ref` (the sensor's own error against the
//!   reference, uncorrected: meaningful when the sensor reports in reference units);
//! - `nrmse_max_percent`: that RMSE as a percentage of the mean reference;
//! - `lod_max`, `loq_max`: limits of detection and quantification, reference units.
//!
//! A criterion whose figure the run does not give fails (it is never passed silently).

use serde::{Deserialize, Serialize};

use crate::error::Problem;
use crate::values::{Finite, NonNegative, Proportion};

/// `[acceptance]`.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct AcceptanceSection {
    /// Where the criteria come from (a published target, a specification).
    pub source: Option<String>,
    /// Slope (gain) range, raw units per reference unit.
    pub slope_range: Option<[Finite; 2]>,
    /// Intercept (offset) range, raw units.
    pub intercept_range: Option<[Finite; 2]>,
    /// Smallest acceptable R².
    pub r_squared_min: Option<Proportion>,
    /// Largest acceptable residual SD, raw units.
    pub residual_sd_max: Option<NonNegative>,
    /// Largest acceptable RMSE of `raw − ref`.
    pub rmse_max: Option<NonNegative>,
    /// Largest acceptable RMSE as a percentage of the mean reference.
    pub nrmse_max_percent: Option<NonNegative>,
    /// Largest acceptable limit of detection, reference units.
    pub lod_max: Option<NonNegative>,
    /// Largest acceptable limit of quantification, reference units.
    pub loq_max: Option<NonNegative>,
}

/// The figures of a lab run the criteria are judged on (`None`: not available).
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize)]
pub struct Figures {
    /// OLS slope.
    pub slope: Option<f64>,
    /// OLS intercept.
    pub intercept: Option<f64>,
    /// OLS R².
    pub r_squared: Option<f64>,
    /// OLS residual SD.
    pub residual_sd: Option<f64>,
    /// RMSE of `raw − ref`.
    pub rmse: Option<f64>,
    /// That RMSE, percent of the mean reference.
    pub nrmse_percent: Option<f64>,
    /// Limit of detection.
    pub lod: Option<f64>,
    /// Limit of quantification.
    pub loq: Option<f64>,
}

/// One criterion judged.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Verdict {
    /// The criterion's key (`slope_range`, ...).
    pub criterion: &'static str,
    /// What it requires, as text (`0.65 ≤ slope ≤ 1.35`).
    pub requirement: String,
    /// The run's figure.
    pub value: Option<f64>,
    /// Whether it is met.
    pub pass: bool,
}

impl AcceptanceSection {
    /// Checks the ranges (low ≤ high).
    pub(crate) fn check(&self) -> Result<(), Problem> {
        for (key, range) in [
            ("acceptance.slope_range", self.slope_range),
            ("acceptance.intercept_range", self.intercept_range),
        ] {
            if let Some([low, high]) = range {
                if low.0 > high.0 {
                    return Err(Problem::new(
                        key,
                        format!(
                            "expected [low, high] with low ≤ high, found [{}, {}]",
                            low.0, high.0
                        ),
                    ));
                }
            }
        }
        Ok(())
    }

    /// True when no criterion is given.
    pub fn is_empty(&self) -> bool {
        self.judge(&Figures::default()).is_empty()
    }

    /// Every criterion given, judged on `figures`, in the order of the keys.
    pub fn judge(&self, figures: &Figures) -> Vec<Verdict> {
        let mut verdicts = Vec::new();
        let mut range = |criterion, name: &str, range: Option<[Finite; 2]>, value: Option<f64>| {
            if let Some([low, high]) = range {
                verdicts.push(Verdict {
                    criterion,
                    requirement: format!("{} ≤ {name} ≤ {}", low.0, high.0),
                    value,
                    pass: value.is_some_and(|v| v >= low.0 && v <= high.0),
                });
            }
        };
        range("slope_range", "slope", self.slope_range, figures.slope);
        range(
            "intercept_range",
            "intercept",
            self.intercept_range,
            figures.intercept,
        );
        if let Some(min) = self.r_squared_min {
            verdicts.push(Verdict {
                criterion: "r_squared_min",
                requirement: format!("R² ≥ {}", min.0),
                value: figures.r_squared,
                pass: figures.r_squared.is_some_and(|v| v >= min.0),
            });
        }
        for (criterion, name, limit, value) in [
            (
                "residual_sd_max",
                "residual SD",
                self.residual_sd_max,
                figures.residual_sd,
            ),
            ("rmse_max", "RMSE", self.rmse_max, figures.rmse),
            (
                "nrmse_max_percent",
                "NRMSE %",
                self.nrmse_max_percent,
                figures.nrmse_percent,
            ),
            ("lod_max", "LOD", self.lod_max, figures.lod),
            ("loq_max", "LOQ", self.loq_max, figures.loq),
        ] {
            if let Some(limit) = limit {
                verdicts.push(Verdict {
                    criterion,
                    requirement: format!("{name} ≤ {}", limit.0),
                    value,
                    pass: value.is_some_and(|v| v <= limit.0),
                });
            }
        }
        verdicts
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn criteria_pass_fail_and_missing_figures_fail() {
        let section: AcceptanceSection = toml::from_str(
            "slope_range = [0.65, 1.35]\nr_squared_min = 0.7\nrmse_max = 7\nlod_max = 2\n",
        )
        .unwrap();
        let figures = Figures {
            slope: Some(1.4),
            r_squared: Some(0.9),
            rmse: Some(7.0),
            ..Figures::default()
        };
        let verdicts = section.judge(&figures);
        let passes: Vec<(&str, bool)> = verdicts.iter().map(|v| (v.criterion, v.pass)).collect();
        assert_eq!(
            passes,
            [
                ("slope_range", false),
                ("r_squared_min", true),
                ("rmse_max", true),
                ("lod_max", false)
            ]
        );
        assert_eq!(verdicts[0].requirement, "0.65 ≤ slope ≤ 1.35");
        assert!(AcceptanceSection::default().is_empty());
        let bad: AcceptanceSection = toml::from_str("slope_range = [2, 1]\n").unwrap();
        assert_eq!(bad.check().unwrap_err().key, "acceptance.slope_range");
    }
}
