//! A two-slot snapshot store over any `embedded-storage` [`NorFlash`].
//!
//! The store owns a region of `2 × slot_len` bytes starting at `base`, both multiples of
//! the flash's `ERASE_SIZE`. Each slot holds one record:
//!
//! ```text
//! offset  size  field
//! 0       4     sequence number, u32 little-endian (1 for the first save)
//! 4       m     a snapshot (see crate::snapshot): header, payload, CRC-32
//! 4+m     4     CRC-32/ISO-HDLC of bytes 0 .. 4+m, u32 little-endian
//! ...           0xFF up to the next multiple of WRITE_SIZE (and to the slot end)
//! ```
//!
//! [`SnapshotStore::save`] erases and writes the slot that does *not* hold the newest good
//! record, with the next sequence number; [`SnapshotStore::load`] returns the good record
//! with the newest sequence number (compared with wrap-around). A record is good when its
//! snapshot's header and CRC check and the slot CRC checks.
//!
//! # Invariants
//! - A power cut at any byte of a save (during the erase or the write) leaves the previous
//!   newest record intact in the other slot, so `load` returns either it or, once the new
//!   record is complete, the new one; never an error and never a mixture. (Checked for
//!   every byte offset over 100 consecutive saves by this module's tests.)
//! - Erases cover whole `ERASE_SIZE` sectors; writes start on a `WRITE_SIZE` boundary and
//!   are a multiple of `WRITE_SIZE` long (padded with 0xFF, which NOR writes leave as is);
//!   reads start on a `READ_SIZE` boundary and are a multiple of `READ_SIZE` long.
//! - Nothing allocates: the caller lends a scratch buffer. One slot
//!   ([`SnapshotStore::scratch_len`]) always suffices; a board that knows its largest
//!   snapshot lends [`SnapshotStore::scratch_len_for`] of it instead (a record, rounded to
//!   the read and write sizes), which for the default `Monitor<f32>` is less than half of a
//!   4 KiB sector. A record that does not fit the scratch is an error
//!   ([`StoreError::ScratchTooSmall`]), never a silent fallback.

use embedded_storage::nor_flash::NorFlash;

use crate::monitor::Monitor;
use crate::real::Real;
use crate::snapshot::{seal_crc32, Header, Snapshot, SnapshotError, CRC32, CRC_LEN, HEADER_LEN};

/// Bytes of the sequence number before the snapshot in a slot.
pub const SEQ_LEN: usize = 4;

/// Why the store cannot do what was asked.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum StoreError<E> {
    /// `base` or `slot_len` is not a multiple of `ERASE_SIZE`, or a slot is too small for
    /// a record header.
    Misaligned,
    /// The two slots do not fit in the flash.
    OutOfBounds,
    /// The scratch buffer is shorter than [`SnapshotStore::scratch_len`].
    ScratchTooSmall,
    /// The snapshot does not fit in a slot.
    SnapshotTooLarge,
    /// The flash reported an error (a power cut, in tests).
    Flash(E),
    /// The newest good record does not restore (another layout, an unusable state).
    Snapshot(SnapshotError),
}

/// A loaded snapshot: where it was found and its bytes (in the caller's scratch buffer).
pub type Loaded<'s> = (SlotInfo, &'s [u8]);

/// Where a record was found or written.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct SlotInfo {
    /// Slot index, 0 or 1.
    pub slot: usize,
    /// Sequence number of the record.
    pub seq: u32,
    /// Bytes of the snapshot (without the slot's sequence number and CRC).
    pub len: usize,
}

/// Two snapshot slots in a region of a NOR flash.
#[derive(Debug)]
pub struct SnapshotStore<F> {
    flash: F,
    base: u32,
    slot_len: u32,
}

const fn round_up(value: usize, to: usize) -> usize {
    if to <= 1 {
        value
    } else {
        value.div_ceil(to) * to
    }
}

/// True when `a` is a later sequence number than `b` (serial-number arithmetic).
pub fn seq_newer(a: u32, b: u32) -> bool {
    a != b && (a.wrapping_sub(b) as i32) > 0
}

