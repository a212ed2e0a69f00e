//! `defmt::Format` for the types a firmware logs (feature `defmt`): events, samples,
//! outcomes, readings, checks' details, flags and rungs.
//!
//! Written by hand in this one module, rather than derived on each type, so the modules that
//! own the types stay untouched. Names are the same as in the event logs (`name()`); an
//! event prints its sequence number and kind name, the fields of a kind being the host's
//! business (replay the device log to get them in full).

use defmt::{write, Format, Formatter};

use crate::event::{AlarmKind, Direction, Event, EventKind, RejectReason, Severity};
use crate::monitor::ConfigError;
use crate::real::Real;
use crate::sample::{CheckDetail, Flags, Outcome, Reading, Sample};
use crate::transform::Rung;

macro_rules! by_name {
    ($($type:ty),*) => {$(
        impl Format for $type {
            fn format(&self, f: Formatter) {
                write!(f, "{=str}", self.name())
            }
        }
    )*};
}

by_name!(Severity, RejectReason, AlarmKind, Direction, Rung);

impl Format for ConfigError {
    fn format(&self, f: Formatter) {
        write!(f, "bad parameter {=str}", self.parameter())
    }
}

impl<R: Real> Format for EventKind<R> {
    fn format(&self, f: Formatter) {
        write!(f, "{=str}", self.name())
    }
}

impl<R: Real> Format for Event<R> {
    fn format(&self, f: Formatter) {
        write!(f, "event {=u64} {}", self.seq, self.kind)
    }
}

impl Format for Flags {
    fn format(&self, f: Formatter) {
        write!(f, "flags {=u16:#06x}", self.0)
    }
}

impl<R: Real + Format> Format for Sample<R> {
    fn format(&self, f: Formatter) {
        write!(
            f,
            "sample {=u64} t={=f64} raw={} ref={} temp={}",
            self.seq, self.t, self.raw, self.reference, self.temperature
        )
    }
}

impl<R: Real + Format> Format for Reading<R> {
    fn format(&self, f: Formatter) {
        write!(
            f,
            "reading {} ± {} (k·u {}) on {}",
            self.value, self.standard_uncertainty, self.expanded_uncertainty, self.rung
        )
    }
}

impl<R: Real + Format> Format for CheckDetail<R> {
    fn format(&self, f: Formatter) {
        write!(
            f,
            "check {} predicted {} residual {} standardized {}",
            self.rung, self.prediction, self.residual, self.standardized
        )
    }
}

impl<R: Real + Format> Format for Outcome<R> {
    fn format(&self, f: Formatter) {
        write!(
            f,
            "outcome {} {} {} new_events={=u8}",
            self.reading(),
            self.check(),
            self.flags,
            self.new_events
        )
    }
}
