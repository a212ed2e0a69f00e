//! Unit tests of `core/src/spread.rs` (a child module: private items are in reach).

use super::*;
use proptest::prelude::*;
use std::vec::Vec;

fn config<R: Real>(forgetting: f64) -> SpreadConfig<R> {
    SpreadConfig {
        level_low: R::from_f64(1.0),
        level_high: R::from_f64(1000.0),
        forgetting: R::from_f64(forgetting),
    }
}

/// A deterministic generator for the unit tests (SplitMix64: Steele, Lea & Flood 2014).
struct SplitMix(u64);
impl SplitMix {
    fn next_unit(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    /// Standard normal by Box–Muller.
    fn next_normal(&mut self) -> f64 {
        let u = self.next_unit();
        let v = self.next_unit();
        libm::sqrt(-2.0 * libm::log(u)) * libm::cos(2.0 * core::f64::consts::PI * v)
    }
}

/// `(level, residual)` pairs, levels log-uniform over [1, 1000], SD = 0.01·level^k.
fn feed(seed: u64, count: usize, k: f64) -> Vec<(f64, f64)> {
    let mut rng = SplitMix(seed);
    (0..count)
        .map(|_| {
            let level = libm::pow(10.0, 3.0 * rng.next_unit());
            (level, 0.01 * libm::pow(level, k) * rng.next_normal())
        })
        .collect()
}

#[test]
fn bin_edges_and_ends() {
    let profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
    assert_eq!(profile.bin_of(0.5), Some(0));
    assert_eq!(profile.bin_of(1.0), Some(0));
    // Edge 1 of 16 over three decades is at 10^(3/16) = 1.5399: from the definition.
    assert_eq!(profile.bin_of(1.53), Some(0));
    assert_eq!(profile.bin_of(1.55), Some(1));
    assert_eq!(profile.bin_of(999.0), Some(15));
    assert_eq!(profile.bin_of(1e300), Some(15));
    assert_eq!(profile.bin_of(f64::MIN_POSITIVE / 4.0), Some(0));
    assert_eq!(profile.bin_of(0.0), None);
    assert_eq!(profile.bin_of(-1.0), None);
    assert_eq!(profile.bin_of(f64::NAN), None);
    assert_eq!(profile.bin_of(f64::INFINITY), None);
}

#[test]
fn invalid_configs_accept_nothing() {
    let good = config::<f64>(0.99);
    for bad in [
        SpreadConfig {
            level_low: 0.0,
            ..good
        },
        SpreadConfig {
            level_high: 0.5,
            ..good
        },
        SpreadConfig {
            forgetting: 0.0,
            ..good
        },
        SpreadConfig {
            forgetting: f64::NAN,
            ..good
        },
        SpreadConfig {
            level_high: f64::INFINITY,
            ..good
        },
    ] {
        assert!(bad.validate().is_err());
        assert!(SpreadProfile::<f64, 16>::new_checked(bad).is_err());
        let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(bad);
        assert!(!profile.push(10.0, 1.0));
        assert_eq!(profile.bin_of(10.0), None);
    }
    assert_eq!(
        SpreadProfile::<f64, 0>::new_checked(good).err(),
        Some(SpreadConfigError::NoBins)
    );
    let mut empty: SpreadProfile<f64, 0> = SpreadProfile::new(good);
    assert!(!empty.push(10.0, 1.0));
    assert!(empty.bin(0).is_none());
}

#[test]
fn exponent_recovers_power_law() {
    // Simulated feeds (invented data, this module's generator): the fit should find the
    // exponent it was built with, within a few standard errors.
    for &truth in &[0.0, 0.5, 1.0, 1.5] {
        let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
        for (level, residual) in feed(7, 20_000, truth) {
            assert!(profile.push(level, residual));
        }
        let exponent = profile.exponent().unwrap();
        assert_eq!(exponent.bins_used, 16);
        assert!(
            (exponent.k - truth).abs() < 4.0 * exponent.standard_error,
            "{truth}: {exponent:?}"
        );
        assert!(exponent.standard_error < 0.02);
    }
}

#[test]
fn koenker_detects_level_tracking() {
    let statistic = |k: f64| {
        let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
        for (level, residual) in feed(11, 5000, k) {
            profile.push(level, residual);
        }
        profile.koenker().unwrap()
    };
    let flat = statistic(0.0);
    assert_eq!(flat.samples, 5000.0);
    // χ²(1) 0.999 quantile 10.83 (SciPy 1.11.4 `stats.chi2.ppf(0.999, 1)` = 10.8276).
    assert!(flat.statistic < 10.83, "{flat:?}");
    assert!(statistic(1.0).statistic > 100.0);
}

#[test]
fn exponent_needs_three_bins() {
    let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
    for i in 0..10 {
        profile.push(2.0, f64::from(i));
        profile.push(200.0, f64::from(i) * 3.0);
    }
    assert!(profile.exponent().is_none());
    profile.push(20.0, 1.0);
    assert!(profile.exponent().is_none());
    profile.push(20.0, 2.0);
    assert_eq!(profile.exponent().unwrap().bins_used, 3);
}

#[test]
fn koenker_needs_samples_and_variation() {
    let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
    for i in 0..9 {
        profile.push(1.0 + f64::from(i), f64::from(i));
    }
    assert!(profile.koenker().is_none());
    profile.push(50.0, 3.0);
    assert!(profile.koenker().is_some());
    let mut constant_level: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
    for i in 0..50 {
        constant_level.push(5.0, f64::from(i));
    }
    assert!(constant_level.koenker().is_none());
}

#[test]
fn overflowing_update_is_refused_whole() {
    let mut profile: SpreadProfile<f32, 16> = SpreadProfile::new(config(0.99));
    assert!(profile.push(10.0, 1.0));
    let before = profile.clone();
    // 1e20² overflows f32: nothing may change, not even the forgetting of other bins.
    assert!(!profile.push(10.0, 1e20));
    assert_eq!(profile.bins, before.bins);
    // A level near f32::MAX overflows the level co-moment: refused as well.
    assert!(!profile.push(3e38, 1.0e-3));
    let mut again = before.clone();
    assert!(!again.push(10.0, 1e20));
    assert_eq!(again.bins, before.bins);
    assert_eq!(again.koenker, before.koenker);
}

#[test]
fn forgetting_decays_every_bin() {
    let beta = 0.9;
    let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(beta));
    profile.push(2.0, 1.0);
    profile.push(2.0, -1.0);
    let low_bin = profile.bin_of(2.0).unwrap();
    let count = profile.bin(low_bin).unwrap().count;
    assert_eq!(count, 1.0 + beta);
    for _ in 0..10 {
        profile.push(500.0, 0.5);
    }
    let decayed = profile.bin(low_bin).unwrap().count;
    assert!((decayed - count * libm::pow(beta, 10.0)).abs() < 1e-12);
    // A bin left alone long enough is emptied, not left subnormal.
    for _ in 0..2000 {
        profile.push(500.0, 0.5);
    }
    assert_eq!(profile.bin(low_bin).unwrap().count, 0.0);
    assert_eq!(profile.bin(low_bin).unwrap().level, 0.0);
}