impl<F: NorFlash> SnapshotStore<F> {
    /// A store on `[base, base + 2 × slot_len)`; both must be multiples of `ERASE_SIZE`.
    pub fn new(flash: F, base: u32, slot_len: u32) -> Result<Self, StoreError<F::Error>> {
        let erase = F::ERASE_SIZE.max(1);
        let slot = slot_len as usize;
        if !(base as usize).is_multiple_of(erase)
            || !slot.is_multiple_of(erase)
            || slot < SEQ_LEN + HEADER_LEN + CRC_LEN + CRC_LEN
            || !slot.is_multiple_of(F::WRITE_SIZE.max(1))
        {
            return Err(StoreError::Misaligned);
        }
        let end = (base as usize)
            .checked_add(slot.checked_mul(2).ok_or(StoreError::OutOfBounds)?)
            .ok_or(StoreError::OutOfBounds)?;
        if end > flash.capacity() || end > u32::MAX as usize {
            return Err(StoreError::OutOfBounds);
        }
        Ok(SnapshotStore {
            flash,
            base,
            slot_len,
        })
    }

    /// The flash back (for example to cut power on it in a test).
    pub fn into_inner(self) -> F {
        self.flash
    }

    /// The flash.
    pub fn flash(&self) -> &F {
        &self.flash
    }

    /// The slot length.
    pub fn slot_len(&self) -> usize {
        self.slot_len as usize
    }

    /// Scratch bytes that always suffice for `save` and `load`: one slot.
    pub fn scratch_len(&self) -> usize {
        self.slot_len as usize
    }

    /// Scratch bytes that suffice while no snapshot is longer than `snapshot_max` bytes
    /// (for example [`crate::snapshot::MAX_SNAPSHOT_LEN`]): the sequence number, the
    /// snapshot and the slot CRC, rounded up to the read and write sizes; at most a slot.
    pub fn scratch_len_for(&self, snapshot_max: usize) -> usize {
        let unit = F::READ_SIZE.max(F::WRITE_SIZE).max(1);
        round_up(SEQ_LEN + snapshot_max + CRC_LEN, unit).min(self.slot_len())
    }

    /// The least scratch that can hold a record's sequence number and snapshot header.
    fn min_scratch(&self) -> usize {
        round_up(SEQ_LEN + HEADER_LEN, F::READ_SIZE.max(1)).min(self.slot_len())
    }

    fn slot_offset(&self, slot: usize) -> u32 {
        self.base + slot as u32 * self.slot_len
    }

    /// Reads and checks one slot into `scratch`; `None` when it holds no good record.
    fn read_slot(
        &mut self,
        slot: usize,
        scratch: &mut [u8],
    ) -> Result<Option<SlotInfo>, StoreError<F::Error>> {
        let read = F::READ_SIZE.max(1);
        let offset = self.slot_offset(slot);
        let head = round_up(SEQ_LEN + HEADER_LEN, read).min(self.slot_len());
        // Checked slices throughout (the callers made the scratch big enough): no panic
        // path on a board.
        let head_bytes = scratch.get_mut(..head).ok_or(StoreError::ScratchTooSmall)?;
        self.flash
            .read(offset, head_bytes)
            .map_err(StoreError::Flash)?;
        let Ok(header) = Header::parse(head_bytes.get(SEQ_LEN..).unwrap_or(&[])) else {
            return Ok(None);
        };
        let len = header.total_len();
        let record = SEQ_LEN.saturating_add(len).saturating_add(CRC_LEN);
        if record > self.slot_len() {
            return Ok(None);
        }
        let whole = round_up(record, read).min(self.slot_len());
        if whole > scratch.len() {
            return Err(StoreError::ScratchTooSmall);
        }
        if let Some(rest) = scratch.get_mut(head..whole).filter(|rest| !rest.is_empty()) {
            self.flash
                .read(offset + head as u32, rest)
                .map_err(StoreError::Flash)?;
        }
        let body = SEQ_LEN + len;
        // Always there (`body + CRC_LEN` is `record` ≤ `whole` ≤ the scratch length): one
        // checked split instead of a bounds check, and a panic path, per byte.
        let Some((data, &[a, b, c, d])) = scratch
            .get(..body + CRC_LEN)
            .and_then(|bytes| bytes.split_last_chunk::<CRC_LEN>())
        else {
            return Ok(None);
        };
        let stored = u32::from_le_bytes([a, b, c, d]);
        let Some((&seq, snapshot)) = data.split_first_chunk::<SEQ_LEN>() else {
            return Ok(None);
        };
        if CRC32.checksum(data) != stored || Snapshot::parse(snapshot).is_err() {
            return Ok(None);
        }
        let seq = u32::from_le_bytes(seq);
        Ok(Some(SlotInfo { slot, seq, len }))
    }

