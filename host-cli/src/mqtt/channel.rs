//! One channel of an MQTT watch: the engine `replay` drives, its sample numbering, the
//! alarms it has raised with since-when, and the counts its status reports.
//!
//! Invariants: `seq` of the next sample is the number of samples the monitor has counted
//! (so a resumed channel numbers on like one uninterrupted replay of its feed, whose `seq`
//! is the 0-based row index); malformed payloads take no `seq`. Event lines are written by
//! [`write_channel_event`], the writer of `replay` on a file of many sensors: the channel
//! first, escaped as a JSON string ([`ChannelPrefix`]), then the event's fields.

use std::collections::BTreeMap;
use std::fmt::Display;

use serde::{Deserialize, Serialize};
use serde_json::{json, Value};
use steadycal_core::event::AlarmKind;
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;
use steadycal_core::sample::Sample;

use crate::number::number;
use crate::replay::engine::Engine;
use crate::replay::sink::events::write_channel_event;
use crate::replay::sink::summary::alarms;
use crate::replay::sink::ChannelPrefix;

/// When an alarm was raised: the time and `seq` of the sample that raised it.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Since {
    /// Time of the sample.
    pub t: f64,
    /// Its `seq`.
    pub seq: u64,
}

/// What a channel keeps beside its monitor's snapshot (saved in the state directory's
/// `channels.json`): valid for the snapshot that counted `samples` samples.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct ChannelRecord {
    /// Samples the monitor had counted when this was saved.
    pub samples: u64,
    /// Time of the last sample processed (null before the first).
    pub last_t: Option<f64>,
    /// Time of the last check.
    pub last_check_t: Option<f64>,
    /// Malformed payloads counted.
    pub malformed: u64,
    /// Redelivered samples recognised and left out.
    pub redelivered: u64,
    /// Raised alarms by kind: since when.
    pub since: BTreeMap<String, Since>,
}

/// What pushing one sample produced.
#[derive(Default)]
pub struct Pushed {
    /// Event lines to publish, in order.
    pub lines: Vec<Vec<u8>>,
    /// True when the set of raised alarms changed.
    pub alarms_changed: bool,
}

/// One channel.
pub struct Channel<R: Real> {
    /// The channel's name.
    pub name: String,
    /// The engine.
    pub engine: Engine<R>,
    /// Time of the last sample processed.
    pub last_t: Option<f64>,
    /// Time of the last check.
    pub last_check_t: Option<f64>,
    /// Malformed payloads counted.
    pub malformed: u64,
    /// Redelivered samples recognised and left out.
    pub redelivered: u64,
    since: [Option<Since>; AlarmKind::COUNT],
    /// Checks counted at the last save.
    pub checks_saved: u64,
    /// Checks counted at the last status.
    pub checks_reported: u64,
    /// True when the channel changed since its last save.
    pub dirty: bool,
    /// The record saved with the snapshot on disk.
    pub saved: Option<ChannelRecord>,
    /// `{"channel":NAME,` with NAME escaped ([`ChannelPrefix::event`]).
    prefix: Vec<u8>,
}

impl<R: Real + Display> Channel<R> {
    /// A channel around an engine (fresh, or resumed with its record when the record
    /// belongs to the snapshot).
    pub fn new(name: String, engine: Engine<R>, record: Option<ChannelRecord>) -> Self {
        let checks = engine.monitor.counters().checks;
        let prefix = ChannelPrefix::new(Some(&name)).event;
        let mut channel = Channel {
            prefix,
            name,
            engine,
            last_t: None,
            last_check_t: None,
            malformed: 0,
            redelivered: 0,
            since: [None; AlarmKind::COUNT],
            checks_saved: checks,
            checks_reported: checks,
            dirty: false,
            saved: record.clone(),
        };
        if let Some(record) = record {
            channel.last_t = record.last_t;
            channel.last_check_t = record.last_check_t;
            channel.malformed = record.malformed;
            channel.redelivered = record.redelivered;
            for kind in AlarmKind::ALL {
                channel.since[kind.index()] = record.since.get(kind.name()).copied();
            }
        }
        channel
    }

    /// The `seq` of the next sample.
    pub fn next_seq(&self) -> u64 {
        self.engine.monitor.counters().samples
    }

    /// True when a sample at time `t` was already processed: it is not after the last
    /// sample's time (time increases within a channel; a broker's DUP flag is no guide).
    pub fn already_seen(&self, t: f64) -> bool {
        self.last_t.is_some_and(|last| t <= last)
    }

    /// Pushes a sample (numbered here) and returns the event lines it raised.
    pub fn push(&mut self, mut sample: Sample<R>, timed: bool) -> std::io::Result<Pushed> {
        sample.seq = self.next_seq();
        if !timed {
            sample.t = sample.seq as f64;
        }
        let before = self.engine.monitor.raised_alarms();
        let mut pushed = Pushed::default();
        let t = sample.t;
        let prefix = &self.prefix;
        self.engine.push(&sample, |event| {
            let mut line = Vec::with_capacity(160);
            write_channel_event(&mut line, prefix, event, t)?;
            pushed.lines.push(line);
            Ok(())
        })?;
        self.last_t = Some(t);
        if sample.reference.is_some() {
            self.last_check_t = Some(t);
        }
        let after = self.engine.monitor.raised_alarms();
        for kind in AlarmKind::ALL {
            let i = kind.index();
            match (before[i], after[i]) {
                (None, Some(_)) => {
                    self.since[i] = Some(Since { t, seq: sample.seq });
                    pushed.alarms_changed = true;
                }
                (Some(_), None) => {
                    self.since[i] = None;
                    pushed.alarms_changed = true;
                }
                (Some(a), Some(b)) if a != b => pushed.alarms_changed = true,
                _ => {}
            }
        }
        self.dirty = true;
        Ok(pushed)
    }

