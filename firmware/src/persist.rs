//! What the board keeps across a power loss: periodic snapshots of the monitor through the
//! core's two-slot [`SnapshotStore`], and its events appended as device-log records, both
//! on the RAM NOR flash of [`crate::storage`].
//!
//! At the end of the feed [`Persist::finish`] saves once more, closes the log and reads it
//! back with the core's record reader, loads the newest snapshot back, prints its length,
//! sequence number, CRC-32, FNV-1a digest and bytes (hex, `snapshot_hex OFFSET HEX` lines
//! of 128 bytes), then restores a second monitor from those bytes and checks that it and
//! the live one answer two more samples identically (`restore ok`).
//!
//! With the `footprint-baseline` feature the monitor is not there: saves are skipped and
//! `finish` only closes the log.

#[cfg(not(feature = "footprint-baseline"))]
use core::fmt::Write;

use steadycal_core::event::Event;
use steadycal_core::record::Record;
use steadycal_core::snapshot::CRC32;

use crate::channel::Channel;
use crate::counter::{Counter, Tally};
use crate::log::{census, LogWriter};
use crate::say;
use crate::storage::{
    RamNorFlash, Scratch, FLASH_LEN, LOG_BASE, LOG_LEN, SCRATCH_LEN, SLOT_LEN, WRITE,
};
#[cfg(not(feature = "footprint-baseline"))]
use crate::{emit, Line};

/// Flash, store scratch buffer and event log writer.
pub struct Persist {
    flash: RamNorFlash,
    scratch: Scratch,
    log: LogWriter<WRITE>,
    /// Instruction-counter ticks of each save.
    saves: Tally,
    last_save: Option<steadycal_core::store::SlotInfo>,
}

impl Persist {
    /// Takes the flash, erases the log region and starts a log session.
    pub fn new() -> Result<Persist, &'static str> {
        let (mut flash, scratch) = RamNorFlash::take().ok_or("flash taken")?;
        let log = LogWriter::start(&mut flash, LOG_BASE as u32, LOG_LEN as u32)
            .map_err(|_| "log region: flash error")?;
        Ok(Persist {
            flash,
            scratch,
            log,
            saves: Tally::default(),
            last_save: None,
        })
    }

    /// Appends an event record to the log region (counted as dropped once it is full).
    pub fn log_event(&mut self, event: &Event<f32>) -> Result<(), &'static str> {
        self.log
            .push(&mut self.flash, &Record::Event(*event))
            .map_err(|_| "log region: flash error")
    }

    /// Saves a snapshot of the channel's monitor through the two-slot store (the monitor
    /// is taken by `&mut` for its snapshot, which changes nothing).
    pub fn save(&mut self, channel: &mut Channel, counter: &Counter) -> Result<(), &'static str> {
        let before = counter.now();
        let saved = save(&mut self.flash, self.scratch, channel)?;
        self.saves.add(counter.since(before));
        if saved.is_some() {
            self.last_save = saved;
        }
        Ok(())
    }

    /// The final save, the log read-back, the load and the restore check (module docs).
    pub fn finish(&mut self, channel: &mut Channel, counter: &Counter) -> Result<(), &'static str> {
        self.save(channel, counter)?;
        let used = self
            .log
            .finish(&mut self.flash)
            .map_err(|_| "log region: flash error")?;
        let region = &self.flash.contents()[LOG_BASE..LOG_BASE + LOG_LEN];
        let appended = &region[..self.log.bytes as usize];
        let found = census(&region[..used as usize]);
        say(format_args!(
            "device_log_out records={} bytes={} dropped={} region_used={used} region_bytes={LOG_LEN} crc={:08x} read_back_sessions={} read_back_events={} read_back_damaged={}",
            self.log.records,
            self.log.bytes,
            self.log.dropped,
            CRC32.checksum(appended),
            found.sessions,
            found.events,
            found.damaged
        ));
        say(format_args!(
            "store saves={} ticks={} max_ticks={} sectors_erased={} bytes_written={} flash_bytes={FLASH_LEN}",
            self.saves.pushes,
            self.saves.ticks,
            self.saves.max,
            self.flash.sectors_erased,
            self.flash.bytes_written
        ));
        say(format_args!(
            "memory store scratch_bytes={SCRATCH_LEN} encode_buffer_bytes=0 max_snapshot_bytes={} ram_flash_bytes={FLASH_LEN} (stands in for flash: 2 slots of {SLOT_LEN} + log {LOG_LEN})",
            steadycal_core::snapshot::MAX_SNAPSHOT_LEN
        ));
        finish(&mut self.flash, self.scratch, channel, self.last_save)
    }
}

#[cfg(not(feature = "footprint-baseline"))]
fn save(
    flash: &mut RamNorFlash,
    scratch: &mut [u8; SCRATCH_LEN],
    channel: &mut Channel,
) -> Result<Option<steadycal_core::store::SlotInfo>, &'static str> {
    let mut store = steadycal_core::store::SnapshotStore::new(flash, 0, SLOT_LEN as u32)
        .map_err(|_| "store: geometry")?;
    store
        .save(channel.monitor_mut(), scratch)
        .map(Some)
        .map_err(|_| "store: save failed")
}

