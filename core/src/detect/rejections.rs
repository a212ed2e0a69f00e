//! Rejections as episodes: a run of samples rejected for the same reason is reported once,
//! with its length, when it ends (or every [`RUN_REPORT_EVERY`] samples while it lasts).
//!
//! A sensor that sits below its origin, outside its physical range or stuck would
//! otherwise raise one event per sample and flood the bounded event queue (and the device
//! log). The monitor's counters stay exact per sample; the events describe episodes.
//!
//! # Invariants
//! - Per pushed sample, the monitor calls [`RejectionRun::note`] for each reason the sample
//!   was rejected for (at most once in practice) and [`RejectionRun::end_of_sample`] once
//!   at the end. Each returns the run that ended, if any: a run ends at the first sample
//!   not rejected for its reason (a sample rejected for another reason starts the next
//!   run), or when it reaches [`RUN_REPORT_EVERY`] samples (the next sample with the same
//!   reason starts a new run).
//! - The counts of the reported runs and of the open run add up to the samples rejected
//!   (per reason) since the tracker was made.
//! - Nothing here panics; counts saturate.

use serde::{Deserialize, Serialize};

use crate::event::RejectReason;

/// Samples after which a run still under way is reported (and counted from zero again).
pub const RUN_REPORT_EVERY: u32 = 1024;

/// A run of rejections that ended.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct EndedRun {
    /// Why its samples were rejected.
    pub reason: RejectReason,
    /// How many samples it held.
    pub count: u32,
    /// The sequence number of its last sample.
    pub last_seq: u64,
}

/// The run of rejections under way.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct RejectionRun {
    reason: Option<RejectReason>,
    count: u32,
    last_seq: u64,
    /// The sample being pushed was noted as rejected (false between samples, so not part
    /// of a snapshot).
    #[serde(skip)]
    noted: bool,
}

impl RejectionRun {
    /// No run under way.
    pub const fn new() -> Self {
        RejectionRun {
            reason: None,
            count: 0,
            last_seq: 0,
            noted: false,
        }
    }

    /// The sample `seq` was rejected for `reason`; returns the run that ended.
    pub fn note(&mut self, seq: u64, reason: RejectReason) -> Option<EndedRun> {
        self.noted = true;
        self.observe_episode(seq, Some(reason))
    }

    /// The end of the sample `seq`: ends the run under way unless the sample was noted as
    /// rejected.
    #[inline]
    pub fn end_of_sample(&mut self, seq: u64) -> Option<EndedRun> {
        if core::mem::take(&mut self.noted) {
            return None;
        }
        self.observe(seq, None)
    }

    /// The run under way: its reason and length so far.
    pub fn open(&self) -> Option<(RejectReason, u32)> {
        self.reason.map(|reason| (reason, self.count))
    }

    /// One sample, `rejected` for a reason or not; returns the run that ended.
    #[inline]
    fn observe(&mut self, seq: u64, rejected: Option<RejectReason>) -> Option<EndedRun> {
        if rejected.is_none() && self.reason.is_none() {
            return None;
        }
        self.observe_episode(seq, rejected)
    }

    /// [`RejectionRun::observe`] while a run is under way or starts.
    #[inline(never)]
    fn observe_episode(&mut self, seq: u64, rejected: Option<RejectReason>) -> Option<EndedRun> {
        let ended = match self.reason {
            Some(reason) if rejected == Some(reason) => {
                self.count = self.count.saturating_add(1);
                self.last_seq = seq;
                if self.count < RUN_REPORT_EVERY {
                    return None;
                }
                let ended = self.ended(reason);
                *self = RejectionRun {
                    noted: self.noted,
                    ..Self::new()
                };
                return Some(ended);
            }
            Some(reason) => Some(self.ended(reason)),
            None => None,
        };
        *self = match rejected {
            Some(reason) => RejectionRun {
                reason: Some(reason),
                count: 1,
                last_seq: seq,
                noted: self.noted,
            },
            None => Self::new(),
        };
        ended
    }