    /// The retained alarm state: `channel`, `alarms` (kind, severity, `since_t` and
    /// `since_seq`, null when raised before a resume that kept no record), empty when
    /// clear.
    pub fn alarms_json(&self) -> Value {
        let monitor: &Monitor<R> = &self.engine.monitor;
        let list: Vec<Value> = alarms(monitor)
            .into_iter()
            .map(|alarm| {
                let since = AlarmKind::ALL
                    .iter()
                    .find(|k| k.name() == alarm.kind)
                    .and_then(|k| self.since[k.index()]);
                json!({
                    "kind": alarm.kind,
                    "severity": alarm.severity,
                    "since_t": since.map(|s| s.t),
                    "since_seq": since.map(|s| s.seq),
                })
            })
            .collect();
        json!({"channel": self.name, "alarms": list})
    }

    /// The retained status: counts, rung, spread exponent, gain and offset, the last
    /// check's time, and the connection's state (`connection`).
    pub fn status_json(&self, connection: &Value) -> Value {
        let monitor = &self.engine.monitor;
        let counters = monitor.counters();
        let params = monitor.parameters();
        json!({
            "channel": self.name,
            "samples": counters.samples,
            "checks": counters.checks,
            "rejected": counters.rejected,
            "malformed": self.malformed,
            "redelivered": self.redelivered,
            "rung": monitor.rung().name(),
            "k": monitor.spread_exponent().map(|e| number(e.k)).unwrap_or(Value::Null),
            "gain": number(params[1]),
            "offset": number(params[0]),
            "last_check_t": self.last_check_t,
            "last_t": self.last_t,
            "alarms": alarms(monitor).len(),
            "connection": connection,
        })
    }

    /// What is saved beside the snapshot.
    pub fn record(&self) -> ChannelRecord {
        ChannelRecord {
            samples: self.next_seq(),
            last_t: self.last_t,
            last_check_t: self.last_check_t,
            malformed: self.malformed,
            redelivered: self.redelivered,
            since: AlarmKind::ALL
                .iter()
                .filter_map(|k| self.since[k.index()].map(|s| (k.name().to_string(), s)))
                .collect(),
        }
    }

    /// Checks counted so far.
    pub fn checks(&self) -> u64 {
        self.engine.monitor.counters().checks
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use steadycal_core::monitor::MonitorConfig;

    #[test]
    fn event_lines_are_replay_lines_with_the_channel() {
        let config = MonitorConfig::<f64>::default_for_range(1.0, 1000.0);
        let engine = Engine::<f32>::new(&config, None).unwrap();
        let mut channel = Channel::new("cell-7".into(), engine, None);
        let mut lines = Vec::new();
        for i in 0..20u32 {
            let raw = if i == 3 { f32::NAN } else { 10.0 + i as f32 };
            let sample = Sample {
                seq: 0,
                t: 100.0 + f64::from(i),
                raw,
                reference: Some(raw),
                temperature: None,
                averaged: 1,
            };
            lines.extend(channel.push(sample, true).unwrap().lines);
        }
        // The rejected sample's run ends at the next good one (see `replay`'s README).
        let first = String::from_utf8(lines[0].clone()).unwrap();
        assert!(
            first.starts_with(r#"{"channel":"cell-7","seq":3,"t":"#),
            "{first}"
        );
        assert!(first.contains(r#""kind":"sample_rejected""#), "{first}");
        assert_eq!(channel.next_seq(), 20);
        assert!(channel.already_seen(119.0));
        assert!(!channel.already_seen(119.5));
        assert_eq!(channel.record().samples, 20);
    }

    #[test]
    fn a_name_with_quotes_backslashes_and_control_characters_is_escaped() {
        // The service admits only `[A-Za-z0-9._-]` names (`topics::valid_channel`); the
        // line is still written escaped whatever the name.
        let name = "cell \"7\"\\b\u{1}\n";
        let config = MonitorConfig::<f64>::default_for_range(1.0, 1000.0);
        let engine = Engine::<f64>::new(&config, None).unwrap();
        let mut channel = Channel::new(name.into(), engine, None);
        let sample = Sample {
            seq: 0,
            t: 5.0,
            raw: f64::NAN,
            reference: None,
            temperature: None,
            averaged: 1,
        };
        let mut lines = channel.push(sample, true).unwrap().lines;
        let sample = Sample {
            raw: 10.0,
            t: 6.0,
            ..sample
        };
        lines.extend(channel.push(sample, true).unwrap().lines);
        assert_eq!(lines.len(), 1, "one sample_rejected event");
        let text = String::from_utf8(lines[0].clone()).unwrap();
        assert!(!text.contains('\n') && !text.contains('\u{1}'), "{text}");
        let event: Value = serde_json::from_str(&text).unwrap();
        assert_eq!(event["channel"], name, "{text}");
        assert_eq!(event["seq"], 0);
        assert_eq!(event["kind"], "sample_rejected");
        // Escapes of RFC 8259, section 7: `\"`, `\\`, `\u0001`, `\n`.
        assert!(
            text.starts_with(r#"{"channel":"cell \"7\"\\b\u0001\n","seq":0,"#),
            "{text}"
        );
    }
}
