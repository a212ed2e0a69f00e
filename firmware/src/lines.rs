//! The canonical event-line format shared by the firmware and the host comparison.
//!
//! One line per event: `event SEQ KIND t=T FIELD=VALUE ...`, the fields in the order of
//! the core's one list of event kinds (`event_kinds!`), each written by
//! its shape: floats of the core's type (f32 here) as the 8 hex digits of `to_bits()`,
//! f64 values (`t`, `seconds`) as 16 hex digits, names (rungs, reasons, severities,
//! directions, alarms) as the core's `name()`, integers in decimal, flags as
//! `true`/`false`. A non-finite float is written `null`, because the host's JSON lines
//! cannot carry one.
//!
//! The host side (tests/tests/firmware_qemu.rs, which compiles this file too) converts
//! `steadycal replay --events` JSON lines into the same format, by the same description,
//! and compares line by line.

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
    put_fields(out, &event.kind)
}

/// `put_fields`, generated from the core's list of event kinds (`event_kinds!`): one
/// match arm per kind, one write per field by its type. Generated here rather than
/// walked through the core's `EventKind::for_each_field`, so the board carries the same
/// straight-line code as a hand-written writer (walking put 1,136 B more code into the
/// core's share of the flash, `footprint-by-source.sh`).
macro_rules! line_fields {
    ($(
        $(#[$vmeta:meta])*
        $variant:ident = $index:literal $name:literal {
            $( $(#[$fmeta:meta])* $field:ident : $ty:ident ),* $(,)?
        }
    )*) => {
        /// Writes the fields of one event, in the order of the list of kinds.
        fn put_fields(out: &mut impl Write, kind: &EventKind<f32>) -> fmt::Result {
            match *kind {
                $( EventKind::$variant { $($field),* } => {
                    $( line_fields!(@put $ty out $field)?; )*
                } )*
            }
            Ok(())
        }
    };
    (@put R $out:ident $field:ident) => { put_f32($out, stringify!($field), $field) };
    (@put f64 $out:ident $field:ident) => { put_f64($out, stringify!($field), $field) };
    (@put $plain:ident $out:ident $field:ident) => {
        line_fields!(@plain $plain $out $field)
    };
    (@plain u8 $out:ident $field:ident) => {
        write!($out, concat!(" ", stringify!($field), "={}"), $field)
    };
    (@plain u32 $out:ident $field:ident) => {
        write!($out, concat!(" ", stringify!($field), "={}"), $field)
    };
    (@plain bool $out:ident $field:ident) => {
        write!($out, concat!(" ", stringify!($field), "={}"), $field)
    };
    (@plain $named:ident $out:ident $field:ident) => {
        write!($out, concat!(" ", stringify!($field), "={}"), $field.name())
    };
}

steadycal_core::event_kinds!(line_fields);
