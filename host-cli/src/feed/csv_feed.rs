//! [`CsvFeed`]: the feed reader. It reads the header, finds the columns by name, and turns
//! each row into a sample by the fast path or, for any other row, by the record reader and
//! a parse cell by cell that words every error.
//!
//! Missing cells: a value cell whose text is a missing marker ([`MissingMarkers`]: empty
//! and `NA` always, and the markers declared with [`CsvFeed::with_missing`]) holds no value.
//! A row whose `raw` cell is missing is no sample: it is counted ([`CsvFeed::missing_raw`])
//! and skipped, its data-row index (`seq`) left unused as in an Arrow source; a missing
//! `ref` makes the row a reading, a missing `temp` is passed on as absent. Every missing
//! cell is counted by column and marker ([`CsvFeed::missing_tally`]). A time cell that is
//! a marker is a bad row, as before. `nan` and `inf` are data, never markers.
//!
//! The fast path reads rows with no marker but the empty cell (a number parsed from a
//! marker's text such as `-200` would be a value there): when numeric markers are
//! declared, every row takes the general path, which matches a cell's text as the marker
//! set does.

use std::io::Read;
use std::path::Path;
use std::str::FromStr;

use steadycal_core::sample::Sample;

use super::cell::{parse_number, parse_rfc3339, shorten, trim};
use super::fast_row::{fast_row, Role};
use super::records::RecordReader;
use super::{Batch, ColumnNames, FeedError, FeedFloat, Location};
use crate::field::missing::{MissingMarkers, MissingTally};

/// A value cell of the general path: a number, or the missing marker at this position of
/// [`MissingMarkers::texts`].
enum Cell<T> {
    Value(T),
    Missing(usize),
}