    /// The good record with the newest sequence number, checked but not decoded, or
    /// `None` when neither slot holds one. On `Some`, the snapshot's bytes are
    /// `scratch[SEQ_LEN..SEQ_LEN + info.len]`.
    pub fn newest(&mut self, scratch: &mut [u8]) -> Result<Option<SlotInfo>, StoreError<F::Error>> {
        if scratch.len() < self.min_scratch() {
            return Err(StoreError::ScratchTooSmall);
        }
        let first = self.read_slot(0, scratch)?;
        let second = self.read_slot(1, scratch)?;
        let newest = match (first, second) {
            (Some(a), Some(b)) => {
                if seq_newer(b.seq, a.seq) {
                    Some(b)
                } else {
                    Some(a)
                }
            }
            (a, b) => a.or(b),
        };
        // Leave the newest record in the scratch buffer (reading slot 1 overwrote it).
        if let Some(info) = newest {
            if info.slot == 0 {
                self.read_slot(0, scratch)?;
            }
        }
        Ok(newest)
    }

    /// Loads the newest good snapshot's bytes into `scratch`; returns them with where they
    /// came from, or `None` when the store is empty (or both slots are damaged).
    pub fn load<'s>(
        &mut self,
        scratch: &'s mut [u8],
    ) -> Result<Option<Loaded<'s>>, StoreError<F::Error>> {
        match self.newest(scratch)? {
            Some(info) => {
                // In range (`newest` checked the record in this scratch); checked anyway,
                // which keeps a panic path off a board.
                let bytes = scratch
                    .get(SEQ_LEN..SEQ_LEN + info.len)
                    .ok_or(StoreError::ScratchTooSmall)?;
                Ok(Some((info, bytes)))
            }
            None => Ok(None),
        }
    }

    /// Loads and restores the newest good snapshot as a monitor.
    pub fn load_monitor<R: Real, const P: usize, const BINS: usize, const Q: usize>(
        &mut self,
        scratch: &mut [u8],
    ) -> Result<Option<Monitor<R, P, BINS, Q>>, StoreError<F::Error>> {
        match self.load(scratch)? {
            Some((_, bytes)) => Monitor::restore(bytes)
                .map(Some)
                .map_err(StoreError::Snapshot),
            None => Ok(None),
        }
    }

    /// Saves a monitor's snapshot into the slot not holding the newest good record.
    ///
    /// The monitor is taken by `&mut` for [`Monitor::snapshot`], which changes nothing
    /// (see there why).
    pub fn save<R: Real, const P: usize, const BINS: usize, const Q: usize>(
        &mut self,
        monitor: &mut Monitor<R, P, BINS, Q>,
        scratch: &mut [u8],
    ) -> Result<SlotInfo, StoreError<F::Error>> {
        let newest = self.newest(scratch)?;
        let room = self.room(scratch);
        // Within the scratch (`room` leaves its sequence number and CRC); checked slices
        // here and below keep panic paths off a board.
        let snapshot_out = scratch
            .get_mut(SEQ_LEN..SEQ_LEN + room)
            .ok_or(StoreError::ScratchTooSmall)?;
        let len = monitor
            .snapshot(snapshot_out)
            .map_err(|_| StoreError::SnapshotTooLarge)?;
        self.write_record(newest, len, scratch)
    }

    /// Saves snapshot bytes already in hand (checked first) like [`SnapshotStore::save`].
    pub fn save_bytes(
        &mut self,
        snapshot: &[u8],
        scratch: &mut [u8],
    ) -> Result<SlotInfo, StoreError<F::Error>> {
        Snapshot::parse(snapshot).map_err(StoreError::Snapshot)?;
        let newest = self.newest(scratch)?;
        if snapshot.len() > self.room(scratch) {
            return Err(StoreError::SnapshotTooLarge);
        }
        scratch[SEQ_LEN..SEQ_LEN + snapshot.len()].copy_from_slice(snapshot);
        self.write_record(newest, snapshot.len(), scratch)
    }

    /// Snapshot bytes a record can carry: the slot or the scratch, whichever is smaller,
    /// less the sequence number, the slot CRC and the write padding.
    fn room(&self, scratch: &[u8]) -> usize {
        let usable = scratch.len().min(self.slot_len());
        let usable = usable - usable % F::WRITE_SIZE.max(1);
        usable.saturating_sub(SEQ_LEN + CRC_LEN)
    }

    /// Writes the record whose snapshot sits at `scratch[SEQ_LEN..SEQ_LEN + len]`.
    fn write_record(
        &mut self,
        newest: Option<SlotInfo>,
        len: usize,
        scratch: &mut [u8],
    ) -> Result<SlotInfo, StoreError<F::Error>> {
        let (slot, seq) = match newest {
            Some(info) => (1 - info.slot, info.seq.wrapping_add(1)),
            None => (0, 1),
        };
        let body = SEQ_LEN + len;
        let record = body + CRC_LEN;
        let padded = round_up(record, F::WRITE_SIZE.max(1));
        if padded > self.slot_len() {
            return Err(StoreError::SnapshotTooLarge);
        }
        // The record image: sequence number, snapshot (already in place), CRC, padding.
        let image = scratch
            .get_mut(..padded)
            .ok_or(StoreError::ScratchTooSmall)?;
        let Some((seq_out, _)) = image.split_first_chunk_mut::<SEQ_LEN>() else {
            return Err(StoreError::ScratchTooSmall);
        };
        *seq_out = seq.to_le_bytes();
        seal_crc32(image, body).ok_or(StoreError::ScratchTooSmall)?;
        if let Some(padding) = image.get_mut(record..) {
            padding.fill(0xFF);
        }
        let offset = self.slot_offset(slot);
        self.flash
            .erase(offset, offset + self.slot_len)
            .map_err(StoreError::Flash)?;
        self.flash.write(offset, image).map_err(StoreError::Flash)?;
        Ok(SlotInfo { slot, seq, len })
    }
}

