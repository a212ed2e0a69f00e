//! The screen: checks on each sample before it reaches a fit.
//!
//! - Physical range: a raw value outside `[raw_low, raw_high]` is rejected
//!   (`out_of_range`) and feeds the `signal_out_of_range` alarm.
//! - Stuck signal, two ways: a run of `stuck_run` bit-identical raw values (the samples of
//!   the run from then on are rejected, reason `stuck`); or, over a window of
//!   `stuck_window` checks, a raw range below `stuck_response` times the range of the
//!   predictions while the reference moves (a sensor that no longer responds).
//! - Spikes: a check whose standardized residual (by the spread model at its level, before
//!   any fit sees it) is beyond `spike_bound` under every credible rung's spread model is rejected
//!   (`spike`) and excluded from every fit. (Under the active rung alone, the scatter at the
//!   top of the range of a still-wrong rung would be cut away, hiding the evidence the
//!   ladder needs to move to the right rung; measured.) After `spike_run_limit` spikes in
//!   a row the screen stops rejecting: that is a change of the sensor, which the CUSUM and
//!   drift detectors must see.
//! - Reference gap: time (sample time `t`) since the last check beyond
//!   `reference_gap_seconds`.
//!
//! # Invariants
//! - Non-finite inputs never enter the state: raw values are screened as non-finite before
//!   this module, a non-finite time is ignored by the gap clock.

use serde::{Deserialize, Serialize};

use crate::real::Real;

/// Settings of the [`Screen`].
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct ScreenConfig<R> {
    /// Lowest physically possible raw value.
    pub raw_low: R,
    /// Highest physically possible raw value.
    pub raw_high: R,
    /// Identical raw values in a row that make the signal stuck (at least 2).
    pub stuck_run: u32,
    /// Checks per window of the no-response test (0 turns it off).
    pub stuck_window: u32,
    /// The no-response test fires when the raw range of a window is below this fraction of
    /// the predicted range.
    pub stuck_response: R,
    /// Spike bound on |standardized residual|.
    pub spike_bound: R,
    /// Spikes in a row after which the screen accepts them as a change.
    pub spike_run_limit: u32,
    /// Seconds of sample time without a check that make a reference gap.
    pub reference_gap_seconds: f64,
}

/// What the screen keeps between samples.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct Screen<R> {
    last_raw_bits: u64,
    identical_run: u32,
    window_checks: u32,
    window_raw_low: R,
    window_raw_high: R,
    window_prediction_low: R,
    window_prediction_high: R,
    spikes_in_a_row: u32,
    unresponsive: bool,
    /// Time of the last check; NaN until the clock starts at the first sample.
    last_check_t: f64,
}

impl<R: Real> Default for Screen<R> {
    fn default() -> Self {
        Self::new()
    }
}

impl<R: Real> Screen<R> {
    /// A screen that has seen nothing.
    pub fn new() -> Self {
        Screen {
            last_raw_bits: 0,
            identical_run: 0,
            window_checks: 0,
            window_raw_low: R::ZERO,
            window_raw_high: R::ZERO,
            window_prediction_low: R::ZERO,
            window_prediction_high: R::ZERO,
            spikes_in_a_row: 0,
            unresponsive: false,
            last_check_t: f64::NAN,
        }
    }

    /// True when `raw` is inside the physical range.
    #[inline]
    pub fn in_range(config: &ScreenConfig<R>, raw: R) -> bool {
        raw >= config.raw_low && raw <= config.raw_high
    }

    /// Counts a (finite) raw value into the run of identical values; returns the run length.
    #[inline]
    pub fn observe_raw(&mut self, raw: R) -> u32 {
        let bits = raw.to_bits_u64();
        if self.identical_run > 0 && bits == self.last_raw_bits {
            self.identical_run = self.identical_run.saturating_add(1);
        } else {
            self.identical_run = 1;
            self.last_raw_bits = bits;
        }
        self.identical_run
    }

    /// Length of the current run of identical raw values.
    pub fn identical_run(&self) -> u32 {
        self.identical_run
    }

