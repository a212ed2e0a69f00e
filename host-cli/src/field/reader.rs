//! Reading a log as a logger wrote it: any one-byte separator, a decimal comma, the time in
//! one column or spread over several (joined with one space), any [`TimeReader`] form,
//! missing markers, one or several sensor columns, a channel column. A reader may keep only
//! the rows of one channel of a long file ([`LogLayout::only_channel`]); the others are
//! passed over without reading their cells. [`LogReader::next_shape`] reads what a file of
//! many channels holds (the channel names, rows without any sensor value) without parsing
//! numbers.
//!
//! Records are split by the `csv` crate (the one the canonical reader's tests compare
//! against). A row whose every cell is blank (a spreadsheet's trailing `;;;;` rows) is
//! skipped and counted; it keeps its data-row index, as the canonical reader's row without
//! a raw value does ([`LogRow::index`]). A cell that is a missing marker gives no value and is counted by
//! column and marker ([`MissingTally`]); any other cell that is not a number stops the row
//! with a [`FeedError`] naming file, line, column and what was expected.
//!
//! Invariants: never panics on any input; memory is flat in the log's length (one record
//! buffer, one row buffer).

use std::io::Read;
use std::path::Path;

use crate::feed::decimal::parse_cell;
use crate::feed::{FeedError, FeedFloat, Location};
use crate::field::missing::{MissingMarkers, MissingTally};
use crate::field::time::{join_cells, TimeForm, TimeReader};

/// Where the columns of a log are and how its cells are written.
#[derive(Clone, Debug)]
pub struct LogLayout {
    /// Field separator (`,` by default; `;` and tab are common).
    pub separator: u8,
    /// Numbers are written with a decimal comma (`0,7578`).
    pub decimal_comma: bool,
    /// Time columns, joined with one space; `None`: `t` when the header has it, else the
    /// data-row index.
    pub time: Option<Vec<String>>,
    /// How time cells are read.
    pub time_reader: TimeReader,
    /// Sensor (raw) columns: one, or several for a wide file of many sensors. Empty: this
    /// log has no sensor column (a reference log).
    pub raw: Vec<String>,
    /// Reference column, when the log has one (`None`: none is looked for).
    pub reference: Option<String>,
    /// The reference column must exist (a reference log).
    pub reference_required: bool,
    /// Temperature column, used when present.
    pub temperature: Option<String>,
    /// Channel column of a long file.
    pub channel: Option<String>,
    /// Keep only the rows whose channel cell is this name (the channel column must be
    /// set); the other rows are passed over unread and take no row index.
    pub only_channel: Option<String>,
    /// Missing markers.
    pub missing: MissingMarkers,
}

impl Default for LogLayout {
    fn default() -> Self {
        LogLayout {
            separator: b',',
            decimal_comma: false,
            time: None,
            time_reader: TimeReader::default(),
            raw: vec!["raw".into()],
            reference: Some("ref".into()),
            reference_required: false,
            temperature: Some("temp".into()),
            channel: None,
            only_channel: None,
            missing: MissingMarkers::default(),
        }
    }
}

/// What one row of a file of many channels holds, read without parsing numbers
/// ([`LogReader::next_shape`]).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct RowShape {
    /// 1-based line.
    pub line: u64,
    /// The channel cell (trimmed; empty without a channel column).
    pub channel: String,
    /// Every sensor column of the layout holds a missing marker (false without sensor
    /// columns).
    pub no_sensor_value: bool,
    /// The reference cell holds something other than a missing marker.
    pub has_reference: bool,
}

/// One row of a log.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LogRow<T> {
    /// Seconds since the epoch (or the data-row index when the log has no time).
    pub t: f64,
    /// One value per sensor column (`None`: missing).
    pub raw: Vec<Option<T>>,
    /// The reference value.
    pub reference: Option<T>,
    /// The temperature.
    pub temperature: Option<T>,
    /// The channel cell of a long file.
    pub channel: String,
    /// 1-based line.
    pub line: u64,
    /// 0-based index among the data rows (the records after the header: blank rows and
    /// bad rows counted, an empty line not; among one channel's rows when the reader keeps
    /// [`LogLayout::only_channel`]). A sample's `seq`.
    pub index: u64,
}

