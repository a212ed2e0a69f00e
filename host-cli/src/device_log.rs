//! Device logs on the host: reading the framed records a board writes (see
//! `steadycal_core::record`) and writing them from a replay (so tests and firmware work
//! can build logs from a CSV feed).
//!
//! A log is read whole into memory, split into frames at the `0x00` delimiters and decoded
//! frame by frame. A frame that does not decode (torn by a power cut, corrupted) is skipped
//! and its byte range reported; runs of damaged frames next to each other are reported as
//! one span. Every intact record is used.

use std::io::Write;
use std::path::Path;

use serde::Serialize;
use steadycal_core::event::Event;
use steadycal_core::real::Real;
use steadycal_core::record::{self, Frames, LogStart, Record, MAX_FRAME_LEN};
use steadycal_core::sample::Sample;

use crate::feed::{FeedError, ParsedRow};

/// A byte range of a device log that holds no intact record: `[start, end)`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct DamagedSpan {
    /// Offset of the first damaged byte.
    pub start: u64,
    /// Offset one past the last damaged byte.
    pub end: u64,
}

/// True when `head` (the first bytes of an input) starts like a device log: a `0x00`
/// delimiter, which no CSV feed starts with.
pub fn looks_like_device_log(head: &[u8]) -> bool {
    head.first() == Some(&0)
}

/// The records of an in-memory device log as feed rows, in order.
pub struct DeviceLogRows<R> {
    file: String,
    bytes: Vec<u8>,
    frames: Vec<(usize, usize)>,
    next: usize,
    real_bits: u8,
    /// Damaged byte ranges met so far (merged when adjacent).
    pub damaged: Vec<DamagedSpan>,
    /// Event records met (the board's own events).
    pub logged_events: u64,
    /// Start records met (sessions).
    pub sessions: u64,
    /// Intact records met.
    pub records: u64,
    _real: std::marker::PhantomData<R>,
}

impl<R: Real> DeviceLogRows<R> {
    /// Reads a whole log file (`-` = standard input already read into `bytes`).
    pub fn new(file: String, bytes: Vec<u8>) -> Self {
        let frames = Frames::new(&bytes).collect();
        DeviceLogRows {
            file,
            bytes,
            frames,
            next: 0,
            real_bits: R::BITS as u8,
            damaged: Vec::new(),
            logged_events: 0,
            sessions: 0,
            records: 0,
            _real: std::marker::PhantomData,
        }
    }

    /// Opens a log file.
    pub fn open(path: &Path) -> Result<Self, FeedError> {
        let file = path.display().to_string();
        let bytes = std::fs::read(path).map_err(|source| FeedError::Io {
            file: file.clone(),
            source,
        })?;
        Ok(Self::new(file, bytes))
    }

    /// The file name as given.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// Bytes in the log.
    pub fn len(&self) -> usize {
        self.bytes.len()
    }

    /// True for an empty log.
    pub fn is_empty(&self) -> bool {
        self.bytes.is_empty()
    }

    fn damage(&mut self, start: usize, end: usize) {
        let (start, end) = (start as u64, end as u64);
        if let Some(last) = self.damaged.last_mut() {
            // Adjacent when only the delimiter between them separates the two.
            if start <= last.end + 1 {
                last.end = last.end.max(end);
                return;
            }
        }
        self.damaged.push(DamagedSpan { start, end });
    }

    fn decode(&self, start: usize, end: usize) -> Result<Record<R>, record::RecordError> {
        if end - start >= MAX_FRAME_LEN {
            return Err(record::RecordError::TooLong);
        }
        let mut body = [0u8; MAX_FRAME_LEN];
        let body = &mut body[..end - start];
        body.copy_from_slice(&self.bytes[start..end]);
        // A start record holds no float: it decodes under either width.
        match self.real_bits {
            64 => record::decode_frame::<f64>(body).map(convert_record),
            _ => record::decode_frame::<f32>(body).map(convert_record),
        }
    }
}

fn convert<S: Real, R: Real>(value: S) -> R {
    R::from_f64(value.to_f64())
}

fn convert_record<S: Real, R: Real>(record: Record<S>) -> Record<R> {
    match record {
        Record::Start(start) => Record::Start(start),
        Record::Sample(s) => Record::Sample(Sample {
            seq: s.seq,
            t: s.t,
            raw: convert(s.raw),
            reference: s.reference.map(convert),
            temperature: s.temperature.map(convert),
            averaged: s.averaged,
        }),
        Record::Event(e) => Record::Event(Event {
            seq: e.seq,
            kind: e.kind.map_real(convert::<S, R>),
        }),
    }
}

impl<R: Real> Iterator for DeviceLogRows<R> {
    type Item = ParsedRow<R>;

    fn next(&mut self) -> Option<ParsedRow<R>> {
        while let Some(&(start, end)) = self.frames.get(self.next) {
            self.next += 1;
            match self.decode(start, end) {
                Ok(Record::Start(start)) => {
                    self.records += 1;
                    self.sessions += 1;
                    self.real_bits = start.real_bits;
                }
                Ok(Record::Event(_)) => {
                    self.records += 1;
                    self.logged_events += 1;
                }
                Ok(Record::Sample(sample)) => {
                    self.records += 1;
                    return Some(ParsedRow {
                        next: Ok(sample),
                        line: self.records,
                        bytes: end as u64,
                    });
                }
                Err(_) => self.damage(start, end),
            }
        }
        None
    }
}

/// Writes a device log: a `0x00` and a start record first, then one frame per record.
pub struct DeviceLogWriter<R> {
    out: Box<dyn Write>,
    _real: std::marker::PhantomData<R>,
}

impl<R: Real> DeviceLogWriter<R> {
    /// Starts a log (a session) on `out`.
    pub fn new(mut out: Box<dyn Write>) -> std::io::Result<Self> {
        out.write_all(&[0])?;
        let mut writer = DeviceLogWriter {
            out,
            _real: std::marker::PhantomData,
        };
        writer.write(&Record::Start(LogStart::new::<R>()))?;
        Ok(writer)
    }

    /// Appends one record.
    pub fn write(&mut self, record: &Record<R>) -> std::io::Result<()> {
        let mut frame = [0u8; MAX_FRAME_LEN];
        let len = record::encode_frame(record, &mut frame)
            .map_err(|e| std::io::Error::other(e.reason()))?;
        self.out.write_all(&frame[..len])
    }

    /// Flushes the output.
    pub fn flush(&mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}
