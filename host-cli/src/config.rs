//! The monitor's configuration file (TOML), read into a [`MonitorConfig`].
//!
//! Every key, its unit and its default is listed in the README section "Configuration
//! file". α levels are turned into thresholds here, on the host, with `statrs` (the core
//! only carries the thresholds):
//!
//! - `ladder.switch_alpha` → switch margin `χ²₁(1 − α) / 2` (a log-likelihood lead),
//! - `spread.alpha` → Koenker threshold `χ²₁(1 − α)`,
//! - `mean_check.alpha` → normal quantile `z = Φ⁻¹(1 − α)`,
//! - `spread.interval_level` → `z = Φ⁻¹((1 + level) / 2)` for the interval reported for k.
//!
//! Each threshold can instead be given directly (`ladder.switch_margin`,
//! `spread.threshold`, `mean_check.z`, `spread.interval_z`); giving both forms of one
//! threshold is an error.
//!
//! # Contract
//! - Unknown keys, wrong types and out-of-range values are errors that name the key; those
//!   found while parsing carry toml's line and column and a snippet of the offending line.
//! - A configuration that reads without error passes [`MonitorConfig::validate`].

use std::path::Path;

use serde::de::{self, Deserializer};
use serde::Deserialize;
use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};
use steadycal_core::monitor::MonitorConfig;
use steadycal_core::transform::Rung;

/// A number that must be a probability strictly between 0 and 1.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Alpha(pub f64);

impl<'de> Deserialize<'de> for Alpha {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        let value = f64::deserialize(deserializer)?;
        if value > 0.0 && value < 1.0 {
            Ok(Alpha(value))
        } else {
            Err(de::Error::custom(format!(
                "out of range: {value}, expected a probability strictly between 0 and 1"
            )))
        }
    }
}

/// A number that must be positive and finite.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Positive(pub f64);

impl<'de> Deserialize<'de> for Positive {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        let value = f64::deserialize(deserializer)?;
        if value.is_finite() && value > 0.0 {
            Ok(Positive(value))
        } else {
            Err(de::Error::custom(format!(
                "out of range: {value}, expected a positive finite number"
            )))
        }
    }
}

/// A number that must be finite (any sign).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Finite(pub f64);

impl<'de> Deserialize<'de> for Finite {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        let value = f64::deserialize(deserializer)?;
        if value.is_finite() {
            Ok(Finite(value))
        } else {
            Err(de::Error::custom(format!(
                "out of range: {value}, expected a finite number"
            )))
        }
    }
}

/// The forgetting factor: in (0, 1].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Forgetting(pub f64);

impl<'de> Deserialize<'de> for Forgetting {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        let value = f64::deserialize(deserializer)?;
        if value > 0.0 && value <= 1.0 {
            Ok(Forgetting(value))
        } else {
            Err(de::Error::custom(format!(
                "out of range: {value}, expected a forgetting factor in (0, 1]"
            )))
        }
    }
}

/// A count that must be at least 1.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AtLeastOne(pub u32);

impl<'de> Deserialize<'de> for AtLeastOne {
    fn deserialize<D: Deserializer<'de>>(deserializer: D) -> Result<Self, D::Error> {
        let value = u32::deserialize(deserializer)?;
        if value >= 1 {
            Ok(AtLeastOne(value))
        } else {
            Err(de::Error::custom("out of range: 0, expected at least 1"))
        }
    }
}

/// `[range]`: the working range of the sensor, raw units.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RangeSection {
    /// Lower end of the working range, raw units above the origin (default 1).
    pub low: Option<Positive>,
    /// Upper end, raw units above the origin (default 1000).
    pub high: Option<Positive>,
    /// Level origin, raw units: power rungs need values above it (default 0).
    pub origin: Option<Finite>,
}

/// `[basis]`: the terms of the calibration mean.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BasisSection {
    /// Include `c·ref²` (default false).
    pub quadratic: Option<bool>,
    /// Include `d·(T − T₀)` (default false).
    pub temperature: Option<bool>,
    /// Typical magnitude of the reference, reference units (default `range.high`).
    pub reference_scale: Option<Positive>,
    /// T₀, the temperature where the temperature term is zero, °C (default 20).
    pub temperature_reference: Option<Finite>,
    /// Typical magnitude of T − T₀, °C (default 10).
    pub temperature_scale: Option<Positive>,
}

/// `[fit]`: the recursive fits.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FitSection {
    /// Forgetting factor β in (0, 1] (default 0.999, a memory of about 1000 checks).
    pub forgetting: Option<Forgetting>,
    /// Initial covariance diagonal, also the wind-up ceiling (default 1e6).
    pub initial_variance: Option<Positive>,
    /// Checks before the spread bins and the ladder's likelihoods start (default 200).
    pub warm_up: Option<u32>,
}

