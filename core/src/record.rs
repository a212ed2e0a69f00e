//! The device log format: what a board records, one framed record per sample and per
//! event, so that a desktop replay can reproduce every alarm.
//!
//! # Format (version [`LOG_VERSION`])
//!
//! A log is a byte stream of frames, each ended by a `0x00` delimiter:
//!
//! ```text
//! frame  = COBS(record ++ crc16) 0x00
//! record = postcard encoding of a `Record<R>` (written and read by the core's serde-free
//!          codec, `crate::wire`, which produces the same bytes)
//! crc16  = CRC-16/IBM-SDLC of the record bytes, u16 little-endian
//! ```
//!
//! COBS (consistent overhead byte stuffing, Cheshire & Baker 1999) removes every `0x00`
//! from the frame body, so `0x00` only ever appears as a delimiter: after a torn or
//! corrupted frame a reader resynchronises at the next `0x00`. The CRC catches a corrupted
//! frame that still COBS-decodes. A writer starts every session (every boot) with a lone
//! `0x00` and a [`Record::Start`] record, so bytes left by a write cut short by a power loss
//! end at that delimiter and spoil no later frame. A log therefore begins with `0x00`,
//! which no CSV feed does: that is how the host tells them apart.
//!
//! # Invariants
//! - [`decode_frame`] never panics on any bytes; a bad frame is a [`RecordError`].
//! - An encoded frame is at most [`MAX_FRAME_LEN`] bytes (delimiter included), for `f32`
//!   and `f64` records alike.
//! - [`Frames`] splits any byte slice into frames with their byte offsets without
//!   copying; empty frames (consecutive delimiters) are skipped.

use crc::{Crc, CRC_16_IBM_SDLC};
use serde::{Deserialize, Serialize};

use crate::checksum::CrcMethod;
use crate::event::Event;
use crate::real::Real;
use crate::sample::Sample;
use crate::wire;

/// The magic of a [`Record::Start`] record.
pub const LOG_MAGIC: [u8; 4] = *b"SClg";
/// The device log format version this build writes and reads.
pub const LOG_VERSION: u16 = 2;
/// The CRC of a frame: CRC-16/IBM-SDLC (also known as CRC-16/X-25).
pub const CRC16: Crc<u16, CrcMethod> = Crc::<u16, CrcMethod>::new(&CRC_16_IBM_SDLC);
/// Largest postcard encoding of a record (f64: a sample is at most 46 bytes, an event
/// 30), with room to spare.
pub const MAX_RECORD_LEN: usize = 64;
/// Largest frame: COBS of the record and its CRC, plus the delimiter.
pub const MAX_FRAME_LEN: usize = cobs::max_encoding_length(MAX_RECORD_LEN + 2) + 1;

/// The first record of every session.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct LogStart {
    /// [`LOG_MAGIC`].
    pub magic: [u8; 4],
    /// [`LOG_VERSION`].
    pub version: u16,
    /// Float width of the samples and events that follow: 32 or 64.
    pub real_bits: u8,
}

impl LogStart {
    /// The start record of a log of `R` values.
    pub fn new<R: Real>() -> Self {
        LogStart {
            magic: LOG_MAGIC,
            version: LOG_VERSION,
            real_bits: R::BITS as u8,
        }
    }
}

/// One record of a device log.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub enum Record<R> {
    /// Start of a session.
    Start(LogStart),
    /// A sample as the monitor received it (seq, t, raw, reference, temperature).
    Sample(Sample<R>),
    /// An event as the monitor raised it.
    Event(Event<R>),
}

/// Why a frame cannot be written or read.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RecordError {
    /// The output buffer is too small.
    BufferTooSmall,
    /// The frame is longer than [`MAX_FRAME_LEN`].
    TooLong,
    /// The frame is not valid COBS.
    Cobs,
    /// Fewer than 3 bytes after COBS decoding (a record and its CRC need more).
    TooShort,
    /// The CRC does not match.
    BadCrc,
    /// The record bytes (CRC correct) do not decode.
    Malformed,
    /// The record decodes but leaves bytes unused.
    Leftover,
    /// A start record with another magic or version.
    UnknownFormat,
}

