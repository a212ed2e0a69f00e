//! Event lines: one JSON object per event (`seq`, `t`, `kind`, then the event's own fields
//! in the order of the core's list of kinds, `EventKind::for_each_field`; no spaces),
//! serialized straight from the borrowed event ([`EventLine`]) into one stack buffer and
//! written to the output in one write.
//!
//! This is the one place the host turns an event into JSON: `replay` writes lines with
//! [`EventsSink`], `watch` takes [`event_json`]'s value.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use serde::ser::{Serialize, SerializeMap, Serializer};
use serde_json::Value;
use steadycal_core::event::{Event, FieldValue};
use steadycal_core::real::Real;

use super::ChannelPrefix;
use crate::number::shortest_f64;
use crate::stack_buffer::StackBuffer;

/// A field's value as JSON: floats as [`crate::number::number`] writes them (null when
/// not finite), integers, flags and names as they are.
struct Json<R>(FieldValue<R>);

impl<R: Real + Display> Serialize for Json<R> {
    fn serialize<S: Serializer>(&self, serializer: S) -> Result<S::Ok, S::Error> {
        match self.0 {
            FieldValue::Real(value) => shortest_f64(value).serialize(serializer),
            FieldValue::Wide(value) => shortest_f64(value).serialize(serializer),
            FieldValue::Integer(n) => serializer.serialize_u32(n),
            FieldValue::Flag(flag) => serializer.serialize_bool(flag),
            FieldValue::Name(name) => serializer.serialize_str(name),
        }
    }
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
        let kind = &self.event.kind;
        let mut map = serializer.serialize_map(Some(3 + kind.id().fields().len()))?;
        map.serialize_entry("seq", &self.event.seq)?;
        map.serialize_entry("t", &shortest_f64(self.t))?;
        map.serialize_entry("kind", kind.name())?;
        kind.for_each_field(&mut |key, value| map.serialize_entry(key, &Json(value)))?;
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

/// Writes one event's JSON object with `"channel":NAME` first (`prefix` is
/// [`ChannelPrefix::event`]), no newline.
pub fn write_channel_event<R: Real + Display>(
    out: &mut dyn Write,
    prefix: &[u8],
    event: &Event<R>,
    t: f64,
) -> std::io::Result<()> {
    let line = EventLine { event, t };
    let mut buffer = StackBuffer::<LINE_BYTES>::default();
    if serde_json::to_writer(&mut buffer, &line).is_ok() {
        out.write_all(prefix)?;
        return out.write_all(&buffer.as_bytes()[1..]);
    }
    let mut text = serde_json::to_vec(&line)?;
    text.splice(0..1, prefix.iter().copied());
    out.write_all(&text)
}

/// The events output of a run: one line per event.
pub struct EventsSink {
    out: Box<dyn Write>,
    prefix: ChannelPrefix,
}

impl EventsSink {
    /// Creates the output (`-` is standard output), or appends to it for one channel of a
    /// file of many (each line then starts with the channel).
    pub fn create(path: &Path, prefix: &ChannelPrefix) -> Result<Self> {
        Ok(EventsSink {
            out: super::open(path, prefix, None)?,
            prefix: prefix.clone(),
        })
    }

    /// Writes one event's line.
    #[inline]
    pub fn write<R: Real + Display>(&mut self, event: &Event<R>, t: f64) -> std::io::Result<()> {
        if self.prefix.is_empty() {
            write_event(self.out.as_mut(), event, t)?;
        } else {
            write_channel_event(self.out.as_mut(), &self.prefix.event, event, t)?;
        }
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
    use steadycal_core::event::{EventKind, FieldSource, KindId, Named};
    use steadycal_core::transform::Rung;

    /// Field values for events of every kind: floats from `values` in turn, integers and
    /// names from `small`.
    struct Values<'a, R>(&'a [R], u32, usize);

    impl<R: Real> FieldSource<R> for Values<'_, R> {
        type Error = std::convert::Infallible;
        fn real(&mut self, _: &'static str) -> Result<R, Self::Error> {
            self.2 += 1;
            Ok(self.0[self.2 % self.0.len()])
        }
        fn wide(&mut self, _: &'static str) -> Result<f64, Self::Error> {
            Ok(self.real("")?.to_f64() * 1e3)
        }
        fn integer(&mut self, _: &'static str, max: u32) -> Result<u32, Self::Error> {
            Ok(self.1.min(max))
        }
        fn flag(&mut self, _: &'static str) -> Result<bool, Self::Error> {
            self.2 += 1;
            Ok((self.1 as usize + self.2).is_multiple_of(2))
        }
        fn name<T: Named>(&mut self, _: &'static str) -> Result<T, Self::Error> {
            self.2 += 1;
            Ok(T::ALL[(self.1 as usize + self.2) % T::ALL.len()])
        }
    }

    /// An event of every kind, from the core's list of kinds.
    fn every_kind<R: Real>(values: &[R], small: u32) -> Vec<EventKind<R>> {
        KindId::ALL
            .into_iter()
            .map(
                |id| match EventKind::from_fields(id, &mut Values(values, small, 0)) {
                    Ok(kind) => kind,
                    Err(never) => match never {},
                },
            )
            .collect()
    }

    /// The line as written and as serde_json writes [`event_json`]'s value (keys sorted),
    /// both read back (the same text reads as the same value whatever the key order).
    fn written<R: Real + Display>(event: &Event<R>, t: f64) -> (Value, Value) {
        let mut direct = Vec::new();
        write_event(&mut direct, event, t).unwrap();
        let built = serde_json::to_vec(&event_json(event, t)).unwrap();
        (
            serde_json::from_slice(&direct).unwrap(),
            serde_json::from_slice(&built).unwrap(),
        )
    }

    #[test]
    fn a_channel_comes_first() {
        let mut line = Vec::new();
        let kind = EventKind::SpreadTracksLevel {
            k: 1.0f64,
            k_low: 0.5,
            k_high: 1.5,
        };
        let prefix = ChannelPrefix::new(Some("cell \"B\""));
        write_channel_event(&mut line, &prefix.event, &Event { seq: 3, kind }, 2.0).unwrap();
        assert_eq!(
            String::from_utf8(line).unwrap(),
            r#"{"channel":"cell \"B\"","seq":3,"t":2.0,"kind":"spread_tracks_level","k":1.0,"k_low":0.5,"k_high":1.5}"#
        );
        assert_eq!(prefix.row, b"\"cell \"\"B\"\"\",");
    }

    #[test]
    fn keys_follow_the_list_of_kinds() {
        let mut line = Vec::new();
        let kind = EventKind::TransformChanged {
            from: Rung::Identity,
            to: Rung::Log,
            gain: 2.5f32,
            held: 200,
            k: 1.0,
            k_low: 0.75,
            k_high: 1.25,
        };
        write_event(&mut line, &Event { seq: 3, kind }, 1.0).unwrap();
        assert_eq!(
            String::from_utf8(line).unwrap(),
            r#"{"seq":3,"t":1.0,"kind":"transform_changed","from":"identity","to":"log","gain":2.5,"held":200,"k":1.0,"k_low":0.75,"k_high":1.25}"#
        );
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
                prop_assert_eq!(direct, built);
            }
            for kind in every_kind(&doubles, small) {
                let (direct, built) = written(&Event { seq, kind }, t);
                prop_assert_eq!(direct, built);
            }
        }
    }
}
