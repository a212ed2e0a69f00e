//! Mean adequacy: after a change of rung, are the residual means zero at every level?
//!
//! The standardized residuals of the active fit are grouped by level (the same log-spaced
//! bins as the spread profile). For bin `b` with `n_b` residuals, `Z_b = Σ z / √n_b` is
//! standard normal when the calibration mean is right, so `Σ Z_b²` over the bins in use is
//! χ² with as many degrees of freedom. Its upper quantile comes from the Wilson–Hilferty
//! approximation (Wilson & Hilferty 1931), so no table is needed on the board.
//!
//! # Invariants
//! - Only finite standardized residuals enter; a bin needs `min_per_bin` of them to count.
//! - The check is reset at every switch; it reports once per switch.

use serde::{Deserialize, Serialize};
use serde_big_array::BigArray;

use crate::real::Real;

/// Outcome of the lack-of-fit test.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct MeanCheckResult<R> {
    /// Σ Z_b² over the bins in use.
    pub statistic: R,
    /// Bins in use (the degrees of freedom).
    pub dof: u8,
    /// The χ² quantile the statistic was compared with.
    pub threshold: R,
    /// True when the statistic exceeds the threshold.
    pub misfit: bool,
    /// The bin means curve (ends against middle): a quadratic term would probably help.
    pub curved: bool,
}

/// Per-level sums of standardized residuals since the last reset.
#[derive(Clone, Debug, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct MeanCheck<R, const BINS: usize> {
    #[serde(with = "BigArray")]
    sums: [R; BINS],
    #[serde(with = "BigArray")]
    counts: [u32; BINS],
    since_reset: u32,
    armed: bool,
}

impl<R: Real, const BINS: usize> Default for MeanCheck<R, BINS> {
    fn default() -> Self {
        Self::new()
    }
}

/// Upper quantile of χ²(dof) for the standard normal quantile `z` (Wilson–Hilferty 1931).
///
/// ```
/// use steadycal_core::adequacy::chi_square_quantile;
/// // χ²(10) at 0.999 is 29.59 (SciPy 1.11.4 `stats.chi2.ppf(0.999, 10)` = 29.5883); the
/// // approximation is close.
/// let q = chi_square_quantile(10, 3.0902f64);
/// assert!((q - 29.59).abs() < 0.3);
/// ```
pub fn chi_square_quantile<R: Real>(dof: u32, z: R) -> R {
    let k = R::from_u32(dof.max(1));
    let a = R::TWO / (R::from_f64(9.0) * k);
    let cube = R::ONE - a + z * a.sqrt();
    k * cube * cube * cube
}

impl<R: Real, const BINS: usize> MeanCheck<R, BINS> {
    /// An empty, disarmed check.
    pub fn new() -> Self {
        MeanCheck {
            sums: [R::ZERO; BINS],
            counts: [0; BINS],
            since_reset: 0,
            armed: false,
        }
    }

    /// Clears the sums and arms the check (called at a switch).
    pub fn arm(&mut self) {
        *self = Self::new();
        self.armed = true;
    }

    /// True between a switch and the report.
    pub fn armed(&self) -> bool {
        self.armed
    }

    /// Residuals taken since the last arm.
    pub fn since_reset(&self) -> u32 {
        self.since_reset
    }

    /// Adds a standardized residual in bin `bin`.
    pub fn push(&mut self, bin: usize, standardized: R) {
        if !self.armed || bin >= BINS || !standardized.is_finite() {
            return;
        }
        self.sums[bin] += standardized;
        self.counts[bin] = self.counts[bin].saturating_add(1);
        self.since_reset = self.since_reset.saturating_add(1);
    }

    /// Evaluates the test and disarms the check.
    pub fn evaluate(&mut self, min_per_bin: u32, z: R) -> Option<MeanCheckResult<R>> {
        self.armed = false;
        let mut statistic = R::ZERO;
        let mut dof = 0u8;
        let (mut first, mut last) = (None, None);
        for bin in 0..BINS {
            if self.counts[bin] < min_per_bin.max(1) {
                continue;
            }
            let mean_z = self.sums[bin] / R::from_u32(self.counts[bin]).sqrt();
            statistic += mean_z * mean_z;
            dof = dof.saturating_add(1);
            if first.is_none() {
                first = Some(bin);
            }
            last = Some(bin);
        }
        if dof == 0 {
            return None;
        }
        let threshold = chi_square_quantile(dof as u32, z);
        let curved = match (first, last) {
            (Some(first), Some(last)) if last >= first + 2 => {
                // Bins found by the loop above (checked access: no panic path on a board).
                let mean = |bin: usize| match (self.sums.get(bin), self.counts.get(bin)) {
                    (Some(&sum), Some(&count)) => sum / R::from_u32(count.max(1)),
                    _ => R::ZERO,
                };
                let middle = (first + last) / 2;
                let ends = mean(first) + mean(last);
                // Ends on one side of the middle: a bowed mean.
                (ends > R::ZERO) != (mean(middle) > R::ZERO)
            }
            _ => false,
        };
        Some(MeanCheckResult {
            statistic,
            dof,
            threshold,
            misfit: statistic > threshold,
            curved,
        })
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real, const BINS: usize] MeanCheck<R, BINS> {
    sums, counts, since_reset, armed
});

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wilson_hilferty_against_table() {
        // χ² upper quantiles (SciPy 1.11.4 `stats.chi2.ppf(0.999, ν)`):
        // χ²(1, 0.999) = 10.8276, χ²(5, 0.999) = 20.5150, χ²(16, 0.999) = 39.2524.
        assert!((chi_square_quantile(5, 3.0902f64) - 20.52).abs() < 0.3);
        assert!((chi_square_quantile(16, 3.0902f64) - 39.25).abs() < 0.3);
        assert!((chi_square_quantile(1, 3.0902f64) - 10.83).abs() < 1.0);
    }

    #[test]
    fn detects_offset_residuals() {
        let mut check: MeanCheck<f64, 4> = MeanCheck::new();
        check.arm();
        for i in 0..400 {
            let z = if (i / 4) % 2 == 0 { 1.0 } else { -1.0 };
            check.push(i % 4, z);
        }
        assert!(!check.evaluate(10, 3.09).unwrap().misfit);
        check.arm();
        for i in 0..400 {
            check.push(i % 4, 0.5 + if (i / 4) % 2 == 0 { 1.0 } else { -1.0 });
        }
        assert!(check.evaluate(10, 3.09).unwrap().misfit);
        assert!(!check.armed());
    }
}