#[test]
fn forgetting_tracks_a_change_of_spread() {
    // With β = 0.999 the exponent should follow a switch from k = 0 to k = 1.
    let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(0.999));
    for (level, residual) in feed(3, 20_000, 0.0) {
        profile.push(level, residual);
    }
    assert!(profile.exponent().unwrap().k.abs() < 0.15);
    for (level, residual) in feed(4, 20_000, 1.0) {
        profile.push(level, residual);
    }
    let exponent = profile.exponent().unwrap();
    assert!((exponent.k - 1.0).abs() < 0.15, "{exponent:?}");
    let koenker = profile.koenker().unwrap();
    // Kish n for a stream of unit-spaced weights β^i: (1 + β)/(1 − β) = 1999 (algebra).
    assert!((koenker.samples - 1999.0).abs() < 1.0, "{koenker:?}");
}

#[test]
fn f32_koenker_matches_f64_with_offset_levels() {
    // Levels 1e4..1.01e4: raw power sums would cancel in f32; co-moments do not.
    let mut rng = SplitMix(99);
    let mut wide: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
    let mut narrow: SpreadProfile<f32, 16> = SpreadProfile::new(SpreadConfig {
        level_low: 1.0f32,
        level_high: 1e5,
        forgetting: 1.0,
    });
    for _ in 0..20_000 {
        let level = 1e4 + 100.0 * rng.next_unit();
        let residual = (level - 1e4) * 0.01 * rng.next_normal();
        let (level32, residual32) = (level as f32, residual as f32);
        wide.push(f64::from(level32), f64::from(residual32));
        narrow.push(level32, residual32);
    }
    let reference = wide.koenker().unwrap().statistic;
    let single = f64::from(narrow.koenker().unwrap().statistic);
    assert!(reference > 1000.0);
    assert!(
        (single - reference).abs() / reference < 1e-3,
        "{single} vs {reference}"
    );
}

