//! Events raised by the monitor and the bounded queue that holds them.
//!
//! The kinds and their fields are described once (the `describe_events!` list below);
//! [`fields`] says what is derived from it.
//!
//! # Invariants
//! - The queue never allocates and never drops an event silently: when it is full, the
//!   newest event is discarded and [`EventQueue::dropped`] counts it.
//! - Every event names the sample (`seq`) that raised it.

use heapless::Deque;
use serde::{Deserialize, Serialize};

use crate::real::Real;
use crate::sample::{Flags, Outcome};
use crate::transform::Rung;

pub mod fields;

pub(crate) use fields::describe_events;
pub use fields::{FieldInfo, FieldSink, FieldSource, FieldValue, Named, Shape};

/// How serious a raised condition is.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
pub enum Severity {
    /// Worth knowing; no action needed.
    Info,
    /// Look at it soon.
    Warn,
    /// The calibration or the sensor cannot be trusted as it is.
    Alarm,
}

impl Severity {
    /// Name as written in event logs and configs.
    pub const fn name(self) -> &'static str {
        match self {
            Severity::Info => "info",
            Severity::Warn => "warn",
            Severity::Alarm => "alarm",
        }
    }

    /// Parses a name written by [`Severity::name`].
    pub fn from_name(name: &str) -> Option<Severity> {
        [Severity::Info, Severity::Warn, Severity::Alarm]
            .into_iter()
            .find(|s| s.name() == name)
    }
}

/// Why the screen refused a sample.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum RejectReason {
    /// The raw value is NaN or infinite.
    NonFiniteRaw,
    /// The reference value is NaN or infinite.
    NonFiniteReference,
    /// The temperature is NaN or infinite.
    NonFiniteTemperature,
    /// The value (or its prediction) is at or below the level origin while a power rung is
    /// active.
    BelowOrigin,
    /// The raw value is outside the configured physical range.
    OutOfRange,
    /// The standardized residual is beyond the spike bound.
    Spike,
    /// The raw value is part of a run of identical values long enough to call the signal
    /// stuck.
    Stuck,
}

impl RejectReason {
    /// Name as written in event logs.
    pub const fn name(self) -> &'static str {
        match self {
            RejectReason::NonFiniteRaw => "non_finite_raw",
            RejectReason::NonFiniteReference => "non_finite_reference",
            RejectReason::NonFiniteTemperature => "non_finite_temperature",
            RejectReason::BelowOrigin => "below_origin",
            RejectReason::OutOfRange => "out_of_range",
            RejectReason::Spike => "spike",
            RejectReason::Stuck => "stuck",
        }
    }
}

/// Which alarm a `cleared` event refers to.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum AlarmKind {
    /// Sustained bias of the residuals (CUSUM).
    BiasShift,
    /// Gain moved beyond tolerance from the baseline.
    GainDrift,
    /// Offset moved beyond tolerance from the baseline.
    OffsetDrift,
    /// Scatter grew at all levels.
    SpreadJump,
    /// The signal is stuck.
    SignalStuck,
    /// The signal is outside its physical range.
    SignalOutOfRange,
    /// No reference check for too long.
    ReferenceGap,
    /// The scatter tracks the level.
    SpreadTracksLevel,
    /// The mean of the active calibration is not adequate.
    MeanMisfit,
}

impl AlarmKind {
    /// Number of alarm kinds.
    pub const COUNT: usize = 9;

    /// All alarm kinds, in [`AlarmKind::index`] order.
    pub const ALL: [AlarmKind; AlarmKind::COUNT] = [
        AlarmKind::BiasShift,
        AlarmKind::GainDrift,
        AlarmKind::OffsetDrift,
        AlarmKind::SpreadJump,
        AlarmKind::SignalStuck,
        AlarmKind::SignalOutOfRange,
        AlarmKind::ReferenceGap,
        AlarmKind::SpreadTracksLevel,
        AlarmKind::MeanMisfit,
    ];

    /// Position in [`AlarmKind::ALL`].
    pub const fn index(self) -> usize {
        self as usize
    }

    /// Name, the same as the event kind that raises it.
    pub const fn name(self) -> &'static str {
        match self {
            AlarmKind::BiasShift => "bias_shift",
            AlarmKind::GainDrift => "gain_drift",
            AlarmKind::OffsetDrift => "offset_drift",
            AlarmKind::SpreadJump => "spread_jump",
            AlarmKind::SignalStuck => "signal_stuck",
            AlarmKind::SignalOutOfRange => "signal_out_of_range",
            AlarmKind::ReferenceGap => "reference_gap",
            AlarmKind::SpreadTracksLevel => "spread_tracks_level",
            AlarmKind::MeanMisfit => "mean_misfit",
        }
    }
}

/// Direction of a bias shift.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub enum Direction {
    /// The sensor reads high against the reference.
    Up,
    /// The sensor reads low against the reference.
    Down,
}

impl Direction {
    /// Name as written in event logs.
    pub const fn name(self) -> &'static str {
        match self {
            Direction::Up => "up",
            Direction::Down => "down",
        }
    }
}

