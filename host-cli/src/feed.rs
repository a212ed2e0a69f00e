//! Reading recorded feeds: CSV with a header, columns found by name.
//!
//! Columns: `t` (seconds, or an RFC 3339 timestamp such as `2026-03-01T12:00:00Z`, read as
//! seconds since 1970-01-01T00:00:00Z; optional: the data-row index is used when absent),
//! `raw` (required), `ref` (empty cell = no reference on that row), `temp` (optional). The
//! names can be mapped ([`ColumnNames`]). Other columns are ignored. `nan`, `inf` and `-inf` cells are data and go to the core, which
//! screens them. Anything else that does not parse stops the feed with a [`FeedError`]
//! naming the file, the line, the column and what was expected.

use std::fmt;
use std::io::Read;
use std::path::Path;
use std::str::FromStr;

use steadycal_core::real::Real;

use crate::decimal::{parse_cell, DecimalFloat};
use steadycal_core::sample::Sample;

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

#[derive(Clone, Copy, Debug)]
struct ColumnIndex {
    time: Option<usize>,
    raw: usize,
    reference: Option<usize>,
    temperature: Option<usize>,
}

/// Bytes read from the input at a time.
pub const READ_BLOCK: usize = 256 << 10;

/// What a feed column is used for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Role {
    Skip,
    Time,
    Raw,
    Reference,
    Temperature,
}

/// Whether the input is exhausted (same states as the csv crate's reader keeps).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum InputState {
    Open,
    End,
    Failed,
}

/// The float types a feed is parsed into: `f32` and `f64`.
pub trait FeedFloat: Real + FromStr + DecimalFloat + Send {}
impl FeedFloat for f32 {}
impl FeedFloat for f64 {}

/// A streaming reader of a CSV feed.
///
/// Records are split by `csv_core`, the state machine under the `csv` crate, driven the way
/// the `csv` crate's reader drives it (same record positions, same field-count check). A
/// row that is a plain line of unquoted numeric cells takes a fast path that splits and
/// parses it straight from the read buffer; any other row (quotes, carriage returns, blank
/// lines, blank or non-numeric cells, the wrong number of fields, a row cut by the end of
/// the buffer) is read by the state machine and parsed cell by cell, which words every
/// error.
pub struct CsvFeed<R: Read> {
    file: String,
    input: R,
    buffer: Box<[u8]>,
    /// Unread bytes are `buffer[start..end]`.
    start: usize,
    end: usize,
    /// The input returned end of file (no further reads).
    input_done: bool,
    state: InputState,
    core: csv_core::Reader,
    /// Bytes consumed by the record reader.
    byte: u64,
    /// Records read, the header included.
    records: u64,
    /// The header's field count.
    expected_fields: Option<u64>,
    /// The last byte consumed ended a line (the fast path starts only there).
    after_newline: bool,
    roles: Box<[Role]>,
    columns: ColumnIndex,
    names: ColumnNames,
    record: csv::ByteRecord,
    fields: Vec<u8>,
    ends: Vec<usize>,
    row: u64,
    /// 1-based line of the last record read (0 before the first).
    line: u64,
}

/// Cells of a row read by the fast path.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FastRow<T> {
    /// The time cell, when the feed has one.
    pub t: Option<f64>,
    /// The raw cell.
    pub raw: T,
    /// The reference cell (`None` when empty or absent).
    pub reference: Option<T>,
    /// The temperature cell (`None` when empty or absent).
    pub temperature: Option<T>,
    /// Bytes of the row, its `\n` included.
    pub len: usize,
}

/// Splits and parses one plain row at the start of `bytes` (see [`CsvFeed`]); `None` sends
/// the row to the general path.
#[inline(always)]
fn fast_row<T: DecimalFloat>(bytes: &[u8], roles: &[Role]) -> Option<FastRow<T>> {
    let mut row = FastRow {
        t: None,
        raw: T::ZERO,
        reference: None,
        temperature: None,
        len: 0,
    };
    if *bytes.first()? == b'\n' {
        // A blank line, which the record reader skips.
        return None;
    }
    let mut at = 0;
    let last = roles.len() - 1;
    for (index, role) in roles.iter().enumerate() {
        let delimiter = if index == last { b'\n' } else { b',' };
        let rest = &bytes[at..];
        match role {
            Role::Skip => {
                let length = rest
                    .iter()
                    .position(|&b| matches!(b, b',' | b'\n' | b'"' | b'\r'))?;
                if rest[length] != delimiter {
                    return None;
                }
                at += length + 1;
            }
            Role::Time => {
                let (value, length) = parse_cell::<f64>(rest, delimiter)?;
                row.t = Some(value);
                at += length;
            }
            Role::Raw => {
                let (value, length) = parse_cell::<T>(rest, delimiter)?;
                row.raw = value;
                at += length;
            }
            Role::Reference | Role::Temperature => {
                let (value, length) = if *rest.first()? == delimiter {
                    (None, 1)
                } else {
                    let (value, length) = parse_cell::<T>(rest, delimiter)?;
                    (Some(value), length)
                };
                if *role == Role::Reference {
                    row.reference = value;
                } else {
                    row.temperature = value;
                }
                at += length;
            }
        }
    }
    row.len = at;
    Some(row)
}

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