impl RecordError {
    /// A short description, for messages.
    pub const fn reason(&self) -> &'static str {
        match self {
            RecordError::BufferTooSmall => "output buffer too small",
            RecordError::TooLong => "frame longer than any record",
            RecordError::Cobs => "not valid COBS",
            RecordError::TooShort => "frame too short for a record",
            RecordError::BadCrc => "CRC mismatch",
            RecordError::Malformed => "record does not decode",
            RecordError::Leftover => "bytes after the record",
            RecordError::UnknownFormat => "start record of an unknown log format or version",
        }
    }
}

/// Writes one frame (COBS body and the `0x00` delimiter) into `out`; returns its length.
///
/// ```
/// use steadycal_core::record::{decode_frame, encode_frame, Record, MAX_FRAME_LEN};
/// use steadycal_core::sample::Sample;
/// let record = Record::Sample(Sample::check(3, 1.5, 10.25f32, 5.0));
/// let mut frame = [0u8; MAX_FRAME_LEN];
/// let len = encode_frame(&record, &mut frame).unwrap();
/// assert_eq!(frame[len - 1], 0);
/// assert!(!frame[..len - 1].contains(&0));
/// assert_eq!(decode_frame::<f32>(&mut frame[..len - 1]), Ok(record));
/// ```
pub fn encode_frame<R: Real>(record: &Record<R>, out: &mut [u8]) -> Result<usize, RecordError> {
    let mut raw = [0u8; MAX_RECORD_LEN + 2];
    let len =
        wire::to_slice(record, &mut raw[..MAX_RECORD_LEN]).map_err(|_| RecordError::TooLong)?;
    // The record and its CRC through a checked split (`len` is at most MAX_RECORD_LEN):
    // no panic path on a board.
    let Some(framed) = raw.get_mut(..len + 2) else {
        return Err(RecordError::TooLong);
    };
    let Some((bytes, crc_out)) = framed.split_last_chunk_mut::<2>() else {
        return Err(RecordError::TooLong);
    };
    *crc_out = CRC16.checksum(bytes).to_le_bytes();
    let body = cobs::try_encode(framed, out).map_err(|_| RecordError::BufferTooSmall)?;
    let delimiter = out.get_mut(body).ok_or(RecordError::BufferTooSmall)?;
    *delimiter = 0;
    Ok(body + 1)
}

/// Decodes one frame body (without its delimiter) in place: COBS, CRC, record.
pub fn decode_frame<R: Real>(frame: &mut [u8]) -> Result<Record<R>, RecordError> {
    if frame.len() >= MAX_FRAME_LEN {
        return Err(RecordError::TooLong);
    }
    let len = cobs::decode_in_place(frame).map_err(|_| RecordError::Cobs)?;
    if len < 3 || len > frame.len() {
        return Err(RecordError::TooShort);
    }
    let (bytes, crc) = frame[..len].split_at(len - 2);
    if CRC16.checksum(bytes) != u16::from_le_bytes([crc[0], crc[1]]) {
        return Err(RecordError::BadCrc);
    }
    let (record, unused): (Record<R>, usize) =
        wire::take_from_bytes(bytes).map_err(|_| RecordError::Malformed)?;
    if unused != 0 {
        return Err(RecordError::Leftover);
    }
    if let Record::Start(start) = record {
        if start.magic != LOG_MAGIC || start.version != LOG_VERSION {
            return Err(RecordError::UnknownFormat);
        }
    }
    Ok(record)
}

/// The frames of a byte slice: `(start, end)` byte offsets of each non-empty frame body,
/// the delimiter excluded. A body at the end with no delimiter is yielded too (a torn
/// last frame).
#[derive(Clone, Debug)]
pub struct Frames<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Frames<'a> {
    /// The frames of `bytes`.
    pub fn new(bytes: &'a [u8]) -> Self {
        Frames { bytes, at: 0 }
    }
}

