//! `steadycal replay`: run a recorded feed through the core exactly as a board would.
//!
//! Events are written as JSON lines while the feed runs (so nothing already written is
//! lost when a later row is bad), readings as CSV, and a summary as JSON at the end. The
//! same input gives byte-identical outputs on every run.

use std::collections::BTreeMap;
use std::fmt::Display;
use std::fs::File;
use std::io::{BufWriter, Read, Write};
use std::path::{Path, PathBuf};
use std::str::FromStr;

use anyhow::{Context, Result};
use serde::Serialize;
use serde_json::{json, Map, Value};
use steadycal_config::Commissioned;
use steadycal_core::event::{AlarmKind, Event, EventKind, Severity};
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::real::Real;
use steadycal_core::record::Record;
use steadycal_core::sample::{Flags, Outcome, Sample};
use steadycal_core::transform::Rung;

use crate::baseline::{cusum_json, BaselineOrigin};
use crate::feed::{Batch, ColumnNames, CsvFeed, FeedError, FeedFloat};

/// The caution every report and summary carries.
pub const CAUTION: &str = "steadycal supports, and does not replace, calibration under the applicable standards, local codes and licensed practice; an alarm cleared by the tool is not a certified calibration.";

/// Float type the core runs in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Precision {
    /// Single precision, as on a Cortex-M4F board.
    F32,
    /// Double precision.
    F64,
}

/// What to replay and where to write.
#[derive(Clone, Debug)]
pub struct ReplayOptions {
    /// The feed (`-` for standard input).
    pub feed: PathBuf,
    /// Events as JSON lines (`-` for standard output).
    pub events: Option<PathBuf>,
    /// Summary as JSON (`-` for standard output).
    pub summary: Option<PathBuf>,
    /// Calibrated readings as CSV (`-` for standard output).
    pub readings: Option<PathBuf>,
    /// One row per fitted check as CSV, for `report` (`-` for standard output); see
    /// [`crate::report::checks`].
    pub checks: Option<PathBuf>,
    /// Float type.
    pub precision: Precision,
    /// Column names.
    pub columns: ColumnNames,
    /// Monitor configuration (f64 values; rounded for f32 runs).
    pub config: MonitorConfig<f64>,
    /// The commissioned baseline of the drift test (the configuration's `[baseline]`);
    /// `None`: the monitor freezes its own.
    pub baseline: Option<Commissioned>,
    /// Skip malformed rows (listing each in the summary) instead of stopping.
    pub skip_bad_rows: bool,
    /// Show a progress bar on standard error for long feed files.
    pub progress: bool,
    /// Print warnings (time order, skipped rows) on standard error.
    pub warnings: bool,
    /// Snapshots and device logs: resume, save, input format, log output.
    pub persist: PersistOptions,
    /// Parse the CSV on a second thread (default). `fleet` turns it off: there the
    /// channels run in parallel, one thread each. The results are the same either way.
    pub pipelined: bool,
}

/// What kind of input a feed is.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, clap::ValueEnum, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum InputFormat {
    /// Decide by content: a device log starts with a 0x00 byte, a CSV feed never does.
    #[default]
    Auto,
    /// CSV with a header.
    Csv,
    /// A device log (COBS-framed postcard records, see `steadycal_core::record`).
    DeviceLog,
}

/// Snapshot and device-log options of a replay.
#[derive(Clone, Debug, Default)]
pub struct PersistOptions {
    /// Start from this snapshot instead of a fresh monitor.
    pub resume: Option<PathBuf>,
    /// Write the final state as a snapshot here.
    pub save_snapshot: Option<PathBuf>,
    /// Input format (default: by content).
    pub input_format: InputFormat,
    /// Write the samples and events of the run as a device log here.
    pub device_log_out: Option<PathBuf>,
    /// The configuration was given explicitly (a config file or range options): a resumed
    /// snapshot must carry the same one.
    pub config_explicit: bool,
}

impl ReplayOptions {
    /// Options with the defaults: no outputs, f32, default columns, stop at bad rows, no
    /// progress bar, warnings on.
    pub fn new(feed: PathBuf, config: MonitorConfig<f64>) -> Self {
        ReplayOptions {
            feed,
            events: None,
            summary: None,
            readings: None,
            checks: None,
            precision: Precision::F32,
            columns: ColumnNames::default(),
            config,
            baseline: None,
            skip_bad_rows: false,
            progress: false,
            warnings: true,
            persist: PersistOptions::default(),
            pipelined: true,
        }
    }
}

/// A JSON number that prints the shortest decimal that round-trips in the float type used
/// (so an f32 value prints as `0.1`, not `0.10000000149011612`).
pub fn number<R: Real + Display>(value: R) -> Value {
    shortest_f64(value)
        .and_then(serde_json::Number::from_f64)
        .map(Value::Number)
        .unwrap_or(Value::Null)
}

/// The `f64` that the shortest decimal of `value` in its own type reads as (`None` for
/// nan and infinities): what [`number`] writes.
fn shortest_f64<R: Real + Display>(value: R) -> Option<f64> {
    if !value.is_finite() {
        return None;
    }
    // In f64 the shortest decimal reads back as the value itself (`Display` round-trips).
    let probe = 1.0 + f64::EPSILON;
    if std::mem::size_of::<R>() == 8 && R::from_f64(probe).to_f64() == probe {
        return Some(value.to_f64());
    }
    // Otherwise format it, on the stack when it fits.
    let mut text = StackText::default();
    if std::fmt::Write::write_fmt(&mut text, format_args!("{value}")).is_ok() {
        return std::str::from_utf8(text.as_bytes()).ok()?.parse().ok();
    }
    f64::from_str(&value.to_string()).ok()
}

