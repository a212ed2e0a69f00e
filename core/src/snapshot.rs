//! Snapshots: the whole state of a [`Monitor`] as bytes, so a board can resume exactly
//! where it stopped after a power loss.
//!
//! # Format (version [`FORMAT_VERSION`])
//!
//! ```text
//! offset  size  field
//! 0       4     magic  b"SCsn"                       (MAGIC)
//! 4       2     format version, u16 little-endian    (FORMAT_VERSION)
//! 6       1     float width in bits (32 or 64)
//! 7       1     P      (fit parameters)
//! 8       1     BINS   (spread bins)
//! 9       1     Q      (event queue capacity)
//! 10      4     payload length n, u32 little-endian
//! 14      n     payload: the Monitor in postcard's wire format (see crate::wire)
//! 14+n    4     CRC-32/ISO-HDLC of bytes 0 .. 14+n, u32 little-endian
//! ```
//!
//! The payload is the monitor whole: configuration, every rung's fit, the spread profile,
//! the mean check, the detectors and their alarm states, the baseline, the waiting events
//! and the counters. The bytes are those postcard + the serde derives write, produced and
//! read by the core's own serde-free codec (`crate::wire`, smaller on a board; a property
//! test checks both agree). Floats are their raw IEEE 754 bits, so a restore is bit-exact:
//! a monitor restored from a snapshot behaves exactly as the one that wrote it.
//!
//! # Invariants
//! - [`Snapshot::parse`] and [`Monitor::restore`] never panic, whatever the bytes; each way
//!   of being wrong has its own [`SnapshotError`] variant, checked in this order: too short
//!   for a header, magic, version, payload length against the bytes there (short or
//!   long), CRC, layout (float width and capacities), payload decoding, state validation.
//! - A restored monitor has passed [`MonitorConfig::validate`](crate::monitor::MonitorConfig::validate)
//!   and its fits, ladder and spread settings agree with its configuration, so pushing
//!   samples into it keeps every invariant of [`Monitor::push`].
//! - The encoded size of a `Monitor<R, P, BINS, Q>` is at most
//!   [`max_snapshot_len::<R, P, BINS, Q>()`](max_snapshot_len); for the default `f32`
//!   monitor that is [`MAX_SNAPSHOT_LEN`].
//!
//! # Versioning
//! The version changes whenever the bytes of a snapshot of the same state would change: a
//! field added, removed, reordered or retyped in any state or configuration type, a
//! variant added anywhere but at the end of an enum, a change of header layout. A decoder
//! accepts exactly the versions it knows ([`FORMAT_VERSION`] only, today) and refuses the
//! rest with [`SnapshotError::UnknownVersion`]; it never guesses. The committed fixture
//! `core/tests/data/snapshot-v2.bin` must keep decoding (see `core/tests/snapshot_fixture.rs`).

use crc::{Crc, CRC_32_ISO_HDLC};

use crate::checksum::CrcMethod;
use crate::monitor::{ConfigError, Monitor, Unusable};
use crate::real::Real;
use crate::wire;

/// The four bytes every snapshot starts with.
pub const MAGIC: [u8; 4] = *b"SCsn";
/// The snapshot format version this build writes and reads.
pub const FORMAT_VERSION: u16 = 5;
/// Bytes before the payload.
pub const HEADER_LEN: usize = 14;
/// Bytes of the trailing CRC.
pub const CRC_LEN: usize = 4;
/// The CRC of a snapshot: CRC-32/ISO-HDLC (the CRC-32 of zlib, PNG and Ethernet).
pub const CRC32: Crc<u32, CrcMethod> = Crc::<u32, CrcMethod>::new(&CRC_32_ISO_HDLC);

/// Writes the [`CRC32`] of `bytes[..len]`, little-endian, into the [`CRC_LEN`] bytes after
/// it and returns the sealed length; `None` when `bytes` has no room for it. A checked
/// split, so no panic path on a board (the snapshot writer and the store's record writer
/// both seal this way).
pub(crate) fn seal_crc32(bytes: &mut [u8], len: usize) -> Option<usize> {
    let sealed = len.checked_add(CRC_LEN)?;
    let (data, crc_out) = bytes.get_mut(..sealed)?.split_last_chunk_mut::<CRC_LEN>()?;
    *crc_out = CRC32.checksum(data).to_le_bytes();
    Some(sealed)
}