impl Iterator for Frames<'_> {
    type Item = (usize, usize);

    fn next(&mut self) -> Option<(usize, usize)> {
        while self.at < self.bytes.len() {
            let start = self.at;
            let end = self.bytes[start..]
                .iter()
                .position(|&b| b == 0)
                .map_or(self.bytes.len(), |p| start + p);
            self.at = end + 1;
            if end > start {
                return Some((start, end));
            }
        }
        None
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::wire_struct!(impl[] LogStart { magic, version, real_bits });

impl<R: Real> wire::Wire for Record<R> {
    fn put(&self, w: &mut wire::Writer<'_>) {
        // As for `EventKind`: the variant index once, then the variant's fields.
        let index = match self {
            Record::Start(_) => 0,
            Record::Sample(_) => 1,
            Record::Event(_) => 2,
        };
        w.byte(index);
        match self {
            Record::Start(start) => start.put(w),
            Record::Sample(sample) => sample.put(w),
            Record::Event(event) => event.put(w),
        }
    }

    fn get(r: &mut wire::Reader<'_>) -> Self {
        use wire::Wire;
        match r.variant() {
            0 => Record::Start(Wire::get(r)),
            1 => Record::Sample(Wire::get(r)),
            2 => Record::Event(Wire::get(r)),
            _ => {
                r.fail();
                Record::Start(LogStart::new::<R>())
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event::{EventKind, RejectReason};
    use proptest::prelude::*;

    #[test]
    fn largest_records_fit() {
        let sample = Record::Sample(Sample {
            seq: u64::MAX,
            t: f64::MAX,
            raw: f64::MAX,
            reference: Some(f64::MAX),
            temperature: Some(f64::MAX),
            averaged: 1,
        });
        let mut raw = [0u8; 128];
        let len = postcard::to_slice(&sample, &mut raw).unwrap().len();
        assert!(len <= MAX_RECORD_LEN, "{len}");
        let mut frame = [0u8; MAX_FRAME_LEN];
        let framed = encode_frame(&sample, &mut frame).unwrap();
        assert!(framed <= MAX_FRAME_LEN);
        let event = Record::Event(Event {
            seq: u64::MAX,
            kind: EventKind::GainDrift {
                change: f64::MAX,
                uncertainty: f64::MAX,
                severity: crate::event::Severity::Alarm,
            },
        });
        assert!(encode_frame(&event, &mut frame).unwrap() <= MAX_FRAME_LEN);
    }

    #[test]
    fn a_damaged_frame_is_refused_and_the_next_one_reads() {
        let mut log = std::vec::Vec::new();
        log.push(0);
        let mut frame = [0u8; MAX_FRAME_LEN];
        let records = [
            Record::Start(LogStart::new::<f32>()),
            Record::Sample(Sample::check(0, 0.0, 2.0f32, 1.0)),
            Record::Event(Event {
                seq: 0,
                kind: EventKind::SampleRejected {
                    reason: RejectReason::Spike,
                    count: 1,
                },
            }),
            Record::Sample(Sample::reading(1, 1.0, 3.0f32)),
        ];
        for record in &records {
            let len = encode_frame(record, &mut frame).unwrap();
            log.extend_from_slice(&frame[..len]);
        }
        let spans: std::vec::Vec<_> = Frames::new(&log).collect();
        assert_eq!(spans.len(), 4);
        // Flip one bit inside the third frame.
        let (start, _) = spans[2];
        log[start + 2] ^= 0x04;
        let mut decoded = std::vec::Vec::new();
        for (start, end) in Frames::new(&log) {
            let mut body = std::vec::Vec::from(&log[start..end]);
            decoded.push(decode_frame::<f32>(&mut body));
        }
        assert_eq!(decoded[0], Ok(records[0]));
        assert_eq!(decoded[1], Ok(records[1]));
        assert!(decoded[2].is_err());
        assert_eq!(decoded[3], Ok(records[3]));
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(4000))]
        #[test]
        fn decode_never_panics_on_arbitrary_bytes(mut bytes in proptest::collection::vec(any::<u8>(), 0..200)) {
            let mut copy = bytes.clone();
            let _ = decode_frame::<f32>(&mut bytes);
            let _ = decode_frame::<f64>(&mut copy);
            let _ = Frames::new(&bytes).count();
        }

        #[test]
        fn samples_round_trip(seq in any::<u64>(), t in any::<f64>(), raw in any::<f32>(), reference in any::<Option<f32>>()) {
            let record = Record::Sample(Sample { seq, t, raw, reference, temperature: None, averaged: 1 });
            let mut frame = [0u8; MAX_FRAME_LEN];
            let len = encode_frame(&record, &mut frame).unwrap();
            let back = decode_frame::<f32>(&mut frame[..len - 1]).unwrap();
            // Bit-exact, NaN included.
            let mut a = [0u8; 80];
            let mut b = [0u8; 80];
            prop_assert_eq!(postcard::to_slice(&record, &mut a).unwrap(), postcard::to_slice(&back, &mut b).unwrap());
        }
    }
}
