//! The feed image that build.rs embeds in flash, read back as samples.
//!
//! Layout (little endian): magic `SCFD`, u32 row count, then per row one flag byte (bit 0:
//! reference present, bit 1: temperature present), t as f64 bits, raw as f32 bits, then the
//! reference and temperature f32 bits when present. A truncated image ends the iteration.

use steadycal_core::sample::Sample;

/// The image written by build.rs.
pub static IMAGE: &[u8] = include_bytes!(concat!(env!("OUT_DIR"), "/feed.bin"));

/// Samples of a feed image, in order, with `seq` the 0-based row index.
pub struct FeedReader {
    bytes: &'static [u8],
    position: usize,
    seq: u64,
    rows: u32,
}

impl FeedReader {
    /// A reader over `bytes`; `None` when the magic is wrong.
    pub fn new(bytes: &'static [u8]) -> Option<FeedReader> {
        if bytes.len() < 8 || &bytes[..4] != b"SCFD" {
            return None;
        }
        let rows = u32::from_le_bytes([bytes[4], bytes[5], bytes[6], bytes[7]]);
        Some(FeedReader {
            bytes,
            position: 8,
            seq: 0,
            rows,
        })
    }

    /// Rows the image says it holds.
    pub fn rows(&self) -> u32 {
        self.rows
    }

    fn take<const N: usize>(&mut self) -> Option<[u8; N]> {
        let end = self.position.checked_add(N)?;
        let chunk: [u8; N] = self.bytes.get(self.position..end)?.try_into().ok()?;
        self.position = end;
        Some(chunk)
    }

    fn take_f32(&mut self) -> Option<f32> {
        self.take::<4>()
            .map(|b| f32::from_bits(u32::from_le_bytes(b)))
    }
}

impl Iterator for FeedReader {
    type Item = Sample<f32>;

    fn next(&mut self) -> Option<Sample<f32>> {
        if self.seq >= u64::from(self.rows) {
            return None;
        }
        let [flags] = self.take::<1>()?;
        let t = f64::from_bits(u64::from_le_bytes(self.take::<8>()?));
        let raw = self.take_f32()?;
        let reference = if flags & 1 != 0 {
            Some(self.take_f32()?)
        } else {
            None
        };
        let temperature = if flags & 2 != 0 {
            Some(self.take_f32()?)
        } else {
            None
        };
        let sample = Sample {
            seq: self.seq,
            t,
            raw,
            reference,
            temperature,
        };
        self.seq += 1;
        Some(sample)
    }
}