    /// Whether a check that is `beyond` the spike bound (under every rung's spread model,
    /// see `PowerLadder::beyond_on_every_rung`) is a spike to reject. Isolated spikes are
    /// rejected; from the `spike_run_limit`-th in a row on they are accepted, unless the raw
    /// value is bit-identical to the previous sample's ([`Screen::observe_raw`]): a frozen
    /// output beyond the bound is not a change of calibration and stays out of the fits
    /// while the stuck-run rule counts up.
    #[inline]
    pub fn is_spike(&mut self, config: &ScreenConfig<R>, beyond: bool) -> bool {
        if !beyond {
            self.spikes_in_a_row = 0;
            return false;
        }
        self.spikes_in_a_row = self.spikes_in_a_row.saturating_add(1);
        self.identical_run >= 2 || self.spikes_in_a_row < config.spike_run_limit
    }

    /// Adds an accepted check to the no-response window. At the end of a window returns
    /// `Some(true)` when the raw values stayed flat while the predictions moved, `Some(false)`
    /// otherwise (the verdict is kept, see [`Screen::unresponsive`]); `None` inside a window.
    #[inline]
    pub fn observe_response(
        &mut self,
        config: &ScreenConfig<R>,
        raw: R,
        prediction: R,
    ) -> Option<bool> {
        if config.stuck_window == 0 || !prediction.is_finite() {
            return None;
        }
        if self.window_checks == 0 {
            self.window_raw_low = raw;
            self.window_raw_high = raw;
            self.window_prediction_low = prediction;
            self.window_prediction_high = prediction;
        } else {
            // Every value here is finite (raw screened, prediction checked above): plain
            // comparisons.
            if raw < self.window_raw_low {
                self.window_raw_low = raw;
            }
            if raw > self.window_raw_high {
                self.window_raw_high = raw;
            }
            if prediction < self.window_prediction_low {
                self.window_prediction_low = prediction;
            }
            if prediction > self.window_prediction_high {
                self.window_prediction_high = prediction;
            }
        }
        self.window_checks += 1;
        if self.window_checks < config.stuck_window {
            return None;
        }
        self.window_checks = 0;
        let predicted = self.window_prediction_high - self.window_prediction_low;
        let observed = self.window_raw_high - self.window_raw_low;
        self.unresponsive = predicted > R::ZERO && observed <= config.stuck_response * predicted;
        Some(self.unresponsive)
    }

    /// The verdict of the last complete no-response window.
    pub fn unresponsive(&self) -> bool {
        self.unresponsive
    }

    /// Advances the gap clock with a sample at time `t`. A sample carrying a reference
    /// (`is_check`) resets it. Returns the seconds since the last check when they exceed the
    /// configured gap, `None` otherwise (and for a non-finite `t`).
    #[inline]
    pub fn observe_time(
        &mut self,
        config: &ScreenConfig<R>,
        t: f64,
        is_check: bool,
    ) -> Option<f64> {
        if is_check {
            if t.is_finite() {
                self.last_check_t = t;
            }
            return None;
        }
        if !t.is_finite() {
            return None;
        }
        if self.last_check_t.is_nan() {
            self.last_check_t = t;
            return None;
        }
        let elapsed = t - self.last_check_t;
        (elapsed > config.reference_gap_seconds).then_some(elapsed)
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] Screen<R> {
    last_raw_bits, identical_run, window_checks, window_raw_low, window_raw_high,
    window_prediction_low, window_prediction_high, spikes_in_a_row, unresponsive,
    last_check_t,
});
crate::wire::walk_struct!(impl[R: Real] ScreenConfig<R> {
    raw_low, raw_high, stuck_run, stuck_window, stuck_response, spike_bound,
    spike_run_limit, reference_gap_seconds,
});

#[cfg(test)]
mod tests {
    use super::*;

    fn config() -> ScreenConfig<f32> {
        ScreenConfig {
            raw_low: -10.0,
            raw_high: 100.0,
            stuck_run: 5,
            stuck_window: 4,
            stuck_response: 0.01,
            spike_bound: 6.0,
            spike_run_limit: 3,
            reference_gap_seconds: 60.0,
        }
    }

