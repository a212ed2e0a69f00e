//! Event lines: one JSON object per event (`seq`, `t`, `kind` and the event's own fields,
//! keys in alphabetical order, no spaces), serialized straight from the borrowed event
//! ([`EventLine`]) into one stack buffer and written to the output in one write.
//!
//! This is the one place the host turns an event into JSON: `replay` writes lines with
//! [`EventsSink`], `watch` takes [`event_json`]'s value.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use serde::ser::{Serialize, SerializeMap, Serializer};
use serde_json::Value;
use steadycal_core::event::{Event, EventKind};
use steadycal_core::real::Real;

use crate::io::create_output;
use crate::number::shortest_f64;
use crate::stack_buffer::StackBuffer;

/// A value in an event's JSON object.
#[derive(Clone, Copy, Debug)]
enum Field {
    /// A float as [`crate::number::number`] writes it (`None` is null).
    Number(Option<f64>),
    /// An integer.
    Integer(u64),
    /// A name.
    Text(&'static str),
    /// A flag.
    Flag(bool),
}

impl Serialize for Field {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        match *self {
            Field::Number(Some(number)) => serializer.serialize_f64(number),
            Field::Number(None) => serializer.serialize_unit(),
            Field::Integer(n) => serializer.serialize_u64(n),
            Field::Text(text) => serializer.serialize_str(text),
            Field::Flag(flag) => serializer.serialize_bool(flag),
        }
    }
}

/// Most fields an event has (`mean_misfit`).
const EVENT_FIELDS: usize = 8;

/// The fields of one event's JSON object: `seq`, `t`, `kind` and the event's own, in the
/// order of their keys (serde_json's map keeps its keys sorted), with their count.
fn event_fields<R: Real + Display>(
    event: &Event<R>,
    t: f64,
) -> ([(&'static str, Field); EVENT_FIELDS], usize) {
    let mut fields = [("", Field::Flag(false)); EVENT_FIELDS];
    let mut count = 0;
    let mut put = |key: &'static str, value: Field| {
        fields[count] = (key, value);
        count += 1;
    };
    let number = |value: R| Field::Number(shortest_f64(value));
    let kind = Field::Text(event.kind.name());
    let seq = Field::Integer(event.seq);
    let time = Field::Number(shortest_f64(t));
    match event.kind {
        EventKind::SpreadTracksLevel { k, k_low, k_high } => {
            put("k", number(k));
            put("k_high", number(k_high));
            put("k_low", number(k_low));
            put("kind", kind);
            put("seq", seq);
            put("t", time);
        }
        EventKind::TransformChanged { from, to, gain } => {
            put("from", Field::Text(from.name()));
            put("gain", number(gain));
            put("kind", kind);
            put("seq", seq);
            put("t", time);
            put("to", Field::Text(to.name()));
        }
        EventKind::MeanMisfit {
            rung,
            statistic,
            dof,
            suggest_quadratic,
            suggest_temperature,
        } => {
            put("dof", Field::Integer(u64::from(dof)));
            put("kind", kind);
            put("rung", Field::Text(rung.name()));
            put("seq", seq);
            put("statistic", number(statistic));
            put("suggest_quadratic", Field::Flag(suggest_quadratic));
            put("suggest_temperature", Field::Flag(suggest_temperature));
            put("t", time);
        }
        EventKind::SampleRejected { reason } => {
            put("kind", kind);
            put("reason", Field::Text(reason.name()));
            put("seq", seq);
            put("t", time);
        }
        EventKind::BiasShift {
            direction,
            size,
            severity,
        } => {
            put("direction", Field::Text(direction.name()));
            put("kind", kind);
            put("seq", seq);
            put("severity", Field::Text(severity.name()));
            put("size", number(size));
            put("t", time);
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
            put("change", number(change));
            put("kind", kind);
            put("seq", seq);
            put("severity", Field::Text(severity.name()));
            put("t", time);
            put("uncertainty", number(uncertainty));
        }
        EventKind::SpreadJump { ratio, severity } => {
            put("kind", kind);
            put("ratio", number(ratio));
            put("seq", seq);
            put("severity", Field::Text(severity.name()));
            put("t", time);
        }
        EventKind::SignalStuck { run, severity } => {
            put("kind", kind);
            put("run", Field::Integer(u64::from(run)));
            put("seq", seq);
            put("severity", Field::Text(severity.name()));
            put("t", time);
        }
        EventKind::SignalOutOfRange { raw, severity } => {
            put("kind", kind);
            put("raw", number(raw));
            put("seq", seq);
            put("severity", Field::Text(severity.name()));
            put("t", time);
        }
        EventKind::ReferenceGap { seconds, severity } => {
            put("kind", kind);
            put("seconds", Field::Number(shortest_f64(seconds)));
            put("seq", seq);
            put("severity", Field::Text(severity.name()));
            put("t", time);
        }
        EventKind::Cleared { alarm } => {
            put("alarm", Field::Text(alarm.name()));
            put("kind", kind);
            put("seq", seq);
            put("t", time);
        }
    }
    debug_assert!(fields[..count].is_sorted_by_key(|(key, _)| *key));
    (fields, count)
}

/// One event with its time, serialized as its JSON object without building it.
pub struct EventLine<'a, R> {
    /// The event.
    pub event: &'a Event<R>,
    /// The time of the sample that raised it.
    pub t: f64,
}

