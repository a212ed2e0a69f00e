//! Tests of checks whose raw value is a mean of several values (a child of `monitor` for
//! its private fields).
//!
//! The feeds are simulated (invented, for the tests): a straight line with normal noise of
//! known single-value spread `c·level^k`. Every tolerance is a number of standard errors
//! of the statistic for the sample size at hand (normal theory: a variance estimated from
//! `n` residuals has relative standard error `√(2/n)`, a sample standard deviation
//! `1/√(2(n − 1))`; from memory, any statistics text), never a guessed margin.

use super::*;
use crate::sample::Averaging;
use proptest::prelude::*;
use std::vec::Vec;

/// Single-value noise `c·level^K` (`K = 1/2`: the `sqrt` rung's model).
const C: f64 = 0.2;
const K: f64 = 0.5;
/// Standard errors allowed for each statistic.
const SE_ALLOWED: f64 = 4.0;

/// A small deterministic generator of standard normal numbers (splitmix64 and
/// Box–Muller; from memory).
struct Normal(u64);

impl Normal {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn next(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * core::f64::consts::PI * v).cos()
    }
}

/// A monitor on the `sqrt` rung (the right one for `K = 1/2`) that never switches, with
/// no forgetting (plain sums: the sample sizes are the counts) and the origin at zero.
fn sqrt_monitor() -> Monitor<f64> {
    let mut config = MonitorConfig::<f64>::default_for_range(1.0, 100.0);
    config.forgetting = 1.0;
    config.initial_rung = Rung::Sqrt;
    config.switch_margin = 1e30;
    config.find_baseline = false;
    Monitor::new(config).unwrap()
}

/// What a run of checks gave: the standardized residuals after the first `skip` checks,
/// by the count each check averaged.
struct Run {
    monitor: Monitor<f64>,
    z: Vec<(u32, f64)>,
}

/// `n` checks, the `i`-th the mean of `counts(i)` values of the line `2 + 1.5·ref` with
/// single-value noise `C·level^K`.
fn run(n: u64, counts: impl Fn(u64) -> u32, seed: u64) -> Run {
    let mut monitor = sqrt_monitor();
    let mut normal = Normal(seed);
    let mut z = Vec::new();
    for i in 0..n {
        let reference = 1.0 + 59.0 * normal.uniform();
        let level = 2.0 + 1.5 * reference;
        let m = counts(i);
        let mut sum = 0.0;
        for _ in 0..m {
            sum += level + C * level.powf(K) * normal.next();
        }
        let raw = sum / f64::from(m);
        let outcome = monitor.push(&Sample::check(i, i as f64, raw, reference).averaged_over(m));
        let check = outcome.check().expect("every check is fitted");
        // Past the warm-up and the first estimates of σ².
        if i >= 1000 {
            z.push((
                m,
                check.standardized.expect("a fit past the warm-up has σ²"),
            ));
        }
    }
    Run { monitor, z }
}

/// The mean of `z²` over the checks of count `m`, and how many there were.
fn mean_square(run: &Run, m: u32) -> (f64, usize) {
    let squares: Vec<f64> = run
        .z
        .iter()
        .filter(|(count, _)| *count == m)
        .map(|(_, z)| z * z)
        .collect();
    (
        squares.iter().sum::<f64>() / squares.len() as f64,
        squares.len(),
    )
}

/// What every run must show whatever its counts: the fit's `σ²`, the spread profile's
/// bins and exponent and the standardized residuals all describe single values.
fn assert_single_value_scale(run: &Run, counts: &[u32]) {
    let monitor = &run.monitor;
    assert_eq!(monitor.rung(), Rung::Sqrt);
    // σ² of the sqrt rung: Var = σ²·(level/level_scale), so σ² = C²·level_scale.
    let fit = monitor.ladder().active_fit();
    let expected = C * C * monitor.ladder_config.level_scale;
    let n = f64::from(fit.updates()) - fit.dim() as f64;
    let relative = fit.residual_variance() / expected - 1.0;
    assert!(
        relative.abs() <= SE_ALLOWED * (2.0 / n).sqrt(),
        "σ² {} against {expected}",
        fit.residual_variance()
    );
    // The standardized residuals have unit variance for every count.
    for &m in counts {
        let (mean, n) = mean_square(run, m);
        assert!(
            (mean - 1.0).abs() <= SE_ALLOWED * (2.0 / n as f64).sqrt(),
            "mean z² {mean} over {n} checks of count {m}"
        );
    }
    // Every well-filled bin's SD is the single-value spread at its level.
    let spread = monitor.spread();
    let mut bins = 0;
    for index in 0..16 {
        let bin = spread.bin(index).unwrap();
        if bin.count < 100.0 {
            continue;
        }
        bins += 1;
        let expected = C * bin.level.powf(K);
        let se = 1.0 / (2.0 * (bin.count - 1.0)).sqrt();
        assert!(
            (bin.sd / expected - 1.0).abs() <= SE_ALLOWED * se,
            "bin {index} at level {}: SD {} against {expected} ({} residuals)",
            bin.level,
            bin.sd,
            bin.count
        );
    }
    assert!(bins >= 8, "{bins} bins well filled");
    // The exponent of the spread against level is the single values' K.
    let exponent = spread.exponent().unwrap();
    assert!(
        (exponent.k - K).abs() <= SE_ALLOWED * exponent.standard_error,
        "k = {} ± {}",
        exponent.k,
        exponent.standard_error
    );
}

#[test]
fn single_values_describe_their_own_noise() {
    // The control: what every averaged run must match.
    let run = run(20_000, |_| 1, 1);
    assert_single_value_scale(&run, &[1]);
}