/// The rung names accepted in config files.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum RungName {
    /// λ = 1.
    Identity,
    /// λ = 1/2.
    Sqrt,
    /// λ = 0.
    Log,
    /// λ = −1/2.
    InvSqrt,
    /// λ = −1.
    Inverse,
}

impl RungName {
    /// The core's rung.
    pub fn rung(self) -> Rung {
        match self {
            RungName::Identity => Rung::Identity,
            RungName::Sqrt => Rung::Sqrt,
            RungName::Log => Rung::Log,
            RungName::InvSqrt => Rung::InvSqrt,
            RungName::Inverse => Rung::Inverse,
        }
    }
}

/// `[ladder]`: the choice of rung.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LadderSection {
    /// Rung to start on (default `identity`).
    pub initial_rung: Option<RungName>,
    /// α of the switch: margin = χ²₁(1 − α)/2 (default 0.001 → 5.414).
    pub switch_alpha: Option<Alpha>,
    /// The switch margin itself, log-likelihood units (instead of `switch_alpha`).
    pub switch_margin: Option<Positive>,
    /// Consecutive winning checks before a switch (default 200).
    pub switch_hold: Option<u32>,
}

/// `[spread]`: the spread-against-level model.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpreadSection {
    /// α of the Koenker test: threshold = χ²₁(1 − α) (default 0.001 → 10.83).
    pub alpha: Option<Alpha>,
    /// The Koenker threshold itself (instead of `alpha`).
    pub threshold: Option<Positive>,
    /// Checks between evaluations of k and the Koenker statistic (default 32).
    pub every: Option<AtLeastOne>,
    /// Confidence level of the interval reported for k (default 0.95 → z = 1.960).
    pub interval_level: Option<Alpha>,
    /// The interval's normal quantile itself (instead of `interval_level`).
    pub interval_z: Option<Positive>,
}

/// `[mean_check]`: the mean-adequacy check after a switch.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MeanCheckSection {
    /// α of the check: z = Φ⁻¹(1 − α) (default 0.001 → 3.090).
    pub alpha: Option<Alpha>,
    /// The normal quantile itself (instead of `alpha`).
    pub z: Option<Positive>,
    /// Checks after a switch before the check runs (default 1000).
    pub after: Option<u32>,
    /// Residuals a level bin needs to take part (default 20).
    pub min_per_bin: Option<u32>,
}

/// `[readings]`: calibrated readings.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReadingsSection {
    /// Coverage factor of the expanded uncertainty (default 2).
    pub coverage_factor: Option<Positive>,
}

/// `[columns]`: header names of the feed's columns (the command-line options win).
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ColumnsSection {
    /// Time column (default `t`).
    pub time: Option<String>,
    /// Raw output column (default `raw`).
    pub raw: Option<String>,
    /// Reference column (default `ref`).
    pub reference: Option<String>,
    /// Temperature column (default `temp`).
    pub temperature: Option<String>,
}

/// The whole configuration file.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ConfigFile {
    /// `[range]`.
    #[serde(default)]
    pub range: RangeSection,
    /// `[basis]`.
    #[serde(default)]
    pub basis: BasisSection,
    /// `[fit]`.
    #[serde(default)]
    pub fit: FitSection,
    /// `[ladder]`.
    #[serde(default)]
    pub ladder: LadderSection,
    /// `[spread]`.
    #[serde(default)]
    pub spread: SpreadSection,
    /// `[mean_check]`.
    #[serde(default)]
    pub mean_check: MeanCheckSection,
    /// `[readings]`.
    #[serde(default)]
    pub readings: ReadingsSection,
    /// `[columns]`.
    #[serde(default)]
    pub columns: ColumnsSection,
    // RESERVED FOR THE DETECTORS: `[detect]` (tolerances, physical range, CUSUM k/h, stuck
    // run, spike bound, reference gap, drift α). Until MonitorConfig has a `detect` field
    // the section is refused with a clear message rather than silently ignored; map it in
    // `ConfigFile::monitor_config` once the field exists.
    /// `[detect]`: reserved for the detector settings (refused by this build).
    #[serde(default)]
    pub detect: Option<toml::Table>,
}

/// A configuration that cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum ConfigError {
    /// The file cannot be read.
    #[error("{file}: cannot read: {source}")]
    Io {
        /// File name.
        file: String,
        /// The cause.
        source: std::io::Error,
    },
    /// toml or serde refused the text (syntax, unknown key, wrong type, out-of-range value);
    /// the message carries line, column and the offending line.
    #[error("{file}: {message}")]
    Parse {
        /// File name.
        file: String,
        /// toml's message.
        message: String,
    },
    /// A key's value does not fit with the others.
    #[error("{file}: `{key}`: {message}")]
    Key {
        /// File name.
        file: String,
        /// Dotted key.
        key: String,
        /// What is wrong.
        message: String,
    },
}

