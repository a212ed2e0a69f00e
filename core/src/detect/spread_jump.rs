//! Spread jump: the scatter grows at every level at once.
//!
//! When the spread model is right, `z²` of a standardized residual is χ²(1), whatever the
//! level. A jump of the SD by a ratio ρ at all levels multiplies `z²` by ρ², i.e. shifts
//! `ln z²` by `2 ln ρ`. The detector is a one-sided upper CUSUM on
//! `v = (ln z² − E[ln χ²₁]) / SD[ln χ²₁]`, with `E[ln χ²₁] = ψ(1/2) + ln 2 = −1.2704` and
//! `SD[ln χ²₁] = √(ψ′(1/2)) = π/√2 = 2.2214` (digamma and trigamma at 1/2; SciPy 1.11.4
//! gives `special.digamma(0.5) + log(2)` = −1.2703628454614782 and
//! `sqrt(special.polygamma(1, 0.5))` = 2.221441469079183). The logarithm keeps one large
//! residual from dominating (the upper tail of `ln χ²₁` is light), which a CUSUM on `z² − 1`
//! would not.
//!
//! This is distinct from `spread_tracks_level`: that one says the scatter depends on the
//! level (a shape), this one says the scatter grew everywhere (a change in time).
//!
//! Defaults k = 0.3, h = 8 (in units of `SD[ln χ²₁]`): in-control signal interval about
//! 7,400 checks; a doubling of the SD signals in about 23 checks, a ratio of 1.5 in about
//! 58 (measured by simulation on N(0, 1) streams, no published table).
//!
//! # Invariants
//! - The sum is finite and non-negative; a non-finite residual is ignored; `z = 0` is
//!   floored so that `ln z²` stays finite.

use serde::{Deserialize, Serialize};

use crate::real::{non_negative_setting, positive_setting, Real};

/// `E[ln χ²₁] = ψ(1/2) + ln 2` (SciPy 1.11.4: `special.digamma(0.5) + log(2)`).
pub const MEAN_LN_CHI_SQUARE_1: f64 = -1.270_362_845_461_478;
/// `SD[ln χ²₁] = π/√2` (SciPy 1.11.4: `sqrt(special.polygamma(1, 0.5))`).
pub const SD_LN_CHI_SQUARE_1: f64 = 2.221_441_469_079_183;

/// Settings of a [`SpreadJumpCusum`], in units of `SD[ln χ²₁]`.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct SpreadJumpConfig<R> {
    /// Reference value k (default 0.3: half the shift of a doubling of the SD, 0.62).
    pub reference_value: R,
    /// Decision interval h (default 8).
    pub decision_interval: R,
}

impl<R: Real> SpreadJumpConfig<R> {
    /// k = 0.3, h = 8.
    pub fn standard() -> Self {
        SpreadJumpConfig {
            reference_value: R::from_f64(0.3),
            decision_interval: R::from_f64(8.0),
        }
    }

    /// True when k ≥ 0 and h > 0, both finite.
    pub fn is_valid(&self) -> bool {
        non_negative_setting(self.reference_value) && positive_setting(self.decision_interval)
    }
}

/// A spread jump signal.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct SpreadJumpSignal<R> {
    /// Estimated ratio of the new SD to the modelled one.
    pub ratio: R,
    /// Consecutive checks the sum had been positive.
    pub run: u32,
}

/// The state of the one-sided CUSUM on `ln z²`.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct SpreadJumpCusum<R> {
    sum: R,
    run: u32,
}

impl<R: Real> SpreadJumpCusum<R> {
    /// The sum at zero.
    pub fn new() -> Self {
        SpreadJumpCusum {
            sum: R::ZERO,
            run: 0,
        }
    }

    /// Restarts the sum from zero.
    pub fn reset(&mut self) {
        *self = Self::new();
    }

    /// The current sum.
    pub fn sum(&self) -> R {
        self.sum
    }

    /// One standardized residual (one `ln` per call). Returns a signal, and restarts, when
    /// the sum exceeds `h`.
    #[inline]
    pub fn update(&mut self, config: &SpreadJumpConfig<R>, z: R) -> Option<SpreadJumpSignal<R>> {
        if !z.is_finite() {
            return None;
        }
        let sd = R::from_f64(SD_LN_CHI_SQUARE_1);
        let squared = (z * z).max(R::from_f64(1e-30));
        let v = (squared.ln() - R::from_f64(MEAN_LN_CHI_SQUARE_1)) / sd;
        let sum = self.sum + v - config.reference_value;
        if sum > R::ZERO {
            self.sum = sum;
            self.run = self.run.saturating_add(1);
        } else {
            self.sum = R::ZERO;
            self.run = 0;
        }
        if !(self.sum > config.decision_interval) {
            return None;
        }
        let run = self.run.max(1);
        // Mean shift of ln z² over the run is 2 ln ρ.
        let shift = (config.reference_value + self.sum / R::from_u32(run)) * sd;
        let ratio = (R::HALF * shift).exp();
        self.reset();
        Some(SpreadJumpSignal { ratio, run })
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] SpreadJumpCusum<R> { sum, run });
crate::wire::walk_struct!(impl[R: Real] SpreadJumpConfig<R> { reference_value, decision_interval });

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn constants_match_closed_forms() {
        // ψ(1/2) = −γ − 2 ln 2 and ψ′(1/2) = π²/2: the closed forms, checked against
        // SciPy 1.11.4 (`special.digamma(0.5)`, `special.polygamma(1, 0.5)`); γ as SciPy
        // 1.11.4 gives it (`-special.digamma(1)` = 0.5772156649015329).
        let gamma = 0.577_215_664_901_532_9;
        let mean = -gamma - 2.0 * core::f64::consts::LN_2 + core::f64::consts::LN_2;
        assert!((mean - MEAN_LN_CHI_SQUARE_1).abs() < 1e-12);
        let sd = core::f64::consts::PI / core::f64::consts::SQRT_2;
        assert!((sd - SD_LN_CHI_SQUARE_1).abs() < 1e-12);
    }

    #[test]
    fn large_residuals_signal_with_a_ratio_estimate() {
        let config = SpreadJumpConfig::<f64>::standard();
        let mut cusum = SpreadJumpCusum::new();
        // z = 3 everywhere: v = (ln 9 + 1.2704)/2.2214 = 1.561, minus k = 1.261 per check,
        // so the sum passes 8 at the 7th check.
        let mut signal = None;
        for i in 0..7 {
            signal = cusum.update(&config, 3.0);
            assert_eq!(signal.is_some(), i == 6);
        }
        let signal = signal.unwrap();
        assert_eq!(signal.run, 7);
        // Mean ln z² shift is ln 9 + 1.2704, so ρ = exp((ln 9 + 1.2704)/2) = 3·e^0.635.
        let expected = 3.0 * (0.5 * 1.270_362_845_461_478f64).exp();
        assert!((signal.ratio - expected).abs() < 1e-9, "{}", signal.ratio);
        assert_eq!(cusum.update(&config, 0.0), None);
        assert_eq!(cusum.sum(), 0.0);
        assert_eq!(cusum.update(&config, f64::NAN), None);
    }
}
