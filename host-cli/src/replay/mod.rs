//! `steadycal replay`: run a recorded feed through the core exactly as a board would.
//!
//! Events are written as JSON lines while the feed runs (so nothing already written is
//! lost when a later row is bad), readings as CSV, and a summary as JSON at the end. The
//! same input gives byte-identical outputs on every run.
//!
//! One job per module: [`options`] (what to read and write), [`engine`] (the monitor and
//! its bookkeeping, shared with `watch` and `fleet`), [`time_order`], [`pipeline`] (how rows
//! reach the engine: a parsing thread, inline, or a device log), [`record_batches`] (Arrow
//! record batches, the entry of every columnar source), [`parquet_file`] (a Parquet file's
//! batches decoded on a second thread), [`run`] (a replay under
//! way: rows, outputs, the end), [`sink`] (one module per output), [`progress`].
//! The command-line arguments live in `commands::replay`.

use std::fs::File;
use std::io::Read;

use anyhow::Result;

use crate::feed::{CsvFeed, FeedError};

pub mod engine;
pub mod options;
pub mod parquet_file;
pub mod pipeline;
pub mod progress;
pub mod record_batches;
pub mod run;
pub mod sink;
pub mod time_order;

pub use crate::precision::Precision;
pub use engine::Engine;
pub use options::{InputFormat, PersistOptions, ReplayOptions};
pub use record_batches::replay_record_batches;
pub use run::ReplayResult;

/// Runs a replay with the options' float type.
///
/// The CSV is parsed on a second thread and handed to the engine in batches of
/// [`pipeline::BATCH_ROWS`] over a bounded channel (at most [`pipeline::BATCHES_IN_FLIGHT`] waiting), so
/// parsing and the core overlap on two cores while memory stays flat in the feed length.
/// The core still sees the samples one by one, in feed order: results are identical to a
/// single-threaded run.
///
/// A Parquet file (detected by content, or asked for with [`InputFormat::Parquet`]) is read
/// one row group at a time through [`replay_record_batches`].
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
    let is_parquet = match options.persist.input_format {
        InputFormat::Parquet => true,
        InputFormat::Auto => {
            crate::feed::parquet::looks_like_parquet(reader.fill_buf().map_err(io_error)?)
        }
        _ => false,
    };
    if is_parquet {
        if file == "-" {
            anyhow::bail!("-: a Parquet feed is read from a file (its footer comes last), not from standard input");
        }
        return parquet_file::replay_parquet(options);
    }
    let is_log = match options.persist.input_format {
        InputFormat::Csv | InputFormat::Parquet => false,
        InputFormat::DeviceLog => true,
        InputFormat::Auto => {
            crate::device_log::looks_like_device_log(reader.fill_buf().map_err(io_error)?)
        }
    };
    if is_log {
        let mut bytes = Vec::new();
        reader.read_to_end(&mut bytes).map_err(io_error)?;
        return match options.precision {
            Precision::F32 => pipeline::replay_device_log::<f32>(file, bytes, options),
            Precision::F64 => pipeline::replay_device_log::<f64>(file, bytes, options),
        };
    }
    let input: Box<dyn Read + Send> = Box::new(reader);
    let feed = CsvFeed::new(file, input, &options.columns)?.with_missing(&options.missing);
    match (options.precision, options.pipelined) {
        (Precision::F32, true) => pipeline::replay_pipelined::<f32>(feed, options),
        (Precision::F64, true) => pipeline::replay_pipelined::<f64>(feed, options),
        (Precision::F32, false) => pipeline::replay_inline::<f32>(feed, options),
        (Precision::F64, false) => pipeline::replay_inline::<f64>(feed, options),
    }
}
