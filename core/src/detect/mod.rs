//! Detectors of drift and sensor faults, and the alarm state machine that decides when
//! they are raised.
//!
//! Every statistic here works on residuals standardized by the spread model at the
//! sample's own level (the active rung's `σ²·(1/w(f) + xᵀPx)`), never by one global sigma:
//! a constant-sigma test raises false alarms at the top of the range and misses drift at
//! the bottom when the scatter tracks the level.
//!
//! - [`screen`]: physical range, stuck signal, spikes, reference gap.
//! - [`cusum`]: two-sided tabular CUSUM (`bias_shift`).
//! - [`drift`]: Wald test against the baseline AND engineering tolerance (`gain_drift`,
//!   `offset_drift`).
//! - [`spread_jump`]: one-sided CUSUM on `ln z²` (`spread_jump`).
//! - [`alarm`]: raise after a sustained signal, clear after a quiet period.
//!
//! # Invariants
//! - No state allocates; all state is serde-serializable for snapshots.
//! - A [`DetectConfig`] that passed [`DetectConfig::validate`] never makes a detector
//!   divide by zero or loop.

pub mod alarm;
pub mod cusum;
pub mod drift;
mod observe;
pub mod rejections;
pub mod screen;
pub mod spread_jump;

use serde::{Deserialize, Serialize};

use crate::event::AlarmKind;
use crate::real::{non_negative_setting, positive_setting, Real};

use alarm::{AlarmBoard, AlarmRules};
use cusum::{CusumConfig, TabularCusum};
use drift::{DriftConfig, DriftDetector};
use rejections::RejectionRun;
use screen::{Screen, ScreenConfig};
use spread_jump::{SpreadJumpConfig, SpreadJumpCusum};

pub(crate) use observe::CheckSeen;

/// Settings of every detector.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct DetectConfig<R> {
    /// The screen.
    pub screen: ScreenConfig<R>,
    /// The bias CUSUM.
    pub cusum: CusumConfig<R>,
    /// The spread jump CUSUM.
    pub spread_jump: SpreadJumpConfig<R>,
    /// The drift test.
    pub drift: DriftConfig<R>,
    /// Raise and clear rules.
    pub alarms: AlarmRules,
}

/// A detector setting that is not usable.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum DetectConfigError {
    /// `raw_low < raw_high` required (both not NaN).
    RawRange,
    /// `stuck_run` must be at least 2.
    StuckRun,
    /// `stuck_response` must be in [0, 1).
    StuckResponse,
    /// `spike_bound` must be positive (∞ turns the spike screen off).
    SpikeBound,
    /// `spike_run_limit` must be at least 1.
    SpikeRunLimit,
    /// `reference_gap_seconds` must be positive (∞ turns the gap check off).
    ReferenceGap,
    /// CUSUM k ≥ 0 and h > 0, finite.
    Cusum,
    /// Spread jump k ≥ 0 and h > 0, finite.
    SpreadJump,
    /// `gain_tolerance_percent` must be non-negative and finite.
    GainTolerance,
    /// `offset_tolerance` must be non-negative and finite.
    OffsetTolerance,
    /// Wald quantiles must be positive and finite.
    WaldQuantiles,
    /// `drift.every` must be at least 1.
    DriftEvery,
    /// An alarm rule has a zero count.
    Alarm(AlarmKind),
}

impl DetectConfigError {
    /// The name of the offending parameter, as written in config files.
    pub const fn parameter(self) -> &'static str {
        match self {
            DetectConfigError::RawRange => "detect.screen.raw_low/raw_high",
            DetectConfigError::StuckRun => "detect.screen.stuck_run",
            DetectConfigError::StuckResponse => "detect.screen.stuck_response",
            DetectConfigError::SpikeBound => "detect.screen.spike_bound",
            DetectConfigError::SpikeRunLimit => "detect.screen.spike_run_limit",
            DetectConfigError::ReferenceGap => "detect.screen.reference_gap_seconds",
            DetectConfigError::Cusum => "detect.cusum",
            DetectConfigError::SpreadJump => "detect.spread_jump",
            DetectConfigError::GainTolerance => "detect.drift.gain_tolerance_percent",
            DetectConfigError::OffsetTolerance => "detect.drift.offset_tolerance",
            DetectConfigError::WaldQuantiles => "detect.drift.wald_quantiles",
            DetectConfigError::DriftEvery => "detect.drift.every",
            DetectConfigError::Alarm(kind) => match kind {
                AlarmKind::BiasShift => "detect.alarms.bias_shift",
                AlarmKind::GainDrift => "detect.alarms.gain_drift",
                AlarmKind::OffsetDrift => "detect.alarms.offset_drift",
                AlarmKind::SpreadJump => "detect.alarms.spread_jump",
                AlarmKind::SignalStuck => "detect.alarms.signal_stuck",
                AlarmKind::SignalOutOfRange => "detect.alarms.signal_out_of_range",
                AlarmKind::ReferenceGap => "detect.alarms.reference_gap",
                AlarmKind::SpreadTracksLevel | AlarmKind::MeanMisfit => "detect.alarms",
            },
        }
    }
}