/// A short text formatted without allocating (`Err` when it does not fit).
struct StackText {
    bytes: [u8; 64],
    len: usize,
}

impl Default for StackText {
    fn default() -> Self {
        StackText {
            bytes: [0; 64],
            len: 0,
        }
    }
}

impl StackText {
    fn as_bytes(&self) -> &[u8] {
        &self.bytes[..self.len]
    }
}

impl std::fmt::Write for StackText {
    fn write_str(&mut self, text: &str) -> std::fmt::Result {
        let end = self.len + text.len();
        if end > self.bytes.len() {
            return Err(std::fmt::Error);
        }
        self.bytes[self.len..end].copy_from_slice(text.as_bytes());
        self.len = end;
        Ok(())
    }
}

/// A value in an event's JSON object.
#[derive(Clone, Copy, Debug)]
enum Field {
    /// A float as [`number`] writes it (`None` is null).
    Number(Option<f64>),
    /// An integer.
    Integer(u64),
    /// A name.
    Text(&'static str),
    /// A flag.
    Flag(bool),
}

impl Field {
    fn value(self) -> Value {
        match self {
            Field::Number(number) => number
                .and_then(serde_json::Number::from_f64)
                .map(Value::Number)
                .unwrap_or(Value::Null),
            Field::Integer(n) => json!(n),
            Field::Text(text) => json!(text),
            Field::Flag(flag) => json!(flag),
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

/// One event as a JSON object: `seq`, `t`, `kind` and the event's fields.
pub fn event_json<R: Real + Display>(event: &Event<R>, t: f64) -> Value {
    let (fields, count) = event_fields(event, t);
    let object: Map<String, Value> = fields[..count]
        .iter()
        .map(|(key, field)| (key.to_string(), field.value()))
        .collect();
    Value::Object(object)
}

/// Writes [`event_json`]'s object as `serde_json::to_writer` does (keys in order, no
/// spaces), without building it: the events file of a run with many events is written
/// several times faster. Keys and names are plain identifiers, written without escaping
/// (the unit tests compare every kind and name with serde_json's output).
pub fn write_event<R: Real + Display>(
    out: &mut dyn Write,
    event: &Event<R>,
    t: f64,
) -> std::io::Result<()> {
    let (fields, count) = event_fields(event, t);
    let mut line = LineBuffer::default();
    if write_fields(&mut line, &fields[..count]).is_ok() {
        return out.write_all(line.as_bytes());
    }
    // Longer than any event line can be; kept for safety.
    serde_json::to_writer(&mut *out, &event_json(event, t))?;
    Ok(())
}

fn write_fields(line: &mut LineBuffer, fields: &[(&'static str, Field)]) -> std::io::Result<()> {
    line.write_all(b"{")?;
    for (index, (key, field)) in fields.iter().enumerate() {
        if index > 0 {
            line.write_all(b",")?;
        }
        line.write_all(b"\"")?;
        line.write_all(key.as_bytes())?;
        line.write_all(b"\":")?;
        match *field {
            Field::Number(Some(number)) => serde_json::to_writer(&mut *line, &number)?,
            Field::Number(None) => line.write_all(b"null")?,
            Field::Integer(n) => serde_json::to_writer(&mut *line, &n)?,
            Field::Text(text) => {
                line.write_all(b"\"")?;
                line.write_all(text.as_bytes())?;
                line.write_all(b"\"")?;
            }
            Field::Flag(flag) => line.write_all(if flag { b"true" } else { b"false" })?,
        }
    }
    line.write_all(b"}")
}

/// One event's line, gathered on the stack before it goes to the output in one write.
struct LineBuffer {
    bytes: [u8; 512],
    len: usize,
}

impl Default for LineBuffer {
    fn default() -> Self {
        LineBuffer {
            bytes: [0; 512],
            len: 0,
        }
    }
}

impl LineBuffer {
    fn as_bytes(&self) -> &[u8] {
        &self.bytes[..self.len]
    }
}

impl Write for LineBuffer {
    fn write(&mut self, bytes: &[u8]) -> std::io::Result<usize> {
        self.write_all(bytes)?;
        Ok(bytes.len())
    }
    #[inline]
    fn write_all(&mut self, bytes: &[u8]) -> std::io::Result<()> {
        let end = self.len + bytes.len();
        if end > self.bytes.len() {
            return Err(std::io::ErrorKind::WriteZero.into());
        }
        self.bytes[self.len..end].copy_from_slice(bytes);
        self.len = end;
        Ok(())
    }
    fn flush(&mut self) -> std::io::Result<()> {
        Ok(())
    }
}

/// Opens an output (`-` is standard output).
pub fn create_output(path: &Path) -> Result<Box<dyn Write>> {
    if path.as_os_str() == "-" {
        Ok(Box::new(BufWriter::new(std::io::stdout().lock())))
    } else {
        let file =
            File::create(path).with_context(|| format!("{}: cannot create", path.display()))?;
        Ok(Box::new(BufWriter::with_capacity(1 << 16, file)))
    }
}

/// The outcome of a replay.
#[derive(Debug)]
pub struct ReplayResult {
    /// The summary document.
    pub summary: Value,
    /// The feed error that stopped the run, if any (outputs up to it are written).
    pub error: Option<FeedError>,
    /// Events raised, by severity: `[info, warn, alarm]` (see [`event_severity`]).
    pub raised: [u64; 3],
}

impl ReplayResult {
    /// True when at least one event of `level` or above was raised.
    pub fn raised_at_least(&self, level: Severity) -> bool {
        self.raised[level as usize..].iter().any(|&n| n > 0)
    }
}

/// How serious an event is, for `--fail-on`: the severity the detectors attach, and for
/// the calibration events: `transform_changed`, `spread_tracks_level` and
/// `sample_rejected` are `info`, `mean_misfit` is `warn`. `cleared` has none.
pub fn event_severity<R>(kind: &EventKind<R>) -> Option<Severity> {
    match kind {
        EventKind::SpreadTracksLevel { .. }
        | EventKind::TransformChanged { .. }
        | EventKind::SampleRejected { .. } => Some(Severity::Info),
        EventKind::MeanMisfit { .. } => Some(Severity::Warn),
        EventKind::BiasShift { severity, .. }
        | EventKind::GainDrift { severity, .. }
        | EventKind::OffsetDrift { severity, .. }
        | EventKind::SpreadJump { severity, .. }
        | EventKind::SignalStuck { severity, .. }
        | EventKind::SignalOutOfRange { severity, .. }
        | EventKind::ReferenceGap { severity, .. } => Some(*severity),
        EventKind::Cleared { .. } => None,
    }
}

/// Most lines listed per kind of time-order problem and of skipped row (the counts are
/// always complete).
pub const LIST_LIMIT: usize = 10_000;

/// Timestamps that go backwards or repeat.
#[derive(Clone, Debug, Default, Serialize)]
pub struct TimeOrder {
    /// Rows whose time is before the previous row's.
    pub backwards: u64,
    /// Rows whose time equals the previous row's.
    pub repeated: u64,
    /// Lines of the rows going backwards (first [`LIST_LIMIT`]).
    pub backwards_lines: Vec<u64>,
    /// Lines of the repeated rows (first [`LIST_LIMIT`]).
    pub repeated_lines: Vec<u64>,
    #[serde(skip)]
    last: Option<f64>,
}

/// What a time-order check found about one row.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TimeStep {
    /// Later than the previous row (or the first row, or no time).
    Forward,
    /// Equal to the previous row's time.
    Repeated,
    /// Before the previous row's time.
    Backwards,
}

impl TimeOrder {
    /// Checks one row's time against the previous row's.
    pub fn check(&mut self, t: f64, line: u64) -> TimeStep {
        let step = match self.last {
            Some(last) if t == last => {
                self.repeated += 1;
                if self.repeated_lines.len() < LIST_LIMIT {
                    self.repeated_lines.push(line);
                }
                TimeStep::Repeated
            }
            Some(last) if t < last => {
                self.backwards += 1;
                if self.backwards_lines.len() < LIST_LIMIT {
                    self.backwards_lines.push(line);
                }
                TimeStep::Backwards
            }
            _ => TimeStep::Forward,
        };
        if t.is_finite() {
            self.last = Some(t);
        }
        step
    }
}

/// A row skipped by `--skip-bad-rows`.
#[derive(Clone, Debug, Serialize)]
pub struct SkippedRow {
    /// 1-based line.
    pub line: u64,
    /// Why it was skipped.
    pub error: String,
}

/// The monitor with the bookkeeping every command around it needs: event counts by kind
/// and severity, time order, last time. `replay`, `watch` and `fleet` all drive this.
pub struct Engine<R: Real> {
    /// The monitor.
    pub monitor: Monitor<R>,
    /// Events by kind.
    pub counts: BTreeMap<&'static str, u64>,
    /// Events by severity `[info, warn, alarm]`.
    pub raised: [u64; 3],
    /// Time order of the rows.
    pub time_order: TimeOrder,
    /// Time of the last sample.
    pub last_t: f64,
    /// Where the drift test's baseline came from.
    pub baseline: BaselineOrigin,
}

impl<R: Real + Display> Engine<R> {
    /// A fresh engine, starting from the commissioned `baseline` when given; a
    /// configuration the core refuses is an error naming the parameter.
    pub fn new(config: &MonitorConfig<f64>, baseline: Option<&Commissioned>) -> Result<Self> {
        let config: MonitorConfig<R> = config.convert();
        let mut monitor: Monitor<R> = Monitor::new(config).map_err(|error| {
            anyhow::anyhow!("configuration: `{}` is out of range", error.parameter())
        })?;
        let origin = match baseline {
            Some(baseline) => BaselineOrigin::commission(&mut monitor, baseline)?,
            None => BaselineOrigin::Pending,
        };
        let mut engine = Self::with_monitor(monitor);
        engine.baseline = origin;
        Ok(engine)
    }

    /// An engine around an existing monitor (for example one resumed from a snapshot).
    pub fn with_monitor(monitor: Monitor<R>) -> Self {
        Engine {
            counts: EventKind::<R>::NAMES
                .iter()
                .map(|name| (*name, 0))
                .collect(),
            raised: [0; 3],
            time_order: TimeOrder::default(),
            last_t: f64::NAN,
            baseline: BaselineOrigin::resumed(&monitor, None),
            monitor,
        }
    }

    /// Pushes one sample; `on_event` sees every event it raised, in order.
    #[inline]
    pub fn push(
        &mut self,
        sample: &Sample<R>,
        mut on_event: impl FnMut(&Event<R>) -> std::io::Result<()>,
    ) -> std::io::Result<Outcome<R>> {
        self.last_t = sample.t;
        let outcome = self.monitor.push(sample);
        self.baseline.observe(&self.monitor, sample.seq);
        if outcome.new_events > 0 {
            while let Some(event) = self.monitor.pop_event() {
                *self.counts.entry(event.kind.name()).or_insert(0) += 1;
                if let Some(severity) = event_severity(&event.kind) {
                    self.raised[severity as usize] += 1;
                }
                on_event(&event)?;
            }
        }
        Ok(outcome)
    }

    /// The summary document: [`summary_json`] plus `raised` (events by severity) and
    /// `time_order`.
    pub fn summary(&self, file: &str, precision: Precision, error: Option<&FeedError>) -> Value {
        let mut summary = summary_json(
            &self.monitor,
            file,
            precision,
            &self.counts,
            self.last_t,
            error,
        );
        if let Value::Object(map) = &mut summary {
            map.insert(
                "raised".into(),
                json!({"info": self.raised[0], "warn": self.raised[1], "alarm": self.raised[2]}),
            );
            map.insert("time_order".into(), json!(self.time_order));
            if let Some(Value::Object(detectors)) = map.get_mut("detectors") {
                if let Value::Object(cusum) = cusum_json(&self.monitor, number) {
                    detectors.extend(cusum);
                }
            }
            if let Some(Value::Object(baseline)) = map
                .get_mut("drift")
                .and_then(|drift| drift.get_mut("baseline"))
            {
                if let Value::Object(origin) = self.baseline.json() {
                    baseline.extend(origin);
                }
            }
        }
        summary
    }
}

/// Runs a replay with the options' float type.
///
/// The CSV is parsed on a second thread and handed to the engine in batches of
/// [`BATCH_ROWS`] over a bounded channel (at most [`BATCHES_IN_FLIGHT`] waiting), so
/// parsing and the core overlap on two cores while memory stays flat in the feed length.
/// The core still sees the samples one by one, in feed order: results are identical to a
/// single-threaded run.
///
/// A device log (detected by content, or asked for with [`InputFormat::DeviceLog`]) is read
/// whole and replayed record by record; damaged byte spans are skipped and listed in the
/// summary (`damaged_spans`).
pub fn replay(options: &ReplayOptions) -> Result<ReplayResult> {
    use std::io::BufRead;
    let file = options.feed.display().to_string();
    let io_error = |source| FeedError::Io {
        file: file.clone(),
        source,
    };
    let input: Box<dyn Read + Send> = if file == "-" {
        Box::new(std::io::stdin())
    } else {
        Box::new(File::open(&options.feed).map_err(io_error)?)
    };
    let mut reader = std::io::BufReader::with_capacity(1 << 16, input);
    let is_log = match options.persist.input_format {
        InputFormat::Csv => false,
        InputFormat::DeviceLog => true,
        InputFormat::Auto => {
            crate::device_log::looks_like_device_log(reader.fill_buf().map_err(io_error)?)
        }
    };
    if is_log {
        let mut bytes = Vec::new();
        reader.read_to_end(&mut bytes).map_err(io_error)?;
        return match options.precision {
            Precision::F32 => replay_device_log::<f32>(file, bytes, options),
            Precision::F64 => replay_device_log::<f64>(file, bytes, options),
        };
    }
    let input: Box<dyn Read + Send> = Box::new(reader);
    let feed = CsvFeed::new(file, input, &options.columns)?;
    match (options.precision, options.pipelined) {
        (Precision::F32, true) => replay_pipelined::<f32>(feed, options),
        (Precision::F64, true) => replay_pipelined::<f64>(feed, options),
        (Precision::F32, false) => replay_inline::<f32>(feed, options),
        (Precision::F64, false) => replay_inline::<f64>(feed, options),
    }
}

fn replay_device_log<R>(
    file: String,
    bytes: Vec<u8>,
    options: &ReplayOptions,
) -> Result<ReplayResult>
where
    R: Real + FromStr + Display,
{
    let mut rows = crate::device_log::DeviceLogRows::<R>::new(file.clone(), bytes);
    let length = rows.len();
    let result = replay_rows_with(&mut rows, &file, options, true, |rows, map| {
        map.insert("input_format".into(), json!(InputFormat::DeviceLog));
        map.insert("damaged_spans".into(), json!(rows.damaged));
        map.insert("logged_events".into(), json!(rows.logged_events));
        map.insert("sessions".into(), json!(rows.sessions));
        map.insert("records".into(), json!(rows.records));
    })?;
    if !rows.damaged.is_empty() && options.warnings {
        let spans: Vec<String> = rows
            .damaged
            .iter()
            .map(|span| format!("bytes {}..{}", span.start, span.end))
            .collect();
        eprintln!(
            "steadycal: warning: {file}: {} damaged span(s) of {length} bytes skipped ({}); every intact record was replayed (listed in the summary's `damaged_spans`)",
            spans.len(),
            spans.join(", ")
        );
    }
    Ok(result)
}

/// Rows per batch handed from the parsing thread to the engine.
pub const BATCH_ROWS: usize = 4096;
/// Batches waiting at most between the parsing thread and the engine.
pub const BATCHES_IN_FLIGHT: usize = 8;

/// One parsed row: the sample or why it is bad, its line, and the bytes read so far.
pub struct ParsedRow<R> {
    /// The sample, or the error for this row.
    pub next: std::result::Result<Sample<R>, FeedError>,
    /// 1-based line of the row.
    pub line: u64,
    /// Bytes of input read so far.
    pub bytes: u64,
}

fn replay_pipelined<R>(
    mut feed: CsvFeed<Box<dyn Read + Send>>,
    options: &ReplayOptions,
) -> Result<ReplayResult>
where
    R: FeedFloat + Display,
{
    let file = feed.file().to_string();
    let (sender, receiver) = std::sync::mpsc::sync_channel::<Batch<R>>(BATCHES_IN_FLIGHT);
    // Emptied batches go back to the parsing thread, so no batch is allocated after the
    // first few.
    let (recycle, recycled) = std::sync::mpsc::sync_channel::<Batch<R>>(BATCHES_IN_FLIGHT + 2);
    std::thread::scope(|scope| {
        scope.spawn(move || loop {
            let mut batch = recycled
                .try_recv()
                .unwrap_or_else(|_| Batch::with_capacity(BATCH_ROWS));
            batch.clear();
            let more = feed.fill_batch(&mut batch, BATCH_ROWS, options.skip_bad_rows);
            if sender.send(batch).is_err() || !more {
                return;
            }
        });
        let mut run = Run::<R>::start(&file, options, false)?;
        'batches: for mut batch in receiver {
            run.progress(batch.bytes);
            if batch.errors.is_empty() {
                for (sample, &line) in batch.samples.iter().zip(&batch.lines) {
                    run.good(*sample, line)?;
                }
            } else {
                let mut errors = batch.errors.drain(..).peekable();
                for (index, (sample, &line)) in batch.samples.iter().zip(&batch.lines).enumerate() {
                    while let Some((_, error)) = errors.next_if(|(at, _)| *at == index) {
                        if !run.bad(error) {
                            break 'batches;
                        }
                    }
                    run.good(*sample, line)?;
                }
                for (_, error) in errors.by_ref() {
                    if !run.bad(error) {
                        break 'batches;
                    }
                }
            }
            let _ = recycle.try_send(batch);
        }
        run.finish(|map| {
            map.insert("input_format".into(), json!(InputFormat::Csv));
        })
    })
}

/// The same replay with the CSV parsed on the calling thread, row by row.
fn replay_inline<R>(
    mut feed: CsvFeed<Box<dyn Read + Send>>,
    options: &ReplayOptions,
) -> Result<ReplayResult>
where
    R: FeedFloat + Display,
{
    let file = feed.file().to_string();
    replay_rows::<R>(parsed_rows::<R>(&mut feed), &file, options)
}

/// The feed's rows, each with its line and the bytes read so far.
fn parsed_rows<R: FeedFloat>(
    feed: &mut CsvFeed<Box<dyn Read + Send>>,
) -> impl Iterator<Item = ParsedRow<R>> + '_ {
    std::iter::from_fn(move || {
        let next = feed.next_sample::<R>()?;
        Some(ParsedRow {
            next,
            line: feed.line(),
            bytes: feed.bytes_read(),
        })
    })
}

fn write_reading<R: Real + Display>(
    out: &mut dyn Write,
    sample: &Sample<R>,
    outcome: &Outcome<R>,
    rung: Rung,
) -> std::io::Result<()> {
    let flags: Vec<&str> = outcome.flags.names().collect();
    match outcome.reading {
        Some(reading) => writeln!(
            out,
            "{},{},{},{},{},{},{},{}",
            sample.seq,
            sample.t,
            sample.raw,
            reading.value,
            reading.standard_uncertainty,
            reading.expanded_uncertainty,
            reading.rung.name(),
            flags.join("|")
        ),
        None => writeln!(
            out,
            "{},{},{},,,,{},{}",
            sample.seq,
            sample.t,
            sample.raw,
            rung.name(),
            flags.join("|")
        ),
    }
}

fn progress_bar(options: &ReplayOptions) -> Option<indicatif::ProgressBar> {
    if !options.progress || options.feed.as_os_str() == "-" {
        return None;
    }
    let length = std::fs::metadata(&options.feed).ok()?.len();
    if length < PROGRESS_MIN_BYTES {
        return None;
    }
    let bar = indicatif::ProgressBar::with_draw_target(
        Some(length),
        indicatif::ProgressDrawTarget::stderr_with_hz(8),
    );
    let template = if crate::terminal::colour_enabled() {
        "{spinner:.green} {bytes}/{total_bytes} [{bar:40.cyan/blue}] {bytes_per_sec}, {eta} left"
    } else {
        "{spinner} {bytes}/{total_bytes} [{bar:40}] {bytes_per_sec}, {eta} left"
    };
    if let Ok(style) = indicatif::ProgressStyle::with_template(template) {
        bar.set_style(style.progress_chars("=> "));
    }
    Some(bar)
}

/// Feeds smaller than this get no progress bar (they take well under a second).
pub const PROGRESS_MIN_BYTES: u64 = 32 << 20;

/// Runs parsed rows through the engine and writes the outputs (the engine side of
/// [`replay`]).
pub fn replay_rows<R>(
    rows_in: impl Iterator<Item = ParsedRow<R>>,
    file: &str,
    options: &ReplayOptions,
) -> Result<ReplayResult>
where
    R: Real + FromStr + Display,
{
    replay_rows_with(rows_in, file, options, false, |_, map| {
        map.insert("input_format".into(), json!(InputFormat::Csv));
    })
}

/// The engine at the start of a replay: fresh, or resumed from the options' snapshot (whose
/// configuration must match an explicitly given one).
pub fn start_engine<R: Real + Display>(options: &ReplayOptions) -> Result<Engine<R>> {
    let Some(path) = &options.persist.resume else {
        return Engine::<R>::new(&options.config, options.baseline.as_ref());
    };
    let monitor = crate::snapshot_file::restore_as::<R>(path)?;
    let origin = BaselineOrigin::resumed(&monitor, options.baseline.as_ref());
    if options.persist.config_explicit {
        let wanted: MonitorConfig<R> = options.config.convert();
        if wanted != *monitor.config() {
            let keys = crate::snapshot_file::config_differences(&wanted, monitor.config());
            anyhow::bail!(
                "{}: the snapshot's monitor configuration differs from the one given on the command line (--config/--level-low/--level-high) in: {}; leave those options out to resume with the snapshot's own configuration",
                path.display(),
                keys.join(", ")
            );
        }
    }
    let mut engine = Engine::with_monitor(monitor);
    engine.baseline = origin;
    Ok(engine)
}

fn replay_rows_with<R, I>(
    mut rows_in: I,
    file: &str,
    options: &ReplayOptions,
    device_log: bool,
    finish: impl FnOnce(&I, &mut Map<String, Value>),
) -> Result<ReplayResult>
where
    R: Real + FromStr + Display,
    I: Iterator<Item = ParsedRow<R>>,
{
    let mut run = Run::<R>::start(file, options, device_log)?;
    for row in rows_in.by_ref() {
        if !run.row(row)? {
            break;
        }
    }
    run.finish(|map| finish(&rows_in, map))
}

/// A replay under way: the engine, the outputs and the bookkeeping of the rows seen.
struct Run<'a, R: Real> {
    file: &'a str,
    options: &'a ReplayOptions,
    device_log: bool,
    engine: Engine<R>,
    seq_offset: u64,
    log_out: Option<crate::device_log::DeviceLogWriter<R>>,
    events_out: Option<Box<dyn Write>>,
    readings_out: Option<Box<dyn Write>>,
    checks_out: Option<Box<dyn Write>>,
    bar: Option<indicatif::ProgressBar>,
    error: Option<FeedError>,
    skipped: Vec<SkippedRow>,
    skipped_count: u64,
    rows: u64,
}

impl<'a, R: Real + Display> Run<'a, R> {
    fn start(file: &'a str, options: &'a ReplayOptions, device_log: bool) -> Result<Self> {
        let engine = start_engine::<R>(options)?;
        // A resumed CSV replay numbers its rows on from the samples the snapshot counted,
        // so that two halves number their events like one whole run.
        let seq_offset = if !device_log && options.persist.resume.is_some() {
            engine.monitor.counters().samples
        } else {
            0
        };
        let log_out = options
            .persist
            .device_log_out
            .as_deref()
            .map(|path| {
                create_output(path)
                    .and_then(|out| Ok(crate::device_log::DeviceLogWriter::<R>::new(out)?))
            })
            .transpose()?;
        let events_out = options.events.as_deref().map(create_output).transpose()?;
        let mut readings_out = options.readings.as_deref().map(create_output).transpose()?;
        if let Some(out) = readings_out.as_mut() {
            writeln!(
                out,
                "seq,t,raw,value,standard_uncertainty,expanded_uncertainty,rung,flags"
            )?;
        }
        let mut checks_out = options.checks.as_deref().map(create_output).transpose()?;
        if let Some(out) = checks_out.as_mut() {
            writeln!(out, "{}", crate::report::checks::HEADER)?;
        }
        Ok(Run {
            file,
            options,
            device_log,
            engine,
            seq_offset,
            log_out,
            events_out,
            readings_out,
            checks_out,
            bar: progress_bar(options),
            error: None,
            skipped: Vec::new(),
            skipped_count: 0,
            rows: 0,
        })
    }

