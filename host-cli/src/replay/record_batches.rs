//! Replay of Arrow record batches: [`replay_record_batches`], the one entry for columnar
//! sources. `steadycal replay FEED.parquet` and `fleet` over Parquet files come through it
//! (with the file's batches decoded on a second thread), and so does any caller holding
//! Arrow data (a Python table handed over as record batches).
//!
//! The samples go through the same [`Run`] as a CSV feed's, so the summary, the event lines,
//! the readings and the checks are those of the same rows written as CSV (numbers of an
//! Arrow `Float64` column in an `f32` run are rounded to the nearest `f32` once, as a CSV
//! cell's decimal text is). The summary adds `missing_raw` and `missing` (cells removed by
//! column and marker, `null` for Arrow nulls), and `input_format` is `arrow` (or `parquet`).

use std::fmt::Display;
use std::sync::Arc;

use anyhow::Result;
use arrow::array::RecordBatch;
use arrow::datatypes::Schema;
use arrow::error::ArrowError;
use serde_json::json;

use crate::feed::arrow::ArrowColumns;
use crate::feed::{Batch, FeedError, FeedFloat};
use crate::replay::options::ReplayOptions;
use crate::replay::run::{ReplayResult, Run};
use crate::replay::Precision;

/// Replays a stream of Arrow record batches with the same options as a CSV feed
/// (`options.columns` names the columns, `options.missing` the declared missing markers,
/// `options.precision` the float type; `options.feed` is not opened).
///
/// `source` names the stream in messages and in the summary's `file`; `schema` is the
/// stream's schema, checked before the first batch (a missing `raw` column or a column that
/// does not hold numbers is an `Err` naming `source` and the column). A batch that fails to
/// decode, or whose columns differ from `schema`, stops the run like a bad CSV row: the
/// outputs up to it are written and [`ReplayResult::error`] says what happened.
///
/// The outputs are those of the same rows replayed from CSV: summary, event lines,
/// readings and checks, written where the options say and returned as the summary.
pub fn replay_record_batches<I>(
    source: &str,
    schema: Arc<Schema>,
    batches: I,
    options: &ReplayOptions,
) -> Result<ReplayResult>
where
    I: IntoIterator<Item = std::result::Result<RecordBatch, ArrowError>>,
{
    replay_labelled(source, schema, batches, options, "arrow", 0.0)
}

/// [`replay_record_batches`] with the summary's `input_format` and the bytes per row for
/// the progress bar (0: none).
pub(crate) fn replay_labelled<I>(
    source: &str,
    schema: Arc<Schema>,
    batches: I,
    options: &ReplayOptions,
    label: &'static str,
    bytes_per_row: f64,
) -> Result<ReplayResult>
where
    I: IntoIterator<Item = std::result::Result<RecordBatch, ArrowError>>,
{
    let columns = ArrowColumns::new(source, schema, &options.columns, &options.missing)?;
    match options.precision {
        Precision::F32 => run::<f32, I>(columns, batches, options, label, bytes_per_row),
        Precision::F64 => run::<f64, I>(columns, batches, options, label, bytes_per_row),
    }
}

fn run<R, I>(
    mut columns: ArrowColumns,
    batches: I,
    options: &ReplayOptions,
    label: &'static str,
    bytes_per_row: f64,
) -> Result<ReplayResult>
where
    R: FeedFloat + Display,
    I: IntoIterator<Item = std::result::Result<RecordBatch, ArrowError>>,
{
    let file = columns.file().to_string();
    let mut run = Run::<R>::start(&file, options, false)?;
    let mut batch = Batch::<R>::with_capacity(0);
    for record_batch in batches {
        batch.clear();
        let filled = match record_batch {
            Ok(record_batch) => columns.fill_batch(&record_batch, &mut batch),
            Err(error) => Err(FeedError::Decode {
                file: file.clone(),
                message: format!("after row {}: {error}", columns.rows()),
            }),
        };
        if let Err(error) = filled {
            // Whole-stream trouble (nothing of this batch was taken): the rows before it
            // stay replayed, the run stops here.
            run.bad(error);
            break;
        }
        batch.bytes = (columns.rows() as f64 * bytes_per_row) as u64;
        if !run.batch(&mut batch)? {
            break;
        }
    }
    let (missing_raw, missing) = (columns.missing_raw, columns.tally.by_column.clone());
    run.finish(|map| {
        map.insert("input_format".into(), json!(label));
        map.insert("missing_raw".into(), json!(missing_raw));
        map.insert("missing".into(), json!(missing));
    })
}
