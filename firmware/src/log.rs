//! Device logs on the board: the input log embedded in flash (read with the core's record
//! reader) and the output log of the board's own events (appended to a region of the RAM
//! NOR flash, see [`crate::storage`]).
//!
//! Input: build.rs writes the bytes `steadycal replay FEED --device-log-out FILE` writes
//! (a lone `0x00`, a start record, then every sample record followed by the records of the
//! events the build host's monitor raised on it). [`LogReader`] splits it into frames
//! ([`record::Frames`]), decodes each one ([`record::decode_frame`]: COBS, CRC-16,
//! postcard) and yields samples; the logged events are handed back beside them so the
//! firmware can compare them with its own. A damaged frame is counted and skipped, as the
//! host does; a log that does not start with an f32 start record is refused.
//!
//! Output: [`LogWriter`] appends frames to the log region of a [`NorFlash`], buffering one
//! `WRITE_SIZE` unit so that every flash write is aligned and each unit is written once.
//! The last partial unit is padded with `0x00` (empty frames, which readers skip). It
//! starts with a lone `0x00` and a start record like every session; a frame that does not
//! fit any more is counted as dropped, never written in part.

use embedded_storage::nor_flash::NorFlash;
use steadycal_core::event::Event;
use steadycal_core::record::{
    decode_frame, encode_frame, Frames, LogStart, Record, RecordError, MAX_FRAME_LEN,
};
use steadycal_core::sample::Sample;

/// The device log written by build.rs.
pub static IMAGE: &[u8] = include_bytes!(concat!(env!("OUT_DIR"), "/feed.log"));

/// One item of the input log.
pub enum Item {
    /// A sample to push.
    Sample(Sample<f32>),
    /// An event the writer of the log raised (the record decoded and checked): its frame
    /// body as stored (COBS bytes, without the delimiter), to compare bit for bit.
    Event(&'static [u8]),
}

/// Reads a device log of f32 records.
pub struct LogReader {
    frames: Frames<'static>,
    /// Frames read (records decoded, damaged frames included).
    pub frames_read: u32,
    /// Sample records.
    pub samples: u32,
    /// Event records.
    pub events: u32,
    /// Start records (sessions).
    pub sessions: u32,
    /// Frames that did not decode (skipped).
    pub damaged: u32,
}

impl LogReader {
    /// A reader over `bytes`; refuses a log whose first frame is not an f32 start record.
    pub fn new(bytes: &'static [u8]) -> Result<LogReader, &'static str> {
        let mut reader = LogReader {
            frames: Frames::new(bytes),
            frames_read: 0,
            samples: 0,
            events: 0,
            sessions: 0,
            damaged: 0,
        };
        let (start, end) = reader.frames.next().ok_or("device log: no frame")?;
        reader.frames_read += 1;
        match decode(&bytes[start..end]) {
            Ok(Record::Start(LogStart { real_bits: 32, .. })) => reader.sessions += 1,
            Ok(Record::Start(_)) => return Err("device log: not an f32 log"),
            _ => return Err("device log: no start record"),
        }
        Ok(reader)
    }
}

fn decode(body: &[u8]) -> Result<Record<f32>, RecordError> {
    let mut buffer = [0u8; MAX_FRAME_LEN];
    let frame = buffer.get_mut(..body.len()).ok_or(RecordError::TooLong)?;
    frame.copy_from_slice(body);
    decode_frame::<f32>(frame)
}

impl Iterator for LogReader {
    type Item = Item;

