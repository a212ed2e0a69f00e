//! Device-log parsing never panics on any bytes: every frame either decodes or is refused,
//! and a decoded record re-encodes to a frame that decodes to the same record.
#![no_main]

use libfuzzer_sys::fuzz_target;
use steadycal_core::record::{decode_frame, encode_frame, Frames, Record, MAX_FRAME_LEN};

fuzz_target!(|data: &[u8]| {
    let mut body = [0u8; 4096];
    for (start, end) in Frames::new(data) {
        assert!(start < end && end <= data.len());
        assert!(!data[start..end].contains(&0));
        let len = (end - start).min(body.len());
        body[..len].copy_from_slice(&data[start..start + len]);
        let _ = decode_frame::<f64>(&mut body[..len].to_vec());
        if let Ok(record) = decode_frame::<f32>(&mut body[..len]) {
            let mut frame = [0u8; MAX_FRAME_LEN];
            let n = encode_frame(&record, &mut frame).expect("a decoded record re-encodes");
            let again: Record<f32> = decode_frame(&mut frame[..n - 1]).expect("re-decodes");
            let (mut a, mut b) = ([0u8; 128], [0u8; 128]);
            assert_eq!(
                postcard::to_slice(&record, &mut a).ok(),
                postcard::to_slice(&again, &mut b).ok()
            );
        }
    }
});
