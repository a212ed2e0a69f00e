//! From the file's sections to the core's configuration (and back: [`ConfigFile::complete`]
//! fills every key not given with the value in force, for the written file).

use statrs::distribution::{ChiSquared, ContinuousCDF, Normal};
use steadycal_core::detect::DetectConfig;
use steadycal_core::monitor::MonitorConfig;

use crate::error::Problem;
use crate::values::{AtLeastOne, Finite, Forgetting, Positive, RungName};
use crate::{ChannelConfig, ColumnsSection, ConfigFile};

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

/// The config-file key of a core parameter name.
fn core_key(parameter: &str) -> &str {
    match parameter {
        "forgetting" => "fit.forgetting",
        "initial_variance" => "fit.initial_variance",
        "level_origin" => "range.origin",
        "level_low/level_high" => "range.low",
        "switch_margin" => "ladder.switch_margin",
        "spread_threshold" => "spread.threshold",
        "spread_every" => "spread.every",
        "coverage_factor/interval_z/mean_check_z" => "readings.coverage_factor",
        "detect.screen.raw_low/raw_high" => "detect.screen.raw_low",
        other => other,
    }
}

fn set<T, V>(target: &mut T, value: Option<V>, map: impl Fn(V) -> T) {
    if let Some(value) = value {
        *target = map(value);
    }
}

impl ConfigFile {
    /// See [`ConfigFile::channel`].
    pub(crate) fn resolve(&self) -> Result<ChannelConfig, Problem> {
        let low = self.range.low.map(|v| v.0).unwrap_or(1.0);
        let high = self.range.high.map(|v| v.0).unwrap_or(1000.0);
        if low >= high {
            return Err(Problem::new(
                "range.low",
                format!("must be below `range.high` ({low} ≥ {high})"),
            ));
        }
        let mut config = MonitorConfig::<f64>::default_for_range(low, high);
        set(&mut config.level_origin, self.range.origin, |v| v.0);
        // A given origin is known: it is used from the first check; otherwise the monitor
        // finds the sensor's baseline (steadycal_core::origin).
        config.find_baseline = self.range.origin.is_none();
        config.detect = DetectConfig::default_for_range(config.level_origin, low, high);
        let basis = &self.basis;
        let b = &mut config.basis;
        set(&mut b.quadratic, basis.quadratic, |v| v);
        set(&mut b.temperature, basis.temperature, |v| v);
        set(&mut b.reference_scale, basis.reference_scale, |v| v.0);
        set(
            &mut b.temperature_reference,
            basis.temperature_reference,
            |v| v.0,
        );
        set(&mut b.temperature_scale, basis.temperature_scale, |v| v.0);
        if config.basis.len() > 3 {
            return Err(Problem::new(
                "basis.temperature",
                "the monitor holds 3 parameters: use `quadratic` or `temperature`, not both",
            ));
        }
        set(&mut config.forgetting, self.fit.forgetting, |v| v.0);
        set(
            &mut config.initial_variance,
            self.fit.initial_variance,
            |v| v.0,
        );
        set(&mut config.warm_up, self.fit.warm_up, |v| v);
        let ladder = &self.ladder;
        Problem::exclusive(
            ("ladder.switch_alpha", ladder.switch_alpha.is_some()),
            ("ladder.switch_margin", ladder.switch_margin.is_some()),
        )?;
        set(&mut config.initial_rung, ladder.initial_rung, |r| r.rung());
        set(&mut config.switch_margin, ladder.switch_alpha, |a| {
            chi_squared_1_quantile(a.0) / 2.0
        });
        set(&mut config.switch_margin, ladder.switch_margin, |v| v.0);
        set(&mut config.switch_hold, ladder.switch_hold, |v| v);
        let spread = &self.spread;
        Problem::exclusive(
            ("spread.alpha", spread.alpha.is_some()),
            ("spread.threshold", spread.threshold.is_some()),
        )?;
        Problem::exclusive(
            ("spread.interval_level", spread.interval_level.is_some()),
            ("spread.interval_z", spread.interval_z.is_some()),
        )?;
        set(&mut config.spread_threshold, spread.alpha, |a| {
            chi_squared_1_quantile(a.0)
        });
        set(&mut config.spread_threshold, spread.threshold, |v| v.0);
        set(&mut config.spread_every, spread.every, |v| v.0);
        set(&mut config.interval_z, spread.interval_level, |level| {
            normal_quantile((1.0 - level.0) / 2.0)
        });
        set(&mut config.interval_z, spread.interval_z, |v| v.0);
        let mean = &self.mean_check;
        Problem::exclusive(
            ("mean_check.alpha", mean.alpha.is_some()),
            ("mean_check.z", mean.z.is_some()),
        )?;
        set(&mut config.mean_check_z, mean.alpha, |a| {
            normal_quantile(a.0)
        });
        set(&mut config.mean_check_z, mean.z, |v| v.0);
        set(&mut config.mean_check_after, mean.after, |v| v);
        set(&mut config.mean_check_min_per_bin, mean.min_per_bin, |v| v);
        set(
            &mut config.coverage_factor,
            self.readings.coverage_factor,
            |v| v.0,
        );
        let cusum_sizing = self.detect.apply(&mut config.detect)?;
        config.validate(3).map_err(|error| {
            Problem::new(
                core_key(error.parameter()),
                "out of range for the monitor (with the other settings)",
            )
        })?;
        let baseline = match &self.baseline {
            Some(section) => Some(section.resolve(&config.basis)?),
            None => None,
        };
        if let Some(acceptance) = &self.acceptance {
            acceptance.check()?;
        }
        Ok(ChannelConfig {
            monitor: config,
            baseline,
            cusum_sizing,
        })
    }

