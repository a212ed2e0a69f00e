//! Reading recorded feeds: CSV with a header, columns found by name.
//!
//! Columns: `t` (seconds, or an RFC 3339 timestamp such as `2026-03-01T12:00:00Z`, read as
//! seconds since 1970-01-01T00:00:00Z; optional: the data-row index is used when absent),
//! `raw` (required), `ref` (empty cell = no reference on that row), `temp` (optional). The
//! names can be mapped ([`ColumnNames`]). Other columns are ignored. `nan`, `inf` and `-inf` cells are data and go to the core, which
//! screens them. Anything else that does not parse stops the feed with a [`FeedError`]
//! naming the file, the line, the column and what was expected.

//!
//! Arrow record batches (from Parquet files or a caller's tables) are read by [`arrow`] with
//! the same column names and missing-value rules; [`parquet`] opens a Parquet file as such
//! a stream, one row group at a time.
//!
//! One job per module: [`csv_feed`] (the reader: header, columns, rows to samples),
//! [`records`] (the record reader driving `csv_core`), [`fast_row`] (plain rows parsed
//! straight from the read buffer), [`decimal`] (numeric cells of the fast path, bit-identical to `str::parse`), [`cell`]
//! (cells of the general path: numbers, timestamps).

use std::fmt;
use std::str::FromStr;

use steadycal_core::real::Real;
use steadycal_core::sample::Sample;

use decimal::DecimalFloat;

pub mod arrow;
pub mod cell;
pub mod csv_feed;
pub mod decimal;
pub mod fast_row;
pub mod parquet;
pub mod records;

pub use cell::{parse_number, parse_rfc3339};
pub use csv_feed::CsvFeed;
pub use fast_row::FastRow;
pub use records::READ_BLOCK;

/// Where a value sits in a feed file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Location {
    /// File name as given (`-` for standard input).
    pub file: String,
    /// 1-based line number.
    pub line: u64,
    /// 1-based column number (field index), 0 when the whole line is at fault.
    pub column: usize,
}

impl fmt::Display for Location {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.column > 0 {
            write!(f, "{}:{}:{}", self.file, self.line, self.column)
        } else {
            write!(f, "{}:{}", self.file, self.line)
        }
    }
}

/// A feed that cannot be read.
#[derive(Debug, thiserror::Error)]
pub enum FeedError {
    /// The file could not be opened or read.
    #[error("{file}: cannot read: {source}")]
    Io {
        /// File name.
        file: String,
        /// The cause.
        source: std::io::Error,
    },
    /// The file has no header line.
    #[error("{file}:1: empty file, expected a header line naming the columns (t, raw, ref, temp)")]
    Empty {
        /// File name.
        file: String,
    },
    /// The header is there but no data row follows.
    #[error("{file}:2: no data rows after the header, expected at least one")]
    NoRows {
        /// File name.
        file: String,
    },
    /// Data rows follow the header, but none has a sensor value: every raw cell is a
    /// missing marker (or the row is blank).
    #[error("{file}: all {rows} data rows have a missing sensor value (column `{column}`, markers {markers}), expected at least one value")]
    NoValues {
        /// File name.
        file: String,
        /// Data rows read, every one without a sensor value.
        rows: u64,
        /// The sensor (raw) column.
        column: String,
        /// The missing markers in force, quoted.
        markers: String,
    },
    /// A device log holds no intact sample record.
    #[error("{file}: no intact sample record in the device log, expected at least one (damaged spans are listed in the summary)")]
    NoRecords {
        /// File name.
        file: String,
    },
    /// A required column is missing from the header.
    #[error("{file}:1: no `{column}` column in the header, expected one (found: {found})")]
    MissingColumn {
        /// File name.
        file: String,
        /// The missing column.
        column: String,
        /// The header as found.
        found: String,
    },
    /// A cell does not hold what was expected.
    #[error("{location}: column `{column}`: expected {expected}, found {found:?}")]
    BadCell {
        /// Where.
        location: Location,
        /// Column name.
        column: String,
        /// What would have been accepted.
        expected: &'static str,
        /// What was there (cut to 40 characters).
        found: String,
    },
    /// A column of a columnar source (Arrow, Parquet) is not in its schema.
    #[error("{file}: no column `{column}`, expected one (found: {found})")]
    NoColumn {
        /// File name (or the source's name).
        file: String,
        /// The missing column.
        column: String,
        /// The schema's columns.
        found: String,
    },
    /// A column of a columnar source holds another type than the column needs.
    #[error("{file}: column `{column}` holds {found}, expected {expected}")]
    ColumnType {
        /// File name (or the source's name).
        file: String,
        /// Column name.
        column: String,
        /// The column's type.
        found: String,
        /// What would have been accepted.
        expected: &'static str,
    },
    /// A value of a columnar source cannot be used (a missing time).
    #[error("{file}: row {row}: column `{column}`: expected {expected}, found {found}")]
    BadValue {
        /// File name (or the source's name).
        file: String,
        /// 1-based row over the whole source.
        row: u64,
        /// Column name.
        column: String,
        /// What would have been accepted.
        expected: &'static str,
        /// What was there.
        found: String,
    },
    /// A columnar source cannot be decoded.
    #[error("{file}: {message}")]
    Decode {
        /// File name (or the source's name).
        file: String,
        /// What the decoder said.
        message: String,
    },
    /// A row is malformed (wrong number of fields, invalid UTF-8, ...).
    #[error("{location}: {message}")]
    BadRow {
        /// Where.
        location: Location,
        /// What is wrong, and what was expected.
        message: String,
    },
}