/// [`Named`] for the types of an event's name fields: the names are the types' own
/// `name()`, the order their declaration's (the wire's variant order).
macro_rules! named {
    ($($ty:ident: [$($variant:ident),* $(,)?];)*) => {$(
        impl Named for $ty {
            const ALL: &'static [Self] = &[$($ty::$variant),*];
            #[inline]
            fn name(self) -> &'static str {
                $ty::name(self)
            }
        }
    )*};
}

named! {
    Rung: [Identity, Sqrt, Log, InvSqrt, Inverse];
    Severity: [Info, Warn, Alarm];
    Direction: [Up, Down];
    RejectReason: [
        NonFiniteRaw, NonFiniteReference, NonFiniteTemperature, BelowOrigin, OutOfRange,
        Spike, Stuck,
    ];
    AlarmKind: [
        BiasShift, GainDrift, OffsetDrift, SpreadJump, SignalStuck, SignalOutOfRange,
        ReferenceGap, SpreadTracksLevel, MeanMisfit,
    ];
}

/// The event kinds, declared once: for each kind its wire index (its position), its name
/// and its fields (name, type, documentation) in order. Invokes `$callback!` with the
/// list; the core's `describe_events!` generates [`EventKind`], [`KindId`], the field walk
/// and the wire codec from it, and a crate that needs code of its own per field (the
/// board's event lines, which must stay small) passes a macro of its own. Field types are
/// single identifiers: `R` (the monitor's float type), `f64`, `u8`, `u32`, `bool` or a
/// [`Named`] type. Adding a field is one line here (and its test).
#[macro_export]
macro_rules! event_kinds {
    ($callback:ident) => {
        $callback! {
            /// The scatter grows (or shrinks) with the level: SD ∝ level^k, k with its 95 % interval.
            SpreadTracksLevel = 0 "spread_tracks_level" {
                /// Estimated exponent.
                k: R,
                /// Lower end of the interval.
                k_low: R,
                /// Upper end of the interval.
                k_high: R,
            }
            /// The active calibration moved to another rung.
            TransformChanged = 1 "transform_changed" {
                /// Previous rung.
                from: Rung,
                /// New rung.
                to: Rung,
                /// Profile log-likelihood gain of `to` over `from` at the switch.
                gain: R,
                /// Checks over which `to` kept the lead before the switch.
                held: u32,
                /// Spread exponent k of the rung left, at its last evaluation (NaN when
                /// none was made since the last switch).
                k: R,
                /// Lower end of the interval of `k`.
                k_low: R,
                /// Upper end of the interval of `k`.
                k_high: R,
            }
            /// After a switch, the residual means by level are not zero: the calibration mean is
            /// wrong, not only the scatter model.
            MeanMisfit = 2 "mean_misfit" {
                /// The active rung.
                rung: Rung,
                /// Lack-of-fit statistic (χ² with `dof` degrees of freedom).
                statistic: R,
                /// Degrees of freedom of `statistic`.
                dof: u8,
                /// A quadratic term would probably help.
                suggest_quadratic: bool,
                /// A temperature term would probably help.
                suggest_temperature: bool,
            }
            /// The screen refused a run of samples (or a check was below the origin while a
            /// power rung is active) for the same reason; raised once, when the run ends
            /// (and every 1,024 samples while it lasts), by its last sample.
            SampleRejected = 3 "sample_rejected" {
                /// Why.
                reason: RejectReason,
                /// Samples in the run.
                count: u32,
            }
            /// CUSUM of standardized residuals crossed its decision interval.
            BiasShift = 4 "bias_shift" {
                /// Which way the sensor moved.
                direction: Direction,
                /// Estimated size of the shift, in standardized units.
                size: R,
                /// Severity.
                severity: Severity,
            }
            /// The gain moved beyond tolerance (and significantly) from the baseline.
            GainDrift = 5 "gain_drift" {
                /// Relative change of the gain (fraction, 0.01 = 1 %).
                change: R,
                /// Standard uncertainty of `change`.
                uncertainty: R,
                /// Severity.
                severity: Severity,
            }
            /// The offset moved beyond tolerance (and significantly) from the baseline.
            OffsetDrift = 6 "offset_drift" {
                /// Change of the offset, in raw units.
                change: R,
                /// Standard uncertainty of `change`.
                uncertainty: R,
                /// Severity.
                severity: Severity,
            }
            /// The scatter grew at all levels.
            SpreadJump = 7 "spread_jump" {
                /// Ratio of the new to the old scatter (SD).
                ratio: R,
                /// Severity.
                severity: Severity,
            }
            /// The signal is stuck.
            SignalStuck = 8 "signal_stuck" {
                /// Length of the run of identical values.
                run: u32,
                /// Severity.
                severity: Severity,
            }
            /// The raw value is outside the configured physical range.
            SignalOutOfRange = 9 "signal_out_of_range" {
                /// The value.
                raw: R,
                /// Severity.
                severity: Severity,
            }
            /// No reference check for too long: the calibration is unverified.
            ReferenceGap = 10 "reference_gap" {
                /// Seconds since the last check.
                seconds: f64,
                /// Severity.
                severity: Severity,
            }
            /// A raised condition is no longer present.
            Cleared = 11 "cleared" {
                /// What cleared.
                alarm: AlarmKind,
            }
            /// The spread profile's exponent points to another rung than the one in use
            /// (its interval lies wholly outside a quarter of the rung's exponent): the
            /// ladder keeps `rung`, which has the best profile likelihood of the ladder.
            /// Raised once per rung in use, and only while no challenger leads.
            RungInDoubt = 12 "rung_in_doubt" {
                /// The rung in use.
                rung: Rung,
                /// The exponent that rung assumes, `1 − λ`.
                rung_k: R,
                /// The spread profile's exponent.
                k: R,
                /// Lower end of its interval.
                k_low: R,
                /// Upper end of its interval.
                k_high: R,
            }
        }
    };
}

