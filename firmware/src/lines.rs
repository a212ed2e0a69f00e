//! The canonical event-line format shared by the firmware and the host comparison.
//!
//! One line per event: `event SEQ KIND t=T FIELD=VALUE ...`, fields in the order of the
//! `EventKind` variant's declaration. Floats of the core's type (f32 here) are written as
//! the 8 hex digits of `to_bits()`, f64 values (`t`, `seconds`) as 16 hex digits, names
//! (rungs, reasons, severities, directions, alarms) as the core's `name()`, integers in
//! decimal, booleans as `true`/`false`. A non-finite float is written `null`, because the
//! host's JSON lines cannot carry one.
//!
//! The host side (tests/tests/firmware_qemu.rs) converts `steadycal replay --events` JSON
//! lines into the same format and compares line by line.

use core::fmt::{self, Write};

use steadycal_core::event::{Event, EventKind};

/// Writes an f32 field.
pub fn put_f32(out: &mut impl Write, key: &str, value: f32) -> fmt::Result {
    if value.is_finite() {
        write!(out, " {key}={:08x}", value.to_bits())
    } else {
        write!(out, " {key}=null")
    }
}

/// Writes an f64 field.
pub fn put_f64(out: &mut impl Write, key: &str, value: f64) -> fmt::Result {
    if value.is_finite() {
        write!(out, " {key}={:016x}", value.to_bits())
    } else {
        write!(out, " {key}=null")
    }
}

/// Writes one event line (without the newline).
pub fn event_line(out: &mut impl Write, event: &Event<f32>, t: f64) -> fmt::Result {
    write!(out, "event {} {}", event.seq, event.kind.name())?;
    put_f64(out, "t", t)?;
    match event.kind {
        EventKind::SpreadTracksLevel { k, k_low, k_high } => {
            put_f32(out, "k", k)?;
            put_f32(out, "k_low", k_low)?;
            put_f32(out, "k_high", k_high)
        }
        EventKind::TransformChanged { from, to, gain } => {
            write!(out, " from={} to={}", from.name(), to.name())?;
            put_f32(out, "gain", gain)
        }
        EventKind::MeanMisfit {
            rung,
            statistic,
            dof,
            suggest_quadratic,
            suggest_temperature,
        } => {
            write!(out, " rung={}", rung.name())?;
            put_f32(out, "statistic", statistic)?;
            write!(out, " dof={dof} suggest_quadratic={suggest_quadratic} suggest_temperature={suggest_temperature}")
        }
        EventKind::SampleRejected { reason } => write!(out, " reason={}", reason.name()),
        EventKind::BiasShift {
            direction,
            size,
            severity,
        } => {
            write!(out, " direction={}", direction.name())?;
            put_f32(out, "size", size)?;
            write!(out, " severity={}", severity.name())
        }
        EventKind::GainDrift {
            change,
            uncertainty,
            severity,
        }
        | EventKind::OffsetDrift {
            change,
            uncertainty,
            severity,
        } => {
            put_f32(out, "change", change)?;
            put_f32(out, "uncertainty", uncertainty)?;
            write!(out, " severity={}", severity.name())
        }
        EventKind::SpreadJump { ratio, severity } => {
            put_f32(out, "ratio", ratio)?;
            write!(out, " severity={}", severity.name())
        }
        EventKind::SignalStuck { run, severity } => {
            write!(out, " run={run} severity={}", severity.name())
        }
        EventKind::SignalOutOfRange { raw, severity } => {
            put_f32(out, "raw", raw)?;
            write!(out, " severity={}", severity.name())
        }
        EventKind::ReferenceGap { seconds, severity } => {
            put_f64(out, "seconds", seconds)?;
            write!(out, " severity={}", severity.name())
        }
        EventKind::Cleared { alarm } => write!(out, " alarm={}", alarm.name()),
    }
}
