//! The summary document of a run: what the monitor ended with (counters, calibration, spread,
//! drift, alarms, detector counts) and the run's own bookkeeping, written as pretty JSON
//! with its keys in alphabetical order.

use std::collections::BTreeMap;
use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use serde_json::{json, Map, Value};
use steadycal_core::event::AlarmKind;
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;
use steadycal_core::transform::Rung;

use crate::baseline::cusum_json;
use crate::feed::FeedError;
use crate::io::create_output;
use crate::number::number;
use crate::precision::Precision;
use crate::replay::engine::Engine;

/// The caution every report and summary carries.
pub const CAUTION: &str = "steadycal supports, and does not replace, calibration under the applicable standards, local codes and licensed practice; an alarm cleared by the tool is not a certified calibration.";

impl<R: Real + Display> Engine<R> {
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

/// Writes a summary document to `path` (`-` is standard output) as pretty JSON and a
/// newline.
pub fn write_summary(path: &Path, summary: &Value) -> Result<()> {
    let mut out = create_output(path)?;
    serde_json::to_writer_pretty(&mut out, summary)?;
    out.write_all(b"\n")?;
    out.flush()?;
    Ok(())
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
        "provisional_readings": counters.provisional_readings,
        "level_origin": number(monitor.level_origin().value()),
        "level_origin_source": level_origin_source(monitor),
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

/// Where the monitor measures levels from: `configured` (`range.origin` given), `pending`
/// (the sensor's baseline is found by the end of the warm-up), `baseline` (the found
/// baseline is in use) or `kept` (the baseline could not be told from the configured
/// origin, which is kept).
pub fn level_origin_source<R: Real>(monitor: &Monitor<R>) -> &'static str {
    let config = monitor.config();
    let origin = monitor.level_origin();
    if !config.find_baseline {
        "configured"
    } else if !origin.settled() {
        "pending"
    } else if origin.value() == config.level_origin {
        "kept"
    } else {
        "baseline"
    }
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