/// χ²₁ upper quantile `χ²₁(1 − α)`.
pub fn chi_squared_1_quantile(alpha: f64) -> f64 {
    // ChiSquared::new(1.0) cannot fail: 1 degree of freedom is valid.
    ChiSquared::new(1.0)
        .map(|d| d.inverse_cdf(1.0 - alpha))
        .unwrap_or(f64::NAN)
}

/// Standard normal upper quantile `Φ⁻¹(1 − α)`.
pub fn normal_quantile(alpha: f64) -> f64 {
    Normal::new(0.0, 1.0)
        .map(|d| d.inverse_cdf(1.0 - alpha))
        .unwrap_or(f64::NAN)
}

fn exclusive<T: Copy>(
    file: &str,
    a: (&str, Option<T>),
    b: (&str, Option<T>),
) -> Result<(), ConfigError> {
    if a.1.is_some() && b.1.is_some() {
        return Err(ConfigError::Key {
            file: file.into(),
            key: b.0.into(),
            message: format!("give either `{}` or `{}`, not both", a.0, b.0),
        });
    }
    Ok(())
}

impl ConfigFile {
    /// Parses TOML text; `file` names it in errors.
    pub fn parse(file: &str, text: &str) -> Result<Self, ConfigError> {
        let config: ConfigFile = toml::from_str(text).map_err(|error| ConfigError::Parse {
            file: file.into(),
            message: error.to_string().trim_end().to_string(),
        })?;
        if config.detect.is_some() {
            return Err(ConfigError::Key {
                file: file.into(),
                key: "detect".into(),
                message: "the detector settings are not supported by this build yet".into(),
            });
        }
        Ok(config)
    }

    /// Reads and parses a file.
    pub fn read(path: &Path) -> Result<Self, ConfigError> {
        let file = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|source| ConfigError::Io {
            file: file.clone(),
            source,
        })?;
        Self::parse(&file, &text)
    }

    /// The monitor configuration, starting from the defaults of
    /// [`MonitorConfig::default_for_range`] over `[range]` and overriding every key given.
    pub fn monitor_config(&self, file: &str) -> Result<MonitorConfig<f64>, ConfigError> {
        let low = self.range.low.map(|v| v.0).unwrap_or(1.0);
        let high = self.range.high.map(|v| v.0).unwrap_or(1000.0);
        if low >= high {
            return Err(ConfigError::Key {
                file: file.into(),
                key: "range.low".into(),
                message: format!("must be below `range.high` ({low} ≥ {high})"),
            });
        }
        let mut config = MonitorConfig::<f64>::default_for_range(low, high);
        if let Some(origin) = self.range.origin {
            config.level_origin = origin.0;
        }
        let basis = &self.basis;
        if let Some(value) = basis.quadratic {
            config.basis.quadratic = value;
        }
        if let Some(value) = basis.temperature {
            config.basis.temperature = value;
        }
        if let Some(value) = basis.reference_scale {
            config.basis.reference_scale = value.0;
        }
        if let Some(value) = basis.temperature_reference {
            config.basis.temperature_reference = value.0;
        }
        if let Some(value) = basis.temperature_scale {
            config.basis.temperature_scale = value.0;
        }
        if config.basis.len() > 3 {
            return Err(ConfigError::Key {
                file: file.into(),
                key: "basis.temperature".into(),
                message:
                    "the monitor holds 3 parameters: use `quadratic` or `temperature`, not both"
                        .into(),
            });
        }
        if let Some(value) = self.fit.forgetting {
            config.forgetting = value.0;
        }
        if let Some(value) = self.fit.initial_variance {
            config.initial_variance = value.0;
        }
        if let Some(value) = self.fit.warm_up {
            config.warm_up = value;
        }
        let ladder = &self.ladder;
        exclusive(
            file,
            ("ladder.switch_alpha", ladder.switch_alpha.map(|_| ())),
            ("ladder.switch_margin", ladder.switch_margin.map(|_| ())),
        )?;
        if let Some(rung) = ladder.initial_rung {
            config.initial_rung = rung.rung();
        }
        if let Some(alpha) = ladder.switch_alpha {
            config.switch_margin = chi_squared_1_quantile(alpha.0) / 2.0;
        }
        if let Some(margin) = ladder.switch_margin {
            config.switch_margin = margin.0;
        }
        if let Some(hold) = ladder.switch_hold {
            config.switch_hold = hold;
        }
        let spread = &self.spread;
        exclusive(
            file,
            ("spread.alpha", spread.alpha.map(|_| ())),
            ("spread.threshold", spread.threshold.map(|_| ())),
        )?;
        exclusive(
            file,
            ("spread.interval_level", spread.interval_level.map(|_| ())),
            ("spread.interval_z", spread.interval_z.map(|_| ())),
        )?;
        if let Some(alpha) = spread.alpha {
            config.spread_threshold = chi_squared_1_quantile(alpha.0);
        }
        if let Some(threshold) = spread.threshold {
            config.spread_threshold = threshold.0;
        }
        if let Some(every) = spread.every {
            config.spread_every = every.0;
        }
        if let Some(level) = spread.interval_level {
            config.interval_z = normal_quantile((1.0 - level.0) / 2.0);
        }
        if let Some(z) = spread.interval_z {
            config.interval_z = z.0;
        }
        let mean = &self.mean_check;
        exclusive(
            file,
            ("mean_check.alpha", mean.alpha.map(|_| ())),
            ("mean_check.z", mean.z.map(|_| ())),
        )?;
        if let Some(alpha) = mean.alpha {
            config.mean_check_z = normal_quantile(alpha.0);
        }
        if let Some(z) = mean.z {
            config.mean_check_z = z.0;
        }
        if let Some(after) = mean.after {
            config.mean_check_after = after;
        }
        if let Some(min) = mean.min_per_bin {
            config.mean_check_min_per_bin = min;
        }
        if let Some(factor) = self.readings.coverage_factor {
            config.coverage_factor = factor.0;
        }
        config.validate(3).map_err(|error| ConfigError::Key {
            file: file.into(),
            key: core_key(error.parameter()).into(),
            message: "out of range for the monitor".into(),
        })?;
        Ok(config)
    }
}

