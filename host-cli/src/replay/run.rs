//! A replay under way ([`Run`]): the engine, every output, and the bookkeeping of the rows
//! seen (bad rows skipped or stopping the run, time-order warnings, the progress bar). Each
//! input (CSV rows, device-log records) drives it row by row; [`Run::finish`] flushes the
//! outputs, saves the snapshot and writes the summary.

use std::fmt::Display;

use anyhow::Result;
use serde::Serialize;
use serde_json::{json, Map, Value};
use steadycal_core::event::Severity;
use steadycal_core::monitor::MonitorConfig;
use steadycal_core::real::Real;
use steadycal_core::record::Record;
use steadycal_core::sample::Sample;

use crate::baseline::BaselineOrigin;
use crate::device_log::DeviceLogWriter;
use crate::feed::{Batch, FeedError, ParsedRow};
use crate::field::census::{RunCensus, Suspect};
use crate::io::create_output;
use crate::replay::engine::Engine;
use crate::replay::options::ReplayOptions;
use crate::replay::progress::progress_bar;
use crate::replay::sink::checks::ChecksSink;
use crate::replay::sink::events::EventsSink;
use crate::replay::sink::readings::ReadingsSink;
use crate::replay::sink::summary::write_summary;
use crate::replay::sink::ChannelPrefix;
use crate::replay::time_order::{TimeStep, LIST_LIMIT};
use crate::snapshot_file;

/// The outcome of a replay.
#[derive(Debug)]
pub struct ReplayResult {
    /// The summary document.
    pub summary: Value,
    /// The feed error that stopped the run, if any (outputs up to it are written).
    pub error: Option<FeedError>,
    /// Events raised, by severity: `[info, warn, alarm]` (see [`crate::replay::engine::event_severity`]).
    pub raised: [u64; 3],
    /// Values that look like undeclared missing markers (see [`crate::field::census`]).
    pub suspects: Vec<Suspect>,
}

