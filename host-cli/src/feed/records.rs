//! Records of a CSV feed, split by `csv_core` (the state machine under the `csv` crate) and
//! driven the way the `csv` crate's reader drives it: same record positions, same
//! field-count check, same handling of a byte order mark. Driving it here, instead of
//! reading with `csv::Reader`, keeps the read buffer in reach of the fast path
//! ([`super::fast_row`]), which parses plain rows straight from it.
//!
//! Measured (2 M rows of the gas-cell demo feed, `replay --events`, f32; callgrind
//! instructions for the whole run, and wall time of `host-cli/benches/replay-throughput.sh`'s
//! 10 M-row replay, median of 3 runs interleaved in one sitting on a shared 2-core machine):
//! this reader 1,677 instructions per row (about 740 on the parsing thread), 3.45 s; every
//! record read by `csv::Reader::read_byte_record` instead (csv 1, the fast path off)
//! 2,831 per row (about 1,915 on the parsing thread), 5.55 s, 38 % fewer rows per second.
//!
//! Invariant: the unread bytes are `buffer[start..end]`; `byte` counts the bytes consumed
//! (by the state machine or by [`RecordReader::consume_row`]), `records` the records read.

use std::io::Read;

use super::{FeedError, Location};

/// Bytes read from the input at a time.
pub const READ_BLOCK: usize = 256 << 10;

/// Whether the input is exhausted (same states as the csv crate's reader keeps).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum InputState {
    Open,
    End,
    Failed,
}

/// The record reader of a feed: input, read buffer and state machine.
pub struct RecordReader<R: Read> {
    /// File name as given (`-` for standard input).
    pub file: String,
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
    /// The last record read by the state machine.
    pub record: csv::ByteRecord,
    fields: Vec<u8>,
    ends: Vec<usize>,
    /// 1-based line of the last record read (0 before the first).
    line: u64,
}

impl<R: Read> RecordReader<R> {
    /// A reader at the start of `input`.
    pub fn new(file: String, input: R) -> Self {
        RecordReader {
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
            record: csv::ByteRecord::new(),
            fields: vec![0; 1024],
            ends: vec![0; 64],
            line: 0,
        }
    }

    /// 1-based line number of the last record read (0 before the first).
    pub fn line(&self) -> u64 {
        self.line
    }

    /// Bytes of input consumed so far.
    pub fn bytes_read(&self) -> u64 {
        self.byte
    }

    /// The unread bytes of the buffer when they start a line (where a plain row may be
    /// taken by the fast path), `None` otherwise.
    #[inline(always)]
    pub fn at_line_start(&self) -> Option<&[u8]> {
        self.after_newline
            .then(|| &self.buffer[self.start..self.end])
    }

    /// Consumes one row of `len` bytes (its `\n` included) that the fast path took from
    /// [`Self::at_line_start`]; returns its 1-based line.
    #[inline(always)]
    pub fn consume_row(&mut self, len: usize) -> u64 {
        let line = self.core.line();
        self.core.set_line(line + 1);
        self.line = line;
        self.start += len;
        self.byte += len as u64;
        self.records += 1;
        line
    }

    /// Reads one record with the state machine into `self.record`, as the `csv` crate's
    /// `Reader::read_byte_record` does: `Ok(false)` at the end (and after an error reading
    /// the input), a field count other than the header's is an error.
    pub fn read_record(&mut self) -> Result<bool, FeedError> {
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
}