impl<R: Real + Display> Serialize for EventLine<'_, R> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        let (fields, count) = event_fields(self.event, self.t);
        let mut map = serializer.serialize_map(Some(count))?;
        for (key, field) in &fields[..count] {
            map.serialize_entry(key, field)?;
        }
        map.end()
    }
}

/// One event as a JSON object: `seq`, `t`, `kind` and the event's fields.
pub fn event_json<R: Real + Display>(event: &Event<R>, t: f64) -> Value {
    serde_json::to_value(EventLine { event, t }).unwrap_or(Value::Null)
}

/// Longest event line gathered on the stack; a longer one (none is) is written directly.
const LINE_BYTES: usize = 512;

/// Writes one event's JSON object (no newline) in one write to `out`.
pub fn write_event<R: Real + Display>(
    out: &mut dyn Write,
    event: &Event<R>,
    t: f64,
) -> std::io::Result<()> {
    let line = EventLine { event, t };
    let mut buffer = StackBuffer::<LINE_BYTES>::default();
    if serde_json::to_writer(&mut buffer, &line).is_ok() {
        return out.write_all(buffer.as_bytes());
    }
    serde_json::to_writer(&mut *out, &line)?;
    Ok(())
}

/// The events output of a run: one line per event.
pub struct EventsSink {
    out: Box<dyn Write>,
}

impl EventsSink {
    /// Creates the output (`-` is standard output).
    pub fn create(path: &Path) -> Result<Self> {
        Ok(EventsSink {
            out: create_output(path)?,
        })
    }

    /// Writes one event's line.
    #[inline]
    pub fn write<R: Real + Display>(&mut self, event: &Event<R>, t: f64) -> std::io::Result<()> {
        write_event(self.out.as_mut(), event, t)?;
        self.out.write_all(b"\n")
    }

    /// Flushes the output.
    pub fn finish(mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use steadycal_core::event::{AlarmKind, Direction, RejectReason, Severity};
    use steadycal_core::transform::Rung;

    /// Every kind of event, with its floats taken from `values` in turn.
    fn every_kind<R: Real>(values: &[R], small: u32) -> Vec<EventKind<R>> {
        let v = |i: usize| values[i % values.len()];
        let severity = [Severity::Info, Severity::Warn, Severity::Alarm][small as usize % 3];
        let rung = Rung::ALL[small as usize % Rung::ALL.len()];
        let mut kinds = vec![
            EventKind::SpreadTracksLevel {
                k: v(0),
                k_low: v(1),
                k_high: v(2),
            },
            EventKind::TransformChanged {
                from: rung,
                to: Rung::ALL[(small as usize + 1) % Rung::ALL.len()],
                gain: v(3),
            },
            EventKind::MeanMisfit {
                rung,
                statistic: v(4),
                dof: small as u8,
                suggest_quadratic: small.is_multiple_of(2),
                suggest_temperature: small.is_multiple_of(3),
            },
            EventKind::BiasShift {
                direction: if small.is_multiple_of(2) {
                    Direction::Up
                } else {
                    Direction::Down
                },
                size: v(5),
                severity,
            },
            EventKind::GainDrift {
                change: v(6),
                uncertainty: v(7),
                severity,
            },
            EventKind::OffsetDrift {
                change: v(7),
                uncertainty: v(6),
                severity,
            },
            EventKind::SpreadJump {
                ratio: v(1),
                severity,
            },
            EventKind::SignalStuck {
                run: small,
                severity,
            },
            EventKind::SignalOutOfRange {
                raw: v(2),
                severity,
            },
            EventKind::ReferenceGap {
                seconds: v(3).to_f64() * 1e3,
                severity,
            },
        ];
        for reason in [
            RejectReason::NonFiniteRaw,
            RejectReason::NonFiniteReference,
            RejectReason::NonFiniteTemperature,
            RejectReason::BelowOrigin,
            RejectReason::OutOfRange,
            RejectReason::Spike,
            RejectReason::Stuck,
        ] {
            kinds.push(EventKind::SampleRejected { reason });
        }
        for alarm in AlarmKind::ALL {
            kinds.push(EventKind::Cleared { alarm });
        }
        kinds
    }

    fn written<R: Real + Display>(event: &Event<R>, t: f64) -> (Vec<u8>, Vec<u8>) {
        let mut direct = Vec::new();
        write_event(&mut direct, event, t).unwrap();
        let built = serde_json::to_vec(&event_json(event, t)).unwrap();
        (direct, built)
    }

    proptest! {
        #[test]
        fn direct_event_lines_equal_serde_json(
            singles in prop::collection::vec(any::<f32>(), 8),
            doubles in prop::collection::vec(any::<f64>(), 8),
            t in prop_oneof![any::<f64>(), 0.0..1e7f64],
            seq in any::<u64>(),
            small in 0u32..1000,
        ) {
            for kind in every_kind(&singles, small) {
                let (direct, built) = written(&Event { seq, kind }, t);
                prop_assert_eq!(String::from_utf8(direct), String::from_utf8(built));
            }
            for kind in every_kind(&doubles, small) {
                let (direct, built) = written(&Event { seq, kind }, t);
                prop_assert_eq!(String::from_utf8(direct), String::from_utf8(built));
            }
        }
    }
}