/// Upper bound of the encoded snapshot of a `Monitor<R, P, BINS, Q>`, header and CRC
/// included.
///
/// The bound is by hand: postcard writes a float in its own width, a `bool` or `u8` in one
/// byte, and a `u16`/`u32`/`u64` varint in at most 3/5/10 bytes (at most 1.5× its width);
/// an `Option` or enum tag takes one byte (fewer than 128 variants everywhere), which a
/// niche-packed `Option` of a one-byte enum does not have in memory (2× for those few
/// bytes). Every field of the monitor is one of these, and the in-memory layout also
/// holds the unused capacity of the event queue. So `3/2 · size_of` plus a margin of 64
/// bytes bounds the payload. The test `worst_case_fits_the_bound` checks it against the
/// largest encoding of a real monitor after a long run, walked by a serializer that counts
/// every integer at its longest varint, a full event queue of the largest event, and a
/// generous allowance for each option left empty (format 5, f32: 1,800 bytes against 3,106).
pub const fn max_snapshot_len<R, const P: usize, const BINS: usize, const Q: usize>() -> usize {
    let size = core::mem::size_of::<Monitor<R, P, BINS, Q>>();
    HEADER_LEN + size + size / 2 + 64 + CRC_LEN
}

/// Snapshot bytes a board reserves for the default monitor, `Monitor<f32>` (3 parameters,
/// 16 bins, a queue of 8), header and CRC included: 1,856. The README states the figure.
///
/// This is the measured worst case with a margin, not the proven bound: the test
/// `worst_case_fits_the_bound` walks a monitor after a long run with every integer at its
/// longest varint, a full queue of the largest event and an allowance for each empty
/// option, with two and with three fit parameters, and finds at most 1,800 bytes. The
/// proven bound [`max_snapshot_len`] (3,106 bytes here) is looser. Should a state ever
/// need more than this, [`Monitor::snapshot`] refuses with
/// [`SnapshotError::BufferTooSmall`] and the store keeps the previous snapshot: nothing is
/// cut or overwritten.
pub const MAX_SNAPSHOT_LEN: usize = 1856;

/// The proven bound is at least the reserved size (the reserve is a tightening of it).
const _: () = assert!(MAX_SNAPSHOT_LEN <= max_snapshot_len::<f32, 3, 16, 8>());

/// The float width and capacities a snapshot was written with.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Layout {
    /// Float width in bits: 32 or 64.
    pub real_bits: u8,
    /// Fit parameters `P`.
    pub params: u8,
    /// Spread bins `BINS`.
    pub bins: u8,
    /// Event queue capacity `Q`.
    pub queue: u8,
}

impl Layout {
    /// The layout of a `Monitor<R, P, BINS, Q>` (capacities above 255 are written as 255,
    /// which no restore then matches).
    pub const fn of<R: Real, const P: usize, const BINS: usize, const Q: usize>() -> Self {
        const fn byte(value: usize) -> u8 {
            if value > 255 {
                255
            } else {
                value as u8
            }
        }
        Layout {
            real_bits: R::BITS as u8,
            params: byte(P),
            bins: byte(BINS),
            queue: byte(Q),
        }
    }
}

/// Why a snapshot cannot be written or read.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SnapshotError {
    /// Fewer bytes than a header.
    Truncated {
        /// Bytes there.
        found: usize,
    },
    /// The first four bytes are not [`MAGIC`].
    BadMagic {
        /// The bytes found.
        found: [u8; 4],
    },
    /// A format version this build does not read.
    UnknownVersion {
        /// The version found.
        found: u16,
    },
    /// The bytes end before the payload and CRC the header announces.
    ShortPayload {
        /// Bytes the header announces (header, payload and CRC).
        expected: usize,
        /// Bytes there.
        found: usize,
    },
    /// Bytes follow the CRC the header places.
    LongPayload {
        /// Bytes the header announces (header, payload and CRC).
        expected: usize,
        /// Bytes there.
        found: usize,
    },
    /// The CRC does not match the bytes.
    BadCrc {
        /// CRC stored in the snapshot.
        stored: u32,
        /// CRC of the bytes.
        computed: u32,
    },
    /// The snapshot was written by a monitor of another float width or capacities.
    LayoutMismatch {
        /// Layout of the monitor being restored.
        expected: Layout,
        /// Layout in the snapshot.
        found: Layout,
    },
    /// The payload (CRC correct) does not decode as a monitor of this version.
    MalformedPayload,
    /// The payload decodes but leaves bytes unused.
    PayloadLeftover {
        /// Payload bytes not used by the decoded monitor.
        unused: usize,
    },
    /// The decoded configuration is not usable.
    InvalidConfig(ConfigError),
    /// The decoded state disagrees with its configuration (fit size, ladder or spread
    /// settings).
    InconsistentState,
    /// The output buffer is too small for the snapshot.
    BufferTooSmall {
        /// Bytes given.
        capacity: usize,
    },
}

