//! What goes into the monitor ([`Sample`]) and what comes out of one push ([`Outcome`]).
//!
//! # Invariants
//! - A `Sample` may carry any value, NaN and ±∞ included; the monitor screens it.
//! - A `Sample`'s [`Sample::averaged`] count is at least 1 as the monitor reads it (0 is
//!   read as 1): every constructor makes 1, [`Sample::averaged_over`] sets another.
//!   A sample of count 1 takes exactly the arithmetic of a sample without the count (see
//!   [`Averaging`]).
//! - An [`Outcome`] with a [`Reading`] always has finite value and uncertainties.
//! - An [`Outcome`] carries a [`CheckDetail`] exactly when its sample was a check the
//!   monitor fitted (flag `CHECK` without `REJECTED`); a push makes a reading or a check's
//!   detail, never both ([`Detail`]).

use serde::{Deserialize, Serialize};

use crate::real::Real;
use crate::transform::Rung;
use crate::wire::{Reader, Wire, Writer};

/// One sample of one channel.
///
/// ```
/// use steadycal_core::sample::Sample;
/// let check = Sample::check(7, 70.0, 101.3f32, 100.0);
/// assert!(check.reference.is_some());
/// let reading = Sample::reading(8, 80.0, 55.1f32);
/// assert!(reading.reference.is_none());
/// // A check whose raw value is the mean of four sensor values.
/// let averaged = Sample::check(9, 90.0, 101.1f32, 100.0).averaged_over(4);
/// assert_eq!(averaged.averaged, 4);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Sample<R> {
    /// Sequence number (0-based data-row index in a feed).
    pub seq: u64,
    /// Time in seconds (any epoch; `f64` on every target so long runs keep their resolution).
    pub t: f64,
    /// The sensor's raw output.
    pub raw: R,
    /// The reference value, when this sample is a check against a reference.
    pub reference: Option<R>,
    /// Temperature, when the channel measures it.
    pub temperature: Option<R>,
    /// How many raw values `raw` is the mean of: 1 for a single value (0 is read as 1).
    /// The variance of the mean is `1/averaged` of a single value's, which the monitor
    /// accounts for (see [`Averaging`]). Not in the device log (see the crate's
    /// ARCHITECTURE.md, open questions): a record decodes with 1.
    #[serde(skip, default = "single_value")]
    pub averaged: u32,
}

/// The count of a sample that is one value (serde's default for [`Sample::averaged`]).
fn single_value() -> u32 {
    1
}

impl<R: Real> Sample<R> {
    /// A sample with a reference value (a check).
    pub fn check(seq: u64, t: f64, raw: R, reference: R) -> Self {
        Sample {
            seq,
            t,
            raw,
            reference: Some(reference),
            temperature: None,
            averaged: 1,
        }
    }

    /// A sample without reference, to be turned into a calibrated reading.
    pub fn reading(seq: u64, t: f64, raw: R) -> Self {
        Sample {
            seq,
            t,
            raw,
            reference: None,
            temperature: None,
            averaged: 1,
        }
    }

    /// The same sample with a temperature.
    pub fn with_temperature(mut self, temperature: R) -> Self {
        self.temperature = Some(temperature);
        self
    }

    /// The same sample with its raw value the mean of `count` raw values (0 is read as 1).
    /// Its temperature and reference are taken as they are (a mean of each, when the
    /// caller averaged them too).
    pub fn averaged_over(mut self, count: u32) -> Self {
        self.averaged = count;
        self
    }

    /// The variance factors of this sample's averaging.
    #[inline(always)]
    pub fn averaging(&self) -> Averaging<R> {
        Averaging::of(self.averaged)
    }
}

/// What averaging `m` raw values does to a raw value's variance, in the three forms the
/// monitor uses: the mean of `m` independent values with variance `σ²` has variance
/// `σ²/m`.
///
/// # The rule
/// For a check whose raw value is the mean of `m` values (see [`Sample::averaged`]):
/// - its weight in every rung's fit is `m` times a single value's (relative variance
///   `1/(m·w(f))`), and its squared transformed residual counts `m` times in the rungs'
///   likelihood sums (a weighted likelihood with known relative weights: the profile
///   `σ²` is `Σ mᵢ·rᵢ²/N`, `N` the count of checks);
/// - its residual is standardized by `√(σ²·(1/(m·w(f)) + xᵀPx))`, so the detectors, the
///   spike screen and the mean-adequacy check see unit variance whatever `m`;
/// - the spread profile takes `residual·√m`, a residual on a single value's scale, so the
///   profile (and so every reading's uncertainty) describes single values;
/// - a reading of such a mean gets the variance `σ²·(1/(m·w(f)) + xᵀPx)/b²`.
///
/// With `m = 1` every factor is exactly 1 and every product with it is the other factor
/// bit for bit, so a single-value sample computes what it computed without the count.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Averaging<R> {
    /// `m`.
    pub count: R,
    /// `1/m`: the variance of the mean relative to a single value's.
    pub inverse: R,
    /// `√m`: turns a residual of the mean into one on a single value's scale.
    pub root: R,
}

impl<R: Real> Averaging<R> {
    /// One value (`m = 1`): every factor 1.
    pub const SINGLE: Self = Averaging {
        count: R::ONE,
        inverse: R::ONE,
        root: R::ONE,
    };

    /// The factors of a mean of `count` values (`count` ≤ 1 is one value).
    #[inline(always)]
    pub fn of(count: u32) -> Self {
        if count <= 1 {
            return Self::SINGLE;
        }
        let m = R::from_u32(count);
        Averaging {
            count: m,
            inverse: R::ONE / m,
            root: m.sqrt(),
        }
    }
}