#[derive(Clone, Debug)]
struct Columns {
    time: Vec<usize>,
    time_name: String,
    raw: Vec<(usize, String)>,
    reference: Option<(usize, String)>,
    temperature: Option<(usize, String)>,
    channel: Option<usize>,
}

/// A streaming reader of a log.
pub struct LogReader {
    file: String,
    reader: csv::Reader<Box<dyn Read + Send>>,
    record: csv::ByteRecord,
    columns: Columns,
    time: TimeReader,
    only_channel: Option<String>,
    missing: MissingMarkers,
    decimal_comma: bool,
    text: String,
    number: Vec<u8>,
    header: Vec<String>,
    rows: u64,
    /// Cells removed as missing, by column and marker.
    pub tally: MissingTally,
    /// Rows whose every cell is blank, skipped.
    pub blank_rows: u64,
}

fn shorten(text: &str) -> String {
    let mut out: String = text.chars().take(40).collect();
    if text.chars().count() > 40 {
        out.push('…');
    }
    out
}

impl LogReader {
    /// Opens a log file, or standard input for `-`.
    pub fn open(path: &Path, layout: &LogLayout) -> Result<Self, FeedError> {
        let file = path.display().to_string();
        let input: Box<dyn Read + Send> = if file == "-" {
            Box::new(std::io::stdin())
        } else {
            Box::new(std::fs::File::open(path).map_err(|source| FeedError::Io {
                file: file.clone(),
                source,
            })?)
        };
        LogReader::new(file, input, layout)
    }

    /// Reads the header of a log from any reader.
    pub fn new(
        file: String,
        input: Box<dyn Read + Send>,
        layout: &LogLayout,
    ) -> Result<Self, FeedError> {
        let mut reader = csv::ReaderBuilder::new()
            .delimiter(layout.separator)
            .has_headers(false)
            .buffer_capacity(1 << 16)
            .from_reader(input);
        let mut record = csv::ByteRecord::new();
        let read = reader
            .read_byte_record(&mut record)
            .map_err(|e| FeedError::BadRow {
                location: Location {
                    file: file.clone(),
                    line: 1,
                    column: 0,
                },
                message: format!("cannot read the header: {e}"),
            })?;
        if !read || record.iter().all(|c| c.iter().all(u8::is_ascii_whitespace)) {
            return Err(FeedError::Empty { file });
        }
        let header: Vec<String> = record
            .iter()
            .map(|c| String::from_utf8_lossy(c).trim().to_string())
            .collect();
        let found = header
            .iter()
            .map(|h| shorten(h))
            .collect::<Vec<_>>()
            .join(", ");
        let find = |name: &str| header.iter().position(|h| h == name);
        let need = |name: &str| {
            find(name).ok_or_else(|| FeedError::MissingColumn {
                file: file.clone(),
                column: name.to_string(),
                found: found.clone(),
            })
        };
        let (time, time_name) = match &layout.time {
            Some(names) => {
                let indices = names
                    .iter()
                    .map(|n| need(n))
                    .collect::<Result<Vec<_>, _>>()?;
                (indices, names.join(","))
            }
            None => match find("t") {
                Some(index) => (vec![index], "t".to_string()),
                None => (Vec::new(), String::new()),
            },
        };
        let raw = layout
            .raw
            .iter()
            .map(|n| need(n).map(|i| (i, n.clone())))
            .collect::<Result<Vec<_>, _>>()?;
        let reference = match &layout.reference {
            Some(name) if layout.reference_required => Some((need(name)?, name.clone())),
            Some(name) => find(name).map(|i| (i, name.clone())),
            None => None,
        };
        let temperature = layout
            .temperature
            .as_ref()
            .and_then(|name| find(name).map(|i| (i, name.clone())));
        let channel = layout.channel.as_deref().map(need).transpose()?;
        Ok(LogReader {
            file,
            reader,
            record,
            columns: Columns {
                time,
                time_name,
                raw,
                reference,
                temperature,
                channel,
            },
            time: layout.time_reader.clone(),
            only_channel: layout.only_channel.clone(),
            missing: layout.missing.clone(),
            decimal_comma: layout.decimal_comma,
            text: String::new(),
            number: Vec::new(),
            header,
            rows: 0,
            tally: MissingTally::default(),
            blank_rows: 0,
        })
    }