    fn ended(&self, reason: RejectReason) -> EndedRun {
        EndedRun {
            reason,
            count: self.count,
            last_seq: self.last_seq,
        }
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
impl crate::wire::Walk for RejectionRun {
    fn walk<'t, 'a>(
        &mut self,
        t: &'t mut crate::wire::Transfer<'a>,
    ) -> &'t mut crate::wire::Transfer<'a> {
        // Every field named, so a field added breaks this build until it is handled.
        let RejectionRun {
            reason: _,
            count: _,
            last_seq: _,
            noted: _,
        } = self;
        let t = self.reason.walk(t);
        let t = self.count.walk(t);
        self.last_seq.walk(t)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use std::vec::Vec;

    #[test]
    fn the_monitor_s_calls_end_a_run_at_an_accepted_sample() {
        let mut run = RejectionRun::new();
        assert_eq!(run.note(7, RejectReason::Spike), None);
        assert_eq!(run.end_of_sample(7), None);
        assert_eq!(run.note(8, RejectReason::Spike), None);
        assert_eq!(run.end_of_sample(8), None);
        let ended = run.end_of_sample(9).unwrap();
        assert_eq!((ended.count, ended.last_seq), (2, 8));
        assert_eq!(run.end_of_sample(10), None);
        assert_eq!(run, RejectionRun::new());
    }

    #[test]
    fn a_run_is_reported_once_when_it_ends() {
        let mut run = RejectionRun::new();
        assert_eq!(run.observe(0, None), None);
        assert_eq!(run.observe(1, Some(RejectReason::Spike)), None);
        assert_eq!(run.observe(2, Some(RejectReason::Spike)), None);
        assert_eq!(run.open(), Some((RejectReason::Spike, 2)));
        let ended = run.observe(3, Some(RejectReason::Stuck)).unwrap();
        assert_eq!(
            ended,
            EndedRun {
                reason: RejectReason::Spike,
                count: 2,
                last_seq: 2
            }
        );
        let ended = run.observe(4, None).unwrap();
        assert_eq!(
            (ended.reason, ended.count, ended.last_seq),
            (RejectReason::Stuck, 1, 3)
        );
        assert_eq!(run.open(), None);
    }

    #[test]
    fn a_long_run_is_reported_every_so_often() {
        let mut run = RejectionRun::new();
        let mut reports = Vec::new();
        for seq in 0..(2 * RUN_REPORT_EVERY as u64 + 5) {
            reports.extend(run.observe(seq, Some(RejectReason::OutOfRange)));
        }
        assert_eq!(reports.len(), 2);
        assert!(reports.iter().all(|r| r.count == RUN_REPORT_EVERY));
        assert_eq!(run.open(), Some((RejectReason::OutOfRange, 5)));
    }

    /// What a snapshot would not hold is never set between samples.
    #[test]
    fn between_samples_nothing_is_noted() {
        let mut run = RejectionRun::new();
        run.note(1, RejectReason::Stuck);
        run.end_of_sample(1);
        assert!(!run.noted);
    }

    proptest! {
        /// Reported and open counts add up to the rejections, per reason.
        #[test]
        fn counts_add_up(samples in proptest::collection::vec(0u8..4, 0..3000)) {
            let reasons = [None, Some(RejectReason::Spike), Some(RejectReason::Stuck), Some(RejectReason::BelowOrigin)];
            let mut run = RejectionRun::new();
            let mut reported = [0u64; 4];
            let mut truth = [0u64; 4];
            for (seq, &i) in samples.iter().enumerate() {
                truth[i as usize] += 1;
                if let Some(ended) = run.observe(seq as u64, reasons[i as usize]) {
                    let index = reasons.iter().position(|r| *r == Some(ended.reason)).unwrap();
                    reported[index] += u64::from(ended.count);
                }
            }
            if let Some((reason, count)) = run.open() {
                let index = reasons.iter().position(|r| *r == Some(reason)).unwrap();
                reported[index] += u64::from(count);
            }
            prop_assert_eq!(&reported[1..], &truth[1..]);
        }
    }
}