fn shorten(bytes: &[u8]) -> String {
    let text = String::from_utf8_lossy(bytes);
    let mut out: String = text.chars().take(40).collect();
    if text.chars().count() > 40 {
        out.push('…');
    }
    out
}

/// Parses a numeric cell; `nan`, `inf`, `-inf` (any case) are accepted as data.
pub fn parse_number<T: FromStr>(cell: &[u8]) -> Option<T> {
    let text = trim(std::str::from_utf8(cell).ok()?);
    text.parse().ok()
}

/// `str::trim`, skipped when the text starts and ends with a visible ASCII character (the
/// usual numeric cell), which `trim` would leave as it is.
fn trim(text: &str) -> &str {
    match (text.as_bytes().first(), text.as_bytes().last()) {
        (Some(first), Some(last)) if first.is_ascii_graphic() && last.is_ascii_graphic() => text,
        _ => text.trim(),
    }
}

/// Parses an RFC 3339 timestamp into seconds since 1970-01-01T00:00:00Z.
pub fn parse_rfc3339(cell: &[u8]) -> Option<f64> {
    let text = std::str::from_utf8(cell).ok()?.trim();
    let time =
        time::OffsetDateTime::parse(text, &time::format_description::well_known::Rfc3339).ok()?;
    Some(time.unix_timestamp_nanos() as f64 * 1e-9)
}

impl CsvFeed<Box<dyn Read + Send>> {
    /// Opens a feed file, or standard input for `-`.
    pub fn open(path: &Path, names: &ColumnNames) -> Result<Self, FeedError> {
        let file = path.display().to_string();
        let input: Box<dyn Read + Send> = if file == "-" {
            Box::new(std::io::stdin())
        } else {
            let handle = std::fs::File::open(path).map_err(|source| FeedError::Io {
                file: file.clone(),
                source,
            })?;
            Box::new(handle)
        };
        CsvFeed::new(file, input, names)
    }
}

impl<R: Read> CsvFeed<R> {
    /// Reads the header of a feed from any reader.
    pub fn new(file: String, input: R, names: &ColumnNames) -> Result<Self, FeedError> {
        let mut feed = CsvFeed {
            file,
            input,
            buffer: vec![0; READ_BLOCK].into_boxed_slice(),
            start: 0,
            end: 0,
            input_done: false,
            state: InputState::Open,
            core: csv_core::Reader::new(),
            byte: 0,
            records: 0,
            expected_fields: None,
            after_newline: false,
            roles: Box::new([]),
            columns: ColumnIndex {
                time: None,
                raw: 0,
                reference: None,
                temperature: None,
            },
            names: names.clone(),
            record: csv::ByteRecord::new(),
            fields: vec![0; 1024],
            ends: vec![0; 64],
            row: 0,
            line: 0,
        };
        feed.read_record()?;
        let header = std::mem::take(&mut feed.record);
        let file = &feed.file;
        if header.is_empty() || (header.len() == 1 && header[0].is_empty()) {
            return Err(FeedError::Empty { file: file.clone() });
        }
        let find = |name: &str| {
            header.iter().position(|h| {
                std::str::from_utf8(h)
                    .map(|h| h.trim() == name)
                    .unwrap_or(false)
            })
        };
        let found = header.iter().map(shorten).collect::<Vec<_>>().join(", ");
        let raw = find(&names.raw).ok_or_else(|| FeedError::MissingColumn {
            file: file.clone(),
            column: names.raw.clone(),
            found,
        })?;
        let columns = ColumnIndex {
            time: find(&names.time),
            raw,
            reference: find(&names.reference),
            temperature: find(&names.temperature),
        };
        let mut roles = vec![Role::Skip; header.len()];
        if let Some(index) = columns.time {
            roles[index] = Role::Time;
        }
        roles[raw] = Role::Raw;
        if let Some(index) = columns.reference {
            roles[index] = Role::Reference;
        }
        if let Some(index) = columns.temperature {
            roles[index] = Role::Temperature;
        }
        let shared = [
            Some(raw),
            columns.time,
            columns.reference,
            columns.temperature,
        ];
        let distinct = shared
            .iter()
            .flatten()
            .enumerate()
            .all(|(i, a)| shared.iter().flatten().skip(i + 1).all(|b| a != b));
        feed.roles = if distinct {
            roles.into_boxed_slice()
        } else {
            // One column under two names: leave every row to the general path.
            Box::new([])
        };
        feed.columns = columns;
        Ok(feed)
    }

