//! The detectors as the monitor drives them, behind one call per step: [`Detectors::screen`]
//! before a sample is used, [`Detectors::is_spike`] before a check updates the fits, and
//! [`Detectors::after_check`] once it has. Each call counts what its detectors saw
//! ([`DetectorCounts`](super::DetectorCounts)) and observes the alarms they feed, raising
//! and clearing them into the monitor's event queue (counted in the sample's outcome).
//!
//! # Invariants
//! - The order of the events a sample raises is fixed: reference gap, out of range, stuck
//!   (screen); bias shift, spread jump, gain drift, offset drift (after a check); a
//!   `cleared` event comes where its alarm's raise would.
//! - Nothing here panics; an absent signal on an idle alarm returns before the alarm's
//!   rule is looked up (most observations).

use super::alarm::{AlarmRules, Transition};
use super::cusum::CusumSignal;
use super::drift::{Baseline, CovarianceLayout};
use super::screen::{Screen, ScreenConfig};
use super::{DetectConfig, Detectors};
use crate::basis::Basis;
use crate::event::{AlarmKind, Direction, EventKind, EventQueue, RejectReason, Severity};
use crate::ladder::PowerLadder;
use crate::real::{every, Real};
use crate::sample::{Outcome, Sample};

/// What the check-level detectors need to know about a check the fits have taken.
pub(crate) struct CheckSeen<'a, R, const P: usize> {
    /// The sample's sequence number.
    pub(crate) seq: u64,
    /// Its raw value.
    pub(crate) raw: R,
    /// The standardized residual on the active rung (`None` where the rung cannot
    /// standardize it).
    pub(crate) standardized: Option<R>,
    /// The active rung's a-priori prediction.
    pub(crate) prediction: R,
    /// The ladder switched rung at this check.
    pub(crate) switched: bool,
    /// Checks accepted so far, this one included (the drift test's period counts these).
    pub(crate) checks: u64,
    /// The ladder, after this check (its active fit and its count of checks).
    pub(crate) ladder: &'a PowerLadder<R, P>,
    /// The monitor's warm-up, in checks.
    pub(crate) warm_up: u32,
    /// The calibration's terms.
    pub(crate) basis: &'a Basis<R>,
}

impl<R: Real> Detectors<R> {
    /// The sample-level screen (reference gap, physical range, stuck signal), with its
    /// alarms. Returns the reason the sample is rejected for, if it is.
    #[inline(always)]
    pub(crate) fn screen<const Q: usize>(
        &mut self,
        config: &DetectConfig<R>,
        sample: &Sample<R>,
        events: &mut EventQueue<R, Q>,
        outcome: &mut Outcome<R>,
    ) -> Option<RejectReason> {
        let screen_config: &ScreenConfig<R> = &config.screen;
        let rules = &config.alarms;
        let seq = sample.seq;
        let is_check = sample.reference.is_some_and(|r| r.is_finite());
        let gap = self.screen.observe_time(screen_config, sample.t, is_check);
        if gap.is_some() {
            self.counts.gap_samples += 1;
        }
        let seconds = gap.unwrap_or(0.0);
        self.observe_alarm(
            rules,
            seq,
            AlarmKind::ReferenceGap,
            gap.is_some(),
            |severity| EventKind::ReferenceGap { seconds, severity },
            events,
            outcome,
        );
        let raw = sample.raw;
        let in_range = Screen::in_range(screen_config, raw);
        self.observe_alarm(
            rules,
            seq,
            AlarmKind::SignalOutOfRange,
            !in_range,
            |severity| EventKind::SignalOutOfRange { raw, severity },
            events,
            outcome,
        );
        if !in_range {
            self.counts.out_of_range += 1;
            return Some(RejectReason::OutOfRange);
        }
        let run = self.screen.observe_raw(raw);
        let identical = run >= screen_config.stuck_run;
        let unresponsive = self.screen.unresponsive();
        let reported_run = if identical {
            run
        } else {
            screen_config.stuck_window
        };
        self.observe_alarm(
            rules,
            seq,
            AlarmKind::SignalStuck,
            identical || unresponsive,
            |severity| EventKind::SignalStuck {
                run: reported_run,
                severity,
            },
            events,
            outcome,
        );
        if identical {
            self.counts.stuck_samples += 1;
            return Some(RejectReason::Stuck);
        }
        None
    }

