//! What a report is drawn from: a replay run (summary, events, per-check table, the
//! configuration) or a lab assessment, read from files or handed over in memory.
//!
//! A run directory holds `summary.json`, `events.jsonl`, `checks.csv` and optionally
//! `monitor.toml`; a summary path `NAME.summary.json` finds `NAME.events.jsonl`,
//! `NAME.checks.csv` and `NAME.monitor.toml` beside it (each can be named explicitly).
//!
//! # Contract
//! - Malformed input is an error naming the file and line; nothing here panics on any bytes.
//! - Alarm intervals are derived from the events alone: a raise opens an interval, the
//!   `cleared` event naming that alarm closes it; one still open at the end runs to the last
//!   sample's time.

use std::io::BufRead;
use std::path::{Path, PathBuf};

use anyhow::{bail, Context, Result};
use serde_json::Value;
use steadycal_core::event::{AlarmKind, KindId};
use steadycal_core::monitor::MonitorConfig;

use super::checks::{self, CheckRow};

/// One event, as read from the events file.
#[derive(Clone, Debug, PartialEq)]
pub struct EventRow {
    /// Data-row index.
    pub seq: u64,
    /// Time, seconds (NaN when the event had none).
    pub t: f64,
    /// Event kind name.
    pub kind: String,
    /// Severity name (`info`, `warn`, `alarm`), none for `cleared`.
    pub severity: Option<String>,
    /// For `cleared`: the alarm it clears.
    pub alarm: Option<String>,
    /// The other fields, `key=value` joined by spaces.
    pub detail: String,
}

/// Event kinds that raise an alarm which a `cleared` event ends: every alarm kind of the
/// core except `mean_misfit`, which is reported and never cleared.
pub fn alarm_kinds() -> impl Iterator<Item = &'static str> {
    AlarmKind::ALL
        .into_iter()
        .filter(|kind| *kind != AlarmKind::MeanMisfit)
        .map(AlarmKind::name)
}

impl EventRow {
    /// Reads one JSON event object.
    pub fn from_json(value: &Value) -> Option<EventRow> {
        let object = value.as_object()?;
        let kind = object.get("kind")?.as_str()?.to_string();
        let seq = object.get("seq")?.as_u64()?;
        let t = object.get("t").and_then(Value::as_f64).unwrap_or(f64::NAN);
        let severity = match object.get("severity").and_then(Value::as_str) {
            Some(s) => Some(s.to_string()),
            None => match KindId::from_name(&kind) {
                Some(KindId::Cleared) => None,
                Some(KindId::MeanMisfit) => Some("warn".into()),
                _ => Some("info".into()),
            },
        };
        let alarm = object
            .get("alarm")
            .and_then(Value::as_str)
            .map(str::to_string);
        let detail = object
            .iter()
            .filter(|(key, _)| !matches!(key.as_str(), "seq" | "t" | "kind" | "severity"))
            .map(|(key, value)| match value {
                Value::String(s) => format!("{key}={s}"),
                other => format!("{key}={other}"),
            })
            .collect::<Vec<_>>()
            .join(" ");
        Some(EventRow {
            seq,
            t,
            kind,
            severity,
            alarm,
            detail,
        })
    }

    /// True for a raise of an alarm that a `cleared` event ends.
    pub fn raises_alarm(&self) -> bool {
        alarm_kinds().any(|kind| kind == self.kind)
    }
}

/// An interval during which an alarm was raised.
#[derive(Clone, Debug, PartialEq)]
pub struct AlarmInterval {
    /// Alarm kind.
    pub kind: String,
    /// Severity at the raise.
    pub severity: String,
    /// Data-row index and time of the raise.
    pub start_seq: u64,
    /// Time of the raise.
    pub start_t: f64,
    /// Time of the clear, or of the last sample when still raised at the end.
    pub end_t: f64,
    /// Data-row index of the clear (None: still raised at the end).
    pub end_seq: Option<u64>,
}

/// Alarm intervals from events in order.
pub fn alarm_intervals(events: &[EventRow], last_t: f64) -> Vec<AlarmInterval> {
    let mut open: Vec<AlarmInterval> = Vec::new();
    let mut done = Vec::new();
    for event in events {
        if event.raises_alarm() {
            if !open.iter().any(|a| a.kind == event.kind) {
                open.push(AlarmInterval {
                    kind: event.kind.clone(),
                    severity: event.severity.clone().unwrap_or_else(|| "info".into()),
                    start_seq: event.seq,
                    start_t: event.t,
                    end_t: f64::NAN,
                    end_seq: None,
                });
            }
        } else if event.kind == KindId::Cleared.name() {
            if let Some(alarm) = &event.alarm {
                if let Some(position) = open.iter().position(|a| &a.kind == alarm) {
                    let mut interval = open.remove(position);
                    interval.end_t = event.t;
                    interval.end_seq = Some(event.seq);
                    done.push(interval);
                }
            }
        }
    }
    for mut interval in open {
        interval.end_t = last_t.max(interval.start_t);
        done.push(interval);
    }
    done.sort_by(|a, b| a.start_seq.cmp(&b.start_seq).then(a.kind.cmp(&b.kind)));
    done
}

/// The configuration a run used, as the report shows it.
#[derive(Clone, Debug)]
pub struct RunConfig {
    /// Where it came from (a file name, or `(defaults)`).
    pub source: String,
    /// The file's text, when there was one.
    pub text: Option<String>,
    /// The resolved monitor configuration.
    pub config: MonitorConfig<f64>,
}

