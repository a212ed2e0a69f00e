//! The feed reader (`CsvFeed`: `csv_core` plus the fast path for plain rows) against the
//! reader it replaced, which read records with the `csv` crate's `Reader` and parsed every
//! cell through `str`. On random feeds (plain rows, quotes, blank lines, CR and CRLF line
//! ends, bad cells, invalid UTF-8, wrong field counts, RFC 3339 times, a missing last line
//! end), read in random small pieces so rows are cut at every place, both give the same
//! samples bit for bit, the same errors word for word, the same lines and byte positions.
//! The reference applies the missing-cell rule of the feed format (README, "Feed format"):
//! an empty or `NA` value cell is missing, and a row whose raw cell is missing is no sample.

use std::io::Read;

use proptest::prelude::*;
use steadycal_cli::feed::{
    parse_number, parse_rfc3339, Batch, ColumnNames, CsvFeed, FeedError, FeedFloat, Location,
};
use steadycal_core::sample::Sample;

/// The reader as it was before the fast path, kept here as the reference (with the
/// missing-cell rule added).
mod reference {
    use super::*;

    pub struct OldFeed<'a> {
        file: String,
        reader: csv::Reader<&'a [u8]>,
        columns: [Option<usize>; 4],
        names: ColumnNames,
        record: csv::ByteRecord,
        row: u64,
        pub missing_raw: u64,
    }

    pub fn shorten(bytes: &[u8]) -> String {
        let text = String::from_utf8_lossy(bytes);
        let mut out: String = text.chars().take(40).collect();
        if text.chars().count() > 40 {
            out.push('…');
        }
        out
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

    impl<'a> OldFeed<'a> {
        pub fn new(input: &'a [u8], names: &ColumnNames) -> Result<Self, FeedError> {
            let file = "feed.csv".to_string();
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
            Ok(OldFeed {
                file,
                reader,
                columns: [
                    find(&names.time),
                    Some(raw),
                    find(&names.reference),
                    find(&names.temperature),
                ],
                names: names.clone(),
                record: csv::ByteRecord::new(),
                row: 0,
                missing_raw: 0,
            })
        }

        pub fn line(&self) -> u64 {
            self.record.position().map(|p| p.line()).unwrap_or(0)
        }

        pub fn bytes_read(&self) -> u64 {
            self.reader.position().byte()
        }

        fn location(&self, column: usize) -> Location {
            Location {
                file: self.file.clone(),
                line: self
                    .record
                    .position()
                    .map(|p| p.line())
                    .unwrap_or(self.row + 1),
                column,
            }
        }

        fn time_cell(&self, index: usize) -> Result<f64, FeedError> {
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

        fn cell<T: FeedFloat>(&self, index: usize, name: &str) -> Result<Option<T>, FeedError> {
            let cell = self.record.get(index).unwrap_or(b"");
            // The default missing markers: an empty cell and `NA` (any case), trimmed.
            if std::str::from_utf8(cell)
                .is_ok_and(|text| text.trim().is_empty() || text.trim().eq_ignore_ascii_case("NA"))
            {
                return Ok(None);
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

        pub fn next_sample<T: FeedFloat>(&mut self) -> Option<Result<Sample<T>, FeedError>> {
            loop {
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
                let [time, raw, reference, temperature] = self.columns;
                let row = (|| {
                    let t = match time {
                        Some(index) => self.time_cell(index)?,
                        None => seq as f64,
                    };
                    let raw = self.cell::<T>(raw.unwrap(), &self.names.raw)?;
                    let reference = match reference {
                        Some(index) => self.cell::<T>(index, &self.names.reference)?,
                        None => None,
                    };
                    let temperature = match temperature {
                        Some(index) => self.cell::<T>(index, &self.names.temperature)?,
                        None => None,
                    };
                    Ok(raw.map(|raw| Sample {
                        seq,
                        t,
                        raw,
                        reference,
                        temperature,
                        averaged: 1,
                    }))
                })();
                match row {
                    Ok(Some(sample)) => return Some(Ok(sample)),
                    Ok(None) => self.missing_raw += 1,
                    Err(error) => return Some(Err(error)),
                }
            }
        }
    }
}

/// A reader that hands out its bytes in pieces of the given sizes, in turn.
struct Pieces {
    bytes: Vec<u8>,
    at: usize,
    sizes: Vec<usize>,
    turn: usize,
}

impl Read for Pieces {
    fn read(&mut self, out: &mut [u8]) -> std::io::Result<usize> {
        let size = self.sizes[self.turn % self.sizes.len()].max(1);
        self.turn += 1;
        let n = size.min(out.len()).min(self.bytes.len() - self.at);
        out[..n].copy_from_slice(&self.bytes[self.at..self.at + n]);
        self.at += n;
        Ok(n)
    }
}

/// A sample as bits, or an error as its message.
type Seen = Result<(u64, u64, u64, Option<u64>, Option<u64>), String>;

fn seen<T: FeedFloat + Into<f64>>(next: Result<Sample<T>, FeedError>) -> Seen {
    next.map(|s| {
        let bits = |v: T| -> u64 { Into::<f64>::into(v).to_bits() };
        (
            s.seq,
            s.t.to_bits(),
            bits(s.raw),
            s.reference.map(bits),
            s.temperature.map(bits),
        )
    })
    .map_err(|e| e.to_string())
}

fn compare<T: FeedFloat + Into<f64>>(
    text: &[u8],
    sizes: &[usize],
    names: &ColumnNames,
) -> Result<(), TestCaseError> {
    let old = reference::OldFeed::new(text, names);
    let pieces = || Pieces {
        bytes: text.to_vec(),
        at: 0,
        sizes: sizes.to_vec(),
        turn: 0,
    };
    let new = CsvFeed::new("feed.csv".into(), pieces(), names);
    let (mut old, mut new) = match (old, new) {
        (Ok(old), Ok(new)) => (old, new),
        (old, new) => {
            prop_assert_eq!(
                old.err().map(|e| e.to_string()),
                new.err().map(|e| e.to_string())
            );
            return Ok(());
        }
    };
    // Row by row.
    let mut expected: Vec<(Seen, u64)> = Vec::new();
    loop {
        let a = old.next_sample::<T>().map(seen);
        let b = new.next_sample::<T>().map(seen);
        prop_assert_eq!(&a, &b);
        prop_assert_eq!(old.missing_raw, new.missing_raw());
        let Some(a) = a else { break };
        prop_assert_eq!(old.line(), new.line());
        prop_assert_eq!(old.bytes_read(), new.bytes_read());
        expected.push((a, old.line()));
    }
    // In batches, bad rows kept in place.
    let mut batched = CsvFeed::new("feed.csv".into(), pieces(), names).unwrap();
    let mut got: Vec<(Seen, u64)> = Vec::new();
    let mut batch = Batch::<T>::with_capacity(3);
    loop {
        batch.clear();
        let more = batched.fill_batch(&mut batch, 3, true);
        let mut errors = batch.errors.drain(..).peekable();
        for (index, (sample, &line)) in batch.samples.iter().zip(&batch.lines).enumerate() {
            while let Some((_, error)) = errors.next_if(|(at, _)| *at == index) {
                let line = error.line().unwrap_or(0);
                got.push((Err(error.to_string()), line));
            }
            got.push((seen(Ok(*sample)), line));
        }
        for (_, error) in errors {
            let line = error.line().unwrap_or(0);
            got.push((Err(error.to_string()), line));
        }
        if !more {
            break;
        }
    }
    prop_assert_eq!(expected, got);
    Ok(())
}

const HEADERS: &[&str] = &[
    "t,raw,ref",
    "t,raw,ref,temp",
    "raw,ref,temp,note",
    "note,raw",
    "raw",
    "ref,raw",
    " t , raw ,ref",
    "\u{feff}t,raw,ref",
    "t,raw,t",
    "\"t\",raw,\"ref\"",
    "x,y",
    "",
    "\n\nt,raw,ref",
];

fn cell() -> impl Strategy<Value = Vec<u8>> {
    prop_oneof![
        8 => (-1e4..1e4f64).prop_map(|v| v.to_string().into_bytes()),
        4 => (0.0..200.0f64).prop_map(|v| format!("{v:.15}").into_bytes()),
        2 => (0u32..100_000).prop_map(|v| v.to_string().into_bytes()),
        2 => Just(Vec::new()),
        1 => prop::sample::select(vec![
            " 1.5", "1.5 ", "\"2.5\"", "\"a,b\"", "\"x\"\"y\"", "nan", "-inf", "abc", "1e5",
            "-.5", "+3", "2026-03-01T00:00:01Z", "2026-03-01T01:00:01+01:00", "\"1\n2\"", " ",
            "1\"2", "0x1", "1.2.3", "12345678901234567890.5", "\u{e9}", "NA", "na", " NA ",
            "NaN", "N/A",
        ]).prop_map(|s| s.as_bytes().to_vec()),
        1 => Just(vec![0xff, b'1']),
        1 => Just(vec![b'1', 0xc3]),
    ]
}

fn row() -> impl Strategy<Value = Vec<u8>> {
    (
        prop::collection::vec(cell(), 1..6),
        prop_oneof![20 => Just("\n"), 1 => Just("\r\n"), 1 => Just("\r"), 1 => Just("\n\n")],
    )
        .prop_map(|(cells, end)| {
            let mut line = cells.join(&b","[..]);
            line.extend_from_slice(end.as_bytes());
            line
        })
}

/// Rows that mostly have the header's width.
fn feed() -> impl Strategy<Value = (Vec<u8>, Vec<usize>)> {
    (
        0..HEADERS.len(),
        prop::collection::vec(
            (row(), prop::collection::vec(cell(), 4), any::<u8>()),
            0..40,
        ),
        any::<bool>(),
        prop::collection::vec(1usize..80, 1..5),
    )
        .prop_map(|(header, rows, cut_last, sizes)| {
            let header = HEADERS[header];
            let width = header.trim_start_matches('\n').split(',').count();
            let mut text = header.as_bytes().to_vec();
            text.push(b'\n');
            for (free_row, cells, choice) in rows {
                if choice % 4 == 0 {
                    text.extend_from_slice(&free_row);
                } else {
                    let mut cells = cells;
                    cells.resize(width.max(1), b"1".to_vec());
                    let mut line = cells.join(&b","[..]);
                    line.push(b'\n');
                    text.extend_from_slice(&line);
                }
            }
            if cut_last && text.last() == Some(&b'\n') {
                text.pop();
            }
            (text, sizes)
        })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(3_000))]

    #[test]
    fn reads_like_the_csv_crate_reader((text, sizes) in feed()) {
        compare::<f32>(&text, &sizes, &ColumnNames::default())?;
        compare::<f64>(&text, &sizes, &ColumnNames::default())?;
        // Whole reads, as from a file.
        compare::<f32>(&text, &[1 << 20], &ColumnNames::default())?;
    }
}

#[test]
fn mapped_names_sharing_a_column() {
    let names = ColumnNames {
        raw: "v".into(),
        reference: "v".into(),
        ..ColumnNames::default()
    };
    let text = b"t,v\n0,1.5\n1,\n2,abc\n";
    compare::<f64>(text, &[7], &names).unwrap();
}

#[test]
fn shipped_feed_reads_alike() {
    let path = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/../simulated-feeds/gas-cell.csv"
    );
    let text = std::fs::read(path).unwrap();
    compare::<f32>(&text, &[4093], &ColumnNames::default()).unwrap();
    compare::<f64>(&text, &[1 << 20], &ColumnNames::default()).unwrap();
}
