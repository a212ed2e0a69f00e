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
//! # Averaged samples
//! A sample whose raw value is the mean of `m` values ([`Sample::averaged`]) has `1/m` of
//! a single value's variance; where each use of a check's variance stands:
//! - every rung's fit weights it `m` times a single value, and the likelihood sums count
//!   its squared transformed residual `m` times ([`crate::ladder`]); the fits' `σ²` stays
//!   the variance of one value;
//! - its standardized residual ([`CheckDetail::standardized`]) divides by
//!   `√(σ²·(1/(m·w(f)) + xᵀPx))`: the spike screen (on every rung), the mean-adequacy
//!   check, the bias CUSUM and the spread-jump CUSUM all take it, so they see unit
//!   variance whatever `m`;
//! - the spread profile takes `residual·√m`, the residual on a single value's scale: the
//!   profile, its exponent and Koenker statistic, and so the rung evidence, describe
//!   single values;
//! - the drift test, the sensor's baseline and the readings use the fit's `σ²` and
//!   parameter covariance, already on a single value's scale; a reading of a mean of `m`
//!   values gets `Var(x̂) = σ²·(1/(m·w(f)) + xᵀPx) / b²`, a single value's is unchanged;
//! - the screen (range, stuck signal, reference gap) and the no-response window look at
//!   raw values and times only: unchanged.
//!
//! With `m = 1` every factor is exactly 1, so a single value computes the same bits as
//! without the count ([`crate::sample::Averaging`]).
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
use crate::detect::drift::{Baseline, BaselineError, DriftStatus};
use crate::detect::rejections::EndedRun;
use crate::detect::{CheckSeen, DetectorCounts, Detectors};
use crate::event::{AlarmKind, Event, EventKind, EventQueue, RejectReason, Severity};
use crate::ladder::{LadderConfig, PowerLadder};
use crate::origin::{BaselineEstimate, LevelOrigin};
use crate::real::{every, Real};
use crate::sample::{CheckDetail, Detail, Flags, Outcome, Reading, Sample};
use crate::spread::{SpreadExponent, SpreadProfile};
use crate::transform::Rung;

/// Residuals (effective count) a spread profile restarted at a switch needs before its
/// exponent and Koenker statistic are reported again: eight per bin of the default sixteen.
const SPREAD_RESTART_CHECKS: u32 = 128;