    #[test]
    fn range_and_identical_runs() {
        let config = config();
        assert!(Screen::in_range(&config, 100.0f32));
        assert!(!Screen::in_range(&config, 100.5f32));
        assert!(!Screen::in_range(&config, f32::NAN));
        let mut screen = Screen::<f32>::new();
        assert_eq!(screen.observe_raw(1.0), 1);
        assert_eq!(screen.observe_raw(1.0), 2);
        assert_eq!(screen.observe_raw(1.0), 3);
        assert_eq!(screen.observe_raw(1.5), 1);
        // 0.0 and -0.0 differ in bits: not identical (a sign flip is a change of output).
        assert_eq!(screen.observe_raw(0.0), 1);
        assert_eq!(screen.observe_raw(-0.0), 1);
    }

    #[test]
    fn spikes_are_rejected_until_they_persist() {
        let config = config();
        let mut screen = Screen::<f32>::new();
        assert!(!screen.is_spike(&config, false));
        assert!(screen.is_spike(&config, true));
        assert!(!screen.is_spike(&config, false));
        assert!(screen.is_spike(&config, true));
        assert!(screen.is_spike(&config, true));
        assert!(!screen.is_spike(&config, true)); // third in a row: a change
        assert!(!screen.is_spike(&config, true));
    }

    #[test]
    fn spikes_of_a_frozen_output_stay_rejected() {
        let config = config();
        let mut screen = Screen::<f32>::new();
        for _ in 0..10 {
            screen.observe_raw(42.0);
            assert!(screen.is_spike(&config, true));
        }
        // The output moves again: spikes that persist are now a change, accepted.
        screen.observe_raw(43.0);
        assert!(!screen.is_spike(&config, true));
    }

    #[test]
    fn flat_output_against_moving_prediction() {
        let config = config();
        let mut screen = Screen::<f32>::new();
        let answers: std::vec::Vec<_> = (0..4)
            .map(|i| screen.observe_response(&config, 3.0, 10.0 * i as f32))
            .collect();
        assert_eq!(answers, [None, None, None, Some(true)]);
        let answers: std::vec::Vec<_> = (0..4)
            .map(|i| screen.observe_response(&config, i as f32, i as f32))
            .collect();
        assert_eq!(answers[3], Some(false));
        // A reference that does not move never says stuck.
        let answers: std::vec::Vec<_> = (0..4)
            .map(|_| screen.observe_response(&config, 3.0, 5.0))
            .collect();
        assert_eq!(answers[3], Some(false));
    }

    #[test]
    fn gap_clock() {
        let config = config();
        let mut screen = Screen::<f32>::new();
        assert_eq!(screen.observe_time(&config, 0.0, false), None); // clock starts
        assert_eq!(screen.observe_time(&config, 60.0, false), None);
        assert_eq!(screen.observe_time(&config, 61.0, false), Some(61.0));
        assert_eq!(screen.observe_time(&config, f64::NAN, false), None);
        assert_eq!(screen.observe_time(&config, 62.0, true), None);
        assert_eq!(screen.observe_time(&config, 100.0, false), None);
        // Negative times, and a time that runs backwards.
        let mut screen = Screen::<f32>::new();
        assert_eq!(screen.observe_time(&config, -100.0, true), None);
        assert_eq!(screen.observe_time(&config, -40.0, false), None);
        assert_eq!(screen.observe_time(&config, -39.5, false), Some(60.5));
        assert_eq!(screen.observe_time(&config, -1000.0, false), None);
        // An infinite gap turns the check off, even for an elapsed time that overflows.
        let off = ScreenConfig {
            reference_gap_seconds: f64::INFINITY,
            ..config
        };
        let mut screen = Screen::<f32>::new();
        assert_eq!(screen.observe_time(&off, -f64::MAX, true), None);
        assert_eq!(screen.observe_time(&off, f64::MAX, false), None);
    }
}