#[test]
fn means_of_four_are_weighed_as_single_values_with_a_quarter_of_the_variance() {
    let run = run(20_000, |_| 4, 2);
    assert_single_value_scale(&run, &[4]);
}

#[test]
fn checks_of_varying_counts_share_one_scale() {
    // Means of 1 and of 8 values in turn: each kind standardizes to unit variance.
    let run = run(20_000, |i| if i % 2 == 0 { 1 } else { 8 }, 3);
    assert_single_value_scale(&run, &[1, 8]);
}

#[test]
fn a_reading_of_a_mean_has_the_uncertainty_of_the_mean() {
    let run = run(5_000, |_| 1, 4);
    let mut monitor = run.monitor;
    let single = monitor.push(&Sample::reading(5_000, 5_000.0, 60.0));
    let mean = monitor.push(&Sample::reading(5_001, 5_001.0, 60.0).averaged_over(4));
    let (single, mean) = (single.reading().unwrap(), mean.reading().unwrap());
    assert_eq!(single.value, mean.value);
    // Var = σ²·(1/(m·w) + xᵀPx)/b²: below the single value's, above a quarter of it.
    assert!(mean.standard_uncertainty < single.standard_uncertainty);
    assert!(mean.standard_uncertainty > 0.5 * single.standard_uncertainty);
}

#[test]
fn a_count_of_zero_or_one_is_a_single_value() {
    assert_eq!(Averaging::<f32>::of(0), Averaging::SINGLE);
    assert_eq!(Averaging::<f32>::of(1), Averaging::SINGLE);
    let four = Averaging::<f64>::of(4);
    assert_eq!((four.count, four.inverse, four.root), (4.0, 0.25, 2.0));
    assert_eq!(Sample::check(0, 0.0, 1.0f32, 1.0).averaged, 1);
    assert_eq!(Sample::reading(0, 0.0, 1.0f32).averaged, 1);
}

/// A feed of checks and readings drawn by proptest: `(reference or none, raw)`.
fn feed() -> impl Strategy<Value = Vec<(Option<f32>, f32)>> {
    prop::collection::vec(
        (
            prop::option::weighted(0.7, 1.0f32..100.0),
            -0.5f32..0.5,
            1.0f32..100.0,
        )
            .prop_map(|(reference, noise, level)| match reference {
                Some(reference) => (Some(reference), 0.5 + 1.2 * reference + noise),
                None => (None, level),
            }),
        250..600,
    )
}

/// Outcomes and the final snapshot of a monitor fed `feed`, each sample's count set by
/// `count` (`None`: as the constructor made it).
fn replay(feed: &[(Option<f32>, f32)], count: Option<u32>) -> (Vec<Outcome<f32>>, Vec<u8>) {
    let config = MonitorConfig::<f32>::default_for_range(1.0, 200.0);
    let mut monitor: Monitor<f32> = Monitor::new(config).unwrap();
    let mut outcomes = Vec::new();
    for (seq, &(reference, raw)) in feed.iter().enumerate() {
        let mut sample = match reference {
            Some(reference) => Sample::check(seq as u64, seq as f64, raw, reference),
            None => Sample::reading(seq as u64, seq as f64, raw),
        };
        if let Some(count) = count {
            sample = sample.averaged_over(count);
        }
        outcomes.push(monitor.push(&sample));
    }
    let mut bytes = std::vec![0u8; 8192];
    let len = monitor.snapshot(&mut bytes).unwrap();
    bytes.truncate(len);
    (outcomes, bytes)
}

/// Bits of an outcome's numbers, so that `-0.0` and `0.0` (and NaN payloads) differ.
fn bits(outcomes: &[Outcome<f32>]) -> Vec<u32> {
    let mut out = Vec::new();
    for outcome in outcomes {
        out.push(u32::from(outcome.flags.0));
        match outcome.detail {
            Detail::Reading(r) => out.extend(
                [r.value, r.standard_uncertainty, r.expanded_uncertainty].map(f32::to_bits),
            ),
            Detail::Check(c) => out.extend(
                [c.prediction, c.residual, c.standardized.unwrap_or(f32::NAN)].map(f32::to_bits),
            ),
            Detail::Nothing => {}
        }
    }
    out
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]

    /// A count of 1 (or 0, read as 1) computes what a sample as the constructors make it
    /// computes, bit for bit: outcomes and the whole state (its snapshot).
    #[test]
    fn a_count_of_one_changes_no_bit(feed in feed()) {
        let (outcomes, snapshot) = replay(&feed, None);
        for count in [0, 1] {
            let (other, other_snapshot) = replay(&feed, Some(count));
            prop_assert_eq!(bits(&outcomes), bits(&other));
            prop_assert_eq!(&snapshot, &other_snapshot);
        }
    }

    /// The factors of a single value are exactly 1, and a product with 1 returns the other
    /// factor's bits for every `f32` and `f64` that is not NaN (IEEE 754 multiplication is
    /// exact when the exact product is representable), so the arithmetic of a count of 1
    /// is the arithmetic without the count.
    #[test]
    fn a_single_value_s_factors_leave_every_number_as_it_is(a in any::<u32>(), b in any::<u64>()) {
        let single = Averaging::<f32>::of(1);
        let x = f32::from_bits(a);
        for factor in [single.count, single.inverse, single.root] {
            prop_assert!(x.is_nan() || (x * factor).to_bits() == a);
        }
        let single = Averaging::<f64>::of(1);
        let y = f64::from_bits(b);
        for factor in [single.count, single.inverse, single.root] {
            prop_assert!(y.is_nan() || (y * factor).to_bits() == b);
        }
    }
}
