//! The alarm state machine: one small state per [`AlarmKind`], raised after a sustained
//! signal and cleared after a quiet period.
//!
//! A detector reports, at each of its observations, whether its signal is present. An
//! *episode* is a sequence of present observations in which no two are separated by
//! `clear_after` or more absent observations. The alarm is raised at the `raise_after`-th
//! present observation of an episode, and cleared (a `cleared` event) once `clear_after`
//! absent observations in a row have ended the episode. For a condition that holds at every
//! observation (a drift beyond tolerance) this is "raise after `raise_after` consecutive
//! observations"; for a detector that signals and resets (the CUSUMs) it is "raise after
//! `raise_after` signals, each within `clear_after` observations of the previous one".
//!
//! # Invariants
//! - A kind is raised at most once per episode; every raise is followed by exactly one
//!   clear before it can be raised again.
//! - Counters saturate; nothing wraps.

use serde::{Deserialize, Serialize};

use crate::event::{AlarmKind, Severity};
use crate::sample::Flags;

/// How one alarm kind is raised and cleared.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct AlarmRule {
    /// Severity of the raised alarm.
    pub severity: Severity,
    /// Present observations of one episode needed to raise (at least 1).
    pub raise_after: u32,
    /// Absent observations in a row that end an episode and clear a raised alarm (at least 1).
    pub clear_after: u32,
}

impl AlarmRule {
    /// A rule.
    pub const fn new(severity: Severity, raise_after: u32, clear_after: u32) -> Self {
        AlarmRule {
            severity,
            raise_after,
            clear_after,
        }
    }

    /// True when both counts are at least 1.
    pub const fn is_valid(&self) -> bool {
        self.raise_after >= 1 && self.clear_after >= 1
    }
}

/// The rules of every detector alarm.
///
/// Defaults (see [`AlarmRules::DEFAULT`]) and why:
/// - `bias_shift`: warn, 8 CUSUM signals each within 50 checks of the previous. A
///   two-sided CUSUM with k = 0.5, h = 5 signals every 465 checks in control (Montgomery,
///   Introduction to Statistical Quality Control, tabular CUSUM table, from memory: no
///   edition could be reached here), and
///   then a signal follows within 50 checks with probability about 0.09 (measured by
///   simulation), so eight in a row is a false alarm about once in 10^10 checks, while a
///   1σ shift signals every 10.4 checks and raises in about 85.
/// - `gain_drift`, `offset_drift`: alarm, 4 consecutive drift evaluations, cleared after 8.
/// - `spread_jump`: warn, 4 signals each within 200 checks of the previous (in-control
///   signal interval about 7,400 checks with the default k and h, measured by simulation).
/// - `signal_stuck`: alarm, raised at once (the run length is the sustained part), cleared
///   after 10 samples that are not stuck.
/// - `signal_out_of_range`: alarm, 3 samples out of range in a row, cleared after 10.
/// - `reference_gap`: warn, raised at once (the gap length is the sustained part), cleared
///   after 5 samples with a recent check.
///
/// All counts are common practice, no source, except where a table is named.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct AlarmRules {
    /// Rule of `bias_shift` (observations: checks; present: a CUSUM signal).
    pub bias_shift: AlarmRule,
    /// Rule of `gain_drift` (observations: drift evaluations).
    pub gain_drift: AlarmRule,
    /// Rule of `offset_drift` (observations: drift evaluations).
    pub offset_drift: AlarmRule,
    /// Rule of `spread_jump` (observations: checks; present: a spread CUSUM signal).
    pub spread_jump: AlarmRule,
    /// Rule of `signal_stuck` (observations: samples).
    pub signal_stuck: AlarmRule,
    /// Rule of `signal_out_of_range` (observations: samples).
    pub signal_out_of_range: AlarmRule,
    /// Rule of `reference_gap` (observations: samples).
    pub reference_gap: AlarmRule,
}

impl AlarmRules {
    /// The documented defaults.
    pub const DEFAULT: AlarmRules = AlarmRules {
        bias_shift: AlarmRule::new(Severity::Warn, 8, 50),
        gain_drift: AlarmRule::new(Severity::Alarm, 4, 8),
        offset_drift: AlarmRule::new(Severity::Alarm, 4, 8),
        spread_jump: AlarmRule::new(Severity::Warn, 4, 200),
        signal_stuck: AlarmRule::new(Severity::Alarm, 1, 10),
        signal_out_of_range: AlarmRule::new(Severity::Alarm, 3, 10),
        reference_gap: AlarmRule::new(Severity::Warn, 1, 5),
    };