    /// The file name as given.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// The header's column names.
    pub fn header(&self) -> &[String] {
        &self.header
    }

    /// True when the log has a time column.
    pub fn has_time(&self) -> bool {
        !self.columns.time.is_empty()
    }

    /// True when the log has a reference column.
    pub fn has_reference(&self) -> bool {
        self.columns.reference.is_some()
    }

    /// Bytes read so far.
    pub fn bytes_read(&self) -> u64 {
        self.reader.position().byte()
    }

    /// The sensor column names.
    pub fn raw_names(&self) -> Vec<String> {
        self.columns.raw.iter().map(|(_, n)| n.clone()).collect()
    }

    fn location(&self, line: u64, column: usize) -> Location {
        Location {
            file: self.file.clone(),
            line,
            column,
        }
    }

    /// Reads the next record that is not blank (blank ones are counted); `None` at the end,
    /// `Some(Err)` for a record the CSV reader refuses (its line named).
    fn next_record(&mut self) -> Option<Result<(), FeedError>> {
        loop {
            match self.reader.read_byte_record(&mut self.record) {
                Ok(false) => return None,
                Ok(true) => {}
                Err(error) => {
                    let line = error.position().map(|p| p.line()).unwrap_or(0);
                    let message = match error.kind() {
                        csv::ErrorKind::UnequalLengths {
                            expected_len, len, ..
                        } => format!("{len} fields, expected {expected_len} as in the header"),
                        _ => format!("cannot read the row: {error}"),
                    };
                    self.rows += 1;
                    return Some(Err(FeedError::BadRow {
                        location: self.location(line, 0),
                        message,
                    }));
                }
            }
            // Every cell blank (the cells lie end to end in one slice).
            if self.record.as_slice().iter().all(u8::is_ascii_whitespace) {
                self.blank_rows += 1;
                // A data row all the same (not one of a kept channel's rows).
                self.rows += u64::from(self.only_channel.is_none());
                continue;
            }
            return Some(Ok(()));
        }
    }

    /// The trimmed text of cell `index` of the current record (empty when absent or not
    /// UTF-8).
    fn cell_text(&self, index: usize) -> &str {
        std::str::from_utf8(self.record.get(index).unwrap_or(b""))
            .unwrap_or("")
            .trim()
    }

    /// What the next row holds (channel cell, whether every sensor cell and the reference
    /// cell are missing markers), without parsing numbers or times; `None` at the end.
    /// Nothing is counted in the tallies.
    pub fn next_shape(&mut self) -> Option<Result<RowShape, FeedError>> {
        if let Err(error) = self.next_record()? {
            return Some(Err(error));
        }
        let line = self.record.position().map(|p| p.line()).unwrap_or(0);
        let columns = &self.columns;
        let missing = |i: usize| {
            let text = self.cell_text(i);
            if self.decimal_comma {
                self.missing.index_of_comma(text).is_some()
            } else {
                self.missing.is_missing(text)
            }
        };
        Some(Ok(RowShape {
            line,
            channel: columns
                .channel
                .map(|i| self.cell_text(i).to_string())
                .unwrap_or_default(),
            no_sensor_value: !columns.raw.is_empty()
                && columns.raw.iter().all(|&(i, _)| missing(i)),
            has_reference: columns
                .reference
                .as_ref()
                .is_some_and(|&(i, _)| !missing(i)),
        }))
    }

