//! The monitor's configuration ([`MonitorConfig`]): its defaults, its validation
//! ([`MonitorConfig::validate`], one rule per setting, the first offending setting named by
//! [`ConfigError`]), its conversion to another float type, and the views the ladder and the
//! spread profile take of it.
//!
//! # Invariants
//! - A configuration that passed [`MonitorConfig::validate`] never makes the monitor divide
//!   by zero, loop or store a NaN: every float setting is finite, the scales positive, the
//!   working range ordered, every period at least 1.
//! - Nothing here panics.

use serde::{Deserialize, Serialize};

use crate::basis::{Basis, BasisError};
use crate::detect::{DetectConfig, DetectConfigError};
use crate::fit::FitConfig;
use crate::ladder::LadderConfig;
use crate::real::{non_negative_setting, positive_setting, Real};
use crate::spread::SpreadConfig;
use crate::transform::Rung;

/// Everything a monitor is configured with. One configuration can serve many channels.
///
/// The defaults are documented on [`MonitorConfig::default_for_range`].
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct MonitorConfig<R> {
    /// Terms of the calibration mean and their scaling.
    pub basis: Basis<R>,
    /// Forgetting factor β of every fit and running sum, in (0, 1].
    pub forgetting: R,
    /// Initial covariance diagonal of the fits (also the wind-up ceiling).
    pub initial_variance: R,
    /// Levels are measured above this origin; power rungs need values above it. With
    /// `find_baseline`, only until the end of the warm-up.
    pub level_origin: R,
    /// From the end of the warm-up on, measure levels above the sensor's baseline (the
    /// fitted raw output at zero reference, see [`crate::origin`]) instead of
    /// `level_origin`. False when the origin is known (configured).
    pub find_baseline: bool,
    /// Lower end of the working range, raw units above the origin (spread bins start here).
    pub level_low: R,
    /// Upper end of the working range, raw units above the origin.
    pub level_high: R,
    /// Checks before the spread bins and the ladder's likelihoods start.
    pub warm_up: u32,
    /// Log-likelihood lead a rung needs to count as winning (default χ²₁(0.999)/2 = 5.41;
    /// the quantile 10.83: SciPy 1.11.4 `stats.chi2.ppf(0.999, 1)` = 10.8276).
    pub switch_margin: R,
    /// Consecutive winning checks before a switch.
    pub switch_hold: u32,
    /// Rung to start on.
    pub initial_rung: Rung,
    /// Koenker statistic above which the scatter is said to track the level (default
    /// χ²₁(0.999) = 10.83; SciPy 1.11.4 `stats.chi2.ppf(0.999, 1)` = 10.8276).
    pub spread_threshold: R,
    /// How often (in checks) the spread exponent and Koenker statistic are evaluated.
    pub spread_every: u32,
    /// Checks after a switch before the mean-adequacy check runs.
    pub mean_check_after: u32,
    /// Residuals a level bin needs to take part in the mean-adequacy check.
    pub mean_check_min_per_bin: u32,
    /// Standard normal quantile of the mean-adequacy check (default 3.090 for α = 0.001;
    /// SciPy 1.11.4 `stats.norm.isf(0.001)` = 3.0902).
    pub mean_check_z: R,
    /// Normal quantile of the interval reported for k (default 1.96 for 95 %).
    pub interval_z: R,
    /// Coverage factor of the expanded uncertainty (default 2).
    pub coverage_factor: R,
    /// Drift and fault detectors, and their alarm rules.
    pub detect: DetectConfig<R>,
}

/// A configuration value that is not usable.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum ConfigError {
    /// `forgetting` must be in (0, 1].
    Forgetting,
    /// `initial_variance` must be positive and finite.
    InitialVariance,
    /// `level_origin` must be finite.
    LevelOrigin,
    /// `level_low` and `level_high` must be finite with 0 < low < high.
    LevelRange,
    /// `switch_margin` must be non-negative and finite.
    SwitchMargin,
    /// `spread_threshold` must be positive and finite.
    SpreadThreshold,
    /// `coverage_factor`, `interval_z` and `mean_check_z` must be positive and finite.
    Quantile,
    /// `spread_every` must be at least 1.
    SpreadEvery,
    /// The basis is not usable.
    Basis(BasisError),
    /// A detector setting is not usable.
    Detect(DetectConfigError),
}

impl ConfigError {
    /// The name of the offending parameter, as written in config files.
    pub const fn parameter(self) -> &'static str {
        match self {
            ConfigError::Forgetting => "forgetting",
            ConfigError::InitialVariance => "initial_variance",
            ConfigError::LevelOrigin => "level_origin",
            ConfigError::LevelRange => "level_low/level_high",
            ConfigError::SwitchMargin => "switch_margin",
            ConfigError::SpreadThreshold => "spread_threshold",
            ConfigError::Quantile => "coverage_factor/interval_z/mean_check_z",
            ConfigError::SpreadEvery => "spread_every",
            ConfigError::Basis(_) => "basis",
            ConfigError::Detect(error) => error.parameter(),
        }
    }
}