/// Value columns in the order their missing cells are counted.
const RAW: usize = 0;
const REFERENCE: usize = 1;
const TEMPERATURE: usize = 2;

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
    /// The roles as found in the header (`roles` is emptied to turn the fast path off).
    header_roles: Box<[Role]>,
    columns: ColumnIndex,
    names: ColumnNames,
    row: u64,
    missing: MissingMarkers,
    /// Rows whose raw cell was missing.
    missing_raw: u64,
    /// Missing cells: `[raw, ref, temp]` counts per marker of `missing.texts()`.
    missing_cells: Vec<[u64; 3]>,
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
            header_roles: Box::new([]),
            missing: MissingMarkers::default(),
            missing_raw: 0,
            missing_cells: vec![[0; 3]; MissingMarkers::default().texts().len()],
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
        feed.header_roles = feed.roles.clone();
        feed.columns = columns;
        Ok(feed)
    }

    /// Reads `markers` (which hold the defaults, empty and `NA`) as missing cells. With a
    /// numeric marker every row takes the general path (see the module notes).
    pub fn with_missing(mut self, markers: &MissingMarkers) -> Self {
        self.missing = markers.clone();
        self.missing_cells = vec![[0; 3]; markers.texts().len()];
        self.roles = if markers.values().is_empty() {
            self.header_roles.clone()
        } else {
            Box::new([])
        };
        self
    }

    /// Rows whose raw cell was missing (no sample), so far.
    pub fn missing_raw(&self) -> u64 {
        self.missing_raw
    }

    /// Missing cells so far, every column and marker together (cheap: to notice a change).
    pub fn missing_cells(&self) -> u64 {
        self.missing_cells.iter().flatten().sum()
    }

    /// Missing cells so far, by column and marker.
    pub fn missing_tally(&self) -> MissingTally {
        let mut tally = MissingTally::default();
        let names = [
            &self.names.raw,
            &self.names.reference,
            &self.names.temperature,
        ];
        for (marker, counts) in self.missing.texts().iter().zip(&self.missing_cells) {
            for (name, &count) in names.iter().zip(counts) {
                if count > 0 {
                    tally.add(name, marker, count);
                }
            }
        }
        tally
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
        // An empty `ref` or `temp` cell (the fast path's only missing cell): counted under
        // the empty marker, which is the first of every marker set.
        self.missing_cells[0][REFERENCE] +=
            u64::from(row.reference.is_none() & self.columns.reference.is_some());
        self.missing_cells[0][TEMPERATURE] +=
            u64::from(row.temperature.is_none() & self.columns.temperature.is_some());
        Some(Sample {
            seq,
            t: row.t.unwrap_or(seq as f64),
            raw: row.raw,
            reference: row.reference,
            temperature: row.temperature,
            averaged: 1,
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
    ) -> Result<Cell<T>, FeedError> {
        // Fast path: a number parsed from the record's text, unless numeric markers are
        // declared (then the text is matched first). Anything else (a marker, bad text,
        // invalid UTF-8) takes the cell-by-cell path below, which decides and words the
        // outcome.
        if let Some(text) = self.cell_text(record, index) {
            let text = trim(text);
            if let Ok(value) = text.parse::<T>() {
                if self.missing.values().is_empty() {
                    return Ok(Cell::Value(value));
                }
                return Ok(match self.missing.index_of(text) {
                    Some(marker) => Cell::Missing(marker),
                    None => Cell::Value(value),
                });
            }
        }
        let cell = self.reader.record.get(index).unwrap_or(b"");
        if let Some(marker) = std::str::from_utf8(cell)
            .ok()
            .and_then(|text| self.missing.index_of(text))
        {
            return Ok(Cell::Missing(marker));
        }
        match parse_number(cell) {
            Some(value) => Ok(Cell::Value(value)),
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
        loop {
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
            match self.parse_record(seq) {
                Ok(Some(sample)) => return Some(Ok(sample)),
                // A missing raw cell: no sample, the next row.
                Ok(None) => continue,
                Err(error) => return Some(Err(error)),
            }
        }
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

    /// The sample of the record just read; `None` when its raw cell is missing. Every
    /// missing cell of the row is counted.
    fn parse_record<T: FeedFloat>(&mut self, seq: u64) -> Result<Option<Sample<T>>, FeedError> {
        let columns = self.columns;
        let names = &self.names;
        let record = std::str::from_utf8(self.reader.record.as_slice()).ok();
        let t = match columns.time {
            Some(index) => self.time_cell(record, index)?,
            None => seq as f64,
        };
        let raw = self.cell::<T>(record, columns.raw, &names.raw)?;
        let reference = match columns.reference {
            Some(index) => Some(self.cell::<T>(record, index, &names.reference)?),
            None => None,
        };
        let temperature = match columns.temperature {
            Some(index) => Some(self.cell::<T>(record, index, &names.temperature)?),
            None => None,
        };
        let mut value = |cell: Option<Cell<T>>, column: usize| match cell? {
            Cell::Value(value) => Some(value),
            Cell::Missing(marker) => {
                self.missing_cells[marker][column] += 1;
                None
            }
        };
        let raw = value(Some(raw), RAW);
        let reference = value(reference, REFERENCE);
        let temperature = value(temperature, TEMPERATURE);
        let Some(raw) = raw else {
            self.missing_raw += 1;
            return Ok(None);
        };
        Ok(Some(Sample {
            seq,
            t,
            raw,
            reference,
            temperature,
            averaged: 1,
        }))
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
    fn empty_and_na_cells_are_missing_and_counted() {
        // Rows 2 and 4 go to the general path (`NA`), the others take the fast path.
        let text = "t,raw,ref,temp\n0,1,2,20\n1,,3,\n2,NA,,21\n3,4,na,\n4,5,,22\n";
        let mut feed = feed(text).unwrap();
        let got: Vec<(u64, f64, Option<f64>, Option<f64>)> =
            std::iter::from_fn(|| feed.next_sample::<f64>())
                .map(|s| s.unwrap())
                .map(|s| (s.seq, s.raw, s.reference, s.temperature))
                .collect();
        assert_eq!(
            got,
            [
                (0, 1.0, Some(2.0), Some(20.0)),
                (3, 4.0, None, None),
                (4, 5.0, None, Some(22.0))
            ]
        );
        assert_eq!(feed.missing_raw(), 2);
        let tally = feed.missing_tally();
        assert_eq!(tally.by_column["raw"][""], 1);
        assert_eq!(tally.by_column["raw"]["NA"], 1);
        assert_eq!(tally.by_column["ref"][""], 2);
        assert_eq!(tally.by_column["ref"]["NA"], 1);
        assert_eq!(tally.by_column["temp"][""], 2);
    }

    #[test]
    fn declared_markers_are_never_values() {
        let markers = MissingMarkers::new(&["-200", "-9999.9"]).unwrap();
        let text = "t,raw,ref\n0,1,-200\n1,-200.0,5\n2,-9999.9,\n3,-2e2,7\n4,-199,8\n";
        let mut feed = feed(text).unwrap().with_missing(&markers);
        // f32: the marker is matched on the cell's text, not on the f32 value (-9999.9 has
        // no exact f32).
        let got: Vec<(u64, f32, Option<f32>)> = std::iter::from_fn(|| feed.next_sample::<f32>())
            .map(|s| s.unwrap())
            .map(|s| (s.seq, s.raw, s.reference))
            .collect();
        assert_eq!(got, [(0, 1.0, None), (4, -199.0, Some(8.0))]);
        assert_eq!(feed.missing_raw(), 3);
        let tally = feed.missing_tally();
        assert_eq!(tally.by_column["raw"]["-200"], 2);
        assert_eq!(tally.by_column["raw"]["-9999.9"], 1);
        assert_eq!(tally.by_column["ref"]["-200"], 1);
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