/// A calibrated reading: the reference-scale value for a raw sample, with its uncertainty.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Reading<R> {
    /// Calibrated value in reference units (inverse prediction through the active fit).
    pub value: R,
    /// Standard uncertainty of `value` (one standard deviation).
    pub standard_uncertainty: R,
    /// Expanded uncertainty: `coverage_factor × standard_uncertainty` (k = 2 by default).
    pub expanded_uncertainty: R,
    /// The rung the reading was made under.
    pub rung: Rung,
}

/// What the rung in use made of a check the monitor fitted, before the check updated it:
/// the values the monitor's own check step computed, so that no caller runs the ladder
/// again to learn them.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct CheckDetail<R> {
    /// The rung in use's a-priori prediction of the raw value (raw units).
    pub prediction: R,
    /// `raw − prediction`.
    pub residual: R,
    /// The residual standardized by that rung's spread model at this level, including the
    /// uncertainty of the prediction, for the mean of [`Sample::averaged`] values
    /// (`residual / √(σ²·(1/(m·w(f)) + xᵀPx))`); `None` until the fit has a residual
    /// variance.
    pub standardized: Option<R>,
    /// The rung in use when the check arrived (the one that made the prediction).
    pub rung: Rung,
}

/// Bit flags describing what one push did.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Flags(pub u16);

impl Flags {
    /// The sample carried a reference (a check).
    pub const CHECK: Flags = Flags(1 << 0);
    /// The sample was rejected by the screen and did not update anything.
    pub const REJECTED: Flags = Flags(1 << 1);
    /// The monitor is still warming up (too few checks for the spread model and ladder).
    pub const WARMING_UP: Flags = Flags(1 << 2);
    /// No reading could be made (no calibration yet, or the raw value is outside the
    /// invertible range of the active fit).
    pub const NO_READING: Flags = Flags(1 << 3);
    /// At least one alarm of severity `alarm` is raised.
    pub const ALARM: Flags = Flags(1 << 4);
    /// At least one alarm of severity `warn` is raised.
    pub const WARNING: Flags = Flags(1 << 5);
    /// The sample was at or below the level origin, so the power rungs did not use it.
    pub const BELOW_ORIGIN: Flags = Flags(1 << 6);
    /// Events were dropped because the event queue was full.
    pub const EVENTS_DROPPED: Flags = Flags(1 << 7);
    /// The active rung is not yet backed by the evidence: the warm-up is not over, or
    /// another rung leads but has not yet won (see
    /// `PowerLadder::provisional` of the `ladder` module). A reading is made on the active rung
    /// all the same.
    pub const PROVISIONAL: Flags = Flags(1 << 8);

    /// No flag set.
    pub const fn empty() -> Flags {
        Flags(0)
    }
    /// True if every flag of `other` is set in `self`.
    pub const fn contains(self, other: Flags) -> bool {
        self.0 & other.0 == other.0
    }
    /// Sets the flags of `other`.
    pub fn insert(&mut self, other: Flags) {
        self.0 |= other.0;
    }
    /// Names of the set flags, in bit order.
    pub fn names(self) -> impl Iterator<Item = &'static str> {
        const NAMES: [&str; 9] = [
            "check",
            "rejected",
            "warming_up",
            "no_reading",
            "alarm",
            "warning",
            "below_origin",
            "events_dropped",
            "provisional",
        ];
        (0..NAMES.len())
            .filter(move |bit| self.0 & (1 << bit) != 0)
            .map(|bit| NAMES[bit])
    }
}

/// What one `Monitor::push` returns.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Outcome<R> {
    /// The reading or the check's detail, when the push made one.
    pub detail: Detail<R>,
    /// What happened.
    pub flags: Flags,
    /// How many events this push appended to the monitor's queue (including dropped ones).
    pub new_events: u8,
}

impl<R: Copy> Outcome<R> {
    /// The calibrated reading, for a sample without reference that could be inverted.
    #[inline]
    pub fn reading(&self) -> Option<Reading<R>> {
        match self.detail {
            Detail::Reading(reading) => Some(reading),
            _ => None,
        }
    }

    /// The check's detail, for a check the monitor fitted.
    #[inline]
    pub fn check(&self) -> Option<CheckDetail<R>> {
        match self.detail {
            Detail::Check(check) => Some(check),
            _ => None,
        }
    }
}

/// What a push produced beside its flags and events: a sample is either read or checked,
/// so one of the two at most (one field keeps [`Outcome`] as small as a reading).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub enum Detail<R> {
    /// Neither: the sample was rejected, or no reading could be made.
    Nothing,
    /// The calibrated reading of a sample without reference.
    Reading(Reading<R>),
    /// The detail of a check the monitor fitted.
    Check(CheckDetail<R>),
}

// The device-log codec of a sample (bytes: see `crate::wire`): the fields serde writes,
// so `averaged` is left out and decodes as 1, as serde's default gives.
impl<R: Real> Wire for Sample<R> {
    fn put(&self, w: &mut Writer<'_>) {
        self.seq.put(w);
        self.t.put(w);
        self.raw.put(w);
        self.reference.put(w);
        self.temperature.put(w);
    }
    fn get(r: &mut Reader<'_>) -> Self {
        Sample {
            seq: Wire::get(r),
            t: Wire::get(r),
            raw: Wire::get(r),
            reference: Wire::get(r),
            temperature: Wire::get(r),
            averaged: 1,
        }
    }
}
