//! How rows reach the engine: a CSV feed parsed on a second thread and handed over in
//! batches ([`BATCH_ROWS`], at most [`BATCHES_IN_FLIGHT`] waiting), the same parsed on the
//! calling thread, or a device log's records. The engine sees the samples one by one in
//! feed order whichever way they come, so the outputs are identical. A CSV run's summary
//! adds the reader's counts of missing cells (`missing_raw`, `missing`).

use std::fmt::Display;
use std::io::Read;
use std::str::FromStr;

use anyhow::Result;
use serde_json::{json, Map, Value};
use steadycal_core::real::Real;

use crate::feed::{Batch, CsvFeed, FeedFloat, ParsedRow};
use crate::field::missing::MissingTally;
use crate::replay::options::{InputFormat, ReplayOptions};
use crate::replay::run::{ReplayResult, Run};

/// The replay of a device log's records.
pub(crate) fn replay_device_log<R>(
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

/// The replay of a CSV feed parsed on a second thread.
pub(crate) fn replay_pipelined<R>(
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
    let mut run = Run::<R>::start(&file, options, false)?;
    // The parsing thread counts the census of the samples it parses: it has time to spare,
    // the engine thread bounds the throughput.
    let mut census = run.census_elsewhere();
    std::thread::scope(|scope| {
        let parser = scope.spawn(move || loop {
            let mut batch = recycled
                .try_recv()
                .unwrap_or_else(|_| Batch::with_capacity(BATCH_ROWS));
            batch.clear();
            let more = feed.fill_batch(&mut batch, BATCH_ROWS, options.skip_bad_rows);
            for sample in &batch.samples {
                census.push(
                    sample.t,
                    sample.raw.to_f64(),
                    sample.reference.map(R::to_f64),
                    sample.temperature.map(R::to_f64),
                );
            }
            if sender.send(batch).is_err() || !more {
                return (census, feed.missing_raw(), feed.missing_tally());
            }
        });
        for mut batch in receiver {
            if !run.batch(&mut batch)? {
                break;
            }
            let _ = recycle.try_send(batch);
        }
        let (missing_raw, missing) = match parser.join() {
            Ok((census, missing_raw, missing)) => {
                run.census_counted(census);
                (missing_raw, missing)
            }
            Err(panic) => std::panic::resume_unwind(panic),
        };
        run.finish(|map| {
            map.insert("input_format".into(), json!(InputFormat::Csv));
            missing_entries(map, missing_raw, &missing);
        })
    })
}

/// The same replay with the CSV parsed on the calling thread, row by row.
pub(crate) fn replay_inline<R>(
    mut feed: CsvFeed<Box<dyn Read + Send>>,
    options: &ReplayOptions,
) -> Result<ReplayResult>
where
    R: FeedFloat + Display,
{
    let file = feed.file().to_string();
    let rows = FeedRows::<R> {
        feed: &mut feed,
        float: std::marker::PhantomData,
    };
    replay_rows_with(rows, &file, options, false, |rows, map| {
        map.insert("input_format".into(), json!(InputFormat::Csv));
        missing_entries(map, rows.feed.missing_raw(), &rows.feed.missing_tally());
    })
}

/// The summary entries of a CSV feed's missing cells.
fn missing_entries(map: &mut Map<String, Value>, missing_raw: u64, missing: &MissingTally) {
    map.insert("missing_raw".into(), json!(missing_raw));
    map.insert("missing".into(), json!(missing.by_column));
}

/// The feed's rows, each with its line and the bytes read so far.
struct FeedRows<'a, R> {
    feed: &'a mut CsvFeed<Box<dyn Read + Send>>,
    float: std::marker::PhantomData<R>,
}

impl<R: FeedFloat> Iterator for FeedRows<'_, R> {
    type Item = ParsedRow<R>;

    fn next(&mut self) -> Option<ParsedRow<R>> {
        let next = self.feed.next_sample::<R>()?;
        Some(ParsedRow {
            next,
            line: self.feed.line(),
            bytes: self.feed.bytes_read(),
        })
    }
}

/// Runs parsed rows through the engine and writes the outputs (the engine side of
/// [`crate::replay::replay`]).
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
