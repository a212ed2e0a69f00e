//! Storage on the board: a RAM-backed NOR flash standing in for the part's real flash, the
//! core's two-slot snapshot store on it, and the log region the board's events go to.
//!
//! Geometry (a common internal-flash layout: 4 KiB pages programmed in 32-bit words, as
//! on the nRF52 family, from memory): [`SECTOR`] = 4,096-byte erase sectors, [`WRITE`] =
//! 4-byte write units, byte reads. A unit can be written once after an erase (writing a
//! unit that is not blank is refused, as many parts refuse it). Layout of the
//! [`FLASH_LEN`] bytes:
//!
//! ```text
//! 0          SLOT_LEN     2·SLOT_LEN                     FLASH_LEN
//! | slot 0    | slot 1     | event log (LOG_SECTORS sectors) |
//! ```
//!
//! One slot is the smallest whole number of sectors that holds the core's bound on the
//! snapshot of a `Monitor<f32>` (`MAX_SNAPSHOT_LEN`) with the store's sequence number and
//! CRC (checked at compile time): one sector. The store's scratch buffer ([`SCRATCH`], in
//! `.bss`) holds one record of that size ([`SCRATCH_LEN`], the core's
//! `SnapshotStore::scratch_len_for(MAX_SNAPSHOT_LEN)`), not a whole sector, and the store
//! encodes a snapshot straight into it, so no separate encode buffer is needed.
//!
//! The flash cells live in `.bss` (zeroed at reset) and are erased to 0xFF when taken, like
//! a blank part; they stand in for flash and are not RAM a real board would spend.

use embedded_storage::nor_flash::{
    ErrorType, NorFlash, NorFlashError, NorFlashErrorKind, ReadNorFlash,
};
use steadycal_core::snapshot::{CRC_LEN, MAX_SNAPSHOT_LEN};
use steadycal_core::store::SEQ_LEN;

/// Erase sector in bytes.
pub const SECTOR: usize = 4096;
/// Write unit in bytes.
pub const WRITE: usize = 4;
/// Sectors of one snapshot slot.
pub const SLOT_SECTORS: usize = (SEQ_LEN + MAX_SNAPSHOT_LEN + CRC_LEN).div_ceil(SECTOR);
/// Bytes of one snapshot slot.
pub const SLOT_LEN: usize = SLOT_SECTORS * SECTOR;
/// Bytes of the store's scratch buffer: one record of the largest snapshot (sequence
/// number, snapshot, slot CRC), rounded to the write unit.
pub const SCRATCH_LEN: usize = (SEQ_LEN + MAX_SNAPSHOT_LEN + CRC_LEN).div_ceil(WRITE) * WRITE;
/// Sectors of the event log region.
pub const LOG_SECTORS: usize = 2;
/// Start of the event log region.
pub const LOG_BASE: usize = 2 * SLOT_LEN;
/// Bytes of the event log region.
pub const LOG_LEN: usize = LOG_SECTORS * SECTOR;
/// Bytes of the whole RAM flash.
pub const FLASH_LEN: usize = LOG_BASE + LOG_LEN;

const _: () = assert!(SLOT_LEN >= SEQ_LEN + MAX_SNAPSHOT_LEN + CRC_LEN);

/// Save a snapshot after every this many samples (and once more at the end).
pub const SNAPSHOT_EVERY: u32 = 1000;

static mut CELLS: [u8; FLASH_LEN] = [0; FLASH_LEN];
static mut SCRATCH: [u8; SCRATCH_LEN] = [0; SCRATCH_LEN];
static mut TAKEN: bool = false;

/// The store's scratch buffer (one record).
pub type Scratch = &'static mut [u8; SCRATCH_LEN];

/// What the RAM flash refuses.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FlashError {
    /// Offset or length not aligned to the operation's unit.
    NotAligned,
    /// Outside the flash.
    OutOfBounds,
    /// A write to a unit that is not erased.
    NotErased,
}