    /// Reads the next row into `row`; `None` at the end.
    pub fn next_row<T: FeedFloat>(&mut self, row: &mut LogRow<T>) -> Option<Result<(), FeedError>> {
        loop {
            if let Err(error) = self.next_record()? {
                return Some(Err(error));
            }
            let wanted = match (&self.only_channel, self.columns.channel) {
                (Some(name), Some(index)) => self.cell_text(index) == name,
                _ => true,
            };
            if wanted {
                break;
            }
        }
        let line = self.record.position().map(|p| p.line()).unwrap_or(0);
        row.line = line;
        row.index = self.rows;
        self.rows += 1;
        Some(self.parse(row, line))
    }

    fn parse<T: FeedFloat>(&mut self, row: &mut LogRow<T>, line: u64) -> Result<(), FeedError> {
        row.t = if self.columns.time.is_empty() {
            row.index as f64
        } else {
            self.time_cell(line)?
        };
        row.raw.clear();
        for k in 0..self.columns.raw.len() {
            let (index, _) = self.columns.raw[k];
            let value = self.value::<T>(index, Column::Raw(k), line)?;
            row.raw.push(value);
        }
        row.reference = match self.columns.reference {
            Some((index, _)) => self.value(index, Column::Reference, line)?,
            None => None,
        };
        row.temperature = match self.columns.temperature {
            Some((index, _)) => self.value(index, Column::Temperature, line)?,
            None => None,
        };
        row.channel.clear();
        if let Some(index) = self.columns.channel {
            let cell = self.record.get(index).unwrap_or(b"");
            row.channel.push_str(String::from_utf8_lossy(cell).trim());
        }
        Ok(())
    }

    fn time_cell(&mut self, line: u64) -> Result<f64, FeedError> {
        if let ([index], TimeForm::Auto) = (self.columns.time.as_slice(), self.time.form()) {
            // Seconds in one column, the common case: the cell's bytes straight to the fast
            // cell parser (no joining, no UTF-8 check). Anything else takes the path below,
            // which gives the same value for these cells. Callgrind, 2·10^5 sensor rows
            // joined with 10^5 reference rows: 445 instructions per time cell by the path
            // below, see the commit message for the figure with this one.
            let cell = self.record.get(*index).unwrap_or(b"");
            if let Some(seconds) = whole_cell::<f64>(&mut self.number, cell) {
                if seconds.is_finite() {
                    return Ok(seconds);
                }
            }
        }
        let record = &self.record;
        let cells = self
            .columns
            .time
            .iter()
            .map(|&i| std::str::from_utf8(record.get(i).unwrap_or(b"")).unwrap_or("\u{fffd}"));
        join_cells(cells, &mut self.text);
        if self.time.form() == &TimeForm::Auto {
            // Seconds, the common case, by the fast cell parser.
            self.number.clear();
            self.number.extend_from_slice(self.text.as_bytes());
            self.number.push(b'\n');
            if let Some((seconds, length)) = parse_cell::<f64>(&self.number, b'\n') {
                if length == self.number.len() && seconds.is_finite() {
                    return Ok(seconds);
                }
            }
        }
        if let Some(seconds) = self.time.seconds(&self.text) {
            return Ok(seconds);
        }
        let column = self.columns.time[0] + 1;
        Err(FeedError::BadRow {
            location: self.location(line, column),
            message: format!(
                "column `{}`: expected {} (zone {}), found {:?}",
                self.columns.time_name,
                self.time.expected(),
                self.time.zone_name(),
                shorten(&self.text)
            ),
        })
    }