    /// The rule of a detector alarm kind; `None` for kinds the detectors do not raise
    /// (`spread_tracks_level`, `mean_misfit`).
    pub const fn rule(&self, kind: AlarmKind) -> Option<AlarmRule> {
        match kind {
            AlarmKind::BiasShift => Some(self.bias_shift),
            AlarmKind::GainDrift => Some(self.gain_drift),
            AlarmKind::OffsetDrift => Some(self.offset_drift),
            AlarmKind::SpreadJump => Some(self.spread_jump),
            AlarmKind::SignalStuck => Some(self.signal_stuck),
            AlarmKind::SignalOutOfRange => Some(self.signal_out_of_range),
            AlarmKind::ReferenceGap => Some(self.reference_gap),
            AlarmKind::SpreadTracksLevel | AlarmKind::MeanMisfit => None,
        }
    }

    /// The first kind whose rule has a zero count.
    pub fn first_invalid(&self) -> Option<AlarmKind> {
        AlarmKind::ALL
            .into_iter()
            .find(|&kind| self.rule(kind).is_some_and(|rule| !rule.is_valid()))
    }
}

impl Default for AlarmRules {
    fn default() -> Self {
        Self::DEFAULT
    }
}

/// A change of an alarm's state.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum Transition {
    /// The alarm was raised by this observation.
    Raised(Severity),
    /// The alarm cleared with this observation.
    Cleared,
}

/// The state of one alarm kind.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct AlarmState {
    present: u32,
    quiet: u32,
    raised: bool,
}

impl AlarmState {
    /// One observation under `rule`.
    #[inline]
    pub fn observe(&mut self, rule: &AlarmRule, present: bool) -> Option<Transition> {
        if present {
            self.quiet = 0;
            self.present = self.present.saturating_add(1);
            if !self.raised && self.present >= rule.raise_after {
                self.raised = true;
                return Some(Transition::Raised(rule.severity));
            }
            return None;
        }
        if self.present == 0 && !self.raised {
            return None;
        }
        self.quiet = self.quiet.saturating_add(1);
        if self.quiet >= rule.clear_after {
            self.present = 0;
            self.quiet = 0;
            if self.raised {
                self.raised = false;
                return Some(Transition::Cleared);
            }
        }
        None
    }

    /// True while raised.
    pub fn raised(&self) -> bool {
        self.raised
    }
}

/// Every detector alarm's state, and how often each was raised.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct AlarmBoard {
    states: [AlarmState; AlarmKind::COUNT],
    raises: [u32; AlarmKind::COUNT],
}

impl AlarmBoard {
    /// All quiet.
    pub fn new() -> Self {
        Self::default()
    }

    /// One observation of `kind`; kinds without a rule are ignored.
    #[inline]
    pub fn observe(
        &mut self,
        rules: &AlarmRules,
        kind: AlarmKind,
        present: bool,
    ) -> Option<Transition> {
        let rule = rules.rule(kind)?;
        let transition = self.states[kind.index()].observe(&rule, present);
        if let Some(Transition::Raised(_)) = transition {
            let count = &mut self.raises[kind.index()];
            *count = count.saturating_add(1);
        }
        transition
    }

    /// True when `kind` has no episode under way: an observation without its signal then
    /// changes nothing and raises nothing (the common case, checked first on every sample).
    /// One load: a raised alarm has counted its signal at least once (`present ≥ 1`, see
    /// [`AlarmBoard::consistent`]).
    #[inline(always)]
    pub fn is_idle(&self, kind: AlarmKind) -> bool {
        self.states[kind.index()].present == 0
    }

    /// True when every raised kind has counted its signal at least once, as observing
    /// always leaves it (a raise counts the signal; a clear resets both): what
    /// [`AlarmBoard::is_idle`] relies on. A restored board is checked.
    pub fn consistent(&self) -> bool {
        self.states
            .iter()
            .all(|state| !state.raised || state.present > 0)
    }

    /// `ALARM` and `WARNING` for the severities of the kinds raised now.
    pub fn flags(&self, rules: &AlarmRules) -> Flags {
        let mut flags = Flags::empty();
        for kind in AlarmKind::ALL {
            if self.raised(kind) {
                match rules.rule(kind).map(|rule| rule.severity) {
                    Some(Severity::Alarm) => flags.insert(Flags::ALARM),
                    Some(Severity::Warn) => flags.insert(Flags::WARNING),
                    Some(Severity::Info) | None => {}
                }
            }
        }
        flags
    }

