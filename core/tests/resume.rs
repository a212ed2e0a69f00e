//! Resume equivalence: a feed replayed in one go and the same feed replayed in two halves,
//! with a snapshot written and restored between them, give identical events, outcomes and
//! final state, bit for bit (compared through their postcard encodings, so NaN payloads and
//! signed zeros count too).

use proptest::prelude::*;
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::real::Real;
use steadycal_core::sample::Sample;
use steadycal_core::snapshot::max_snapshot_len;

/// A deterministic pseudo-random feed (invented, for the test): a drifting line with
/// proportional or constant scatter, readings between checks, and now and then a
/// non-finite value, a spike, a stuck run or a gap in time.
fn feed<R: Real>(seed: u64, length: usize, proportional: bool) -> Vec<Sample<R>> {
    let mut state = seed | 1;
    let mut next = move || {
        // xorshift64* (Vigna 2016), enough for test data.
        state ^= state >> 12;
        state ^= state << 25;
        state ^= state >> 27;
        (state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut out = Vec::with_capacity(length);
    let mut t = 0.0;
    let mut stuck = 0u32;
    let mut last_raw = 0.0;
    for seq in 0..length as u64 {
        t += if next() < 0.002 { 5000.0 } else { 1.0 };
        let reference = 1.0 + 99.0 * next();
        let gain = 2.0 + 1e-4 * seq as f64;
        let sd = if proportional { 0.02 * reference } else { 0.3 };
        let noise = sd * (next() + next() + next() - 1.5) * 2.0;
        let mut raw = 0.5 + gain * reference + noise;
        let u = next();
        if u < 0.003 {
            raw = f64::NAN;
        } else if u < 0.006 {
            raw += 50.0 * sd;
        } else if u < 0.008 {
            stuck = 12;
        }
        if stuck > 0 {
            stuck -= 1;
            raw = last_raw;
        }
        last_raw = raw;
        let sample = if next() < 0.7 {
            Sample::check(seq, t, R::from_f64(raw), R::from_f64(reference))
        } else {
            Sample::reading(seq, t, R::from_f64(raw))
        };
        out.push(sample);
    }
    out
}

fn bytes<T: serde::Serialize>(value: &T) -> Vec<u8> {
    let mut buffer = vec![0u8; 1 << 14];
    let len = postcard::to_slice(value, &mut buffer).unwrap().len();
    buffer.truncate(len);
    buffer
}

/// Runs samples, recording every outcome and event (as bytes).
fn run<R: Real>(monitor: &mut Monitor<R>, samples: &[Sample<R>], log: &mut Vec<Vec<u8>>) {
    for sample in samples {
        let outcome = monitor.push(sample);
        log.push(bytes(&outcome));
        while let Some(event) = monitor.pop_event() {
            log.push(bytes(&event));
        }
    }
}

fn equivalent<R: Real>(seed: u64, length: usize, split: f64, proportional: bool) {
    let samples = feed::<R>(seed, length, proportional);
    let at = ((length as f64 * split) as usize).min(length);
    let config = MonitorConfig::<R>::default_for_range(R::ONE, R::from_f64(100.0));

    let mut whole: Monitor<R> = Monitor::new(config).unwrap();
    let mut whole_log = Vec::new();
    run(&mut whole, &samples, &mut whole_log);

    let mut first: Monitor<R> = Monitor::new(config).unwrap();
    let mut split_log = Vec::new();
    run(&mut first, &samples[..at], &mut split_log);
    let mut buffer = vec![0u8; max_snapshot_len::<R, 3, 16, 8>()];
    let len = first.snapshot(&mut buffer).unwrap();
    drop(first);
    let mut second: Monitor<R> = Monitor::restore(&buffer[..len]).unwrap();
    run(&mut second, &samples[at..], &mut split_log);

    assert_eq!(
        whole_log.len(),
        split_log.len(),
        "seed {seed}, split at {at}"
    );
    for (index, (a, b)) in whole_log.iter().zip(&split_log).enumerate() {
        assert_eq!(a, b, "seed {seed}, split at {at}: output {index} differs");
    }
    assert_eq!(
        bytes(&whole),
        bytes(&second),
        "seed {seed}, split at {at}: final state"
    );
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(if cfg!(debug_assertions) { 8 } else { 64 }))]

    #[test]
    fn two_halves_equal_one_go_f32(seed in any::<u64>(), length in 1usize..4000, split in 0.0f64..=1.0, proportional in any::<bool>()) {
        equivalent::<f32>(seed, length, split, proportional);
    }

    #[test]
    fn two_halves_equal_one_go_f64(seed in any::<u64>(), length in 1usize..4000, split in 0.0f64..=1.0, proportional in any::<bool>()) {
        equivalent::<f64>(seed, length, split, proportional);
    }
}

#[test]
fn split_after_warm_up_and_switch() {
    // A long proportional-error feed with the split well after warm-up (so the ladder,
    // spread profile and detectors all carry state across the snapshot).
    for split in [0.3, 0.5, 0.77] {
        equivalent::<f32>(0x5eed_0001, 6000, split, true);
    }
}
