//! The summary document of a run: what the monitor ended with (counters, calibration, spread,
//! drift, alarms, detector counts) and the run's own bookkeeping, written as pretty JSON
//! with its keys in alphabetical order.

use std::collections::BTreeMap;
use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use serde::Serialize;
use serde_json::Value;
use steadycal_core::event::AlarmKind;
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;
use steadycal_core::transform::Rung;

use crate::baseline::{BaselineOrigin, CusumSummary, OriginSummary};
use crate::feed::FeedError;
use crate::io::create_output;
use crate::number::Shortest;
use crate::precision::Precision;
use crate::replay::engine::Engine;
use crate::replay::time_order::TimeOrder;

/// The caution every report and summary carries.
pub const CAUTION: &str = "steadycal supports, and does not replace, calibration under the applicable standards, local codes and licensed practice; an alarm cleared by the tool is not a certified calibration.";

impl<R: Real + Display> Engine<R> {
    /// The summary document of the run so far, as a JSON value (keys sorted) that each
    /// input and command adds its own entries to.
    pub fn summary(&self, file: &str, precision: Precision, error: Option<&FeedError>) -> Value {
        serde_json::to_value(self.typed_summary(file, precision, error)).unwrap_or(Value::Null)
    }

    /// The summary document of the run so far.
    pub fn typed_summary<'a>(
        &'a self,
        file: &'a str,
        precision: Precision,
        error: Option<&FeedError>,
    ) -> Summary<'a> {
        let monitor = &self.monitor;
        let counters = monitor.counters();
        let exponent = monitor.spread_exponent();
        let likelihoods = monitor.ladder().log_likelihoods();
        Summary {
            feed: file,
            precision,
            samples: counters.samples,
            checks: counters.checks,
            readings: counters.readings,
            rejected: counters.rejected,
            below_origin: counters.below_origin,
            provisional_readings: counters.provisional_readings,
            level_origin: Shortest::of(monitor.level_origin().value()),
            level_origin_source: level_origin_source(monitor),
            last_t: Shortest::of(self.last_t),
            rung: monitor.rung().name(),
            spread_exponent: exponent.map(|e| Shortest::of(e.k)),
            spread_exponent_se: exponent.map(|e| Shortest::of(e.standard_error)),
            koenker_statistic: monitor
                .spread()
                .koenker()
                .map(|k| Shortest::of(k.statistic)),
            params: Parameters::of(&monitor.parameters()),
            residual_sd: Shortest::of(monitor.ladder().active_fit().residual_variance().sqrt()),
            log_likelihood: likelihoods
                .map(|l| {
                    Rung::ALL
                        .iter()
                        .map(|rung| (rung.name(), Shortest::of(l[rung.index()])))
                        .collect()
                })
                .unwrap_or_default(),
            events: &self.counts,
            events_dropped: monitor.events_dropped(),
            alarms: alarms(monitor),
            drift: drift(monitor, &self.baseline),
            detectors: Detectors::of(monitor),
            stopped_at: error.map(|e| e.to_string()),
            caution: CAUTION,
            raised: Raised {
                info: self.raised[0],
                warn: self.raised[1],
                alarm: self.raised[2],
            },
            time_order: &self.time_order,
        }
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

/// The summary document of a run (written with its keys in alphabetical order).
#[derive(Debug, Serialize)]
pub struct Summary<'a> {
    /// The feed as given.
    pub feed: &'a str,
    /// Float type of the core.
    pub precision: Precision,
    /// Samples pushed.
    pub samples: u64,
    /// Samples with a reference.
    pub checks: u64,
    /// Readings given.
    pub readings: u64,
    /// Samples rejected.
    pub rejected: u64,
    /// Samples below the level origin.
    pub below_origin: u64,
    /// Readings flagged provisional.
    pub provisional_readings: u64,
    /// The level origin in use.
    pub level_origin: Shortest,
    /// Where the level origin came from ([`level_origin_source`]).
    pub level_origin_source: &'static str,
    /// Time of the last sample.
    pub last_t: Shortest,
    /// The active rung.
    pub rung: &'static str,
    /// Spread exponent k, once evaluated.
    pub spread_exponent: Option<Shortest>,
    /// Its standard error.
    pub spread_exponent_se: Option<Shortest>,
    /// Koenker's statistic, once evaluated.
    pub koenker_statistic: Option<Shortest>,
    /// The calibration parameters.
    pub params: Parameters,
    /// Residual scale of the active fit.
    pub residual_sd: Shortest,
    /// Log-likelihood of each rung (empty before the likelihoods start).
    pub log_likelihood: BTreeMap<&'static str, Shortest>,
    /// Events by kind.
    pub events: &'a BTreeMap<&'static str, u64>,
    /// Events lost to a full queue.
    pub events_dropped: u32,
    /// Alarms raised at the end.
    pub alarms: Vec<AlarmSummary>,
    /// The baseline and the drift against it (null before a baseline exists).
    pub drift: Option<Drift>,
    /// Per-detector counts and the CUSUM in force.
    pub detectors: Detectors,
    /// The error that stopped the run.
    pub stopped_at: Option<String>,
    /// [`CAUTION`].
    pub caution: &'static str,
    /// Events by severity.
    pub raised: Raised,
    /// Time order of the rows.
    pub time_order: &'a TimeOrder,
}