/// A RAM-backed NOR flash with real NOR semantics and a power switch, for tests.
///
/// Erase sets bytes to 0xFF (whole `ERASE`-byte sectors), a write can only clear bits
/// (new = old AND data), writes must be `WRITE`-aligned and erases `ERASE`-aligned.
/// [`RamFlash::cut_after`] arms a power cut after that many more bytes erased or written:
/// the operation in progress stops there (the bytes before it done, the rest untouched)
/// and returns [`RamFlashError::PowerCut`]; every later operation fails until
/// [`RamFlash::power_on`].
#[cfg(any(test, feature = "testing"))]
#[derive(Clone, Debug)]
pub struct RamFlash<const SIZE: usize, const WRITE: usize = 4, const ERASE: usize = 256> {
    data: [u8; SIZE],
    budget: Option<usize>,
    powered: bool,
    /// Bytes erased or written since creation (power-cut offsets count these).
    pub operations: usize,
}

/// What a [`RamFlash`] refuses.
#[cfg(any(test, feature = "testing"))]
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum RamFlashError {
    /// Offset or length not aligned to the operation's size.
    NotAligned,
    /// Outside the flash.
    OutOfBounds,
    /// The power was cut.
    PowerCut,
}

#[cfg(any(test, feature = "testing"))]
impl embedded_storage::nor_flash::NorFlashError for RamFlashError {
    fn kind(&self) -> embedded_storage::nor_flash::NorFlashErrorKind {
        use embedded_storage::nor_flash::NorFlashErrorKind;
        match self {
            RamFlashError::NotAligned => NorFlashErrorKind::NotAligned,
            RamFlashError::OutOfBounds => NorFlashErrorKind::OutOfBounds,
            RamFlashError::PowerCut => NorFlashErrorKind::Other,
        }
    }
}

#[cfg(any(test, feature = "testing"))]
impl<const SIZE: usize, const WRITE: usize, const ERASE: usize> Default
    for RamFlash<SIZE, WRITE, ERASE>
{
    fn default() -> Self {
        Self::new()
    }
}