impl ReplayResult {
    /// True when at least one event of `level` or above was raised.
    pub fn raised_at_least(&self, level: Severity) -> bool {
        self.raised[level as usize..].iter().any(|&n| n > 0)
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

/// The engine at the start of a replay: fresh, or resumed from the options' snapshot (whose
/// configuration must match an explicitly given one).
pub fn start_engine<R: Real + Display>(options: &ReplayOptions) -> Result<Engine<R>> {
    let Some(path) = &options.persist.resume else {
        return Engine::<R>::new(&options.config, options.baseline.as_ref());
    };
    let monitor = snapshot_file::restore_as::<R>(path)?;
    let origin = BaselineOrigin::resumed(&monitor, options.baseline.as_ref());
    if options.persist.config_explicit {
        let wanted: MonitorConfig<R> = options.config.convert();
        if wanted != *monitor.config() {
            let keys = snapshot_file::config_differences(&wanted, monitor.config());
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

/// A replay under way: the engine, the outputs and the bookkeeping of the rows seen.
pub(crate) struct Run<'a, R: Real> {
    file: &'a str,
    options: &'a ReplayOptions,
    device_log: bool,
    engine: Engine<R>,
    seq_offset: u64,
    log_out: Option<DeviceLogWriter<R>>,
    events_out: Option<EventsSink>,
    readings_out: Option<ReadingsSink>,
    checks_out: Option<ChecksSink>,
    bar: Option<indicatif::ProgressBar>,
    error: Option<FeedError>,
    skipped: Vec<SkippedRow>,
    skipped_count: u64,
    rows: u64,
    census: RunCensus,
    /// The census is counted here (false when the parsing thread counts it, see
    /// [`Run::census_elsewhere`]).
    census_here: bool,
}

impl<'a, R: Real + Display> Run<'a, R> {
    pub(crate) fn start(
        file: &'a str,
        options: &'a ReplayOptions,
        device_log: bool,
    ) -> Result<Self> {
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
            .map(|path| create_output(path).and_then(|out| Ok(DeviceLogWriter::<R>::new(out)?)))
            .transpose()?;
        let prefix = ChannelPrefix::new(options.channel.as_deref());
        let events_out = options
            .events
            .as_deref()
            .map(|path| EventsSink::create(path, &prefix))
            .transpose()?;
        let readings_out = options
            .readings
            .as_deref()
            .map(|path| ReadingsSink::create(path, &prefix))
            .transpose()?;
        let checks_out = options
            .checks
            .as_deref()
            .map(|path| ChecksSink::create(path, &prefix))
            .transpose()?;
        let census = {
            // The configuration in force: a resumed snapshot's own.
            let c = engine.monitor.config();
            let (origin, low, high) = (
                c.level_origin.to_f64(),
                c.level_low.to_f64(),
                c.level_high.to_f64(),
            );
            let names = &options.columns;
            RunCensus::new(
                [&names.raw, &names.reference, &names.temperature],
                (origin + low, origin + high),
            )
        };
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
            census,
            census_here: true,
        })
    }

    /// An empty census for another thread to count (the parsing thread of a pipelined
    /// replay, which has time to spare while the engine bounds the throughput); the run
    /// stops counting its own and takes that one back with [`Run::census_counted`].
    pub(crate) fn census_elsewhere(&mut self) -> RunCensus {
        self.census_here = false;
        self.census.clone()
    }

    /// The census counted elsewhere.
    pub(crate) fn census_counted(&mut self, census: RunCensus) {
        self.census = census;
    }

    /// Moves the progress bar to `bytes` read.
    pub(crate) fn progress(&self, bytes: u64) {
        if let Some(bar) = &self.bar {
            bar.set_position(bytes);
        }
    }

    /// One row, good or bad; false when the run stops here.
    pub(crate) fn row(&mut self, row: ParsedRow<R>) -> Result<bool> {
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
    pub(crate) fn bad(&mut self, feed_error: FeedError) -> bool {
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

    /// The rows of a batch, good and bad, in order (the progress bar moved to its bytes);
    /// false when the run stops in it.
    pub(crate) fn batch(&mut self, batch: &mut Batch<R>) -> Result<bool> {
        self.progress(batch.bytes);
        if batch.errors.is_empty() {
            for (sample, &line) in batch.samples.iter().zip(&batch.lines) {
                self.good(*sample, line)?;
            }
            return Ok(true);
        }
        let mut errors = batch.errors.drain(..).peekable();
        for (index, (sample, &line)) in batch.samples.iter().zip(&batch.lines).enumerate() {
            while let Some((_, error)) = errors.next_if(|(at, _)| *at == index) {
                if !self.bad(error) {
                    return Ok(false);
                }
            }
            self.good(*sample, line)?;
        }
        for (_, error) in errors.by_ref() {
            if !self.bad(error) {
                return Ok(false);
            }
        }
        Ok(true)
    }

    /// A good row, on `line`: time order, the core, and every output.
    #[inline]
    pub(crate) fn good(&mut self, mut sample: Sample<R>, line: u64) -> Result<()> {
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
        if self.census_here {
            self.census.push(
                t,
                sample.raw.to_f64(),
                sample.reference.map(R::to_f64),
                sample.temperature.map(R::to_f64),
            );
        }
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
                Some(out) => out.write(event, t),
                None => Ok(()),
            }
        })?;
        if let Some(out) = self.readings_out.as_mut() {
            out.write(&sample, &outcome, engine.monitor.rung())?;
        }
        if let Some(out) = self.checks_out.as_mut() {
            out.write(&engine.monitor, &sample, &outcome)?;
        }
        Ok(())
    }

    /// Flushes the outputs, saves the snapshot and writes the summary; `extra` adds the
    /// input's own summary entries.
    pub(crate) fn finish(
        self,
        extra: impl FnOnce(&mut Map<String, Value>),
    ) -> Result<ReplayResult> {
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
            census,
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
        if let Some(out) = events_out {
            out.finish()?;
        }
        if let Some(out) = readings_out {
            out.finish()?;
        }
        if let Some(out) = checks_out {
            out.finish()?;
        }
        if let Some(mut log) = log_out {
            log.flush()?;
        }
        // The state after the last good row is saved even when a bad row stopped the run.
        let snapshot_bytes = match &options.persist.save_snapshot {
            Some(path) => Some(snapshot_file::write(path, &mut engine.monitor)?),
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
            census_entries(map, &census, options);
            extra(map);
        }
        no_values(
            &mut error,
            &mut summary,
            &options.columns.raw,
            &options.missing,
            0,
        );
        let suspects = census.suspects();
        if options.warnings {
            census_warnings(file, &census, &suspects, options);
            let order = &engine.time_order;
            if order.repeated + order.backwards > 0 {
                eprintln!(
                    "steadycal: warning: {file}: {} rows repeat the previous time, {} go backwards",
                    order.repeated, order.backwards
                );
            }
        }
        if let Some(path) = &options.summary {
            write_summary(path, &summary)?;
        }
        Ok(ReplayResult {
            summary,
            error,
            raised: engine.raised,
            suspects,
        })
    }
}

/// Words a run that gave no sample because every data row lacks a sensor value
/// ([`FeedError::NoValues`] instead of [`FeedError::NoRows`], in `error` and in the
/// summary's `stopped_at`), from the summary's `missing_raw` and `blank_rows` more rows
/// without any value. Left as it is when bad rows were skipped (not every row lacks a
/// value then) or nothing was missing.
pub fn no_values(
    error: &mut Option<FeedError>,
    summary: &mut Value,
    column: &str,
    markers: &crate::field::missing::MissingMarkers,
    blank_rows: u64,
) {
    let Some(FeedError::NoRows { file }) = error else {
        return;
    };
    let missing_raw = summary["missing_raw"].as_u64().unwrap_or(0);
    if missing_raw == 0 || summary["rows_skipped"].as_u64().unwrap_or(0) > 0 {
        return;
    }
    let quoted: Vec<String> = markers.texts().iter().map(|m| format!("{m:?}")).collect();
    let better = FeedError::NoValues {
        file: file.clone(),
        rows: missing_raw + blank_rows,
        column: column.to_string(),
        markers: quoted.join(", "),
    };
    if let Value::Object(map) = summary {
        map.insert("stopped_at".into(), json!(better.to_string()));
    }
    *error = Some(better);
}

/// The summary entries of the census: the time span, suspected undeclared missing markers,
/// the checks outside the working range and where that range came from.
fn census_entries(map: &mut Map<String, Value>, census: &RunCensus, options: &ReplayOptions) {
    map.insert("first_t".into(), json!(census.first_t));
    map.insert("last_t".into(), json!(census.last_t));
    map.insert("suspected_missing_markers".into(), json!(census.suspects()));
    map.insert("range_source".into(), json!(options.range_source));
    map.insert(
        "checks_outside_range".into(),
        json!({"checks": census.checks, "outside": census.checks_outside}),
    );
}

fn census_warnings(file: &str, census: &RunCensus, suspects: &[Suspect], options: &ReplayOptions) {
    for suspect in suspects {
        eprintln!("steadycal: warning: {file}: {}", suspect.warning());
    }
    if census.too_many_outside() {
        let c = &options.config;
        eprintln!(
            "steadycal: warning: {file}: {} of {} checks ({:.1} %) have a raw value outside the working range [{}, {}] above the origin {} (range from {}); set range.low/high in the configuration or --level-low/--level-high",
            census.checks_outside,
            census.checks,
            100.0 * census.checks_outside as f64 / census.checks as f64,
            c.level_low,
            c.level_high,
            c.level_origin,
            options.range_source,
        );
    }
}