/// Calibration parameters (offset, gain, quadratic and temperature terms).
#[derive(Clone, Copy, Debug, Serialize)]
pub struct Parameters {
    /// Offset.
    pub offset: Shortest,
    /// Gain.
    pub gain: Shortest,
    /// Quadratic term.
    pub quadratic: Shortest,
    /// Temperature term.
    pub temperature: Shortest,
}

impl Parameters {
    /// The first four of `p`.
    pub fn of<R: Real + Display>(p: &[R]) -> Self {
        Parameters {
            offset: Shortest::of(p[0]),
            gain: Shortest::of(p[1]),
            quadratic: Shortest::of(p[2]),
            temperature: Shortest::of(p[3]),
        }
    }
}

/// Events by severity.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct Raised {
    /// Info events.
    pub info: u64,
    /// Warnings.
    pub warn: u64,
    /// Alarms.
    pub alarm: u64,
}

/// One alarm raised at the end of a run.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct AlarmSummary {
    /// Its kind.
    pub kind: &'static str,
    /// Its severity.
    pub severity: &'static str,
    /// How often it was raised (null for `spread_tracks_level`, which keeps no count).
    pub times_raised: Option<u32>,
}

/// The alarms raised at the end of a run, in kind order.
pub fn alarms<R: Real>(monitor: &Monitor<R>) -> Vec<AlarmSummary> {
    let raised = monitor.raised_alarms();
    AlarmKind::ALL
        .iter()
        .filter_map(|&kind| {
            raised[kind.index()].map(|severity| AlarmSummary {
                kind: kind.name(),
                severity: severity.name(),
                // Only the detector alarms keep a raise count.
                times_raised: (kind != AlarmKind::SpreadTracksLevel)
                    .then(|| monitor.alarm_raises(kind)),
            })
        })
        .collect()
}

/// The alarms raised at the end of a run as a JSON value (for `snapshot inspect`).
pub fn alarms_json<R: Real>(monitor: &Monitor<R>) -> Value {
    serde_json::to_value(alarms(monitor)).unwrap_or(Value::Null)
}

/// The drift baseline: its parameters and where it came from.
#[derive(Clone, Debug, Serialize)]
pub struct DriftBaseline {
    /// The baseline's parameters.
    #[serde(flatten)]
    pub params: Parameters,
    /// Where it came from.
    #[serde(flatten)]
    pub origin: OriginSummary,
}

/// The baseline and the drift against it (`evaluated` false before the first evaluation).
#[derive(Clone, Debug, Serialize)]
pub struct Drift {
    /// The baseline.
    pub baseline: DriftBaseline,
    /// True once the drift test ran.
    pub evaluated: bool,
    /// The last evaluation, when there is one.
    #[serde(flatten, skip_serializing_if = "Option::is_none")]
    pub status: Option<DriftStatus>,
}

/// The last drift evaluation.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct DriftStatus {
    /// Gain change.
    pub gain_change: Option<Shortest>,
    /// Its uncertainty.
    pub gain_change_uncertainty: Option<Shortest>,
    /// Offset change.
    pub offset_change: Shortest,
    /// Its uncertainty.
    pub offset_change_uncertainty: Shortest,
    /// Wald statistic.
    pub wald: Shortest,
    /// Its threshold.
    pub wald_threshold: Shortest,
    /// Degrees of freedom.
    pub dof: u8,
    /// Significant drift.
    pub significant: bool,
    /// Gain change beyond tolerance.
    pub gain_beyond_tolerance: bool,
    /// Offset change beyond tolerance.
    pub offset_beyond_tolerance: bool,
}

/// The baseline and the drift against it (reported whether or not it alarms), or `None`
/// before a baseline exists.
pub fn drift<R: Real + Display>(monitor: &Monitor<R>, origin: &BaselineOrigin) -> Option<Drift> {
    let baseline = monitor.baseline()?;
    let status = monitor.drift_status().map(|status| DriftStatus {
        gain_change: status.gain_change.map(Shortest::of),
        gain_change_uncertainty: status.gain_uncertainty.map(Shortest::of),
        offset_change: Shortest::of(status.offset_change),
        offset_change_uncertainty: Shortest::of(status.offset_uncertainty),
        wald: Shortest::of(status.wald),
        wald_threshold: Shortest::of(status.threshold),
        dof: status.dof,
        significant: status.significant,
        gain_beyond_tolerance: status.gain_beyond_tolerance,
        offset_beyond_tolerance: status.offset_beyond_tolerance,
    });
    Some(Drift {
        baseline: DriftBaseline {
            params: Parameters::of(&baseline.parameters),
            origin: origin.summary(),
        },
        evaluated: status.is_some(),
        status,
    })
}

/// Per-detector counts (signals and screened samples, not raised alarms: the core's
/// `DetectorCounts`, its fields in its order) and the CUSUM in force.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct Detectors {
    /// How often each detector fired.
    #[serde(flatten)]
    pub counts: steadycal_core::detect::DetectorCounts,
    /// The CUSUM in force.
    #[serde(flatten)]
    pub cusum: CusumSummary,
}

impl Detectors {
    /// The counts of `monitor`.
    pub fn of<R: Real + Display>(monitor: &Monitor<R>) -> Self {
        Detectors {
            counts: monitor.detector_counts(),
            cusum: CusumSummary::of(monitor),
        }
    }
}