impl<R: Real> DetectConfig<R> {
    /// Defaults for a working range `[low, high]` above `origin`:
    /// - physical range `[origin − high, origin + 2·high]` (a generous band around the
    ///   working range; set it to the sensor's real output range; common practice, no source);
    /// - stuck after 50 identical raw values, or a window of 32 checks whose raw range is
    ///   below 1 % of the predicted range (common practice, no source);
    /// - spikes beyond 6 standardized units (a normal residual passes 6σ about twice in
    ///   10^9 checks: SciPy 1.11.4 `2 * stats.norm.sf(6)` = 1.97e-9), accepted as a change
    ///   from the 3rd in a row;
    /// - reference gap after one day, 86,400 s (a daily check, common practice, no source);
    /// - CUSUM k = 0.5, h = 5 (Montgomery's tabular CUSUM; from memory, the book could not
    ///   be reached here); spread jump k = 0.3, h = 8;
    /// - drift: gain tolerance 1 %, offset tolerance `low` raw units, χ²_p(0.999), baseline
    ///   frozen 1000 checks after the warm-up, evaluated every 16 checks;
    /// - alarm rules [`AlarmRules::DEFAULT`].
    pub fn default_for_range(origin: R, low: R, high: R) -> Self {
        DetectConfig {
            screen: ScreenConfig {
                raw_low: origin - high,
                raw_high: origin + R::TWO * high,
                stuck_run: 50,
                stuck_window: 32,
                stuck_response: R::from_f64(0.01),
                spike_bound: R::from_f64(6.0),
                spike_run_limit: 3,
                reference_gap_seconds: 86_400.0,
            },
            cusum: CusumConfig::standard(),
            spread_jump: SpreadJumpConfig::standard(),
            drift: DriftConfig {
                gain_tolerance_percent: R::ONE,
                offset_tolerance: low,
                wald_quantiles: DriftConfig::chi_square_999(),
                freeze_after: 1000,
                every: 16,
            },
            alarms: AlarmRules::DEFAULT,
        }
    }

    /// Checks every value, naming the first offending parameter.
    pub fn validate(&self) -> Result<(), DetectConfigError> {
        let screen = &self.screen;
        if !(screen.raw_low < screen.raw_high) {
            return Err(DetectConfigError::RawRange);
        }
        if screen.stuck_run < 2 {
            return Err(DetectConfigError::StuckRun);
        }
        if !(screen.stuck_response >= R::ZERO && screen.stuck_response < R::ONE) {
            return Err(DetectConfigError::StuckResponse);
        }
        if !(screen.spike_bound > R::ZERO) {
            return Err(DetectConfigError::SpikeBound);
        }
        if screen.spike_run_limit == 0 {
            return Err(DetectConfigError::SpikeRunLimit);
        }
        if !(screen.reference_gap_seconds > 0.0) {
            return Err(DetectConfigError::ReferenceGap);
        }
        if !self.cusum.is_valid() {
            return Err(DetectConfigError::Cusum);
        }
        if !self.spread_jump.is_valid() {
            return Err(DetectConfigError::SpreadJump);
        }
        let drift = &self.drift;
        if !non_negative_setting(drift.gain_tolerance_percent) {
            return Err(DetectConfigError::GainTolerance);
        }
        if !non_negative_setting(drift.offset_tolerance) {
            return Err(DetectConfigError::OffsetTolerance);
        }
        if !drift.wald_quantiles.iter().all(|&q| positive_setting(q)) {
            return Err(DetectConfigError::WaldQuantiles);
        }
        if drift.every == 0 {
            return Err(DetectConfigError::DriftEvery);
        }
        match self.alarms.first_invalid() {
            Some(kind) => Err(DetectConfigError::Alarm(kind)),
            None => Ok(()),
        }
    }