    fn value<T: FeedFloat>(
        &mut self,
        index: usize,
        column: Column,
        line: u64,
    ) -> Result<Option<T>, FeedError> {
        let name = match column {
            Column::Raw(k) => &self.columns.raw[k].1,
            Column::Reference => &self.columns.reference.as_ref().expect("present").1,
            Column::Temperature => &self.columns.temperature.as_ref().expect("present").1,
        };
        let cell = self.record.get(index).unwrap_or(b"");
        if !self.decimal_comma {
            // A plain number that is no numeric marker, the common case: parsed from the
            // cell's bytes (no UTF-8 check, no trimming, no text-marker comparison). A
            // cell the fast parser takes is a number for `str::parse`, so it can only
            // match a text marker that is a number of the same value; with numeric
            // markers declared, the cell's number is read in f64 (as the marker test
            // below reads it, never narrowed) and one equal to a marker takes the path
            // below. Callgrind (as in `time_cell`): 740 instructions per numeric cell by
            // the path below.
            if let Some(value) = whole_cell::<T>(&mut self.number, cell) {
                let values = self.missing.values();
                let no_marker = values.is_empty()
                    || matches!(
                        parse_cell::<f64>(&self.number, b'\n'),
                        Some((wide, length)) if length == self.number.len() && !values.contains(&wide)
                    );
                if no_marker {
                    return Ok(Some(value));
                }
            }
        }
        let Ok(text) = std::str::from_utf8(cell) else {
            return Err(FeedError::BadRow {
                location: self.location(line, index + 1),
                message: format!(
                    "column `{name}`: expected a number in UTF-8 text (found invalid UTF-8)"
                ),
            });
        };
        let text = text.trim();
        // Markers are matched on the cell's text (a numeric marker by the text's number in
        // f64), as the canonical reader does, never on the value narrowed to the run's
        // float type: in f32, `-9999.9` is no f64 marker and `-200.000001` reads as -200.
        let marker = if self.decimal_comma {
            self.missing.index_of_comma(text)
        } else {
            self.missing.index_of(text)
        };
        if let Some(marker) = marker {
            self.tally.count(name, &self.missing.texts()[marker]);
            return Ok(None);
        }
        // The canonical reader's cell parser (bit for bit `str::parse`, faster on plain
        // decimals) on the cell's text, a decimal comma turned into a point.
        self.number.clear();
        if self.decimal_comma {
            self.number
                .extend(text.bytes().map(|b| if b == b',' { b'.' } else { b }));
        } else {
            self.number.extend_from_slice(text.as_bytes());
        }
        self.number.push(b'\n');
        let parsed = match parse_cell::<T>(&self.number, b'\n') {
            Some((value, length)) if length == self.number.len() => Some(value),
            _ => std::str::from_utf8(&self.number[..self.number.len() - 1])
                .ok()
                .and_then(|t| t.parse::<T>().ok()),
        };
        match parsed {
            Some(value) => Ok(Some(value)),
            None => Err(FeedError::BadRow {
                location: self.location(line, index + 1),
                message: format!(
                    "column `{name}`: expected a number{} or a missing marker ({}), found {:?}",
                    if self.decimal_comma {
                        " with a decimal comma"
                    } else {
                        ""
                    },
                    self.missing
                        .texts()
                        .iter()
                        .map(|m| format!("{m:?}"))
                        .collect::<Vec<_>>()
                        .join(", "),
                    shorten(text)
                ),
            }),
        }
    }
}

/// A whole cell by the canonical reader's cell parser (bit for bit `str::parse` of the
/// trimmed text), `number` holding the cell and a line end; `None` when the parser does not
/// take it all.
fn whole_cell<T: FeedFloat>(number: &mut Vec<u8>, cell: &[u8]) -> Option<T> {
    number.clear();
    number.extend_from_slice(cell);
    number.push(b'\n');
    match parse_cell::<T>(number, b'\n') {
        Some((value, length)) if length == number.len() => Some(value),
        _ => None,
    }
}

#[derive(Clone, Copy)]
enum Column {
    Raw(usize),
    Reference,
    Temperature,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn reader(text: &str, layout: &LogLayout) -> Result<LogReader, FeedError> {
        LogReader::new(
            "log.csv".into(),
            Box::new(std::io::Cursor::new(text.as_bytes().to_vec())),
            layout,
        )
    }

    fn rows(text: &str, layout: &LogLayout) -> Vec<Result<LogRow<f64>, String>> {
        let mut r = reader(text, layout).unwrap();
        let mut out = Vec::new();
        loop {
            let mut row = LogRow::default();
            match r.next_row::<f64>(&mut row) {
                None => return out,
                Some(Ok(())) => out.push(Ok(row)),
                Some(Err(e)) => out.push(Err(e.to_string())),
            }
        }
    }

