//! Parquet files as Arrow streams: [`ParquetFeed`] opens a file, finds the columns of the
//! feed by name ([`super::arrow::ArrowColumns`]) in its full schema, and reads only those,
//! one row group after the other in batches of [`PARQUET_BATCH_ROWS`] rows.
//!
//! Memory: the file's footer, and the pages of one row group's chosen columns while they
//! are decoded; never the whole file (peak RSS in the README's figures table). Compression:
//! uncompressed and Snappy (what most writers use by default); another codec is refused
//! with the file named and the codec the decoder reports.
//!
//! Invariants: never panics on a damaged file; every error names the file.

use std::fs::File;
use std::path::Path;
use std::sync::Arc;

use arrow::array::RecordBatch;
use arrow::datatypes::Schema;
use arrow::error::ArrowError;
use parquet::arrow::arrow_reader::{ParquetRecordBatchReader, ParquetRecordBatchReaderBuilder};
use parquet::arrow::ProjectionMask;

use super::arrow::ArrowColumns;
use super::{ColumnNames, FeedError};
use crate::field::missing::MissingMarkers;

/// Rows per record batch read from a Parquet file.
pub const PARQUET_BATCH_ROWS: usize = 8192;

/// The four bytes a Parquet file starts (and ends) with.
pub const PARQUET_MAGIC: &[u8; 4] = b"PAR1";

/// True when `head` (the first bytes of a file) starts like a Parquet file.
pub fn looks_like_parquet(head: &[u8]) -> bool {
    head.starts_with(PARQUET_MAGIC)
}

/// An open Parquet feed: its full schema, its rows, and the reader of the chosen columns.
pub struct ParquetFeed {
    /// The file's Arrow schema (every column, for messages).
    pub schema: Arc<Schema>,
    /// Rows in the file (from the footer).
    pub rows: u64,
    /// Row groups in the file.
    pub row_groups: usize,
    /// Record batches of the feed's columns.
    pub batches: ParquetRecordBatchReader,
}

impl ParquetFeed {
    /// Opens `path` and checks its columns against `names` (the errors of
    /// [`ArrowColumns::new`], with the file's name).
    pub fn open(
        path: &Path,
        names: &ColumnNames,
        missing: &MissingMarkers,
    ) -> Result<Self, FeedError> {
        let file_name = path.display().to_string();
        let decode = |e: parquet::errors::ParquetError| FeedError::Decode {
            file: file_name.clone(),
            message: format!("not a readable Parquet file: {e}"),
        };
        let file = File::open(path).map_err(|source| FeedError::Io {
            file: file_name.clone(),
            source,
        })?;
        let builder = ParquetRecordBatchReaderBuilder::try_new(file).map_err(decode)?;
        let schema = builder.schema().clone();
        // The column checks with every column of the file in the messages.
        ArrowColumns::new(&file_name, schema.clone(), names, missing)?;
        let wanted = [
            &names.time,
            &names.raw,
            &names.reference,
            &names.temperature,
        ];
        let indices: Vec<usize> = schema
            .fields()
            .iter()
            .enumerate()
            .filter(|(_, f)| wanted.contains(&f.name()))
            .map(|(i, _)| i)
            .collect();
        let mask = ProjectionMask::roots(builder.parquet_schema(), indices);
        let metadata = builder.metadata().clone();
        let batches = builder
            .with_projection(mask)
            .with_batch_size(PARQUET_BATCH_ROWS)
            .build()
            .map_err(decode)?;
        Ok(ParquetFeed {
            schema,
            rows: metadata.file_metadata().num_rows().max(0) as u64,
            row_groups: metadata.num_row_groups(),
            batches,
        })
    }
}

impl Iterator for ParquetFeed {
    type Item = Result<RecordBatch, ArrowError>;
    fn next(&mut self) -> Option<Self::Item> {
        self.batches.next()
    }
}