    /// Whether a check (after the warm-up) is a spike: `beyond` says it lies beyond the
    /// spike bound on every rung; counted when it is.
    #[inline(always)]
    pub(crate) fn is_spike(&mut self, config: &ScreenConfig<R>, beyond: bool) -> bool {
        let spike = self.screen.is_spike(config, beyond);
        if spike {
            self.counts.spikes += 1;
        }
        spike
    }

    /// The check-level detectors after the fits took a check (after the warm-up): bias
    /// CUSUM, spread jump, no-response window, drift against the baseline (set from the
    /// fit once `freeze_after` checks past the warm-up when none was commissioned).
    #[inline(always)]
    pub(crate) fn after_check<const P: usize, const Q: usize>(
        &mut self,
        config: &DetectConfig<R>,
        check: &CheckSeen<'_, R, P>,
        events: &mut EventQueue<R, Q>,
        outcome: &mut Outcome<R>,
    ) {
        let rules = &config.alarms;
        let seq = check.seq;
        if let Some(z) = check.standardized {
            self.counts.cusum_checks += 1;
            let signal = self.cusum.update(&config.cusum, z);
            if signal.is_some() {
                self.counts.cusum_signals += 1;
            }
            self.observe_alarm(
                rules,
                seq,
                AlarmKind::BiasShift,
                signal.is_some(),
                |severity| {
                    let signal = signal.unwrap_or(CusumSignal {
                        direction: Direction::Up,
                        size: R::ZERO,
                        run: 0,
                    });
                    EventKind::BiasShift {
                        direction: signal.direction,
                        size: signal.size,
                        severity,
                    }
                },
                events,
                outcome,
            );
            let jump = self.spread_jump.update(&config.spread_jump, z);
            if jump.is_some() {
                self.counts.spread_jump_signals += 1;
            }
            let ratio = jump.map(|j| j.ratio).unwrap_or(R::ONE);
            self.observe_alarm(
                rules,
                seq,
                AlarmKind::SpreadJump,
                jump.is_some(),
                |severity| EventKind::SpreadJump { ratio, severity },
                events,
                outcome,
            );
        }
        if check.switched {
            // The standardization changes with the rung: both sums restart.
            self.cusum.reset();
            self.spread_jump.reset();
        }
        if self
            .screen
            .observe_response(&config.screen, check.raw, check.prediction)
            == Some(true)
        {
            self.counts.unresponsive_windows += 1;
        }
        self.drift(config, check, events, outcome);
    }

    #[inline(always)]
    fn drift<const P: usize, const Q: usize>(
        &mut self,
        config: &DetectConfig<R>,
        check: &CheckSeen<'_, R, P>,
        events: &mut EventQueue<R, Q>,
        outcome: &mut Outcome<R>,
    ) {
        // Once the baseline is frozen, only every `every`-th check has work (checked first:
        // this runs on every check).
        let frozen = self.drift.baseline().is_some();
        if frozen && !every(check.checks, config.drift.every) {
            return;
        }
        self.drift_due(config, check, frozen, events, outcome);
    }