    fn logger_layout() -> LogLayout {
        LogLayout {
            separator: b';',
            decimal_comma: true,
            time: Some(vec!["Date".into(), "Time".into()]),
            time_reader: TimeReader::new(Some("%d/%m/%Y %H.%M.%S"), None, None).unwrap(),
            raw: vec!["S1".into()],
            reference: Some("CO".into()),
            temperature: Some("T".into()),
            missing: MissingMarkers::new(&["-200"]).unwrap(),
            ..LogLayout::default()
        }
    }

    #[test]
    fn a_logger_file_with_two_time_columns_and_a_decimal_comma() {
        let text = "Date;Time;CO;S1;T;;\n01/03/2026;18.00.00;2,6;1360;13,6;;\n01/03/2026;19.00.00;-200;1292;-200;;\n;;;;;;\n";
        let mut r = reader(text, &logger_layout()).unwrap();
        let mut row = LogRow::<f64>::default();
        r.next_row(&mut row).unwrap().unwrap();
        // 2026-03-01T18:00:00Z = 1,772,323,200 + 64,800 s (Python 3 datetime).
        assert_eq!(row.t, 1_772_388_000.0);
        assert_eq!(
            (row.raw[0], row.reference, row.temperature),
            (Some(1360.0), Some(2.6), Some(13.6))
        );
        r.next_row(&mut row).unwrap().unwrap();
        assert_eq!(
            (row.raw[0], row.reference, row.temperature),
            (Some(1292.0), None, None)
        );
        assert!(r.next_row::<f64>(&mut row).is_none());
        assert_eq!(r.blank_rows, 1);
        assert_eq!(r.tally.column_total("CO"), 1);
        assert_eq!(r.tally.column_total("T"), 1);
    }

    #[test]
    fn a_time_cell_that_does_not_match_the_format_names_file_line_column_and_format() {
        let text = "Date;Time;CO;S1;T\n01/03/2026;18.00.00;1;2;3\n2026-03-01;19:00;1;2;3\n";
        let out = rows(text, &logger_layout());
        assert_eq!(
            out[1].as_ref().unwrap_err(),
            "log.csv:3:1: column `Date,Time`: expected a time in the format %d/%m/%Y %H.%M.%S (zone UTC), found \"2026-03-01 19:00\""
        );
    }

    #[test]
    fn a_time_column_that_is_not_there_is_named() {
        let text = "Date;CO;S1\n01/03/2026;1;2\n";
        let error = reader(text, &logger_layout()).err().unwrap().to_string();
        assert_eq!(
            error,
            "log.csv:1: no `Time` column in the header, expected one (found: Date, CO, S1)"
        );
    }

    #[test]
    fn a_bad_number_names_the_markers() {
        let text = "t,raw,ref\n0,1,2\n1,x,2\n";
        let out = rows(text, &LogLayout::default());
        assert_eq!(
            out[1].as_ref().unwrap_err(),
            "log.csv:3:2: column `raw`: expected a number or a missing marker (\"\", \"NA\"), found \"x\""
        );
    }

    #[test]
    fn wide_and_long_files() {
        let layout = LogLayout {
            raw: vec!["s1".into(), "s2".into(), "s3".into()],
            ..LogLayout::default()
        };
        let out = rows("t,s1,s2,s3,ref\n0,1,NA,3,9\n", &layout);
        assert_eq!(out[0].as_ref().unwrap().raw, [Some(1.0), None, Some(3.0)]);
        let layout = LogLayout {
            channel: Some("id".into()),
            ..LogLayout::default()
        };
        let out = rows("t,id,raw\n0,a,1\n0,b,2\n", &layout);
        assert_eq!(out[1].as_ref().unwrap().channel, "b");
    }