    /// Moves the progress bar to `bytes` read.
    fn progress(&self, bytes: u64) {
        if let Some(bar) = &self.bar {
            bar.set_position(bytes);
        }
    }

    /// One row, good or bad; false when the run stops here.
    fn row(&mut self, row: ParsedRow<R>) -> Result<bool> {
        if (self.rows + 1).is_multiple_of(65_536) {
            self.progress(row.bytes);
        }
        match row.next {
            Ok(sample) => {
                self.good(sample, row.line)?;
                Ok(true)
            }
            Err(error) => Ok(self.bad(error)),
        }
    }

    /// A bad row: skipped and listed with `--skip-bad-rows` (when it is about one line),
    /// otherwise the error that stops the run. False when the run stops.
    fn bad(&mut self, feed_error: FeedError) -> bool {
        self.rows += 1;
        if self.options.skip_bad_rows && feed_error.line().is_some() {
            if self.options.warnings && self.skipped_count == 0 {
                eprintln!("steadycal: warning: skipping bad row: {feed_error} (every skipped line is listed in the summary)");
            }
            self.skipped_count += 1;
            if self.skipped.len() < LIST_LIMIT {
                self.skipped.push(SkippedRow {
                    line: feed_error.line().unwrap_or(0),
                    error: feed_error.to_string(),
                });
            }
            return true;
        }
        self.error = Some(feed_error);
        false
    }

