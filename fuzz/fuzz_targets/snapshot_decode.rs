//! Snapshot decoding never panics, whatever the bytes; a snapshot that decodes
//! re-encodes to a snapshot that decodes to the same state, and survives pushes.
#![no_main]

use libfuzzer_sys::fuzz_target;
use steadycal_core::monitor::Monitor;
use steadycal_core::sample::Sample;
use steadycal_core::snapshot::{max_snapshot_len, Snapshot};

fuzz_target!(|data: &[u8]| {
    let _ = Snapshot::parse(data);
    if let Ok(mut monitor) = Monitor::<f32>::restore(data) {
        let mut again = [0u8; max_snapshot_len::<f32, 3, 16, 8>()];
        let len = monitor.snapshot(&mut again).expect("a restored monitor re-encodes");
        let mut back = Monitor::<f32>::restore(&again[..len]).expect("the re-encoding decodes");
        let mut third = [0u8; max_snapshot_len::<f32, 3, 16, 8>()];
        let len3 = back.snapshot(&mut third).expect("re-encodes again");
        assert_eq!(&again[..len], &third[..len3]);
        for i in 0..16u64 {
            monitor.push(&Sample::check(i, i as f64, 2.0 + i as f32, 1.0 + i as f32 * 0.5));
            monitor.push(&Sample::reading(i, i as f64, 3.0));
        }
    }
    let _ = Monitor::<f64>::restore(data);
});