    #[test]
    fn one_channel_of_a_long_file_and_the_shape_of_rows() {
        let layout = LogLayout {
            channel: Some("id".into()),
            only_channel: Some("b".into()),
            ..LogLayout::default()
        };
        let out = rows("t,id,raw\n0,a,x\n0,b,2\n1,a,3\n1, b ,4\n", &layout);
        let got: Vec<(f64, Option<f64>, u64, u64)> = out
            .iter()
            .map(|r| {
                let r = r.as_ref().unwrap();
                (r.t, r.raw[0], r.line, r.index)
            })
            .collect();
        assert_eq!(got, [(0.0, Some(2.0), 3, 0), (1.0, Some(4.0), 5, 1)]);
        let layout = LogLayout {
            raw: vec!["s1".into(), "s2".into()],
            missing: MissingMarkers::new(&["-200"]).unwrap(),
            ..LogLayout::default()
        };
        let mut r = reader(
            "t,s1,s2,ref\n0,1,NA,\n1,-200,,5\n,,,\n2,x,-200,NA\n",
            &layout,
        )
        .unwrap();
        let shapes: Vec<(u64, bool, bool)> = std::iter::from_fn(|| r.next_shape())
            .map(|s| {
                let s = s.unwrap();
                (s.line, s.no_sensor_value, s.has_reference)
            })
            .collect();
        assert_eq!(
            shapes,
            [(2, false, false), (3, true, true), (5, false, false)]
        );
        assert_eq!(r.blank_rows, 1);
        assert_eq!(r.tally.column_total("s1"), 0);
    }

    #[test]
    fn a_point_decimal_marker_is_matched_on_the_text_in_f32() {
        // -9999.9 in f32 is no f64 marker; the cell's text is.
        let layout = LogLayout {
            missing: MissingMarkers::new(&["-9999.9", "-200"]).unwrap(),
            ..LogLayout::default()
        };
        let text = "t,raw,ref\n0,-9999.9,-200.0\n1,-200.000001,5\n2,-2e2,7\n";
        let mut r = reader(text, &layout).unwrap();
        let mut row = LogRow::<f32>::default();
        r.next_row(&mut row).unwrap().unwrap();
        assert_eq!((row.raw[0], row.reference), (None, None));
        r.next_row(&mut row).unwrap().unwrap();
        assert_eq!((row.raw[0], row.reference), (Some(-200.0f32), Some(5.0)));
        r.next_row(&mut row).unwrap().unwrap();
        assert_eq!(row.raw[0], None);
        assert_eq!(r.tally.by_column["raw"]["-9999.9"], 1);
        assert_eq!(r.tally.by_column["raw"]["-200"], 1);
        assert_eq!(r.tally.by_column["ref"]["-200"], 1);
    }

    #[test]
    fn numeric_markers_match_the_text_not_the_narrowed_value() {
        let layout = LogLayout {
            separator: b';',
            decimal_comma: true,
            missing: MissingMarkers::new(&["-9999.9", "-200"]).unwrap(),
            ..LogLayout::default()
        };
        let text = "t;raw;ref\n0;-9999,9;-200,0\n1;-200,000001;5\n";
        let mut r = reader(text, &layout).unwrap();
        let mut row = LogRow::<f32>::default();
        r.next_row(&mut row).unwrap().unwrap();
        assert_eq!((row.raw[0], row.reference), (None, None));
        r.next_row(&mut row).unwrap().unwrap();
        // -200.000001 is a measurement (it rounds to -200 in f32, which is no marker test).
        assert_eq!(row.raw[0], Some(-200.0f32));
        assert_eq!(r.tally.by_column["raw"]["-9999.9"], 1);
        assert_eq!(r.tally.by_column["ref"]["-200"], 1);
    }

    #[test]
    fn blank_rows_keep_their_data_row_index() {
        let out = rows("raw,ref\n1,1\n,\n3,3\n", &LogLayout::default());
        let got: Vec<(u64, f64)> = out
            .iter()
            .map(|r| {
                let r = r.as_ref().unwrap();
                (r.index, r.t)
            })
            .collect();
        assert_eq!(got, [(0, 0.0), (2, 2.0)]);
    }

    #[test]
    fn a_row_of_the_wrong_width() {
        let out = rows("t,raw\n0,1\n1,2,3\n", &LogLayout::default());
        assert_eq!(
            out[1].as_ref().unwrap_err(),
            "log.csv:3: 3 fields, expected 2 as in the header"
        );
    }
}