    /// The drift test's work on a check that has some: the baseline frozen from the fit,
    /// or an evaluation against it.
    // Inlined: out of line (`inline(never)`) the board took 96 B more flash and 11 more
    // instructions per live check (firmware/footprint-by-source.sh, firmware/measure.sh).
    #[inline(always)]
    fn drift_due<const P: usize, const Q: usize>(
        &mut self,
        config: &DetectConfig<R>,
        check: &CheckSeen<'_, R, P>,
        frozen: bool,
        events: &mut EventQueue<R, Q>,
        outcome: &mut Outcome<R>,
    ) {
        let drift_config = &config.drift;
        let basis = check.basis;
        let fit = check.ladder.active_fit();
        if (fit.updates() as usize) <= fit.dim() {
            return;
        }
        if !frozen {
            let since_warm_up = check.ladder.checks().saturating_sub(check.warm_up);
            if since_warm_up >= drift_config.freeze_after {
                let parameters = basis.physical(&fit.parameters());
                let layout = CovarianceLayout::of(basis);
                let covariance =
                    layout.physical_covariance(&fit.covariance(), fit.residual_variance());
                if let Ok(baseline) = Baseline::new(parameters, Some(covariance)) {
                    self.drift.set_baseline(baseline);
                }
            }
            return;
        }
        let (theta, covariance, variance) =
            (fit.parameters(), fit.covariance(), fit.residual_variance());
        let Some(status) = self
            .drift
            .evaluate(drift_config, basis, &theta, &covariance, variance)
        else {
            return;
        };
        self.counts.drift_evaluations += 1;
        if status.significant {
            self.counts.drift_significant += 1;
        }
        let gain_change = status.gain_change.unwrap_or(R::ZERO);
        let gain_uncertainty = status.gain_uncertainty.unwrap_or(R::ZERO);
        self.observe_alarm(
            &config.alarms,
            check.seq,
            AlarmKind::GainDrift,
            status.gain_signal(),
            |severity| EventKind::GainDrift {
                change: gain_change,
                uncertainty: gain_uncertainty,
                severity,
            },
            events,
            outcome,
        );
        self.observe_alarm(
            &config.alarms,
            check.seq,
            AlarmKind::OffsetDrift,
            status.offset_signal(),
            |severity| EventKind::OffsetDrift {
                change: status.offset_change,
                uncertainty: status.offset_uncertainty,
                severity,
            },
            events,
            outcome,
        );
    }

    /// One observation of a detector alarm; emits the raise (built by `event` with the
    /// rule's severity) or the `cleared` event.
    // The queue and the outcome are passed apart, not as one struct of borrows: building
    // that struct cost the board 6 instructions per live check (1,535 against 1,529,
    // firmware/measure.sh).
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn observe_alarm<const Q: usize>(
        &mut self,
        rules: &AlarmRules,
        seq: u64,
        kind: AlarmKind,
        present: bool,
        event: impl FnOnce(Severity) -> EventKind<R>,
        events: &mut EventQueue<R, Q>,
        outcome: &mut Outcome<R>,
    ) {
        // Nothing to do for an absent signal on an idle alarm (most observations).
        if !present && self.alarms.is_idle(kind) {
            return;
        }
        if let Some(severity) =
            self.observe_alarm_episode(rules, seq, kind, present, events, outcome)
        {
            events.raise(seq, event(severity), outcome);
        }
    }

    /// [`Detectors::observe_alarm`] while an episode is under way or the signal is
    /// present: raises the `cleared` event itself, and returns the severity of a raise for
    /// the caller to build its event (not generic over the event, so one copy serves every
    /// alarm).
    #[inline(never)]
    fn observe_alarm_episode<const Q: usize>(
        &mut self,
        rules: &AlarmRules,
        seq: u64,
        kind: AlarmKind,
        present: bool,
        events: &mut EventQueue<R, Q>,
        outcome: &mut Outcome<R>,
    ) -> Option<Severity> {
        match self.alarms.observe(rules, kind, present) {
            Some(Transition::Raised(severity)) => Some(severity),
            Some(Transition::Cleared) => {
                events.raise(seq, EventKind::Cleared { alarm: kind }, outcome);
                None
            }
            None => None,
        }
    }
}