    /// The file name as given.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// 1-based line number of the last record read (0 before the first).
    pub fn line(&self) -> u64 {
        self.line
    }

    /// Bytes of input consumed so far (for progress bars).
    pub fn bytes_read(&self) -> u64 {
        self.byte
    }

    /// True when the feed has a time column.
    pub fn has_time(&self) -> bool {
        self.columns.time.is_some()
    }

    /// Reads one record with the state machine into `self.record`, as the `csv` crate's
    /// `Reader::read_byte_record` does: `Ok(false)` at the end (and after an error reading
    /// the input), a field count other than the header's is an error.
    fn read_record(&mut self) -> Result<bool, FeedError> {
        use csv_core::ReadRecordResult;
        let line = self.core.line();
        let mut position = csv::Position::new();
        position
            .set_byte(self.byte)
            .set_line(line)
            .set_record(self.records);
        self.record.clear();
        self.record.set_position(Some(position));
        self.line = line;
        if self.state != InputState::Open {
            return Ok(false);
        }
        let (mut out_len, mut ends_len) = (0, 0);
        loop {
            if self.start == self.end && !self.input_done {
                self.start = 0;
                self.end = 0;
                // The record reader strips a UTF-8 byte order mark only when its first
                // input holds all three bytes and more (an input of the mark alone reads as
                // the end): read four bytes before the first record, as a file read gives.
                let wanted = if self.byte == 0 { 4 } else { 1 };
                while self.end < wanted && !self.input_done {
                    match self.input.read(&mut self.buffer[self.end..]) {
                        Ok(0) => self.input_done = true,
                        Ok(n) => self.end += n,
                        Err(source) => {
                            self.state = InputState::Failed;
                            return Err(FeedError::Io {
                                file: self.file.clone(),
                                source,
                            });
                        }
                    }
                }
            }
            let input = &self.buffer[self.start..self.end];
            let (result, read, written, ended) = self.core.read_record(
                input,
                &mut self.fields[out_len..],
                &mut self.ends[ends_len..],
            );
            if read > 0 {
                self.after_newline = input[read - 1] == b'\n';
            }
            self.start += read;
            self.byte += read as u64;
            out_len += written;
            ends_len += ended;
            match result {
                ReadRecordResult::InputEmpty => {}
                ReadRecordResult::OutputFull => {
                    let length = self.fields.len().max(4) * 2;
                    self.fields.resize(length, 0);
                }
                ReadRecordResult::OutputEndsFull => {
                    let length = self.ends.len().max(4) * 2;
                    self.ends.resize(length, 0);
                }
                ReadRecordResult::Record => {
                    let mut from = 0;
                    for &to in &self.ends[..ends_len] {
                        self.record.push_field(&self.fields[from..to]);
                        from = to;
                    }
                    self.records += 1;
                    let count = ends_len as u64;
                    return match self.expected_fields {
                        None => {
                            self.expected_fields = Some(count);
                            Ok(true)
                        }
                        Some(expected) if expected == count => Ok(true),
                        Some(expected) => Err(FeedError::BadRow {
                            location: Location {
                                file: self.file.clone(),
                                line,
                                column: 0,
                            },
                            message: format!(
                                "{count} fields, expected {expected} as in the header"
                            ),
                        }),
                    };
                }
                ReadRecordResult::End => {
                    self.state = InputState::End;
                    return Ok(false);
                }
            }
        }
    }