/// Everything a replay report is drawn from.
#[derive(Clone, Debug)]
pub struct RunData {
    /// Title (the feed's name).
    pub title: String,
    /// The summary document.
    pub summary: Value,
    /// Events in order.
    pub events: Vec<EventRow>,
    /// Fitted checks in order.
    pub checks: Vec<CheckRow>,
    /// The configuration.
    pub config: RunConfig,
    /// Where each input came from (for the report's provenance table).
    pub inputs: Vec<(String, String)>,
}

impl RunData {
    /// Time of the last sample (from the summary, else the last check).
    pub fn last_t(&self) -> f64 {
        self.summary
            .get("last_t")
            .and_then(Value::as_f64)
            .or_else(|| self.checks.last().map(|c| c.t))
            .unwrap_or(f64::NAN)
    }
    /// Time of the first check or event.
    pub fn first_t(&self) -> f64 {
        let check = self.checks.first().map_or(f64::NAN, |c| c.t);
        let event = self.events.first().map_or(f64::NAN, |e| e.t);
        check.min(event)
    }
    /// Alarm intervals of the run.
    pub fn alarms(&self) -> Vec<AlarmInterval> {
        alarm_intervals(&self.events, self.last_t())
    }
}

/// Reads an events file (JSON lines).
pub fn read_events(path: &Path) -> Result<Vec<EventRow>> {
    let file = path.display().to_string();
    let reader = std::io::BufReader::new(
        std::fs::File::open(path).with_context(|| format!("{file}: cannot open"))?,
    );
    let mut events = Vec::new();
    for (index, line) in reader.lines().enumerate() {
        let line = line.with_context(|| format!("{file}:{}: cannot read", index + 1))?;
        if line.trim().is_empty() {
            continue;
        }
        let value: Value = serde_json::from_str(&line)
            .map_err(|e| anyhow::anyhow!("{file}:{}:{}: {e}", index + 1, e.column()))?;
        match EventRow::from_json(&value) {
            Some(event) => events.push(event),
            None => bail!(
                "{file}:{}:1: expected an event object with `seq`, `t` and `kind`",
                index + 1
            ),
        }
    }
    Ok(events)
}

/// Reads a summary document.
pub fn read_summary(path: &Path) -> Result<Value> {
    let file = path.display().to_string();
    let text = std::fs::read_to_string(path).with_context(|| format!("{file}: cannot read"))?;
    let value: Value = serde_json::from_str(&text)
        .map_err(|e| anyhow::anyhow!("{file}:{}:{}: {e}", e.line(), e.column()))?;
    if !value.is_object() || value.get("samples").is_none() {
        bail!("{file}:1:1: expected a replay summary (an object with `samples`)");
    }
    Ok(value)
}

/// The input files of a run.
#[derive(Clone, Debug)]
pub struct RunFiles {
    /// Summary.
    pub summary: PathBuf,
    /// Events.
    pub events: PathBuf,
    /// Per-check table.
    pub checks: PathBuf,
    /// Configuration file (optional: used when it exists).
    pub config: Option<PathBuf>,
}

impl RunFiles {
    /// The files of a run directory or beside a summary path.
    pub fn locate(path: &Path) -> RunFiles {
        if path.is_dir() {
            let config = path.join("monitor.toml");
            return RunFiles {
                summary: path.join("summary.json"),
                events: path.join("events.jsonl"),
                checks: path.join("checks.csv"),
                config: config.exists().then_some(config),
            };
        }
        let name = path
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_default();
        let dir = path.parent().unwrap_or(Path::new(""));
        let sibling = |suffix: &str| -> PathBuf {
            match name.strip_suffix("summary.json") {
                Some(stem) => dir.join(format!("{stem}{suffix}")),
                None => dir.join(suffix),
            }
        };
        let config = sibling("monitor.toml");
        RunFiles {
            summary: path.to_path_buf(),
            events: sibling("events.jsonl"),
            checks: sibling("checks.csv"),
            config: config.exists().then_some(config),
        }
    }
}

/// Reads a run's files; `config` is the resolved configuration the run used.
pub fn read_run(files: &RunFiles, config: RunConfig) -> Result<RunData> {
    let summary = read_summary(&files.summary)?;
    let events = read_events(&files.events)?;
    let checks = checks::read(&files.checks)?;
    let title = summary
        .get("feed")
        .and_then(Value::as_str)
        .unwrap_or("(unnamed feed)")
        .to_string();
    let inputs = vec![
        ("summary".into(), files.summary.display().to_string()),
        ("events".into(), files.events.display().to_string()),
        ("checks".into(), files.checks.display().to_string()),
        ("config".into(), config.source.clone()),
    ];
    Ok(RunData {
        title,
        summary,
        events,
        checks,
        config,
        inputs,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn event(seq: u64, kind: &str, alarm: Option<&str>) -> EventRow {
        EventRow {
            seq,
            t: seq as f64,
            kind: kind.into(),
            severity: Some("alarm".into()),
            alarm: alarm.map(str::to_string),
            detail: String::new(),
        }
    }

    #[test]
    fn intervals_open_on_raise_and_close_on_clear() {
        let events = vec![
            event(10, "gain_drift", None),
            event(12, "transform_changed", None),
            event(20, "cleared", Some("gain_drift")),
            event(30, "bias_shift", None),
        ];
        let intervals = alarm_intervals(&events, 99.0);
        assert_eq!(intervals.len(), 2);
        assert_eq!((intervals[0].start_t, intervals[0].end_t), (10.0, 20.0));
        assert_eq!(intervals[1].kind, "bias_shift");
        assert_eq!((intervals[1].end_t, intervals[1].end_seq), (99.0, None));
    }

    #[test]
    fn sibling_files_of_a_summary() {
        let files = RunFiles::locate(Path::new("runs/gas.summary.json"));
        assert_eq!(files.events, Path::new("runs/gas.events.jsonl"));
        assert_eq!(files.checks, Path::new("runs/gas.checks.csv"));
    }
}