impl<R: Real> MonitorConfig<R> {
    /// Defaults for a straight-line calibration over the working range `[low, high]` (raw
    /// units above an origin of 0): β = 0.999 (memory of about 1000 checks), warm-up 200
    /// checks, switch after a lead of 5.41 held for 200 checks, spread evaluated every 32
    /// checks, mean check 1000 checks after a switch, k = 2 coverage; detectors as
    /// documented on [`DetectConfig::default_for_range`].
    ///
    /// ```
    /// use steadycal_core::monitor::MonitorConfig;
    /// let config = MonitorConfig::<f32>::default_for_range(1.0, 1000.0);
    /// assert!(config.validate(3).is_ok());
    /// ```
    pub fn default_for_range(low: R, high: R) -> Self {
        let mut basis = Basis::linear(high);
        basis.temperature_scale = R::from_f64(10.0);
        MonitorConfig {
            basis,
            forgetting: R::from_f64(0.999),
            initial_variance: R::from_f64(1e6),
            level_origin: R::ZERO,
            find_baseline: true,
            level_low: low,
            level_high: high,
            warm_up: 200,
            switch_margin: R::from_f64(5.414),
            switch_hold: 200,
            initial_rung: Rung::Identity,
            spread_threshold: R::from_f64(10.828),
            spread_every: 32,
            mean_check_after: 1000,
            mean_check_min_per_bin: 20,
            mean_check_z: R::from_f64(3.090),
            interval_z: R::from_f64(1.960),
            coverage_factor: R::TWO,
            detect: DetectConfig::default_for_range(R::ZERO, low, high),
        }
    }

    /// Checks every value, naming the first offending parameter.
    pub fn validate(&self, capacity: usize) -> Result<(), ConfigError> {
        let beta = self.forgetting;
        if !(positive_setting(beta) && beta <= R::ONE) {
            return Err(ConfigError::Forgetting);
        }
        if !positive_setting(self.initial_variance) {
            return Err(ConfigError::InitialVariance);
        }
        if !self.level_origin.is_finite() {
            return Err(ConfigError::LevelOrigin);
        }
        if !(positive_setting(self.level_low)
            && positive_setting(self.level_high)
            && self.level_low < self.level_high)
        {
            return Err(ConfigError::LevelRange);
        }
        if !non_negative_setting(self.switch_margin) {
            return Err(ConfigError::SwitchMargin);
        }
        if !positive_setting(self.spread_threshold) {
            return Err(ConfigError::SpreadThreshold);
        }
        if !(positive_setting(self.coverage_factor)
            && positive_setting(self.interval_z)
            && positive_setting(self.mean_check_z))
        {
            return Err(ConfigError::Quantile);
        }
        if self.spread_every == 0 {
            return Err(ConfigError::SpreadEvery);
        }
        self.detect.validate().map_err(ConfigError::Detect)?;
        self.basis.validate(capacity).map_err(ConfigError::Basis)
    }

    /// The same configuration in another float type (values rounded to nearest).
    ///
    /// ```
    /// use steadycal_core::monitor::MonitorConfig;
    /// let wide = MonitorConfig::<f64>::default_for_range(1.0, 1000.0);
    /// let narrow: MonitorConfig<f32> = wide.convert();
    /// assert_eq!(narrow.forgetting, 0.999f32);
    /// ```
    pub fn convert<S: Real>(&self) -> MonitorConfig<S> {
        let c = |value: R| S::from_f64(value.to_f64());
        let basis = self.basis;
        MonitorConfig {
            basis: Basis {
                quadratic: basis.quadratic,
                temperature: basis.temperature,
                reference_scale: c(basis.reference_scale),
                temperature_reference: c(basis.temperature_reference),
                temperature_scale: c(basis.temperature_scale),
            },
            forgetting: c(self.forgetting),
            initial_variance: c(self.initial_variance),
            level_origin: c(self.level_origin),
            find_baseline: self.find_baseline,
            level_low: c(self.level_low),
            level_high: c(self.level_high),
            warm_up: self.warm_up,
            switch_margin: c(self.switch_margin),
            switch_hold: self.switch_hold,
            initial_rung: self.initial_rung,
            spread_threshold: c(self.spread_threshold),
            spread_every: self.spread_every,
            mean_check_after: self.mean_check_after,
            mean_check_min_per_bin: self.mean_check_min_per_bin,
            mean_check_z: c(self.mean_check_z),
            interval_z: c(self.interval_z),
            coverage_factor: c(self.coverage_factor),
            detect: self.detect.convert(),
        }
    }

    /// The ladder's view of this configuration.
    pub fn ladder(&self) -> LadderConfig<R> {
        let scale = (self.level_low * self.level_high).sqrt();
        LadderConfig {
            fit: FitConfig {
                forgetting: self.forgetting,
                initial_variance: self.initial_variance,
            },
            level_origin: self.level_origin,
            level_scale: scale,
            inverse_level_scale: R::ONE / scale,
            log_level_scale: scale.ln(),
            level_floor: self.level_low / scale,
            warm_up: self.warm_up,
            switch_margin: self.switch_margin,
            switch_hold: self.switch_hold,
            decide_every: 8,
        }
    }

    /// The spread profile's view of this configuration.
    pub fn spread(&self) -> SpreadConfig<R> {
        SpreadConfig {
            level_low: self.level_low,
            level_high: self.level_high,
            forgetting: self.forgetting,
        }
    }
}

// The snapshot codec of the configuration (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] MonitorConfig<R> {
    basis, forgetting, initial_variance, level_origin, find_baseline, level_low, level_high,
    warm_up,
    switch_margin, switch_hold, initial_rung, spread_threshold, spread_every,
    mean_check_after, mean_check_min_per_bin, mean_check_z, interval_z, coverage_factor,
    detect,
});