/// Fills the ladder settings of a monitor being decoded until `complete_restored`
/// derives the real ones from its configuration.
fn unset_ladder_config<R: Real>() -> LadderConfig<R> {
    MonitorConfig::<R>::default_for_range(R::ONE, R::from_f64(10.0)).ladder()
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
    /// Readings produced while the rung was provisional (flag `PROVISIONAL`).
    pub provisional_readings: u64,
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
/// let reading = outcome.reading().unwrap();
/// assert!((reading.value - 50.0).abs() < 1e-6);
/// ```
#[derive(Clone, Debug, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct Monitor<R, const P: usize = 3, const BINS: usize = 16, const Q: usize = 8> {
    config: MonitorConfig<R>,
    /// Derived from `config`; not in a snapshot (rebuilt by `complete_restored`).
    #[serde(skip, default = "unset_ladder_config")]
    ladder_config: LadderConfig<R>,
    ladder: PowerLadder<R, P>,
    spread: SpreadProfile<R, BINS>,
    mean_check: MeanCheck<R, BINS>,
    events: EventQueue<R, Q>,
    counters: Counters,
    spread_raised: bool,
    last_exponent: Option<SpreadExponent<R>>,
    /// `rung_in_doubt` was raised for the rung in use.
    rung_doubted: bool,
    detectors: Detectors<R>,
    /// Where levels are measured from (the sensor's baseline once found).
    origin: LevelOrigin<R>,
    /// `ALARM`/`WARNING` for the alarms raised now: derived from the alarm states,
    /// recomputed on a push that raised an event, so a sample does not scan every alarm;
    /// not in a snapshot (rebuilt by `complete_restored`).
    #[serde(skip, default = "Flags::empty")]
    alarm_flags: Flags,
}

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Monitor<R, P, BINS, Q> {
    /// A fresh monitor; fails on an unusable configuration.
    pub fn new(config: MonitorConfig<R>) -> Result<Self, ConfigError> {
        config.validate(P)?;
        let ladder_config = config.ladder();
        let ladder = PowerLadder::new(config.basis.len(), &ladder_config, config.initial_rung);
        let spread = SpreadProfile::new(config.spread());
        Ok(Self::assemble(config, ladder_config, ladder, spread))
    }

    /// The monitor of `config` with the parts built from it given and every other part as
    /// a fresh monitor starts: the one list of the monitor's fields, for [`Monitor::new`]
    /// and for the blank monitor a snapshot is decoded into (`codec`).
    #[inline(always)]
    fn assemble(
        config: MonitorConfig<R>,
        ladder_config: LadderConfig<R>,
        ladder: PowerLadder<R, P>,
        spread: SpreadProfile<R, BINS>,
    ) -> Self {
        Monitor {
            config,
            ladder_config,
            ladder,
            spread,
            mean_check: MeanCheck::new(),
            events: EventQueue::new(),
            counters: Counters::default(),
            spread_raised: false,
            last_exponent: None,
            rung_doubted: false,
            detectors: Detectors::new(),
            origin: LevelOrigin::new(config.level_origin, config.find_baseline),
            alarm_flags: Flags::empty(),
        }
    }

    /// The configuration.
    pub fn config(&self) -> &MonitorConfig<R> {
        &self.config
    }

    /// The origin levels are measured from: the configured one, or the sensor's baseline
    /// once found (see [`crate::origin`]).
    pub fn level_origin(&self) -> &LevelOrigin<R> {
        &self.origin
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

    /// The severity of every raised alarm, by [`AlarmKind::index`] (`None` = not raised).
    /// `spread_tracks_level` shows as `info` while raised.
    pub fn raised_alarms(&self) -> [Option<Severity>; AlarmKind::COUNT] {
        let mut out = self
            .detectors
            .alarms
            .raised_severities(&self.config.detect.alarms);
        if self.spread_raised {
            out[AlarmKind::SpreadTracksLevel.index()] = Some(Severity::Info);
        }
        out
    }

    /// How many times a detector alarm was raised.
    pub fn alarm_raises(&self, kind: AlarmKind) -> u32 {
        self.detectors.alarms.raises(kind)
    }

    /// The latest drift evaluation against the baseline (reported whether or not it
    /// alarms: drift inside tolerance shows here and is not raised).
    pub fn drift_status(&self) -> Option<DriftStatus<R>> {
        self.detectors.drift.status()
    }

    /// The baseline the drift test compares with, once set or frozen.
    pub fn baseline(&self) -> Option<&Baseline<R>> {
        self.detectors.drift.baseline()
    }

    /// Sets the commissioned baseline: physical `[offset, gain, quadratic, temperature]`
    /// and their covariance (`None`: taken as exact). Replaces a frozen one.
    pub fn set_baseline(
        &mut self,
        parameters: [R; 4],
        covariance: Option<[[R; 4]; 4]>,
    ) -> Result<(), BaselineError> {
        let baseline = Baseline::new(parameters, covariance)?;
        self.detectors.drift.set_baseline(baseline);
        Ok(())
    }

    /// How often each detector fired.
    pub fn detector_counts(&self) -> DetectorCounts {
        self.detectors.counts
    }

    /// The bias CUSUM's state (for tests and reports).
    pub fn detectors(&self) -> &Detectors<R> {
        &self.detectors
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
        self.events.raise(seq, kind, outcome);
    }

    fn reject(&mut self, sample: &Sample<R>, reason: RejectReason, outcome: &mut Outcome<R>) {
        self.counters.rejected += 1;
        outcome.flags.insert(Flags::REJECTED);
        self.note_rejection(sample.seq, reason, outcome);
    }

    /// A rejection joins the run under way (see [`crate::detect::rejections`]); a run it
    /// ends is raised.
    fn note_rejection(&mut self, seq: u64, reason: RejectReason, outcome: &mut Outcome<R>) {
        let ended = self.detectors.rejections.note(seq, reason);
        self.raise_rejection_run(ended, outcome);
    }

    fn raise_rejection_run(&mut self, ended: Option<EndedRun>, outcome: &mut Outcome<R>) {
        if let Some(run) = ended {
            let kind = EventKind::SampleRejected {
                reason: run.reason,
                count: run.count,
            };
            self.raise(run.last_seq, kind, outcome);
        }
    }

    /// Processes one sample. Never panics, whatever the values.
    pub fn push(&mut self, sample: &Sample<R>) -> Outcome<R> {
        let mut outcome = self.push_sample(sample);
        // A sample not rejected ends the run of rejections under way.
        let ended = self.detectors.rejections.end_of_sample(sample.seq);
        if ended.is_some() {
            self.raise_rejection_run(ended, &mut outcome);
        }
        outcome
    }

    #[inline(always)]
    fn push_sample(&mut self, sample: &Sample<R>) -> Outcome<R> {
        let mut outcome = Outcome {
            detail: Detail::Nothing,
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
        if self.screen(sample, &mut outcome) {
            self.flag_alarms(&mut outcome);
            return outcome;
        }
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
        if self.ladder.provisional(&self.ladder_config) {
            outcome.flags.insert(Flags::PROVISIONAL);
            if matches!(outcome.detail, Detail::Reading(_)) {
                self.counters.provisional_readings += 1;
            }
        }
        self.flag_alarms(&mut outcome);
        outcome
    }

    #[inline(always)]
    fn flag_alarms(&mut self, outcome: &mut Outcome<R>) {
        // Every raise and clear of a detector alarm comes with an event: the flags can
        // only have changed on a push that raised one.
        if outcome.new_events != 0 {
            self.alarm_flags = self.detectors.alarms.flags(&self.config.detect.alarms);
        }
        outcome.flags.insert(self.alarm_flags);
    }

    /// The sample-level screen (reference gap, physical range, stuck signal). Returns true
    /// when the sample was rejected.
    fn screen(&mut self, sample: &Sample<R>, outcome: &mut Outcome<R>) -> bool {
        let rejected =
            self.detectors
                .screen(&self.config.detect, sample, &mut self.events, outcome);
        match rejected {
            Some(reason) => {
                self.reject(sample, reason, outcome);
                true
            }
            None => false,
        }
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
        let averaging = sample.averaging();
        let assessment = self
            .ladder
            .assess(&self.ladder_config, &x, sample.raw, averaging.inverse);
        let spike_bound = self.config.detect.screen.spike_bound;
        let beyond = warmed_up
            && self.ladder.beyond_on_every_rung(
                &self.ladder_config,
                assessment.standardized,
                &x,
                sample.raw,
                spike_bound,
                averaging.inverse,
            );
        if warmed_up && self.detectors.is_spike(&self.config.detect.screen, beyond) {
            self.reject(sample, RejectReason::Spike, outcome);
            return;
        }
        let rung = self.ladder.active();
        let step =
            self.ladder
                .update_assessed(&self.ladder_config, &x, sample.raw, assessment, averaging);
        self.counters.checks += 1;
        outcome.detail = Detail::Check(CheckDetail {
            prediction: step.prediction,
            residual: step.residual,
            standardized: step.standardized,
            rung,
        });
        // The origin settles by the end of the warm-up (tested first: after it, nothing).
        if !warmed_up && self.origin.due(self.ladder.checks(), self.config.warm_up) {
            self.find_baseline();
        }
        if step.below_origin {
            self.counters.below_origin += 1;
            outcome.flags.insert(Flags::BELOW_ORIGIN);
            if step.switch.is_none() && self.ladder.active().needs_positive() {
                self.note_rejection(sample.seq, RejectReason::BelowOrigin, outcome);
            }
        }
        let level = step.prediction - self.ladder_config.level_origin;
        if warmed_up {
            // On a single value's scale (see the module docs).
            let residual = step.residual * averaging.root;
            let bin = match step.log_level {
                Some(log_level) => self.spread.push_binned_with_log(level, log_level, residual),
                None => self.spread.push_binned(level, residual),
            };
            if let (Some(bin), Some(z)) = (bin, step.standardized) {
                self.mean_check.push(bin, z);
            }
        }
        if let Some(switch) = step.switch {
            // The evidence: the lead, the checks it was held, and the spread profile's
            // exponent on the rung left (NaN when it has none yet).
            let (k, k_low, k_high) = match self.last_exponent {
                Some(exponent) => {
                    let half_width = self.config.interval_z * exponent.standard_error;
                    (exponent.k, exponent.k - half_width, exponent.k + half_width)
                }
                None => (R::NAN, R::NAN, R::NAN),
            };
            self.raise(
                sample.seq,
                EventKind::TransformChanged {
                    from: switch.from,
                    to: switch.to,
                    gain: switch.gain,
                    held: switch.held,
                    k,
                    k_low,
                    k_high,
                },
                outcome,
            );
            self.rung_doubted = false;
            self.mean_check.arm();
            // The profile describes the rung in use: it restarts on the new rung's
            // residuals (the old rung's, with its mean off at the ends of the range, would
            // dominate the end bins for thousands of checks).
            self.spread.clear();
            self.last_exponent = None;
        }
        if self.mean_check.armed() && self.mean_check.since_reset() >= self.config.mean_check_after
        {
            let z = self.config.mean_check_z;
            if let Some(result) = self
                .mean_check
                .evaluate(self.config.mean_check_min_per_bin, z)
            {
                // The ladder holds its rung while the mean is inadequate (the likelihoods
                // of a wrong mean wander from rung to rung); the check runs again until
                // the mean is adequate, which releases the hold.
                let was_held = self.ladder.held();
                self.ladder.hold(result.misfit);
                if result.misfit {
                    self.mean_check.arm();
                } else if was_held {
                    self.raise(
                        sample.seq,
                        EventKind::Cleared {
                            alarm: AlarmKind::MeanMisfit,
                        },
                        outcome,
                    );
                }
                if result.misfit && !was_held {
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
        if warmed_up && every(self.counters.checks, self.config.spread_every) {
            self.evaluate_spread(sample.seq, outcome);
        }
        if warmed_up {
            let check = CheckSeen {
                seq: sample.seq,
                raw: sample.raw,
                standardized: step.standardized,
                prediction: step.prediction,
                switched: step.switch.is_some(),
                checks: self.counters.checks,
                ladder: &self.ladder,
                warm_up: self.config.warm_up,
                basis: &self.config.basis,
            };
            self.detectors
                .after_check(&self.config.detect, &check, &mut self.events, outcome);
        }
    }

    /// Takes the origin's next stage from the `log` rung's raw output at zero reference
    /// (see [`crate::origin`]) and measures the ladder's levels from it.
    #[inline(never)]
    fn find_baseline(&mut self) {
        let fit = self.ladder.fit(Rung::Log);
        if (fit.updates() as usize) <= fit.dim() {
            return;
        }
        let zero: [R; P] = self.config.basis.regressors(R::ZERO, None);
        let estimate = BaselineEstimate {
            value: fit.predict(&zero),
            standard_error: (fit.residual_variance() * fit.leverage(&zero)).sqrt(),
        };
        let final_stage = self.ladder.checks() >= self.config.warm_up;
        self.origin
            .take_estimate(estimate, self.config.level_origin, final_stage);
        self.ladder_config.level_origin = self.origin.value();
    }

    fn evaluate_spread(&mut self, seq: u64, outcome: &mut Outcome<R>) {
        // A profile restarted at a switch reports once it holds a few residuals per bin.
        if self.spread.weight() < R::from_u32(SPREAD_RESTART_CHECKS) {
            return;
        }
        let exponent = self.spread.exponent();
        self.last_exponent = exponent;
        let (Some(exponent), Some(koenker)) = (exponent, self.spread.koenker()) else {
            return;
        };
        let half_width = self.config.interval_z * exponent.standard_error;
        let (k_low, k_high) = (exponent.k - half_width, exponent.k + half_width);
        // Only a settled ladder is in doubt: while a challenger leads, the ladder is
        // already weighing another rung (and the reading says so, `PROVISIONAL`).
        if !self.rung_doubted && !self.ladder.provisional(&self.ladder_config) {
            // The exponent points to another rung when its interval lies wholly outside a
            // quarter (half the spacing of the rungs) of the rung's own exponent.
            let rung = self.ladder.active();
            let rung_k = R::ONE - rung.lambda::<R>();
            let quarter = R::from_f64(0.25);
            if k_high < rung_k - quarter || k_low > rung_k + quarter {
                self.rung_doubted = true;
                self.raise(
                    seq,
                    EventKind::RungInDoubt {
                        rung,
                        rung_k,
                        k: exponent.k,
                        k_low,
                        k_high,
                    },
                    outcome,
                );
            }
        }
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
        match self.reading_of_mean(sample.raw, temperature, sample.averaged) {
            Some(reading) => {
                self.counters.readings += 1;
                outcome.detail = Detail::Reading(reading);
                if self.ladder.active().needs_positive()
                    && !(sample.raw > self.ladder_config.level_origin)
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
        self.reading_of_mean(raw, temperature, 1)
    }

    /// [`Monitor::reading`] for a raw value that is the mean of `averaged` values (its
    /// relative variance divided by `averaged`; 0 and 1 are a single value).
    #[inline(always)]
    fn reading_of_mean(&self, raw: R, temperature: Option<R>, averaged: u32) -> Option<Reading<R>> {
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
        let mut relative =
            PowerLadder::<R, P>::relative_variance(&self.ladder_config, rung, prediction);
        if averaged > 1 {
            relative /= R::from_u32(averaged);
        }
        let variance = fit.residual_variance() * (relative + fit.leverage(&x)) / (slope * slope);
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

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[] Counters {
    samples, checks, rejected, below_origin, readings, provisional_readings
});

/// The monitor's own walk and the blank monitor a snapshot is decoded into.
mod codec;
pub(crate) use codec::Unusable;

mod config;
pub use config::{ConfigError, MonitorConfig};

#[cfg(test)]
mod tests;

#[cfg(test)]
mod averaging_tests;