event_kinds!(describe_events);

/// One event: what happened, and at which sample.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Event<R> {
    /// Sequence number of the sample that raised it.
    pub seq: u64,
    /// What happened.
    pub kind: EventKind<R>,
}

/// A bounded first-in first-out queue of events with a count of the ones it had to drop.
///
/// ```
/// use steadycal_core::event::{Event, EventKind, EventQueue, RejectReason};
/// let mut queue: EventQueue<f32, 2> = EventQueue::new();
/// let event = Event { seq: 1, kind: EventKind::SampleRejected { reason: RejectReason::Spike, count: 1 } };
/// assert!(queue.push(event));
/// assert!(queue.push(event));
/// assert!(!queue.push(event)); // full: dropped and counted
/// assert_eq!(queue.dropped(), 1);
/// assert_eq!(queue.pop(), Some(event));
/// ```
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct EventQueue<R, const Q: usize> {
    events: Deque<Event<R>, Q>,
    dropped: u32,
}

impl<R: Real, const Q: usize> Default for EventQueue<R, Q> {
    fn default() -> Self {
        Self::new()
    }
}

impl<R: Real, const Q: usize> EventQueue<R, Q> {
    /// An empty queue.
    pub const fn new() -> Self {
        EventQueue {
            events: Deque::new(),
            dropped: 0,
        }
    }

    /// Appends an event; returns `false` (and counts the drop) when the queue is full.
    pub fn push(&mut self, event: Event<R>) -> bool {
        match self.events.push_back(event) {
            Ok(()) => true,
            Err(_) => {
                self.dropped = self.dropped.saturating_add(1);
                false
            }
        }
    }

    /// Appends an event raised by sample `seq` during a push and counts it in that push's
    /// outcome (`new_events`, and [`Flags::EVENTS_DROPPED`] when the queue was full).
    pub(crate) fn raise(&mut self, seq: u64, kind: EventKind<R>, outcome: &mut Outcome<R>) {
        outcome.new_events = outcome.new_events.saturating_add(1);
        if !self.push(Event { seq, kind }) {
            outcome.flags.insert(Flags::EVENTS_DROPPED);
        }
    }

    /// Takes the oldest event.
    pub fn pop(&mut self) -> Option<Event<R>> {
        self.events.pop_front()
    }

    /// Events waiting.
    pub fn len(&self) -> usize {
        self.events.len()
    }

    /// True when no event is waiting.
    pub fn is_empty(&self) -> bool {
        self.events.is_empty()
    }

    /// Events dropped so far because the queue was full.
    pub fn dropped(&self) -> u32 {
        self.dropped
    }
}
// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
impl<R: Real, const Q: usize> crate::wire::Walk for EventQueue<R, Q> {
    fn walk<'t, 'a>(
        &mut self,
        t: &'t mut crate::wire::Transfer<'a>,
    ) -> &'t mut crate::wire::Transfer<'a> {
        if t.encoding() {
            let w = t.writer();
            w.varint32(self.events.len() as u32);
            for event in &self.events {
                crate::wire::Wire::put(event, w);
            }
        } else {
            let r = t.reader();
            let len = r.len();
            if len > Q {
                r.fail();
            }
            self.events.clear();
            for _ in 0..len.min(Q) {
                // Cannot be full: at most Q pushes.
                let _ = self.events.push_back(crate::wire::Wire::get(r));
            }
        }
        crate::wire::Walk::walk(&mut self.dropped, t)
    }
}
crate::wire::wire_unit_enum!(Severity { Info, Warn, Alarm });
crate::wire::wire_unit_enum!(Direction { Up, Down });
crate::wire::wire_unit_enum!(RejectReason {
    NonFiniteRaw,
    NonFiniteReference,
    NonFiniteTemperature,
    BelowOrigin,
    OutOfRange,
    Spike,
    Stuck,
});
crate::wire::wire_unit_enum!(AlarmKind {
    BiasShift,
    GainDrift,
    OffsetDrift,
    SpreadJump,
    SignalStuck,
    SignalOutOfRange,
    ReferenceGap,
    SpreadTracksLevel,
    MeanMisfit,
});
crate::wire::wire_struct!(impl[R: Real] Event<R> { seq, kind });