    /// A good row, on `line`: time order, the core, and every output.
    #[inline]
    fn good(&mut self, mut sample: Sample<R>, line: u64) -> Result<()> {
        self.rows += 1;
        sample.seq += self.seq_offset;
        // `seq` stays the 0-based data-row index, skipped rows included, so an event points
        // at its line (line = seq + 2 for a one-line header).
        let engine = &mut self.engine;
        let step = engine.time_order.check(sample.t, line);
        if step != TimeStep::Forward && self.options.warnings {
            let order = &engine.time_order;
            if (step == TimeStep::Repeated && order.repeated == 1)
                || (step == TimeStep::Backwards && order.backwards == 1)
            {
                let what = if step == TimeStep::Repeated {
                    "repeats the previous row's time"
                } else {
                    "is before the previous row's time"
                };
                eprintln!(
                    "steadycal: warning: {}:{line}: time {} {what}; every such row is counted in the summary (`time_order`)",
                    self.file, sample.t
                );
            }
        }
        let t = sample.t;
        let before = match self.checks_out {
            Some(_) => crate::report::checks::before(&engine.monitor, &sample),
            None => None,
        };
        if let Some(log) = self.log_out.as_mut() {
            log.write(&Record::Sample(sample))?;
        }
        let log_out = &mut self.log_out;
        let events_out = &mut self.events_out;
        let outcome = engine.push(&sample, |event| {
            if let Some(log) = log_out.as_mut() {
                log.write(&Record::Event(*event))?;
            }
            match events_out.as_mut() {
                Some(out) => {
                    write_event(out.as_mut(), event, t)?;
                    out.write_all(b"\n")
                }
                None => Ok(()),
            }
        })?;
        if let Some(out) = self.readings_out.as_mut() {
            if sample.reference.is_none() {
                write_reading(out.as_mut(), &sample, &outcome, engine.monitor.rung())?;
            }
        }
        if let (Some(out), Some(before)) = (self.checks_out.as_mut(), before) {
            if !outcome.flags.contains(Flags::REJECTED) {
                crate::report::checks::write_row(out.as_mut(), &engine.monitor, &sample, &before)?;
            }
        }
        Ok(())
    }

