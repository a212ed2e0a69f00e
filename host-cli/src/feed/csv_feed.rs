//! [`CsvFeed`]: the feed reader. It reads the header, finds the columns by name, and turns
//! each row into a sample by the fast path or, for any other row, by the record reader and
//! a parse cell by cell that words every error.

use std::io::Read;
use std::path::Path;
use std::str::FromStr;

use steadycal_core::sample::Sample;

use super::cell::{parse_number, parse_rfc3339, shorten, trim};
use super::fast_row::{fast_row, Role};
use super::records::RecordReader;
use super::{Batch, ColumnNames, FeedError, FeedFloat, Location};

#[derive(Clone, Copy, Debug)]
struct ColumnIndex {
    time: Option<usize>,
    raw: usize,
    reference: Option<usize>,
    temperature: Option<usize>,
}

/// A streaming reader of a CSV feed.
///
/// Records are split by the record reader ([`super::records`]); a row that is a plain line
/// of unquoted numeric cells takes the fast path ([`super::fast_row`]) that splits and
/// parses it straight from the read buffer; any other row is read by the state machine and
/// parsed cell by cell, which words every error.
pub struct CsvFeed<R: Read> {
    reader: RecordReader<R>,
    roles: Box<[Role]>,
    columns: ColumnIndex,
    names: ColumnNames,
    row: u64,
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
            reader: RecordReader::new(file, input),
            roles: Box::new([]),
            columns: ColumnIndex {
                time: None,
                raw: 0,
                reference: None,
                temperature: None,
            },
            names: names.clone(),
            row: 0,
        };
        feed.reader.read_record()?;
        let header = std::mem::take(&mut feed.reader.record);
        let file = &feed.reader.file;
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
        &self.reader.file
    }

    /// 1-based line number of the last record read (0 before the first).
    pub fn line(&self) -> u64 {
        self.reader.line()
    }

    /// Bytes of input consumed so far (for progress bars).
    pub fn bytes_read(&self) -> u64 {
        self.reader.bytes_read()
    }

    /// True when the feed has a time column.
    pub fn has_time(&self) -> bool {
        self.columns.time.is_some()
    }

    /// The next row by the fast path, when it is a plain one wholly in the buffer.
    #[inline(always)]
    fn next_fast<T: FeedFloat>(&mut self) -> Option<Sample<T>> {
        if self.roles.is_empty() {
            return None;
        }
        let row = fast_row::<T>(self.reader.at_line_start()?, &self.roles)?;
        self.reader.consume_row(row.len);
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
            .reader
            .record
            .position()
            .map(|p| p.line())
            .unwrap_or(self.row + 1);
        Location {
            file: self.reader.file.clone(),
            line,
            column,
        }
    }

    /// The text of cell `index` when the whole record is valid UTF-8 and the cell's bounds
    /// fall on character boundaries (the common case: one validation per record instead of
    /// one per cell). `None` sends the caller to the cell-by-cell path.
    fn cell_text<'a>(&self, record: Option<&'a str>, index: usize) -> Option<&'a str> {
        record?.get(self.reader.record.range(index)?)
    }

    fn time_cell(&self, record: Option<&str>, index: usize) -> Result<f64, FeedError> {
        if let Some(seconds) = self
            .cell_text(record, index)
            .and_then(|text| trim(text).parse::<f64>().ok())
        {
            return Ok(seconds);
        }
        let cell = self.reader.record.get(index).unwrap_or(b"");
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
        let cell = self.reader.record.get(index).unwrap_or(b"");
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
        match self.reader.read_record() {
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
                batch.lines.push(self.reader.line());
                continue;
            }
            match self.next_general::<T>() {
                None => break false,
                Some(Ok(sample)) => {
                    batch.samples.push(sample);
                    batch.lines.push(self.reader.line());
                }
                Some(Err(error)) => {
                    batch.errors.push((batch.samples.len(), error));
                    if !skip_bad {
                        break false;
                    }
                }
            }
        };
        batch.bytes = self.reader.bytes_read();
        more
    }

    fn parse_record<T: FeedFloat>(&self, seq: u64) -> Result<Sample<T>, FeedError> {
        let columns = self.columns;
        let names = &self.names;
        let record = std::str::from_utf8(self.reader.record.as_slice()).ok();
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
