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
use steadycal_core::event::{Event, EventKind};
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::real::Real;
use steadycal_core::sample::{Outcome, Sample};
use steadycal_core::transform::Rung;

use crate::feed::{ColumnNames, CsvFeed, FeedError};

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
    /// Float type.
    pub precision: Precision,
    /// Column names.
    pub columns: ColumnNames,
    /// Monitor configuration (f64 values; rounded for f32 runs).
    pub config: MonitorConfig<f64>,
}

/// A JSON number that prints the shortest decimal that round-trips in the float type used
/// (so an f32 value prints as `0.1`, not `0.10000000149011612`).
pub fn number<R: Real + Display>(value: R) -> Value {
    if !value.is_finite() {
        return Value::Null;
    }
    let shortest = value.to_string();
    f64::from_str(&shortest)
        .ok()
        .and_then(serde_json::Number::from_f64)
        .map(Value::Number)
        .unwrap_or(Value::Null)
}

/// One event as a JSON object: `seq`, `t`, `kind` and the event's fields.
pub fn event_json<R: Real + Display>(event: &Event<R>, t: f64) -> Value {
    let mut object = Map::new();
    object.insert("seq".into(), json!(event.seq));
    object.insert("t".into(), number(t));
    object.insert("kind".into(), json!(event.kind.name()));
    let mut put = |key: &str, value: Value| {
        object.insert(key.into(), value);
    };
    match event.kind {
        EventKind::SpreadTracksLevel { k, k_low, k_high } => {
            put("k", number(k));
            put("k_low", number(k_low));
            put("k_high", number(k_high));
        }
        EventKind::TransformChanged { from, to, gain } => {
            put("from", json!(from.name()));
            put("to", json!(to.name()));
            put("gain", number(gain));
        }
        EventKind::MeanMisfit {
            rung,
            statistic,
            dof,
            suggest_quadratic,
            suggest_temperature,
        } => {
            put("rung", json!(rung.name()));
            put("statistic", number(statistic));
            put("dof", json!(dof));
            put("suggest_quadratic", json!(suggest_quadratic));
            put("suggest_temperature", json!(suggest_temperature));
        }
        EventKind::SampleRejected { reason } => put("reason", json!(reason.name())),
        EventKind::BiasShift {
            direction,
            size,
            severity,
        } => {
            put("direction", json!(direction.name()));
            put("size", number(size));
            put("severity", json!(severity.name()));
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
            put("uncertainty", number(uncertainty));
            put("severity", json!(severity.name()));
        }
        EventKind::SpreadJump { ratio, severity } => {
            put("ratio", number(ratio));
            put("severity", json!(severity.name()));
        }
        EventKind::SignalStuck { run, severity } => {
            put("run", json!(run));
            put("severity", json!(severity.name()));
        }
        EventKind::SignalOutOfRange { raw, severity } => {
            put("raw", number(raw));
            put("severity", json!(severity.name()));
        }
        EventKind::ReferenceGap { seconds, severity } => {
            put("seconds", number(seconds));
            put("severity", json!(severity.name()));
        }
        EventKind::Cleared { alarm } => put("alarm", json!(alarm.name())),
    }
    Value::Object(object)
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
}

/// Runs a replay with the options' float type.
pub fn replay(options: &ReplayOptions) -> Result<ReplayResult> {
    let feed = CsvFeed::open(&options.feed, &options.columns)?;
    match options.precision {
        Precision::F32 => replay_with::<f32, _>(feed, options),
        Precision::F64 => replay_with::<f64, _>(feed, options),
    }
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

fn replay_with<R, I>(mut feed: CsvFeed<I>, options: &ReplayOptions) -> Result<ReplayResult>
where
    R: Real + FromStr + Display,
    I: Read,
{
    let config: MonitorConfig<R> = options.config.convert();
    let mut monitor: Monitor<R> = Monitor::new(config).map_err(|error| {
        anyhow::anyhow!("configuration: `{}` is out of range", error.parameter())
    })?;
    let mut events_out = options.events.as_deref().map(create_output).transpose()?;
    let mut readings_out = options.readings.as_deref().map(create_output).transpose()?;
    if let Some(out) = readings_out.as_mut() {
        writeln!(
            out,
            "seq,t,raw,value,standard_uncertainty,expanded_uncertainty,rung,flags"
        )?;
    }
    let mut counts: BTreeMap<&'static str, u64> = EventKind::<R>::NAMES
        .iter()
        .map(|name| (*name, 0))
        .collect();
    let mut error = None;
    let mut last_t = f64::NAN;
    while let Some(next) = feed.next_sample::<R>() {
        let sample = match next {
            Ok(sample) => sample,
            Err(feed_error) => {
                error = Some(feed_error);
                break;
            }
        };
        last_t = sample.t;
        let outcome = monitor.push(&sample);
        if let Some(out) = readings_out.as_mut() {
            if sample.reference.is_none() {
                write_reading(out.as_mut(), &sample, &outcome, monitor.rung())?;
            }
        }
        while let Some(event) = monitor.pop_event() {
            *counts.entry(event.kind.name()).or_insert(0) += 1;
            if let Some(out) = events_out.as_mut() {
                serde_json::to_writer(&mut *out, &event_json(&event, sample.t))?;
                out.write_all(b"\n")?;
            }
        }
    }
    if let Some(mut out) = events_out {
        out.flush()?;
    }
    if let Some(mut out) = readings_out {
        out.flush()?;
    }
    let summary = summary_json(
        &monitor,
        feed.file(),
        options.precision,
        &counts,
        last_t,
        error.as_ref(),
    );
    if let Some(path) = &options.summary {
        let mut out = create_output(path)?;
        serde_json::to_writer_pretty(&mut out, &summary)?;
        out.write_all(b"\n")?;
        out.flush()?;
    }
    Ok(ReplayResult { summary, error })
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
        "stopped_at": error.map(|e| Value::String(e.to_string())).unwrap_or(Value::Null),
        "caution": CAUTION,
    })
}