#[cfg(any(test, feature = "testing"))]
impl<const SIZE: usize, const WRITE: usize, const ERASE: usize> RamFlash<SIZE, WRITE, ERASE> {
    /// A fully erased flash.
    pub const fn new() -> Self {
        RamFlash {
            data: [0xFF; SIZE],
            budget: None,
            powered: true,
            operations: 0,
        }
    }

    /// Cuts the power after `bytes` more bytes erased or written.
    pub fn cut_after(&mut self, bytes: usize) {
        self.budget = Some(bytes);
    }

    /// Power back on, no cut armed.
    pub fn power_on(&mut self) {
        self.budget = None;
        self.powered = true;
    }

    /// The contents.
    pub fn data(&self) -> &[u8; SIZE] {
        &self.data
    }

    /// One byte operation; false when the power goes (or is gone).
    fn spend(&mut self) -> bool {
        if !self.powered {
            return false;
        }
        match &mut self.budget {
            Some(0) => {
                self.powered = false;
                false
            }
            Some(left) => {
                *left -= 1;
                self.operations += 1;
                true
            }
            None => {
                self.operations += 1;
                true
            }
        }
    }
}

#[cfg(any(test, feature = "testing"))]
impl<const SIZE: usize, const WRITE: usize, const ERASE: usize>
    embedded_storage::nor_flash::ErrorType for RamFlash<SIZE, WRITE, ERASE>
{
    type Error = RamFlashError;
}

#[cfg(any(test, feature = "testing"))]
impl<const SIZE: usize, const WRITE: usize, const ERASE: usize>
    embedded_storage::nor_flash::ReadNorFlash for RamFlash<SIZE, WRITE, ERASE>
{
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), RamFlashError> {
        if !self.powered {
            return Err(RamFlashError::PowerCut);
        }
        let start = offset as usize;
        let end = start
            .checked_add(bytes.len())
            .ok_or(RamFlashError::OutOfBounds)?;
        let source = self
            .data
            .get(start..end)
            .ok_or(RamFlashError::OutOfBounds)?;
        bytes.copy_from_slice(source);
        Ok(())
    }

    fn capacity(&self) -> usize {
        SIZE
    }
}