    /// The same file with every key not given set to the value in force (a setting given in
    /// the engineer's terms, an α or a run length, keeps that form), so a written file
    /// shows everything the monitor runs with.
    pub fn complete(&self) -> Result<ConfigFile, Problem> {
        let channel = self.resolve()?;
        let c = &channel.monitor;
        let mut file = self.clone();
        let range = &mut file.range;
        range.low.get_or_insert(Positive(c.level_low));
        range.high.get_or_insert(Positive(c.level_high));
        // `range.origin` stays unset unless given: the monitor then finds the sensor's
        // baseline, which a written value would replace.
        let basis = &mut file.basis;
        basis.quadratic.get_or_insert(c.basis.quadratic);
        basis.temperature.get_or_insert(c.basis.temperature);
        basis
            .reference_scale
            .get_or_insert(Positive(c.basis.reference_scale));
        basis
            .temperature_reference
            .get_or_insert(Finite(c.basis.temperature_reference));
        basis
            .temperature_scale
            .get_or_insert(Positive(c.basis.temperature_scale));
        let fit = &mut file.fit;
        fit.forgetting.get_or_insert(Forgetting(c.forgetting));
        fit.initial_variance
            .get_or_insert(Positive(c.initial_variance));
        fit.warm_up.get_or_insert(c.warm_up);
        let ladder = &mut file.ladder;
        ladder
            .initial_rung
            .get_or_insert(RungName::of(c.initial_rung));
        if ladder.switch_alpha.is_none() {
            ladder
                .switch_margin
                .get_or_insert(Positive(c.switch_margin));
        }
        ladder.switch_hold.get_or_insert(c.switch_hold);
        let spread = &mut file.spread;
        if spread.alpha.is_none() {
            spread.threshold.get_or_insert(Positive(c.spread_threshold));
        }
        spread.every.get_or_insert(AtLeastOne(c.spread_every));
        if spread.interval_level.is_none() {
            spread.interval_z.get_or_insert(Positive(c.interval_z));
        }
        let mean = &mut file.mean_check;
        if mean.alpha.is_none() {
            mean.z.get_or_insert(Positive(c.mean_check_z));
        }
        mean.after.get_or_insert(c.mean_check_after);
        mean.min_per_bin.get_or_insert(c.mean_check_min_per_bin);
        file.readings
            .coverage_factor
            .get_or_insert(Positive(c.coverage_factor));
        let columns = &mut file.columns;
        let defaults = ColumnsSection::defaults();
        columns
            .time
            .get_or_insert(defaults.time.unwrap_or_default());
        columns.raw.get_or_insert(defaults.raw.unwrap_or_default());
        columns
            .reference
            .get_or_insert(defaults.reference.unwrap_or_default());
        columns
            .temperature
            .get_or_insert(defaults.temperature.unwrap_or_default());
        columns.missing.get_or_insert_with(Vec::new);
        file.detect.complete(&c.detect);
        Ok(file)
    }
}

impl ColumnsSection {
    /// The default column names (`t`, `raw`, `ref`, `temp`).
    pub fn defaults() -> Self {
        ColumnsSection {
            time: Some("t".into()),
            raw: Some("raw".into()),
            reference: Some("ref".into()),
            temperature: Some("temp".into()),
            missing: Some(Vec::new()),
        }
    }
}
