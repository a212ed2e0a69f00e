//! How the CRCs of snapshots and device-log records are computed.
//!
//! The values never depend on the method: a 256-entry table per CRC on hosted targets
//! (fast when a desktop reads large logs), bit by bit on bare metal, where the tables would
//! cost 512 bytes (CRC-16) and 1,024 bytes (CRC-32) of a board's flash and the CRCs run over a
//! record of a few dozen bytes per sample or a snapshot every few thousand samples
//! (firmware/README.md, "Footprint", has the figures).

/// The CRC method of this build: a byte-wise table (hosted targets).
#[cfg(not(target_os = "none"))]
pub type CrcMethod = crc::Table<1>;

/// The CRC method of this build: bit by bit, no table (bare metal).
#[cfg(target_os = "none")]
pub type CrcMethod = crc::NoTable;