    /// The next row by the fast path, when it is a plain one wholly in the buffer.
    #[inline(always)]
    fn next_fast<T: FeedFloat>(&mut self) -> Option<Sample<T>> {
        if !self.after_newline || self.roles.is_empty() {
            return None;
        }
        let row = fast_row::<T>(&self.buffer[self.start..self.end], &self.roles)?;
        let line = self.core.line();
        self.core.set_line(line + 1);
        self.line = line;
        self.start += row.len;
        self.byte += row.len as u64;
        self.records += 1;
        let seq = self.row;
        self.row += 1;
        Some(Sample {
            seq,
            t: row.t.unwrap_or(seq as f64),
            raw: row.raw,
            reference: row.reference,
            temperature: row.temperature,
        })
    }

    fn location(&self, column: usize) -> Location {
        let line = self
            .record
            .position()
            .map(|p| p.line())
            .unwrap_or(self.row + 1);
        Location {
            file: self.file.clone(),
            line,
            column,
        }
    }

    /// The text of cell `index` when the whole record is valid UTF-8 and the cell's bounds
    /// fall on character boundaries (the common case: one validation per record instead of
    /// one per cell). `None` sends the caller to the cell-by-cell path.
    fn cell_text<'a>(&self, record: Option<&'a str>, index: usize) -> Option<&'a str> {
        record?.get(self.record.range(index)?)
    }

    fn time_cell(&self, record: Option<&str>, index: usize) -> Result<f64, FeedError> {
        if let Some(seconds) = self
            .cell_text(record, index)
            .and_then(|text| trim(text).parse::<f64>().ok())
        {
            return Ok(seconds);
        }
        let cell = self.record.get(index).unwrap_or(b"");
        if let Some(seconds) = parse_number::<f64>(cell) {
            return Ok(seconds);
        }
        if let Some(seconds) = parse_rfc3339(cell) {
            return Ok(seconds);
        }
        Err(FeedError::BadCell {
            location: self.location(index + 1),
            column: self.names.time.clone(),
            expected: "seconds or an RFC 3339 timestamp (2026-03-01T12:00:00Z)",
            found: shorten(cell),
        })
    }

    fn cell<T: FromStr>(
        &self,
        record: Option<&str>,
        index: usize,
        name: &str,
        optional: bool,
    ) -> Result<Option<T>, FeedError> {
        // Fast path: a number parsed from the record's text. Anything else (blank, bad
        // text, invalid UTF-8) takes the cell-by-cell path below, which decides and words
        // the outcome exactly as before.
        if let Some(value) = self
            .cell_text(record, index)
            .and_then(|text| trim(text).parse::<T>().ok())
        {
            return Ok(Some(value));
        }
        let cell = self.record.get(index).unwrap_or(b"");
        if cell.iter().all(|b| b.is_ascii_whitespace()) {
            if optional {
                return Ok(None);
            }
            return Err(FeedError::BadCell {
                location: self.location(index + 1),
                column: name.to_string(),
                expected: "a number (nan and inf are accepted as data)",
                found: String::new(),
            });
        }
        match parse_number(cell) {
            Some(value) => Ok(Some(value)),
            None if std::str::from_utf8(cell).is_err() => Err(FeedError::BadCell {
                location: self.location(index + 1),
                column: name.to_string(),
                expected: "a number in UTF-8 text (found invalid UTF-8)",
                found: shorten(cell),
            }),
            None => Err(FeedError::BadCell {
                location: self.location(index + 1),
                column: name.to_string(),
                expected: "a number (nan and inf are accepted as data)",
                found: shorten(cell),
            }),
        }
    }

    /// The next sample, `None` at the end of the feed. `seq` is the 0-based data-row index.
    #[inline]
    pub fn next_sample<T: FeedFloat>(&mut self) -> Option<Result<Sample<T>, FeedError>> {
        if let Some(sample) = self.next_fast::<T>() {
            return Some(Ok(sample));
        }
        self.next_general()
    }

    /// The next sample read by the state machine and parsed cell by cell.
    #[inline(never)]
    fn next_general<T: FeedFloat>(&mut self) -> Option<Result<Sample<T>, FeedError>> {
        match self.read_record() {
            Ok(false) => return None,
            Ok(true) => {}
            Err(error) => {
                self.row += 1;
                return Some(Err(error));
            }
        }
        let seq = self.row;
        self.row += 1;
        Some(self.parse_record(seq))
    }

    /// Parses up to `rows` more rows into `batch` (which it does not clear). Returns false
    /// when the feed is done: its end, an error reading it, or a bad row when `skip_bad` is
    /// off (the bad row is the batch's last).
    pub fn fill_batch<T: FeedFloat>(
        &mut self,
        batch: &mut Batch<T>,
        rows: usize,
        skip_bad: bool,
    ) -> bool {
        let target = batch.len() + rows;
        let more = loop {
            if batch.len() >= target {
                break true;
            }
            if let Some(sample) = self.next_fast::<T>() {
                batch.samples.push(sample);
                batch.lines.push(self.line);
                continue;
            }
            match self.next_general::<T>() {
                None => break false,
                Some(Ok(sample)) => {
                    batch.samples.push(sample);
                    batch.lines.push(self.line);
                }
                Some(Err(error)) => {
                    batch.errors.push((batch.samples.len(), error));
                    if !skip_bad {
                        break false;
                    }
                }
            }
        };
        batch.bytes = self.byte;
        more
    }

    fn parse_record<T: FeedFloat>(&self, seq: u64) -> Result<Sample<T>, FeedError> {
        let columns = self.columns;
        let names = &self.names;
        let record = std::str::from_utf8(self.record.as_slice()).ok();
        let t = match columns.time {
            Some(index) => self.time_cell(record, index)?,
            None => seq as f64,
        };
        let raw = self
            .cell::<T>(record, columns.raw, &names.raw, false)?
            .unwrap_or(T::NAN);
        let reference = match columns.reference {
            Some(index) => self.cell::<T>(record, index, &names.reference, true)?,
            None => None,
        };
        let temperature = match columns.temperature {
            Some(index) => self.cell::<T>(record, index, &names.temperature, true)?,
            None => None,
        };
        Ok(Sample {
            seq,
            t,
            raw,
            reference,
            temperature,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn feed(text: &str) -> Result<CsvFeed<&[u8]>, FeedError> {
        CsvFeed::new("feed.csv".into(), text.as_bytes(), &ColumnNames::default())
    }

    #[test]
    fn reads_columns_by_name() {
        let mut feed = feed("raw,extra,ref,t\n1.5,x,2,10\n2.5,y,,11\nnan,z,3,12\n").unwrap();
        let first: Sample<f64> = feed.next_sample().unwrap().unwrap();
        assert_eq!(
            (first.seq, first.t, first.raw, first.reference),
            (0, 10.0, 1.5, Some(2.0))
        );
        let second: Sample<f64> = feed.next_sample().unwrap().unwrap();
        assert_eq!(second.reference, None);
        let third: Sample<f64> = feed.next_sample().unwrap().unwrap();
        assert!(third.raw.is_nan());
        assert!(feed.next_sample::<f64>().is_none());
    }

    #[test]
    fn bad_cell_names_line_and_column() {
        let mut feed = feed("t,raw,ref\n0,1,1\n1,abc,2\n").unwrap();
        assert!(feed.next_sample::<f32>().unwrap().is_ok());
        let error = feed.next_sample::<f32>().unwrap().unwrap_err();
        assert_eq!(error.to_string(), "feed.csv:3:2: column `raw`: expected a number (nan and inf are accepted as data), found \"abc\"");
    }

    #[test]
    fn missing_raw_and_empty() {
        assert!(matches!(
            feed("t,ref\n1,2\n"),
            Err(FeedError::MissingColumn { .. })
        ));
        assert!(matches!(feed(""), Err(FeedError::Empty { .. })));
    }

    #[test]
    fn rfc3339_and_mapped_names() {
        let names = ColumnNames {
            time: "when".into(),
            raw: "counts".into(),
            ..ColumnNames::default()
        };
        let text = "when,counts\n2026-03-01T00:00:01Z,5\n2026-03-01T01:00:01+01:00,x\n";
        let mut feed = CsvFeed::new("f.csv".into(), text.as_bytes(), &names).unwrap();
        let first: Sample<f64> = feed.next_sample().unwrap().unwrap();
        // 2026-03-01T00:00:00Z is 1_772_323_200 s after the epoch (20513 days · 86400 s,
        // computed with Python 3 datetime).
        assert_eq!(first.t, 1_772_323_201.0);
        let error = feed.next_sample::<f64>().unwrap().unwrap_err().to_string();
        assert!(error.starts_with("f.csv:3:2: column `counts`"), "{error}");
    }

    #[test]
    fn wrong_field_count() {
        let mut feed = feed("t,raw,ref\n0,1,1\n1,2\n").unwrap();
        assert!(feed.next_sample::<f32>().unwrap().is_ok());
        let error = feed.next_sample::<f32>().unwrap().unwrap_err();
        assert!(
            error
                .to_string()
                .starts_with("feed.csv:3: 2 fields, expected 3"),
            "{error}"
        );
    }
}