    fn next(&mut self) -> Option<Item> {
        let bytes = IMAGE;
        loop {
            let (start, end) = self.frames.next()?;
            self.frames_read += 1;
            match decode(&bytes[start..end]) {
                Ok(Record::Sample(sample)) => {
                    self.samples += 1;
                    return Some(Item::Sample(sample));
                }
                Ok(Record::Event(_)) => {
                    self.events += 1;
                    return Some(Item::Event(&bytes[start..end]));
                }
                Ok(Record::Start(_)) => self.sessions += 1,
                Err(_) => self.damaged += 1,
            }
        }
    }
}

/// True when `event` encodes to exactly the frame body `logged` (bit for bit).
pub fn same_frame(event: &Event<f32>, logged: &[u8]) -> bool {
    let mut frame = [0u8; MAX_FRAME_LEN];
    match encode_frame(&Record::Event(*event), &mut frame) {
        Ok(len) => &frame[..len - 1] == logged,
        Err(_) => false,
    }
}

/// Appends device-log frames to `[base, base + len)` of a NOR flash (see the module docs).
pub struct LogWriter<const WRITE: usize> {
    base: u32,
    len: u32,
    /// Bytes of the region written so far (whole units).
    at: u32,
    unit: [u8; WRITE],
    filled: usize,
    /// Records written (the start record included).
    pub records: u32,
    /// Bytes of frames appended (delimiters included, the session's leading `0x00` too,
    /// the final padding not).
    pub bytes: u32,
    /// Records that did not fit.
    pub dropped: u32,
}

impl<const WRITE: usize> LogWriter<WRITE> {
    /// Erases the region and starts a session (`0x00` and a start record).
    pub fn start<F: NorFlash>(flash: &mut F, base: u32, len: u32) -> Result<Self, F::Error> {
        flash.erase(base, base + len)?;
        let mut writer = LogWriter {
            base,
            len,
            at: 0,
            unit: [0; WRITE],
            filled: 0,
            records: 0,
            bytes: 0,
            dropped: 0,
        };
        writer.append(flash, &[0])?;
        writer.push(flash, &Record::Start(LogStart::new::<f32>()))?;
        Ok(writer)
    }

    /// Bytes of the region left for frames (the final padding fits in the current unit).
    fn room(&self) -> u32 {
        self.len - self.at - self.filled as u32
    }

    fn append<F: NorFlash>(&mut self, flash: &mut F, bytes: &[u8]) -> Result<(), F::Error> {
        self.bytes += bytes.len() as u32;
        for &byte in bytes {
            self.unit[self.filled] = byte;
            self.filled += 1;
            if self.filled == WRITE {
                flash.write(self.base + self.at, &self.unit)?;
                self.at += WRITE as u32;
                self.filled = 0;
            }
        }
        Ok(())
    }

    /// Appends one record; a record that does not fit is counted in `dropped`.
    pub fn push<F: NorFlash>(
        &mut self,
        flash: &mut F,
        record: &Record<f32>,
    ) -> Result<(), F::Error> {
        let mut frame = [0u8; MAX_FRAME_LEN];
        let Ok(len) = encode_frame(record, &mut frame) else {
            self.dropped += 1;
            return Ok(());
        };
        if len as u32 > self.room() {
            self.dropped += 1;
            return Ok(());
        }
        self.append(flash, &frame[..len])?;
        self.records += 1;
        Ok(())
    }

    /// Writes the last partial unit (padded with `0x00`); returns the bytes of the
    /// region used (whole units). The appended bytes are the first `bytes` of the region.
    pub fn finish<F: NorFlash>(&mut self, flash: &mut F) -> Result<u32, F::Error> {
        if self.filled > 0 {
            self.unit[self.filled..].fill(0);
            flash.write(self.base + self.at, &self.unit)?;
            self.at += WRITE as u32;
            self.filled = 0;
        }
        Ok(self.at)
    }
}

/// What a read-back of a log region found.
#[derive(Default)]
pub struct Census {
    /// Start records.
    pub sessions: u32,
    /// Event records.
    pub events: u32,
    /// Sample records.
    pub samples: u32,
    /// Frames that did not decode.
    pub damaged: u32,
}

/// Reads every frame of `bytes` back with the core's record reader.
pub fn census(bytes: &[u8]) -> Census {
    let mut census = Census::default();
    for (start, end) in Frames::new(bytes) {
        // Erased flash (0xFF) after the last frame is one long "frame": stop there.
        if bytes[start] == 0xFF {
            break;
        }
        match decode(&bytes[start..end]) {
            Ok(Record::Start(_)) => census.sessions += 1,
            Ok(Record::Event(_)) => census.events += 1,
            Ok(Record::Sample(_)) => census.samples += 1,
            Err(_) => census.damaged += 1,
        }
    }
    census
}