#[test]
fn serde_round_trip() {
    let mut profile: SpreadProfile<f32, 16> = SpreadProfile::new(config(0.999));
    for (level, residual) in feed(5, 300, 1.0) {
        profile.push(level as f32, residual as f32);
    }
    let mut buffer = [0u8; 1024];
    let bytes = postcard::to_slice(&profile, &mut buffer).unwrap();
    let back: SpreadProfile<f32, 16> = postcard::from_bytes(bytes).unwrap();
    assert_eq!(back.bins, profile.bins);
    assert_eq!(back.koenker, profile.koenker);
    assert_eq!(back.exponent(), profile.exponent());
}

#[test]
fn compact_state() {
    // Four floats per bin, as the module documentation promises.
    assert_eq!(core::mem::size_of::<BinAccumulator<f32>>(), 16);
    // Bins, 12 floats of configuration and Koenker sums, the lazy-forgetting scale pair.
    assert!(core::mem::size_of::<SpreadProfile<f32, 16>>() <= 16 * 16 + 14 * 4 + 4);
}

fn any_f64() -> impl Strategy<Value = f64> {
    prop_oneof![
        proptest::num::f64::ANY,
        -1e6f64..1e6,
        1e-3f64..1e4,
        Just(f64::NAN),
        Just(f64::INFINITY),
        Just(f64::NEG_INFINITY),
    ]
}

fn any_f32() -> impl Strategy<Value = f32> {
    prop_oneof![
        proptest::num::f32::ANY,
        -1e6f32..1e6,
        1e-3f32..1e4,
        Just(f32::NAN),
        Just(f32::INFINITY),
    ]
}

fn assert_state_finite<R: Real, const B: usize>(profile: &SpreadProfile<R, B>) {
    // Every stored number, not only what the accessors show.
    for bin in profile.bins.iter() {
        for value in [bin.weight, bin.mean, bin.comoment, bin.mean_log_level] {
            assert!(value.is_finite(), "bin {bin:?}");
        }
    }
    let k = &profile.koenker;
    for value in [
        k.weight,
        k.weight_squares,
        k.mean_level,
        k.mean_square,
        k.level_comoment,
        k.square_comoment,
        k.cross_comoment,
        profile.scale,
        profile.sample_weight,
    ] {
        assert!(value.is_finite());
    }
    for index in 0..B {
        let bin = profile.bin(index).unwrap();
        assert!(bin.count.is_finite() && bin.mean.is_finite() && bin.sd.is_finite());
    }
    if let Some(exponent) = profile.exponent() {
        assert!(exponent.k.is_finite() && exponent.standard_error > R::ZERO);
    }
    if let Some(koenker) = profile.koenker() {
        assert!(koenker.statistic >= R::ZERO && koenker.statistic <= koenker.samples);
    }
}

