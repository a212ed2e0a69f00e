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

/// A streaming reader of a CSV feed.
pub struct CsvFeed<R: Read> {
    file: String,
    reader: csv::Reader<R>,
    columns: ColumnIndex,
    names: ColumnNames,
    record: csv::ByteRecord,
    row: u64,
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
            Box::new(std::io::BufReader::with_capacity(1 << 16, std::io::stdin()))
        } else {
            let handle = std::fs::File::open(path).map_err(|source| FeedError::Io {
                file: file.clone(),
                source,
            })?;
            Box::new(std::io::BufReader::with_capacity(1 << 16, handle))
        };
        CsvFeed::new(file, input, names)
    }
}

impl<R: Read> CsvFeed<R> {
    /// Reads the header of a feed from any reader.
    pub fn new(file: String, input: R, names: &ColumnNames) -> Result<Self, FeedError> {
        let mut reader = csv::ReaderBuilder::new()
            .has_headers(true)
            .flexible(false)
            .from_reader(input);
        let header = match reader.byte_headers() {
            Ok(header) => header.clone(),
            Err(error) => return Err(csv_error(&file, error)),
        };
        if header.is_empty() || (header.len() == 1 && header[0].is_empty()) {
            return Err(FeedError::Empty { file });
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
        Ok(CsvFeed {
            file,
            reader,
            columns,
            names: names.clone(),
            record: csv::ByteRecord::new(),
            row: 0,
        })
    }

    /// The file name as given.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// 1-based line number of the last record read (0 before the first).
    pub fn line(&self) -> u64 {
        self.record.position().map(|p| p.line()).unwrap_or(0)
    }

    /// Bytes of input consumed so far (for progress bars).
    pub fn bytes_read(&self) -> u64 {
        self.reader.position().byte()
    }

    /// True when the feed has a time column.
    pub fn has_time(&self) -> bool {
        self.columns.time.is_some()
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
    pub fn next_sample<T: Real + FromStr>(&mut self) -> Option<Result<Sample<T>, FeedError>> {
        match self.reader.read_byte_record(&mut self.record) {
            Ok(false) => return None,
            Ok(true) => {}
            Err(error) => {
                self.row += 1;
                return Some(Err(csv_error(&self.file, error)));
            }
        }
        let seq = self.row;
        self.row += 1;
        Some(self.parse_record(seq))
    }

    fn parse_record<T: Real + FromStr>(&self, seq: u64) -> Result<Sample<T>, FeedError> {
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

fn csv_error(file: &str, error: csv::Error) -> FeedError {
    let line = error.position().map(|p| p.line()).unwrap_or(0);
    let location = Location {
        file: file.to_string(),
        line,
        column: 0,
    };
    match error.into_kind() {
        csv::ErrorKind::Io(source) => FeedError::Io {
            file: file.to_string(),
            source,
        },
        csv::ErrorKind::Utf8 { err, .. } => FeedError::BadRow {
            location: Location {
                column: err.field() + 1,
                ..location
            },
            message: "invalid UTF-8, expected text".into(),
        },
        csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => FeedError::BadRow {
            location,
            message: format!("{len} fields, expected {expected_len} as in the header"),
        },
        other => FeedError::BadRow {
            location,
            message: format!("malformed CSV: {other:?}"),
        },
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