impl SnapshotError {
    /// A short description of what is wrong, for messages.
    pub const fn reason(&self) -> &'static str {
        match self {
            SnapshotError::Truncated { .. } => "shorter than a snapshot header",
            SnapshotError::BadMagic { .. } => "not a steadycal snapshot (wrong magic)",
            SnapshotError::UnknownVersion { .. } => "unknown snapshot format version",
            SnapshotError::ShortPayload { .. } => "payload shorter than its header says",
            SnapshotError::LongPayload { .. } => "bytes after the end the header gives",
            SnapshotError::BadCrc { .. } => "CRC mismatch (damaged snapshot)",
            SnapshotError::LayoutMismatch { .. } => {
                "written by a monitor of another float width or capacity"
            }
            SnapshotError::MalformedPayload => "payload does not decode as a monitor",
            SnapshotError::PayloadLeftover { .. } => "payload longer than the monitor it holds",
            SnapshotError::InvalidConfig(_) => "configuration in the snapshot is not usable",
            SnapshotError::InconsistentState => "state disagrees with its configuration",
            SnapshotError::BufferTooSmall { .. } => "output buffer too small",
        }
    }
}

/// The parsed header of a snapshot.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Header {
    /// Format version.
    pub version: u16,
    /// Float width and capacities.
    pub layout: Layout,
    /// Payload length in bytes.
    pub payload_len: u32,
}

impl Header {
    /// Parses the first [`HEADER_LEN`] bytes: magic, version, layout, payload length.
    pub fn parse(bytes: &[u8]) -> Result<Header, SnapshotError> {
        let Some(head) = bytes.get(..HEADER_LEN) else {
            return Err(SnapshotError::Truncated { found: bytes.len() });
        };
        let magic = [head[0], head[1], head[2], head[3]];
        if magic != MAGIC {
            return Err(SnapshotError::BadMagic { found: magic });
        }
        let version = u16::from_le_bytes([head[4], head[5]]);
        if version != FORMAT_VERSION {
            return Err(SnapshotError::UnknownVersion { found: version });
        }
        Ok(Header {
            version,
            layout: Layout {
                real_bits: head[6],
                params: head[7],
                bins: head[8],
                queue: head[9],
            },
            payload_len: u32::from_le_bytes([head[10], head[11], head[12], head[13]]),
        })
    }

    /// Total length of the snapshot this header starts: header, payload and CRC
    /// (saturating, so a huge length field cannot overflow).
    pub fn total_len(&self) -> usize {
        (self.payload_len as usize)
            .saturating_add(HEADER_LEN)
            .saturating_add(CRC_LEN)
    }

    fn write(&self, out: &mut [u8; HEADER_LEN]) {
        out[..4].copy_from_slice(&MAGIC);
        out[4..6].copy_from_slice(&self.version.to_le_bytes());
        out[6] = self.layout.real_bits;
        out[7] = self.layout.params;
        out[8] = self.layout.bins;
        out[9] = self.layout.queue;
        out[10..14].copy_from_slice(&self.payload_len.to_le_bytes());
    }
}

/// A snapshot whose header and CRC check, not yet decoded into a monitor.
#[derive(Clone, Copy, Debug)]
pub struct Snapshot<'a> {
    header: Header,
    bytes: &'a [u8],
    crc: u32,
}

impl<'a> Snapshot<'a> {
    /// Checks magic, version, length and CRC of exactly one snapshot in `bytes`.
    pub fn parse(bytes: &'a [u8]) -> Result<Snapshot<'a>, SnapshotError> {
        let header = Header::parse(bytes)?;
        let expected = header.total_len();
        if bytes.len() < expected {
            return Err(SnapshotError::ShortPayload {
                expected,
                found: bytes.len(),
            });
        }
        if bytes.len() > expected {
            return Err(SnapshotError::LongPayload {
                expected,
                found: bytes.len(),
            });
        }
        let body = expected - CRC_LEN;
        let tail = &bytes[body..];
        let stored = u32::from_le_bytes([tail[0], tail[1], tail[2], tail[3]]);
        let computed = CRC32.checksum(&bytes[..body]);
        if stored != computed {
            return Err(SnapshotError::BadCrc { stored, computed });
        }
        Ok(Snapshot {
            header,
            bytes,
            crc: stored,
        })
    }

    /// The header.
    pub fn header(&self) -> Header {
        self.header
    }

    /// The stored CRC-32.
    pub fn crc(&self) -> u32 {
        self.crc
    }

    /// The snapshot's bytes (header, payload, CRC).
    pub fn bytes(&self) -> &'a [u8] {
        self.bytes
    }