#[cfg(feature = "footprint-baseline")]
fn save(
    _flash: &mut RamNorFlash,
    _scratch: &mut [u8; SCRATCH_LEN],
    channel: &mut Channel,
) -> Result<Option<steadycal_core::store::SlotInfo>, &'static str> {
    core::hint::black_box(channel);
    Ok(None)
}

#[cfg(feature = "footprint-baseline")]
fn finish(
    _flash: &mut RamNorFlash,
    _scratch: &mut [u8; SCRATCH_LEN],
    _channel: &mut Channel,
    _last: Option<steadycal_core::store::SlotInfo>,
) -> Result<(), &'static str> {
    Ok(())
}

#[cfg(not(feature = "footprint-baseline"))]
fn finish(
    flash: &mut RamNorFlash,
    scratch: &mut [u8; SCRATCH_LEN],
    channel: &mut Channel,
    last: Option<steadycal_core::store::SlotInfo>,
) -> Result<(), &'static str> {
    use crate::channel::BoardMonitor;
    use steadycal_core::sample::{Detail, Outcome, Sample};
    use steadycal_core::snapshot::Snapshot;
    use steadycal_core::store::SnapshotStore;

    let mut store = SnapshotStore::new(flash, 0, SLOT_LEN as u32).map_err(|_| "store: geometry")?;
    let (info, bytes) = store
        .load(scratch)
        .map_err(|_| "store: load failed")?
        .ok_or("store: nothing saved")?;
    if Some(info) != last {
        return Err("store: loaded another record than the last saved");
    }
    let snapshot = Snapshot::parse(bytes).map_err(|e| e.reason())?;
    say(format_args!(
        "snapshot_loaded len={} seq={} slot={} crc={:08x} fnv1a={:016x}",
        info.len,
        info.seq,
        info.slot,
        snapshot.crc(),
        crate::storage::fnv1a(bytes)
    ));
    for (index, chunk) in bytes.chunks(128).enumerate() {
        let mut line = Line::new();
        let _ = write!(line, "snapshot_hex {:05}", index * 128);
        let _ = line.push(' ');
        for byte in chunk {
            let _ = write!(line, "{byte:02x}");
        }
        emit(&line);
    }
    let mut restored = BoardMonitor::restore(bytes).map_err(|e| e.reason())?;

    // Two more samples (invented: a check at mid-range, then a reading) into both.
    let live = channel.monitor_mut();
    let counters = live.counters();
    let next = counters.samples;
    let t = f64::from(next as u32);
    let probes = [
        Sample::check(next, t, 205.0f32, 200.0),
        Sample::reading(next + 1, t + 1.0, 410.0f32),
    ];
    let mut same = counters == restored.counters();
    for probe in &probes {
        let a = live.push(probe);
        let b = restored.push(probe);
        same &= same_outcome(&a, &b);
        loop {
            match (live.pop_event(), restored.pop_event()) {
                (None, None) => break,
                (Some(x), Some(y)) => same &= same_event(&x, &y),
                _ => {
                    same = false;
                    break;
                }
            }
        }
    }
    // The whole state after the probes, compared through the CRC of each snapshot.
    let mut crcs = [0u32; 2];
    for (crc, monitor) in crcs.iter_mut().zip([&mut *live, &mut restored]) {
        let len = monitor.snapshot(scratch).map_err(|e| e.reason())?;
        *crc = CRC32.checksum(&scratch[..len]);
    }
    same &= crcs[0] == crcs[1];
    if !same {
        return Err("restore: the restored monitor answers differently");
    }
    say(format_args!(
        "restore ok probes={} snapshot_crc_after={:08x}",
        probes.len(),
        crcs[0]
    ));

    /// Every bit of an outcome: flags, event count, and the reading or the check's detail.
    fn bits(outcome: &Outcome<f32>) -> ([u32; 4], u16, u8) {
        let words = match outcome.detail {
            Detail::Nothing => [0; 4],
            Detail::Reading(r) => [
                1 | (r.rung as u32) << 8,
                r.value.to_bits(),
                r.standard_uncertainty.to_bits(),
                r.expanded_uncertainty.to_bits(),
            ],
            Detail::Check(c) => [
                2 | (c.rung as u32) << 8 | (c.standardized.is_some() as u32) << 16,
                c.prediction.to_bits(),
                c.residual.to_bits(),
                c.standardized.map_or(0, f32::to_bits),
            ],
        };
        (words, outcome.flags.0, outcome.new_events)
    }
    fn same_outcome(a: &Outcome<f32>, b: &Outcome<f32>) -> bool {
        bits(a) == bits(b)
    }
    fn same_event(a: &Event<f32>, b: &Event<f32>) -> bool {
        let mut frame = [0u8; steadycal_core::record::MAX_FRAME_LEN];
        match steadycal_core::record::encode_frame(&Record::Event(*a), &mut frame) {
            Ok(len) => crate::log::same_frame(b, &frame[..len - 1]),
            Err(_) => false,
        }
    }
    Ok(())
}
