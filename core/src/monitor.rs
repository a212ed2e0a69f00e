//! The monitor of one sensor channel: screen, fit, spread model, ladder, readings, events.
//!
//! [`Monitor::push`] takes one [`Sample`]. A sample with a reference (a *check*) updates the
//! calibration: every rung's fit on the [`PowerLadder`], the [`SpreadProfile`] of the active
//! fit's residuals against level, and the rung choice. A sample without a reference returns
//! a calibrated [`Reading`]: the inverse prediction through the active fit, with standard
//! and expanded uncertainty from the parameter covariance and the spread model at that level
//! (the classical calibration standard error generalized through the transform by the delta
//! method: `Var(x̂) = σ²·(1/w(f) + xᵀPx) / b²`, with `w` the rung's weight and `b` the slope).
//!
//! # Invariants
//! - `push` never panics and never stores a NaN: a non-finite raw, reference or temperature
//!   is rejected (and reported) before it touches any state.
//! - Everything is fixed-size: `size_of::<Monitor<f32>>()` is a compile-time constant (see
//!   the README for the figure) and nothing allocates.
//! - Events go into a bounded queue; the caller drains it with [`Monitor::pop_event`]. When
//!   it is full the event is counted in [`Monitor::events_dropped`], never silently lost.

use serde::{Deserialize, Serialize};

use crate::adequacy::MeanCheck;
use crate::basis::{Basis, BasisError};
use crate::event::{AlarmKind, Event, EventKind, EventQueue, RejectReason};
use crate::fit::FitConfig;
use crate::ladder::{LadderConfig, PowerLadder};
use crate::real::Real;
use crate::sample::{Flags, Outcome, Reading, Sample};
use crate::spread::{SpreadConfig, SpreadExponent, SpreadProfile};
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
    /// Levels are measured above this origin; power rungs need values above it.
    pub level_origin: R,
    /// Lower end of the working range, raw units above the origin (spread bins start here).
    pub level_low: R,
    /// Upper end of the working range, raw units above the origin.
    pub level_high: R,
    /// Checks before the spread bins and the ladder's likelihoods start.
    pub warm_up: u32,
    /// Log-likelihood lead a rung needs to count as winning (default χ²₁(0.999)/2 = 5.41;
    /// the quantile 10.83 from standard χ² tables, from memory).
    pub switch_margin: R,
    /// Consecutive winning checks before a switch.
    pub switch_hold: u32,
    /// Rung to start on.
    pub initial_rung: Rung,
    /// Koenker statistic above which the scatter is said to track the level (default
    /// χ²₁(0.999) = 10.83, standard χ² tables, from memory).
    pub spread_threshold: R,
    /// How often (in checks) the spread exponent and Koenker statistic are evaluated.
    pub spread_every: u32,
    /// Checks after a switch before the mean-adequacy check runs.
    pub mean_check_after: u32,
    /// Residuals a level bin needs to take part in the mean-adequacy check.
    pub mean_check_min_per_bin: u32,
    /// Standard normal quantile of the mean-adequacy check (default 3.090 for α = 0.001,
    /// standard normal tables, from memory).
    pub mean_check_z: R,
    /// Normal quantile of the interval reported for k (default 1.96 for 95 %).
    pub interval_z: R,
    /// Coverage factor of the expanded uncertainty (default 2).
    pub coverage_factor: R,
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
        }
    }
}

fn positive<R: Real>(value: R) -> bool {
    value.is_finite() && value > R::ZERO
}