    /// Flushes the outputs, saves the snapshot and writes the summary; `extra` adds the
    /// input's own summary entries.
    fn finish(self, extra: impl FnOnce(&mut Map<String, Value>)) -> Result<ReplayResult> {
        let Run {
            file,
            options,
            device_log,
            mut engine,
            log_out,
            events_out,
            readings_out,
            checks_out,
            bar,
            mut error,
            skipped,
            skipped_count,
            rows,
            ..
        } = self;
        if let Some(bar) = bar {
            bar.finish_and_clear();
        }
        if rows == 0 && error.is_none() {
            error = Some(if device_log {
                FeedError::NoRecords {
                    file: file.to_string(),
                }
            } else {
                FeedError::NoRows {
                    file: file.to_string(),
                }
            });
        }
        if let Some(mut out) = events_out {
            out.flush()?;
        }
        if let Some(mut out) = readings_out {
            out.flush()?;
        }
        if let Some(mut out) = checks_out {
            out.flush()?;
        }
        if let Some(mut log) = log_out {
            log.flush()?;
        }
        // The state after the last good row is saved even when a bad row stopped the run.
        let snapshot_bytes = match &options.persist.save_snapshot {
            Some(path) => Some(crate::snapshot_file::write(path, &mut engine.monitor)?),
            None => None,
        };
        let mut summary = engine.summary(file, options.precision, error.as_ref());
        if let Value::Object(map) = &mut summary {
            map.insert("rows_skipped".into(), json!(skipped_count));
            map.insert("skipped_rows".into(), json!(skipped));
            map.insert(
                "resumed_from".into(),
                json!(options
                    .persist
                    .resume
                    .as_ref()
                    .map(|p| p.display().to_string())),
            );
            map.insert(
                "snapshot".into(),
                match (&options.persist.save_snapshot, snapshot_bytes) {
                    (Some(path), Some(bytes)) => {
                        json!({"file": path.display().to_string(), "bytes": bytes})
                    }
                    _ => Value::Null,
                },
            );
            extra(map);
        }
        if options.warnings {
            let order = &engine.time_order;
            if order.repeated + order.backwards > 0 {
                eprintln!(
                    "steadycal: warning: {file}: {} rows repeat the previous time, {} go backwards",
                    order.repeated, order.backwards
                );
            }
        }
        if let Some(path) = &options.summary {
            let mut out = create_output(path)?;
            serde_json::to_writer_pretty(&mut out, &summary)?;
            out.write_all(b"\n")?;
            out.flush()?;
        }
        Ok(ReplayResult {
            summary,
            error,
            raised: engine.raised,
        })
    }
}

/// The summary document of a monitor after a run.
pub fn summary_json<R: Real + Display>(
    monitor: &Monitor<R>,
    file: &str,
    precision: Precision,
    counts: &BTreeMap<&'static str, u64>,
    last_t: f64,
    error: Option<&FeedError>,
) -> Value {
    let counters = monitor.counters();
    let params = monitor.parameters();
    let exponent = monitor.spread_exponent();
    let koenker = monitor.spread().koenker();
    let fit = monitor.ladder().active_fit();
    let likelihoods = monitor.ladder().log_likelihoods();
    let mut rungs = Map::new();
    if let Some(likelihoods) = likelihoods {
        for rung in Rung::ALL {
            rungs.insert(rung.name().into(), number(likelihoods[rung.index()]));
        }
    }
    json!({
        "feed": file,
        "precision": precision,
        "samples": counters.samples,
        "checks": counters.checks,
        "readings": counters.readings,
        "rejected": counters.rejected,
        "below_origin": counters.below_origin,
        "last_t": number(last_t),
        "rung": monitor.rung().name(),
        "spread_exponent": exponent.map(|e| number(e.k)).unwrap_or(Value::Null),
        "spread_exponent_se": exponent.map(|e| number(e.standard_error)).unwrap_or(Value::Null),
        "koenker_statistic": koenker.map(|k| number(k.statistic)).unwrap_or(Value::Null),
        "params": {
            "offset": number(params[0]),
            "gain": number(params[1]),
            "quadratic": number(params[2]),
            "temperature": number(params[3]),
        },
        "residual_sd": number(fit.residual_variance().sqrt()),
        "log_likelihood": Value::Object(rungs),
        "events": counts,
        "events_dropped": monitor.events_dropped(),
        "alarms": alarms_json(monitor),
        "drift": drift_json(monitor),
        "detectors": detectors_json(monitor),
        "stopped_at": error.map(|e| Value::String(e.to_string())).unwrap_or(Value::Null),
        "caution": CAUTION,
    })
}

/// The alarms raised at the end of a run: `[{kind, severity, raised_count}]`, in kind order.
pub fn alarms_json<R: Real>(monitor: &Monitor<R>) -> Value {
    let raised = monitor.raised_alarms();
    let list: Vec<Value> = AlarmKind::ALL
        .iter()
        .filter_map(|&kind| {
            raised[kind.index()].map(|severity| {
                json!({
                    "kind": kind.name(),
                    "severity": severity.name(),
                    // Only the detector alarms keep a raise count.
                    "times_raised": if kind == AlarmKind::SpreadTracksLevel {
                        Value::Null
                    } else {
                        json!(monitor.alarm_raises(kind))
                    },
                })
            })
        })
        .collect();
    Value::Array(list)
}

/// The baseline and the drift against it (reported whether or not it alarms; `evaluated`
/// false before the first evaluation), or null before a baseline exists.
pub fn drift_json<R: Real + Display>(monitor: &Monitor<R>) -> Value {
    let Some(baseline) = monitor.baseline() else {
        return Value::Null;
    };
    let p = baseline.parameters;
    let baseline = json!({
        "offset": number(p[0]),
        "gain": number(p[1]),
        "quadratic": number(p[2]),
        "temperature": number(p[3]),
    });
    let Some(status) = monitor.drift_status() else {
        return json!({ "baseline": baseline, "evaluated": false });
    };
    let optional = |value: Option<R>| value.map(number).unwrap_or(Value::Null);
    json!({
        "baseline": baseline,
        "evaluated": true,
        "gain_change": optional(status.gain_change),
        "gain_change_uncertainty": optional(status.gain_uncertainty),
        "offset_change": number(status.offset_change),
        "offset_change_uncertainty": number(status.offset_uncertainty),
        "wald": number(status.wald),
        "wald_threshold": number(status.threshold),
        "dof": status.dof,
        "significant": status.significant,
        "gain_beyond_tolerance": status.gain_beyond_tolerance,
        "offset_beyond_tolerance": status.offset_beyond_tolerance,
    })
}

/// Per-detector counts (signals and screened samples, not raised alarms).
pub fn detectors_json<R: Real>(monitor: &Monitor<R>) -> Value {
    let counts = monitor.detector_counts();
    json!({
        "spikes": counts.spikes,
        "out_of_range": counts.out_of_range,
        "stuck_samples": counts.stuck_samples,
        "unresponsive_windows": counts.unresponsive_windows,
        "cusum_checks": counts.cusum_checks,
        "cusum_signals": counts.cusum_signals,
        "spread_jump_signals": counts.spread_jump_signals,
        "drift_evaluations": counts.drift_evaluations,
        "drift_significant": counts.drift_significant,
        "gap_samples": counts.gap_samples,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;
    use steadycal_core::event::{Direction, RejectReason};

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

    #[test]
    fn numbers_print_shortest_in_their_type() {
        assert_eq!(number(0.1f32).to_string(), "0.1");
        assert_eq!(number(0.1f64).to_string(), "0.1");
        assert_eq!(number(-0.0f32).to_string(), "-0.0");
        assert_eq!(number(f32::NAN), Value::Null);
        assert_eq!(number(f64::NEG_INFINITY), Value::Null);
        assert_eq!(number(f32::from_bits(1)).to_string(), "1e-45");
        assert_eq!(number(f32::MAX).to_string(), "3.4028235e+38");
    }
}