proptest! {
    #[test]
    fn never_panics_f64(
        pairs in proptest::collection::vec((any_f64(), any_f64()), 0..200),
        forgetting in prop_oneof![Just(1.0f64), 0.5f64..1.0, any_f64()],
        low in any_f64(),
        high in any_f64(),
    ) {
        for cfg in [config::<f64>(forgetting), SpreadConfig { level_low: low, level_high: high, forgetting }] {
            let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(cfg);
            for &(level, residual) in &pairs {
                let accepted = profile.push(level, residual);
                if !(level.is_finite() && level > 0.0 && residual.is_finite()) {
                    prop_assert!(!accepted);
                }
                let _ = profile.bin_of(level);
            }
            assert_state_finite(&profile);
        }
    }

    #[test]
    fn never_panics_f32(
        pairs in proptest::collection::vec((any_f32(), any_f32()), 0..200),
        forgetting in prop_oneof![Just(1.0f32), 0.5f32..1.0, any_f32()],
    ) {
        let mut profile: SpreadProfile<f32, 16> = SpreadProfile::new(config::<f32>(f64::from(forgetting)));
        for &(level, residual) in &pairs {
            profile.push(level, residual);
        }
        assert_state_finite(&profile);
        let mut small: SpreadProfile<f32, 3> = SpreadProfile::new(config::<f32>(0.9));
        for &(level, residual) in &pairs {
            small.push(level, residual);
        }
        assert_state_finite(&small);
    }

    /// Huge levels and residuals of both signs (squares and products overflow): the
    /// state stays finite, whatever the update refuses.
    #[test]
    fn state_stays_finite_f32(
        pairs in proptest::collection::vec(
            (prop_oneof![1e15f32..3.4e38, 1e-3f32..1e4], prop_oneof![-3.4e38f32..3.4e38, -1e20f32..1e20, -1.0f32..1.0]),
            0..200,
        ),
        forgetting in prop_oneof![Just(1.0f32), 0.9f32..1.0],
    ) {
        let mut profile: SpreadProfile<f32, 16> = SpreadProfile::new(config::<f32>(f64::from(forgetting)));
        for &(level, residual) in &pairs {
            profile.push(level, residual);
            assert_state_finite(&profile);
        }
    }

    #[test]
    fn state_stays_finite_f64(
        pairs in proptest::collection::vec(
            (prop_oneof![1e150f64..1.7e308, 1e-3f64..1e4], prop_oneof![-1.7e308f64..1.7e308, -1e160f64..1e160, -1.0f64..1.0]),
            0..200,
        ),
    ) {
        let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config::<f64>(0.999));
        for &(level, residual) in &pairs {
            profile.push(level, residual);
            assert_state_finite(&profile);
        }
    }

    #[test]
    fn welford_equals_two_pass(
        pairs in proptest::collection::vec((1e-2f64..1e5, -1e3f64..1e3), 1..300),
    ) {
        let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
        for &(level, residual) in &pairs {
            prop_assert!(profile.push(level, residual));
        }
        for index in 0..16 {
            let members: Vec<(f64, f64)> = pairs
                .iter()
                .copied()
                .filter(|&(level, _)| profile.bin_of(level) == Some(index))
                .collect();
            let bin = profile.bin(index).unwrap();
            prop_assert_eq!(bin.count, members.len() as f64);
            if members.is_empty() {
                continue;
            }
            let n = members.len() as f64;
            let mean = members.iter().map(|m| m.1).sum::<f64>() / n;
            let mean_log = members.iter().map(|m| libm::log(m.0)).sum::<f64>() / n;
            let scale = members.iter().map(|m| m.1.abs()).fold(1e-300, f64::max);
            prop_assert!((bin.mean - mean).abs() <= 1e-12 * scale);
            prop_assert!((libm::log(bin.level) - mean_log).abs() <= 1e-12 * (1.0 + mean_log.abs()));
            if members.len() >= 2 {
                let variance = members.iter().map(|m| (m.1 - mean).powi(2)).sum::<f64>() / (n - 1.0);
                let sd = variance.sqrt();
                prop_assert!((bin.sd - sd).abs() <= 1e-9 * scale, "{} vs {}", bin.sd, sd);
            }
        }
    }

    #[test]
    fn koenker_invariant_to_residual_scale(
        pairs in proptest::collection::vec((1e-1f64..1e4, -1e2f64..1e2), 12..200),
        scale in prop_oneof![1e-3f64..1e3, Just(4.0), Just(0.125)],
    ) {
        let mut plain: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
        let mut scaled: SpreadProfile<f64, 16> = SpreadProfile::new(config(1.0));
        for &(level, residual) in &pairs {
            plain.push(level, residual);
            scaled.push(level, residual * scale);
        }
        match (plain.koenker(), scaled.koenker()) {
            (Some(a), Some(b)) => {
                prop_assert_eq!(a.samples, b.samples);
                prop_assert!((a.statistic - b.statistic).abs() <= 1e-9 * (1.0 + a.statistic));
            }
            (None, None) => {}
            (a, b) => prop_assert!(false, "{:?} vs {:?}", a, b),
        }
    }
}
