//! The committed snapshot fixture of the current format, `tests/data/snapshot-v5.bin`
//! (format version 5), must keep decoding, and must re-encode to the same bytes: if a change
//! to any state or configuration type changes the bytes, the format version must be bumped
//! (see ARCHITECTURE.md, "Format versioning") and a new fixture committed beside the old
//! ones. Older fixtures stay and are refused by version, never misread.
//!
//! Version history: 1 wrote every fit's full `P×P` factor, its padding and its
//! configuration, and the ladder settings; 2 writes only what each fit uses and derives the
//! rest from the monitor's configuration (1,257 → about 1,000 bytes for the gas-cell demo
//! state in f32); 3 adds the level origin (the sensor's baseline and how far it is
//! found), the ladder's recent switches, the rung it left last and its hold, and the
//! configuration's `find_baseline`; 4 adds the count of provisional readings; 5 adds the run of rejections under way, the
//! rung-doubt mark and the fields of `transform_changed` (`held`, `k`, `k_low`, `k_high`) and
//! `sample_rejected` (`count`), and the kind `rung_in_doubt`. No decoder of an older version is kept: a snapshot of
//! an older version is refused by version and the channel re-commissioned.
//!
//! The generator (`fixture_monitor`) gave the fixture's bytes when it was written; a later
//! change to the arithmetic of `push` changes its numbers but not the format, so the test
//! holds the generator only to the same header and an exact round trip.
//!
//! Regenerate (only together with a version bump):
//! `cargo test -p steadycal-core --test snapshot_fixture -- --ignored write_fixture`

use std::path::PathBuf;

use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::sample::Sample;
use steadycal_core::snapshot::{Snapshot, SnapshotError, FORMAT_VERSION, MAX_SNAPSHOT_LEN};

fn fixture_path() -> PathBuf {
    fixture_of(FORMAT_VERSION)
}

fn fixture_of(version: u16) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join(format!("tests/data/snapshot-v{version}.bin"))
}

/// The monitor the fixture holds: defaults for [1, 100], 700 samples of an invented
/// proportional-error line (checks and readings).
fn fixture_monitor() -> Monitor<f32> {
    let config = MonitorConfig::<f32>::default_for_range(1.0, 100.0);
    let mut monitor: Monitor<f32> = Monitor::new(config).unwrap();
    for i in 0..700u64 {
        let reference = 1.0 + (i % 33) as f32 * 3.0;
        let noise = 0.02 * reference * (((i * 7919) % 11) as f32 - 5.0) / 5.0;
        let raw = 0.4 + 1.8 * reference + noise;
        let sample = if i % 4 == 3 {
            Sample::reading(i, i as f64, raw)
        } else {
            Sample::check(i, i as f64, raw, reference)
        };
        monitor.push(&sample);
    }
    monitor
}

#[test]
fn older_fixtures_are_refused_by_version() {
    for version in 1..FORMAT_VERSION {
        let bytes = std::fs::read(fixture_of(version)).expect("committed fixture");
        match Snapshot::parse(&bytes) {
            Err(SnapshotError::UnknownVersion { .. }) => {}
            other => panic!("a version-{version} snapshot must be refused by version: {other:?}"),
        }
    }
}

#[test]
fn current_version_fixture_still_decodes() {
    let bytes = std::fs::read(fixture_path()).expect("committed fixture");
    let snapshot = Snapshot::parse(&bytes).expect("header and CRC");
    assert_eq!(snapshot.header().version, 5);
    let mut monitor: Monitor<f32> = snapshot.monitor().expect("decodes as Monitor<f32>");
    let counters = monitor.counters();
    assert_eq!(counters.samples, 700);
    assert_eq!(counters.checks + counters.rejected + counters.readings, 700);
    // Same version: the bytes must be reproduced exactly.
    if FORMAT_VERSION == 5 {
        let mut again = [0u8; MAX_SNAPSHOT_LEN];
        let len = monitor.snapshot(&mut again).unwrap();
        assert_eq!(
            &again[..len],
            &bytes[..],
            "re-encoding changed the bytes: bump FORMAT_VERSION"
        );
        // The generator's state today is in the same format: same header, and it
        // re-encodes to its own bytes. Its numbers need not equal the fixture's: a change
        // to the arithmetic of `push` changes the state, not the format, and the committed
        // bytes stay the witness of the format.
        let mut fresh = [0u8; MAX_SNAPSHOT_LEN];
        let len = fixture_monitor().snapshot(&mut fresh).unwrap();
        let parsed = Snapshot::parse(&fresh[..len]).expect("fresh snapshot parses");
        let (fresh_header, fixture_header) = (parsed.header(), snapshot.header());
        assert_eq!(
            (fresh_header.version, fresh_header.layout),
            (fixture_header.version, fixture_header.layout)
        );
        let mut back: Monitor<f32> = parsed.monitor().expect("fresh snapshot decodes");
        let mut again = [0u8; MAX_SNAPSHOT_LEN];
        let again_len = back.snapshot(&mut again).unwrap();
        assert_eq!(&again[..again_len], &fresh[..len]);
    }
}

/// Rewrites the fixture. Run only together with a format version bump.
#[test]
#[ignore]
fn write_fixture() {
    let mut buffer = [0u8; MAX_SNAPSHOT_LEN];
    let len = fixture_monitor().snapshot(&mut buffer).unwrap();
    std::fs::write(fixture_path(), &buffer[..len]).unwrap();
    eprintln!("wrote {} ({len} bytes)", fixture_path().display());
}