#[cfg(any(test, feature = "testing"))]
impl<const SIZE: usize, const WRITE: usize, const ERASE: usize> NorFlash
    for RamFlash<SIZE, WRITE, ERASE>
{
    const WRITE_SIZE: usize = WRITE;
    const ERASE_SIZE: usize = ERASE;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), RamFlashError> {
        let (from, to) = (from as usize, to as usize);
        if !from.is_multiple_of(ERASE) || !to.is_multiple_of(ERASE) || from > to {
            return Err(RamFlashError::NotAligned);
        }
        if to > SIZE {
            return Err(RamFlashError::OutOfBounds);
        }
        for index in from..to {
            if !self.spend() {
                return Err(RamFlashError::PowerCut);
            }
            self.data[index] = 0xFF;
        }
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), RamFlashError> {
        let start = offset as usize;
        if !start.is_multiple_of(WRITE) || !bytes.len().is_multiple_of(WRITE) {
            return Err(RamFlashError::NotAligned);
        }
        if start.checked_add(bytes.len()).is_none_or(|end| end > SIZE) {
            return Err(RamFlashError::OutOfBounds);
        }
        for (index, byte) in bytes.iter().enumerate() {
            if !self.spend() {
                return Err(RamFlashError::PowerCut);
            }
            self.data[start + index] &= *byte;
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::monitor::MonitorConfig;
    use crate::sample::Sample;
    use crate::snapshot::MAX_SNAPSHOT_LEN;

    const ERASE: usize = 256;
    const SLOT: usize = round_up(MAX_SNAPSHOT_LEN + SEQ_LEN + CRC_LEN, ERASE);
    type Flash = RamFlash<{ 2 * SLOT + ERASE }, 4, ERASE>;

    fn advance(monitor: &mut Monitor<f32>, step: u64) {
        // Invented samples, a few per save so that consecutive snapshots differ.
        for i in step * 7..step * 7 + 7 {
            let reference = 1.0 + (i % 30) as f32 * 3.0;
            let noise = 0.02 * (((i * 7919) % 13) as f32 - 6.0);
            monitor.push(&Sample::check(
                i,
                i as f64,
                0.5 + 1.5 * reference + noise,
                reference,
            ));
        }
    }

    #[test]
    fn empty_store_loads_nothing_and_first_save_goes_to_slot_zero() {
        let mut store = SnapshotStore::new(Flash::new(), ERASE as u32, SLOT as u32).unwrap();
        let mut scratch = [0u8; SLOT];
        assert_eq!(store.load(&mut scratch).unwrap(), None);
        let mut monitor: Monitor<f32> =
            Monitor::new(MonitorConfig::default_for_range(1.0, 100.0)).unwrap();
        let info = store.save(&mut monitor, &mut scratch).unwrap();
        assert_eq!((info.slot, info.seq), (0, 1));
        let info = store.save(&mut monitor, &mut scratch).unwrap();
        assert_eq!((info.slot, info.seq), (1, 2));
        let info = store.save(&mut monitor, &mut scratch).unwrap();
        assert_eq!((info.slot, info.seq), (0, 3));
        let loaded: Monitor<f32> = store.load_monitor(&mut scratch).unwrap().unwrap();
        assert_eq!(loaded.counters(), monitor.counters());
    }

    #[test]
    fn a_scratch_too_small_for_the_record_is_an_error() {
        let mut store = SnapshotStore::new(Flash::new(), ERASE as u32, SLOT as u32).unwrap();
        let mut monitor: Monitor<f32> =
            Monitor::new(MonitorConfig::default_for_range(1.0, 100.0)).unwrap();
        advance(&mut monitor, 0);
        let mut scratch = [0u8; SLOT];
        store.save(&mut monitor, &mut scratch).unwrap();
        let mut tiny = [0u8; 8];
        assert_eq!(store.load(&mut tiny), Err(StoreError::ScratchTooSmall));
        let mut short = [0u8; 200];
        assert_eq!(store.load(&mut short), Err(StoreError::ScratchTooSmall));
        assert_eq!(
            store.save(&mut monitor, &mut short),
            Err(StoreError::ScratchTooSmall)
        );
        // The good record is still there.
        assert!(store.load(&mut scratch).unwrap().is_some());
    }

    #[test]
    fn alignment_is_checked() {
        assert!(matches!(
            SnapshotStore::new(Flash::new(), 10, SLOT as u32),
            Err(StoreError::Misaligned)
        ));
        assert!(matches!(
            SnapshotStore::new(Flash::new(), 0, 100),
            Err(StoreError::Misaligned)
        ));
        assert!(matches!(
            SnapshotStore::new(Flash::new(), 2 * ERASE as u32, SLOT as u32),
            Err(StoreError::OutOfBounds)
        ));
    }

    #[test]
    fn sequence_numbers_wrap() {
        assert!(seq_newer(1, 0));
        assert!(seq_newer(0, u32::MAX));
        assert!(!seq_newer(u32::MAX, 0));
        assert!(!seq_newer(5, 5));
    }

    /// For every byte offset of each of `saves` consecutive saves (erase and write), cut
    /// the power there: `load` must return the previous snapshot or the new one, bit for
    /// bit, never an error and never anything else. `stride` > 1 samples the offsets.
    fn power_cut_at_every_byte(saves: u64, stride: usize) -> (u64, usize) {
        let mut flash = Flash::new();
        let mut monitor: Monitor<f32> =
            Monitor::new(MonitorConfig::default_for_range(1.0, 100.0)).unwrap();
        let mut scratch = [0u8; SLOT];
        let mut previous: Option<std::vec::Vec<u8>> = None;
        let mut cuts = 0usize;
        for step in 0..saves {
            advance(&mut monitor, step);
            let mut expected = [0u8; MAX_SNAPSHOT_LEN];
            let len = monitor.snapshot(&mut expected).unwrap();
            let new = &expected[..len];
            // The full save, measured.
            let mut complete = flash.clone();
            let before = complete.operations;
            let mut store = SnapshotStore::new(&mut complete, ERASE as u32, SLOT as u32).unwrap();
            store.save(&mut monitor, &mut scratch).unwrap();
            let total = complete.operations - before;
            let mut offset = 0;
            while offset <= total {
                let mut cut = flash.clone();
                cut.cut_after(offset);
                let mut store = SnapshotStore::new(&mut cut, ERASE as u32, SLOT as u32).unwrap();
                let result = store.save(&mut monitor, &mut scratch);
                assert_eq!(
                    result.is_ok(),
                    offset >= total,
                    "offset {offset} of {total}: {result:?}"
                );
                cut.power_on();
                let mut store = SnapshotStore::new(&mut cut, ERASE as u32, SLOT as u32).unwrap();
                let loaded = store.load(&mut scratch).expect("load never fails");
                match (loaded, &previous) {
                    (Some((_, bytes)), Some(old)) => assert!(
                        bytes == new || bytes == &old[..],
                        "save {step}, cut at {offset}: neither snapshot"
                    ),
                    (Some((_, bytes)), None) => {
                        assert!(bytes == new, "save {step}, cut at {offset}")
                    }
                    (None, None) => assert!(offset < total),
                    (None, Some(_)) => {
                        panic!("save {step}, cut at {offset}: lost the previous snapshot")
                    }
                }
                cuts += 1;
                offset += if offset + stride > total && offset < total {
                    total - offset
                } else {
                    stride
                };
            }
            flash = complete;
            previous = Some(std::vec::Vec::from(new));
        }
        (saves, cuts)
    }

    #[test]
    fn other_geometry_16_byte_writes_4_kib_sectors() {
        // One 4 KiB sector per slot, 16-byte write units: records are padded, offsets
        // aligned; power cuts sampled every 61st byte over 12 saves.
        type Big = RamFlash<{ 3 * 4096 }, 16, 4096>;
        let mut flash = Big::new();
        let mut monitor: Monitor<f32> =
            Monitor::new(MonitorConfig::default_for_range(1.0, 100.0)).unwrap();
        // A board's scratch: one record of the largest default snapshot, not a sector.
        const SMALL: usize = round_up(SEQ_LEN + MAX_SNAPSHOT_LEN + CRC_LEN, 16);
        assert_eq!(
            SnapshotStore::new(Big::new(), 4096, 4096)
                .unwrap()
                .scratch_len_for(MAX_SNAPSHOT_LEN),
            SMALL
        );
        let mut scratch = [0u8; SMALL];
        let mut previous: Option<std::vec::Vec<u8>> = None;
        for step in 0..12 {
            advance(&mut monitor, step);
            let mut expected = [0u8; MAX_SNAPSHOT_LEN];
            let len = monitor.snapshot(&mut expected).unwrap();
            for offset in (0..4096 + len + 8).step_by(61) {
                let mut cut = flash.clone();
                cut.cut_after(offset);
                let mut store = SnapshotStore::new(&mut cut, 4096, 4096).unwrap();
                let _ = store.save(&mut monitor, &mut scratch);
                cut.power_on();
                let mut store = SnapshotStore::new(&mut cut, 4096, 4096).unwrap();
                match (store.load(&mut scratch).unwrap(), &previous) {
                    (Some((_, bytes)), Some(old)) => {
                        assert!(bytes == &expected[..len] || bytes == &old[..])
                    }
                    (Some((_, bytes)), None) => assert!(bytes == &expected[..len]),
                    (None, None) => {}
                    (None, Some(_)) => panic!("save {step}, cut at {offset}: lost"),
                }
            }
            let mut store = SnapshotStore::new(&mut flash, 4096, 4096).unwrap();
            let info = store.save(&mut monitor, &mut scratch).unwrap();
            assert_eq!(info.seq, step as u32 + 1);
            previous = Some(std::vec::Vec::from(&expected[..len]));
        }
    }

    #[test]
    fn power_cut_at_any_byte_keeps_a_good_snapshot() {
        // Every byte offset over 100 consecutive saves in release builds; every 37th byte
        // in debug builds (the same test, reduced, to keep `cargo test` quick).
        let stride = if cfg!(debug_assertions) { 37 } else { 1 };
        let (saves, cuts) = power_cut_at_every_byte(101, stride);
        std::eprintln!("power-cut test: {saves} saves, {cuts} cuts (stride {stride})");
        assert!(saves >= 100);
    }
}