    /// True while any kind is raised.
    #[inline]
    pub fn any_raised(&self) -> bool {
        // Written out (no early exit, no loop): this runs on every sample.
        let [a, b, c, d, e, f, g, h, i] = &self.states;
        a.raised
            | b.raised
            | c.raised
            | d.raised
            | e.raised
            | f.raised
            | g.raised
            | h.raised
            | i.raised
    }

    /// True while `kind` is raised.
    pub fn raised(&self, kind: AlarmKind) -> bool {
        self.states[kind.index()].raised()
    }

    /// How many times `kind` was raised.
    pub fn raises(&self, kind: AlarmKind) -> u32 {
        self.raises[kind.index()]
    }

    /// The severity of every raised kind (by [`AlarmKind::index`]).
    pub fn raised_severities(&self, rules: &AlarmRules) -> [Option<Severity>; AlarmKind::COUNT] {
        let mut out = [None; AlarmKind::COUNT];
        for kind in AlarmKind::ALL {
            if self.raised(kind) {
                out[kind.index()] = rules.rule(kind).map(|rule| rule.severity);
            }
        }
        out
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[] AlarmState { present, quiet, raised });
crate::wire::walk_struct!(impl[] AlarmBoard { states, raises });
crate::wire::walk_struct!(impl[] AlarmRule { severity, raise_after, clear_after });
crate::wire::walk_struct!(impl[] AlarmRules {
    bias_shift, gain_drift, offset_drift, spread_jump, signal_stuck, signal_out_of_range,
    reference_gap,
});

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sustained_condition_raises_and_quiet_period_clears() {
        let rule = AlarmRule::new(Severity::Alarm, 3, 2);
        let mut state = AlarmState::default();
        assert_eq!(state.observe(&rule, true), None);
        assert_eq!(state.observe(&rule, true), None);
        assert_eq!(
            state.observe(&rule, true),
            Some(Transition::Raised(Severity::Alarm))
        );
        assert_eq!(state.observe(&rule, true), None); // raised once per episode
        assert_eq!(state.observe(&rule, false), None);
        assert_eq!(state.observe(&rule, true), None); // quiet run broken
        assert_eq!(state.observe(&rule, false), None);
        assert_eq!(state.observe(&rule, false), Some(Transition::Cleared));
        assert!(!state.raised());
    }

    #[test]
    fn scattered_signals_do_not_add_up() {
        // Signals further apart than `clear_after` start a new episode each time.
        let rule = AlarmRule::new(Severity::Warn, 2, 3);
        let mut state = AlarmState::default();
        for _ in 0..10 {
            assert_eq!(state.observe(&rule, true), None);
            for _ in 0..3 {
                assert_eq!(state.observe(&rule, false), None);
            }
        }
        assert_eq!(state.observe(&rule, true), None);
        assert_eq!(state.observe(&rule, false), None);
        assert_eq!(
            state.observe(&rule, true),
            Some(Transition::Raised(Severity::Warn))
        );
    }

    #[test]
    fn board_counts_raises_and_ignores_kinds_without_rule() {
        let rules = AlarmRules::DEFAULT;
        let mut board = AlarmBoard::new();
        assert_eq!(board.observe(&rules, AlarmKind::MeanMisfit, true), None);
        assert_eq!(
            board.observe(&rules, AlarmKind::SignalStuck, true),
            Some(Transition::Raised(Severity::Alarm))
        );
        assert_eq!(board.raises(AlarmKind::SignalStuck), 1);
        assert_eq!(
            board.raised_severities(&rules)[AlarmKind::SignalStuck.index()],
            Some(Severity::Alarm)
        );
        assert_eq!(rules.first_invalid(), None);
        let mut bad = rules;
        bad.gain_drift.clear_after = 0;
        assert_eq!(bad.first_invalid(), Some(AlarmKind::GainDrift));
    }

    proptest::proptest! {
        /// What `AlarmBoard::is_idle` relies on: observing never leaves a raised alarm
        /// with no signal counted, whatever the rule and the signals.
        #[test]
        fn a_raised_alarm_has_counted_its_signal(
            raise_after in 0u32..5,
            clear_after in 0u32..5,
            signals in proptest::collection::vec(proptest::bool::ANY, 0..64),
        ) {
            let rule = AlarmRule::new(Severity::Warn, raise_after, clear_after);
            let mut state = AlarmState::default();
            for present in signals {
                state.observe(&rule, present);
                proptest::prop_assert!(!state.raised || state.present > 0);
            }
        }
    }
}