impl<R: Real> MonitorConfig<R> {
    /// Defaults for a straight-line calibration over the working range `[low, high]` (raw
    /// units above an origin of 0): β = 0.999 (memory of about 1000 checks), warm-up 200
    /// checks, switch after a lead of 5.41 held for 200 checks, spread evaluated every 32
    /// checks, mean check 1000 checks after a switch, k = 2 coverage.
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
        }
    }

    /// Checks every value, naming the first offending parameter.
    pub fn validate(&self, capacity: usize) -> Result<(), ConfigError> {
        let beta = self.forgetting;
        if !(beta.is_finite() && beta > R::ZERO && beta <= R::ONE) {
            return Err(ConfigError::Forgetting);
        }
        if !positive(self.initial_variance) {
            return Err(ConfigError::InitialVariance);
        }
        if !self.level_origin.is_finite() {
            return Err(ConfigError::LevelOrigin);
        }
        if !(positive(self.level_low)
            && positive(self.level_high)
            && self.level_low < self.level_high)
        {
            return Err(ConfigError::LevelRange);
        }
        if !(self.switch_margin.is_finite() && self.switch_margin >= R::ZERO) {
            return Err(ConfigError::SwitchMargin);
        }
        if !positive(self.spread_threshold) {
            return Err(ConfigError::SpreadThreshold);
        }
        if !(positive(self.coverage_factor)
            && positive(self.interval_z)
            && positive(self.mean_check_z))
        {
            return Err(ConfigError::Quantile);
        }
        if self.spread_every == 0 {
            return Err(ConfigError::SpreadEvery);
        }
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
            level_floor: self.level_low / scale,
            warm_up: self.warm_up,
            switch_margin: self.switch_margin,
            switch_hold: self.switch_hold,
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

/// Running counts of what the monitor has seen.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Counters {
    /// Samples pushed.
    pub samples: u64,
    /// Samples with a reference that were accepted.
    pub checks: u64,
    /// Samples the screen rejected.
    pub rejected: u64,
    /// Checks at or below the level origin (not used by the power rungs).
    pub below_origin: u64,
    /// Readings produced.
    pub readings: u64,
}