impl FeedError {
    /// The line the error is on, if it is about one line.
    pub fn line(&self) -> Option<u64> {
        match self {
            FeedError::BadCell { location, .. } | FeedError::BadRow { location, .. } => {
                Some(location.line)
            }
            FeedError::BadValue { row, .. } => Some(*row),
            _ => None,
        }
    }
}

/// Column names to look for.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ColumnNames {
    /// Time column.
    pub time: String,
    /// Raw sensor output column.
    pub raw: String,
    /// Reference column.
    pub reference: String,
    /// Temperature column.
    pub temperature: String,
}

impl Default for ColumnNames {
    fn default() -> Self {
        ColumnNames {
            time: "t".into(),
            raw: "raw".into(),
            reference: "ref".into(),
            temperature: "temp".into(),
        }
    }
}

/// The float types a feed is parsed into: `f32` and `f64`.
pub trait FeedFloat: Real + FromStr + DecimalFloat + Send + 'static {}
impl FeedFloat for f32 {}
impl FeedFloat for f64 {}

/// One parsed row: the sample or why it is bad, its line, and the bytes read so far.
pub struct ParsedRow<R> {
    /// The sample, or the error for this row.
    pub next: std::result::Result<Sample<R>, FeedError>,
    /// 1-based line of the row (for a device log: the record's number).
    pub line: u64,
    /// Bytes of input read so far.
    pub bytes: u64,
}

/// Rows parsed in one go for the engine: samples in feed order with their lines, and the
/// bad rows between them.
#[derive(Debug)]
pub struct Batch<R> {
    /// The good rows.
    pub samples: Vec<Sample<R>>,
    /// 1-based line of each good row.
    pub lines: Vec<u64>,
    /// Bad rows: `(i, error)` comes before `samples[i]` (after the last sample when
    /// `i == samples.len()`), in feed order.
    pub errors: Vec<(usize, FeedError)>,
    /// Bytes of input read after the batch.
    pub bytes: u64,
}

impl<R> Batch<R> {
    /// An empty batch with room for `rows` rows.
    pub fn with_capacity(rows: usize) -> Self {
        Batch {
            samples: Vec::with_capacity(rows),
            lines: Vec::with_capacity(rows),
            errors: Vec::new(),
            bytes: 0,
        }
    }

    /// Empties the batch, keeping its memory.
    pub fn clear(&mut self) {
        self.samples.clear();
        self.lines.clear();
        self.errors.clear();
        self.bytes = 0;
    }

    /// Rows in the batch, bad ones included.
    pub fn len(&self) -> usize {
        self.samples.len() + self.errors.len()
    }

    /// True when the batch holds no row.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
}
