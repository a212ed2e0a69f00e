//! How the CRCs of snapshots and device-log records are computed.
//!
//! The values never depend on the method: a 256-entry table per CRC on hosted targets
//! (fast when a desktop reads large logs), bit by bit on bare metal, where the tables would
//! cost 512 bytes (CRC-16) and 1,024 bytes (CRC-32) of a board's flash and the CRCs run over
//! a record of a few dozen bytes per sample or a snapshot of about a kilobyte per save (the
//! example firmware saves every 1,000 samples; firmware/README.md, "Footprint", has the
//! figures).

/// The CRC method of this build: a byte-wise table (hosted targets).
#[cfg(not(target_os = "none"))]
pub type CrcMethod = crc::Table<1>;

/// The CRC method of this build: bit by bit, no table (bare metal).
#[cfg(target_os = "none")]
pub type CrcMethod = crc::NoTable;

#[cfg(test)]
mod tests {
    use crc::{Crc, NoTable, Table, CRC_16_IBM_SDLC, CRC_32_ISO_HDLC};
    use proptest::prelude::*;

    proptest! {
        /// The bitwise method a board uses gives the table's values (CRC-16 of records,
        /// CRC-32 of snapshots).
        #[test]
        fn bitwise_and_table_crcs_agree(bytes in proptest::collection::vec(any::<u8>(), 0..2048)) {
            let table16 = Crc::<u16, Table<1>>::new(&CRC_16_IBM_SDLC);
            let bitwise16 = Crc::<u16, NoTable>::new(&CRC_16_IBM_SDLC);
            prop_assert_eq!(table16.checksum(&bytes), bitwise16.checksum(&bytes));
            let table32 = Crc::<u32, Table<1>>::new(&CRC_32_ISO_HDLC);
            let bitwise32 = Crc::<u32, NoTable>::new(&CRC_32_ISO_HDLC);
            prop_assert_eq!(table32.checksum(&bytes), bitwise32.checksum(&bytes));
        }
    }

    #[test]
    fn check_values_of_the_catalogue() {
        // The "check" value of each algorithm (the CRC of the ASCII bytes "123456789") of the
        // CRC RevEng "Catalogue of parametrised CRC algorithms", as crc-catalog 2.5.0 (the
        // crate generated from that catalogue, under the crc crate) carries it:
        // `CRC_16_IBM_SDLC.check` = 0x906e, `CRC_32_ISO_HDLC.check` = 0xcbf43926; CPython
        // 3.11 `zlib.crc32(b"123456789")` gives the same 0xcbf43926.
        let check = b"123456789";
        assert_eq!(crate::record::CRC16.checksum(check), 0x906e);
        assert_eq!(crate::snapshot::CRC32.checksum(check), 0xcbf4_3926);
    }
}