/// The monitor of one channel: `P` fit parameters at most, `BINS` spread bins, an event
/// queue of `Q`.
///
/// ```
/// use steadycal_core::monitor::{Monitor, MonitorConfig};
/// use steadycal_core::sample::Sample;
/// let config = MonitorConfig::<f64>::default_for_range(1.0, 100.0);
/// let mut monitor: Monitor<f64> = Monitor::new(config).unwrap();
/// for i in 0..50u64 {
///     let reference = 1.0 + (i % 10) as f64 * 10.0;
///     monitor.push(&Sample::check(i, i as f64, 0.5 + 2.0 * reference, reference));
/// }
/// let outcome = monitor.push(&Sample::reading(50, 50.0, 100.5));
/// let reading = outcome.reading.unwrap();
/// assert!((reading.value - 50.0).abs() < 1e-6);
/// ```
#[derive(Clone, Debug, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct Monitor<R, const P: usize = 3, const BINS: usize = 16, const Q: usize = 8> {
    config: MonitorConfig<R>,
    ladder_config: LadderConfig<R>,
    ladder: PowerLadder<R, P>,
    spread: SpreadProfile<R, BINS>,
    mean_check: MeanCheck<R, BINS>,
    events: EventQueue<R, Q>,
    counters: Counters,
    spread_raised: bool,
    last_exponent: Option<SpreadExponent<R>>,
}

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Monitor<R, P, BINS, Q> {
    /// A fresh monitor; fails on an unusable configuration.
    pub fn new(config: MonitorConfig<R>) -> Result<Self, ConfigError> {
        config.validate(P)?;
        let ladder_config = config.ladder();
        Ok(Monitor {
            config,
            ladder_config,
            ladder: PowerLadder::new(config.basis.len(), &ladder_config, config.initial_rung),
            spread: SpreadProfile::new(config.spread()),
            mean_check: MeanCheck::new(),
            events: EventQueue::new(),
            counters: Counters::default(),
            spread_raised: false,
            last_exponent: None,
        })
    }

    /// The configuration.
    pub fn config(&self) -> &MonitorConfig<R> {
        &self.config
    }

    /// The active rung.
    pub fn rung(&self) -> Rung {
        self.ladder.active()
    }

    /// The ladder (every rung's fit and likelihood).
    pub fn ladder(&self) -> &PowerLadder<R, P> {
        &self.ladder
    }

    /// The spread profile of the active fit's residuals.
    pub fn spread(&self) -> &SpreadProfile<R, BINS> {
        &self.spread
    }

    /// The last evaluated spread exponent.
    pub fn spread_exponent(&self) -> Option<SpreadExponent<R>> {
        self.last_exponent
    }

    /// Counts of samples, checks, rejections and readings.
    pub fn counters(&self) -> Counters {
        self.counters
    }

    /// The active calibration in physical units: `[offset, gain, quadratic, temperature]`.
    pub fn parameters(&self) -> [R; 4] {
        self.config
            .basis
            .physical(&self.ladder.active_fit().parameters())
    }

    /// Takes the oldest waiting event.
    pub fn pop_event(&mut self) -> Option<Event<R>> {
        self.events.pop()
    }

    /// Events dropped because the queue was full.
    pub fn events_dropped(&self) -> u32 {
        self.events.dropped()
    }

    fn raise(&mut self, seq: u64, kind: EventKind<R>, outcome: &mut Outcome<R>) {
        outcome.new_events = outcome.new_events.saturating_add(1);
        if !self.events.push(Event { seq, kind }) {
            outcome.flags.insert(Flags::EVENTS_DROPPED);
        }
    }

    fn reject(&mut self, sample: &Sample<R>, reason: RejectReason, outcome: &mut Outcome<R>) {
        self.counters.rejected += 1;
        outcome.flags.insert(Flags::REJECTED);
        self.raise(sample.seq, EventKind::SampleRejected { reason }, outcome);
    }

    /// Processes one sample. Never panics, whatever the values.
    pub fn push(&mut self, sample: &Sample<R>) -> Outcome<R> {
        let mut outcome = Outcome {
            reading: None,
            flags: Flags::empty(),
            new_events: 0,
        };
        self.counters.samples += 1;
        if !sample.raw.is_finite() {
            self.reject(sample, RejectReason::NonFiniteRaw, &mut outcome);
            return outcome;
        }
        if matches!(sample.temperature, Some(t) if !t.is_finite()) && self.config.basis.temperature
        {
            self.reject(sample, RejectReason::NonFiniteTemperature, &mut outcome);
            return outcome;
        }
        let temperature = sample.temperature.filter(|t| t.is_finite());
        match sample.reference {
            Some(reference) if !reference.is_finite() => {
                self.reject(sample, RejectReason::NonFiniteReference, &mut outcome);
            }
            Some(reference) => self.check(sample, reference, temperature, &mut outcome),
            None => self.read(sample, temperature, &mut outcome),
        }
        if !self.ladder.warmed_up(&self.ladder_config) {
            outcome.flags.insert(Flags::WARMING_UP);
        }
        outcome
    }

    fn check(
        &mut self,
        sample: &Sample<R>,
        reference: R,
        temperature: Option<R>,
        outcome: &mut Outcome<R>,
    ) {
        outcome.flags.insert(Flags::CHECK);
        let x: [R; P] = self.config.basis.regressors(reference, temperature);
        let warmed_up = self.ladder.warmed_up(&self.ladder_config);
        let step = self.ladder.update(&self.ladder_config, &x, sample.raw);
        self.counters.checks += 1;
        if step.below_origin {
            self.counters.below_origin += 1;
            outcome.flags.insert(Flags::BELOW_ORIGIN);
            if step.switch.is_none() && self.ladder.active().needs_positive() {
                self.raise(
                    sample.seq,
                    EventKind::SampleRejected {
                        reason: RejectReason::BelowOrigin,
                    },
                    outcome,
                );
            }
        }
        let level = step.prediction - self.config.level_origin;
        if warmed_up {
            self.spread.push(level, step.residual);
            if let (Some(bin), Some(z)) = (self.spread.bin_of(level), step.standardized) {
                self.mean_check.push(bin, z);
            }
        }
        if let Some(switch) = step.switch {
            self.raise(
                sample.seq,
                EventKind::TransformChanged {
                    from: switch.from,
                    to: switch.to,
                    gain: switch.gain,
                },
                outcome,
            );
            self.mean_check.arm();
        }
        if self.mean_check.armed() && self.mean_check.since_reset() >= self.config.mean_check_after
        {
            let z = self.config.mean_check_z;
            if let Some(result) = self
                .mean_check
                .evaluate(self.config.mean_check_min_per_bin, z)
            {
                if result.misfit {
                    let basis = self.config.basis;
                    let kind = EventKind::MeanMisfit {
                        rung: self.ladder.active(),
                        statistic: result.statistic,
                        dof: result.dof,
                        suggest_quadratic: !basis.quadratic && result.curved,
                        suggest_temperature: !basis.temperature && temperature.is_some(),
                    };
                    self.raise(sample.seq, kind, outcome);
                }
            }
        }
        if warmed_up
            && self
                .counters
                .checks
                .is_multiple_of(self.config.spread_every as u64)
        {
            self.evaluate_spread(sample.seq, outcome);
        }
    }

    fn evaluate_spread(&mut self, seq: u64, outcome: &mut Outcome<R>) {
        let exponent = self.spread.exponent();
        self.last_exponent = exponent;
        let (Some(exponent), Some(koenker)) = (exponent, self.spread.koenker()) else {
            return;
        };
        let half_width = self.config.interval_z * exponent.standard_error;
        let (k_low, k_high) = (exponent.k - half_width, exponent.k + half_width);
        let tracks = koenker.statistic > self.config.spread_threshold
            && (k_low > R::ZERO || k_high < R::ZERO);
        if tracks && !self.spread_raised {
            self.spread_raised = true;
            self.raise(
                seq,
                EventKind::SpreadTracksLevel {
                    k: exponent.k,
                    k_low,
                    k_high,
                },
                outcome,
            );
        } else if self.spread_raised && koenker.statistic < R::HALF * self.config.spread_threshold {
            self.spread_raised = false;
            self.raise(
                seq,
                EventKind::Cleared {
                    alarm: AlarmKind::SpreadTracksLevel,
                },
                outcome,
            );
        }
    }

    fn read(&mut self, sample: &Sample<R>, temperature: Option<R>, outcome: &mut Outcome<R>) {
        match self.reading(sample.raw, temperature) {
            Some(reading) => {
                self.counters.readings += 1;
                outcome.reading = Some(reading);
                if self.ladder.active().needs_positive() && !(sample.raw > self.config.level_origin)
                {
                    outcome.flags.insert(Flags::BELOW_ORIGIN);
                }
            }
            None => outcome.flags.insert(Flags::NO_READING),
        }
    }

    /// The calibrated reading for a raw value (inverse prediction through the active fit),
    /// or `None` before the fit is determined or where the calibration cannot be inverted.
    pub fn reading(&self, raw: R, temperature: Option<R>) -> Option<Reading<R>> {
        let fit = self.ladder.active_fit();
        if (fit.updates() as usize) <= fit.dim() {
            return None;
        }
        let basis = &self.config.basis;
        let theta = fit.parameters();
        let value = basis.invert(&theta, raw, temperature)?;
        let x: [R; P] = basis.regressors(value, temperature);
        let prediction = fit.predict(&x);
        let slope = basis.slope(&theta, value);
        let rung = self.ladder.active();
        let weight = PowerLadder::<R, P>::weight(&self.ladder_config, rung, prediction);
        let variance =
            fit.residual_variance() * (R::ONE / weight + fit.leverage(&x)) / (slope * slope);
        let standard_uncertainty = variance.sqrt();
        if !(value.is_finite() && standard_uncertainty.is_finite()) {
            return None;
        }
        Some(Reading {
            value,
            standard_uncertainty,
            expanded_uncertainty: self.config.coverage_factor * standard_uncertainty,
            rung,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn default_monitor_fits_in_two_kilobytes() {
        // Target from the design: Monitor<f32> with defaults (P = 3, 16 bins, 5 rungs,
        // queue of 8) at most 2048 bytes. The README states the measured figure.
        let size = core::mem::size_of::<Monitor<f32>>();
        std::eprintln!("size_of::<Monitor<f32>>() = {size}");
        assert!(size <= 2048, "{size}");
    }

    #[test]
    fn bad_config_names_parameter() {
        let mut config = MonitorConfig::<f32>::default_for_range(1.0, 100.0);
        config.forgetting = 1.5;
        let error = Monitor::<f32>::new(config).unwrap_err();
        assert_eq!(error.parameter(), "forgetting");
        let mut config = MonitorConfig::<f32>::default_for_range(100.0, 1.0);
        config.level_low = 100.0;
        assert_eq!(
            Monitor::<f32>::new(config).unwrap_err(),
            ConfigError::LevelRange
        );
    }

    #[test]
    fn non_finite_samples_are_rejected_without_touching_state() {
        let config = MonitorConfig::<f32>::default_for_range(1.0, 100.0);
        let mut monitor: Monitor<f32> = Monitor::new(config).unwrap();
        for value in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
            let outcome = monitor.push(&Sample::check(0, 0.0, value, 1.0));
            assert!(outcome.flags.contains(Flags::REJECTED));
            let outcome = monitor.push(&Sample::check(0, 0.0, 1.0, value));
            assert!(outcome.flags.contains(Flags::REJECTED));
            let outcome = monitor.push(&Sample::reading(0, 0.0, value));
            assert!(outcome.flags.contains(Flags::REJECTED));
        }
        assert_eq!(monitor.counters().checks, 0);
        assert_eq!(monitor.counters().rejected, 9);
        assert_eq!(monitor.events_dropped(), 1); // queue of 8, 9 rejections
    }
}