/// The config-file key of a core parameter name.
fn core_key(parameter: &str) -> &str {
    match parameter {
        "forgetting" => "fit.forgetting",
        "initial_variance" => "fit.initial_variance",
        "level_origin" => "range.origin",
        "level_low/level_high" => "range.low/range.high",
        "switch_margin" => "ladder.switch_margin",
        "spread_threshold" => "spread.threshold",
        "spread_every" => "spread.every",
        other => other,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn parse(text: &str) -> Result<MonitorConfig<f64>, ConfigError> {
        ConfigFile::parse("c.toml", text)?.monitor_config("c.toml")
    }

    #[test]
    fn empty_file_gives_core_defaults() {
        let config = parse("").unwrap();
        assert_eq!(config, MonitorConfig::<f64>::default_for_range(1.0, 1000.0));
    }

    #[test]
    fn alphas_become_the_core_default_thresholds() {
        // Core defaults (core/src/monitor.rs): 5.414, 10.828, 3.090, 1.960, which are
        // χ²₁(0.999)/2, χ²₁(0.999), Φ⁻¹(0.999), Φ⁻¹(0.975) (standard χ² and normal tables,
        // from memory); statrs 0.18 must reproduce them to the printed digits.
        let config = parse(
            "[ladder]\nswitch_alpha = 0.001\n[spread]\nalpha = 0.001\ninterval_level = 0.95\n[mean_check]\nalpha = 0.001\n",
        )
        .unwrap();
        assert!((config.switch_margin - 5.414).abs() < 5e-4);
        assert!((config.spread_threshold - 10.828).abs() < 5e-4);
        assert!((config.mean_check_z - 3.090).abs() < 5e-4);
        assert!((config.interval_z - 1.960).abs() < 5e-4);
    }

    #[test]
    fn unknown_key_wrong_type_and_range_name_the_key_with_line_and_column() {
        let error = parse("[fit]\nforgeting = 0.99\n").unwrap_err().to_string();
        assert!(error.contains("unknown field `forgeting`"), "{error}");
        assert!(error.contains("line 2, column 1"), "{error}");
        let error = parse("[fit]\nforgetting = \"high\"\n")
            .unwrap_err()
            .to_string();
        assert!(error.contains("invalid type"), "{error}");
        assert!(error.contains("forgetting"), "{error}");
        let error = parse("[ladder]\nswitch_alpha = 1.5\n")
            .unwrap_err()
            .to_string();
        assert!(error.contains("out of range: 1.5"), "{error}");
        assert!(error.contains("switch_alpha"), "{error}");
        assert!(error.contains("line 2"), "{error}");
        let error = parse("[range]\nlow = 10\nhigh = 5\n")
            .unwrap_err()
            .to_string();
        assert!(error.contains("`range.low`"), "{error}");
        let error = parse("[detect]\ncusum_h = 5\n").unwrap_err().to_string();
        assert!(error.contains("`detect`"), "{error}");
        let error = parse("[spread]\nalpha = 0.01\nthreshold = 6\n")
            .unwrap_err()
            .to_string();
        assert!(error.contains("not both"), "{error}");
    }
}