    /// The same settings in another float type (values rounded to nearest).
    pub fn convert<S: Real>(&self) -> DetectConfig<S> {
        let c = |value: R| S::from_f64(value.to_f64());
        let screen = &self.screen;
        DetectConfig {
            screen: ScreenConfig {
                raw_low: c(screen.raw_low),
                raw_high: c(screen.raw_high),
                stuck_run: screen.stuck_run,
                stuck_window: screen.stuck_window,
                stuck_response: c(screen.stuck_response),
                spike_bound: c(screen.spike_bound),
                spike_run_limit: screen.spike_run_limit,
                reference_gap_seconds: screen.reference_gap_seconds,
            },
            cusum: CusumConfig {
                reference_value: c(self.cusum.reference_value),
                decision_interval: c(self.cusum.decision_interval),
            },
            spread_jump: SpreadJumpConfig {
                reference_value: c(self.spread_jump.reference_value),
                decision_interval: c(self.spread_jump.decision_interval),
            },
            drift: DriftConfig {
                gain_tolerance_percent: c(self.drift.gain_tolerance_percent),
                offset_tolerance: c(self.drift.offset_tolerance),
                // Written out rather than `map`: a board converting its configuration from
                // constants then folds every conversion at compile time (a loop kept a run-
                // time f64-to-f32 conversion, about 300 bytes of soft-float code).
                wald_quantiles: {
                    let [one, two, three, four] = self.drift.wald_quantiles;
                    [c(one), c(two), c(three), c(four)]
                },
                freeze_after: self.drift.freeze_after,
                every: self.drift.every,
            },
            alarms: self.alarms,
        }
    }
}

/// How often each detector fired (signals, not raised alarms; those are counted by
/// [`AlarmBoard::raises`]).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct DetectorCounts {
    /// Checks rejected as spikes.
    pub spikes: u64,
    /// Samples outside the physical range.
    pub out_of_range: u64,
    /// Samples rejected as part of a stuck run.
    pub stuck_samples: u64,
    /// Windows in which the raw output did not follow the predictions.
    pub unresponsive_windows: u64,
    /// Checks the bias CUSUM saw.
    pub cusum_checks: u64,
    /// Bias CUSUM signals.
    pub cusum_signals: u64,
    /// Spread jump CUSUM signals.
    pub spread_jump_signals: u64,
    /// Drift evaluations.
    pub drift_evaluations: u64,
    /// Drift evaluations that were significant (whether or not beyond tolerance).
    pub drift_significant: u64,
    /// Samples that arrived during a reference gap.
    pub gap_samples: u64,
}

/// The state of every detector.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct Detectors<R> {
    /// The screen.
    pub screen: Screen<R>,
    /// The bias CUSUM.
    pub cusum: TabularCusum<R>,
    /// The spread jump CUSUM.
    pub spread_jump: SpreadJumpCusum<R>,
    /// The drift test and its baseline.
    pub drift: DriftDetector<R>,
    /// Raised alarms.
    pub alarms: AlarmBoard,
    /// Counts.
    pub counts: DetectorCounts,
    /// The run of rejections under way (rejections are reported as episodes).
    pub rejections: RejectionRun,
}

impl<R: Real> Default for Detectors<R> {
    fn default() -> Self {
        Self::new()
    }
}

impl<R: Real> Detectors<R> {
    /// Fresh detectors.
    pub fn new() -> Self {
        Detectors {
            screen: Screen::new(),
            cusum: TabularCusum::new(),
            spread_jump: SpreadJumpCusum::new(),
            drift: DriftDetector::new(),
            alarms: AlarmBoard::new(),
            counts: DetectorCounts::default(),
            rejections: RejectionRun::new(),
        }
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] DetectConfig<R> { screen, cusum, spread_jump, drift, alarms });
crate::wire::walk_struct!(impl[] DetectorCounts {
    spikes, out_of_range, stuck_samples, unresponsive_windows, cusum_checks, cusum_signals,
    spread_jump_signals, drift_evaluations, drift_significant, gap_samples,
});
crate::wire::walk_struct!(impl[R: Real] Detectors<R> {
    screen, cusum, spread_jump, drift, alarms, counts, rejections
});

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_validate_and_errors_name_parameters() {
        let config = DetectConfig::<f32>::default_for_range(0.0, 2.0, 1000.0);
        assert_eq!(config.validate(), Ok(()));
        let mut bad = config;
        bad.screen.spike_bound = f32::NAN;
        assert_eq!(
            bad.validate().unwrap_err().parameter(),
            "detect.screen.spike_bound"
        );
        let mut bad = config;
        bad.alarms.reference_gap.raise_after = 0;
        assert_eq!(
            bad.validate().unwrap_err().parameter(),
            "detect.alarms.reference_gap"
        );
        let mut bad = config;
        bad.cusum.decision_interval = -1.0;
        assert_eq!(bad.validate(), Err(DetectConfigError::Cusum));
        let wide: DetectConfig<f64> = config.convert();
        assert_eq!(wide.convert::<f32>(), config);
    }
}