impl NorFlashError for FlashError {
    fn kind(&self) -> NorFlashErrorKind {
        match self {
            FlashError::NotAligned => NorFlashErrorKind::NotAligned,
            FlashError::OutOfBounds => NorFlashErrorKind::OutOfBounds,
            FlashError::NotErased => NorFlashErrorKind::Other,
        }
    }
}

/// The RAM-backed NOR flash (see the module docs).
pub struct RamNorFlash {
    cells: &'static mut [u8; FLASH_LEN],
    /// Sectors erased.
    pub sectors_erased: u32,
    /// Bytes written.
    pub bytes_written: u32,
}

impl RamNorFlash {
    /// The flash, erased, and the store's scratch buffer; `None` after the first call.
    pub fn take() -> Option<(RamNorFlash, Scratch)> {
        cortex_m::interrupt::free(|_| {
            // SAFETY: TAKEN, CELLS and SCRATCH are only touched here, inside a critical
            // section on a single core; TAKEN makes sure the one `&mut` to each of CELLS
            // and SCRATCH is handed out once.
            let (cells, scratch) = unsafe {
                let taken = &mut *core::ptr::addr_of_mut!(TAKEN);
                if *taken {
                    return None;
                }
                *taken = true;
                (
                    &mut *core::ptr::addr_of_mut!(CELLS),
                    &mut *core::ptr::addr_of_mut!(SCRATCH),
                )
            };
            cells.fill(0xFF);
            Some((
                RamNorFlash {
                    cells,
                    sectors_erased: 0,
                    bytes_written: 0,
                },
                scratch,
            ))
        })
    }

    /// The contents.
    pub fn contents(&self) -> &[u8] {
        &self.cells[..]
    }
}

impl ErrorType for RamNorFlash {
    type Error = FlashError;
}

impl ReadNorFlash for RamNorFlash {
    const READ_SIZE: usize = 1;

    fn read(&mut self, offset: u32, bytes: &mut [u8]) -> Result<(), FlashError> {
        let start = offset as usize;
        let end = start
            .checked_add(bytes.len())
            .ok_or(FlashError::OutOfBounds)?;
        bytes.copy_from_slice(self.cells.get(start..end).ok_or(FlashError::OutOfBounds)?);
        Ok(())
    }

    fn capacity(&self) -> usize {
        FLASH_LEN
    }
}

impl NorFlash for RamNorFlash {
    const WRITE_SIZE: usize = WRITE;
    const ERASE_SIZE: usize = SECTOR;

    fn erase(&mut self, from: u32, to: u32) -> Result<(), FlashError> {
        let (from, to) = (from as usize, to as usize);
        if !from.is_multiple_of(SECTOR) || !to.is_multiple_of(SECTOR) || from > to {
            return Err(FlashError::NotAligned);
        }
        self.cells
            .get_mut(from..to)
            .ok_or(FlashError::OutOfBounds)?
            .fill(0xFF);
        self.sectors_erased += ((to - from) / SECTOR) as u32;
        Ok(())
    }

    fn write(&mut self, offset: u32, bytes: &[u8]) -> Result<(), FlashError> {
        let start = offset as usize;
        if !start.is_multiple_of(WRITE) || !bytes.len().is_multiple_of(WRITE) {
            return Err(FlashError::NotAligned);
        }
        let end = start
            .checked_add(bytes.len())
            .ok_or(FlashError::OutOfBounds)?;
        let cells = self
            .cells
            .get_mut(start..end)
            .ok_or(FlashError::OutOfBounds)?;
        if cells.iter().any(|&cell| cell != 0xFF) {
            return Err(FlashError::NotErased);
        }
        cells.copy_from_slice(bytes);
        self.bytes_written += bytes.len() as u32;
        Ok(())
    }
}

/// FNV-1a (64-bit) of `bytes` (the same function as the readings digest).
#[cfg(not(feature = "footprint-baseline"))]
pub fn fnv1a(bytes: &[u8]) -> u64 {
    bytes.iter().fold(0xcbf2_9ce4_8422_2325, |state, byte| {
        (state ^ u64::from(*byte)).wrapping_mul(0x0000_0100_0000_01b3)
    })
}