    /// The postcard payload.
    pub fn payload(&self) -> &'a [u8] {
        // In range for every parsed snapshot; the checked form keeps a panic path (and
        // its source location) off a board.
        let end = self.bytes.len().saturating_sub(CRC_LEN);
        self.bytes.get(HEADER_LEN..end).unwrap_or(&[])
    }

    /// Decodes the monitor (layout, payload and state checked).
    ///
    /// Out of line: inlined into a caller with a stack frame above 4 KiB (a board's
    /// restore path holding a second monitor), every field store of the decoder needs an
    /// extra address instruction.
    #[inline(never)]
    pub fn monitor<R: Real, const P: usize, const BINS: usize, const Q: usize>(
        &self,
    ) -> Result<Monitor<R, P, BINS, Q>, SnapshotError> {
        let expected = Layout::of::<R, P, BINS, Q>();
        if self.header.layout != expected {
            return Err(SnapshotError::LayoutMismatch {
                expected,
                found: self.header.layout,
            });
        }
        let payload = self.payload();
        let mut monitor = Monitor::<R, P, BINS, Q>::blank();
        let unused = wire::decode_into(&mut monitor, payload)
            .map_err(|_| SnapshotError::MalformedPayload)?;
        if unused != 0 {
            return Err(SnapshotError::PayloadLeftover { unused });
        }
        monitor
            .complete_restored()
            .map_err(|unusable| match unusable {
                Unusable::Config(error) => SnapshotError::InvalidConfig(error),
                Unusable::Inconsistent => SnapshotError::InconsistentState,
            })?;
        Ok(monitor)
    }
}

impl<R: Real, const P: usize, const BINS: usize, const Q: usize> Monitor<R, P, BINS, Q> {
    /// Writes a snapshot of the whole monitor into `out`; returns its length (at most
    /// [`max_snapshot_len::<R, P, BINS, Q>()`](max_snapshot_len)).
    ///
    /// Takes `&mut self` but changes nothing: saving and restoring share one walk of the
    /// monitor's fields, written once for both directions to keep the board's flash small,
    /// and restoring needs write access. After a snapshot the monitor is as it was, and
    /// its next snapshot is byte-identical (the test
    /// `a_snapshot_leaves_the_monitor_as_it_was` checks both).
    ///
    /// ```
    /// use steadycal_core::monitor::{Monitor, MonitorConfig};
    /// use steadycal_core::snapshot::MAX_SNAPSHOT_LEN;
    /// let mut monitor: Monitor<f32> =
    ///     Monitor::new(MonitorConfig::default_for_range(1.0, 100.0)).unwrap();
    /// let mut buffer = [0u8; MAX_SNAPSHOT_LEN];
    /// let len = monitor.snapshot(&mut buffer).unwrap();
    /// let restored: Monitor<f32> = Monitor::restore(&buffer[..len]).unwrap();
    /// assert_eq!(restored.counters(), monitor.counters());
    /// ```
    pub fn snapshot(&mut self, out: &mut [u8]) -> Result<usize, SnapshotError> {
        let capacity = out.len();
        let too_small = SnapshotError::BufferTooSmall { capacity };
        // Checked splits throughout: no panic path (and no source location) on a board.
        let Some((header_out, rest)) = out.split_first_chunk_mut::<HEADER_LEN>() else {
            return Err(too_small);
        };
        let Some((payload_out, _)) = rest.split_last_chunk_mut::<CRC_LEN>() else {
            return Err(too_small);
        };
        let payload_len = wire::encode(self, payload_out).map_err(|_| too_small)?;
        let header = Header {
            version: FORMAT_VERSION,
            layout: Layout::of::<R, P, BINS, Q>(),
            payload_len: payload_len as u32,
        };
        header.write(header_out);
        seal_crc32(out, HEADER_LEN + payload_len).ok_or(too_small)
    }

    /// A monitor from a snapshot written by [`Monitor::snapshot`]: `bytes` must hold exactly
    /// one snapshot. Never panics; every fault is a [`SnapshotError`].
    pub fn restore(bytes: &[u8]) -> Result<Self, SnapshotError> {
        Snapshot::parse(bytes)?.monitor()
    }
}

#[cfg(test)]
mod tests;
