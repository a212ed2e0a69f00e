//! Residual spread against signal level, with streaming statistics.
//!
//! A [`SpreadProfile`] receives `(level, residual)` pairs, where `level` is already measured
//! above the origin (so it must be positive). It keeps two things:
//!
//! - **Level bins.** `BINS` bins, equally spaced in `ln level` between
//!   [`SpreadConfig::level_low`] and [`SpreadConfig::level_high`]; levels below the range go
//!   to the first bin, levels above it to the last. Each bin holds an exponentially
//!   forgetting weighted Welford accumulator (West 1979, "Updating mean and variance
//!   estimates: an improved method", CACM 22(9)): for a new residual `x`,
//!   `W ← βW + 1`, `μ ← μ + (x − μ)/W`, `S ← βS + (x − μ_old)(x − μ_new)`, plus the running
//!   mean of `ln level` (the abscissa of the exponent fit). Four floats per bin.
//! - **Koenker sums.** Exponentially weighted co-moments of `(level, residual²)` over all
//!   residuals, updated the same stable way (no raw power sums), from which Koenker's
//!   studentized Breusch–Pagan statistic `n·R²` of the regression of `e²` on level (with a
//!   constant) follows.
//!
//! # Forgetting
//! On every accepted push, *every* bin and the Koenker sums are multiplied by the forgetting
//! factor β (weights and co-moments; means are unchanged by a common scale), so old residuals
//! leave every bin at the fit's rate, not only the bin that is being fed. A bin whose weight
//! decays below `R::EPSILON` is emptied (this keeps subnormal numbers out of the state). With
//! β = 1 the bins are plain Welford accumulators and equal two-pass statistics up to rounding.
//!
//! # Conventions (the Python reference `tests/reference/spread_reference.py` uses the same)
//! - Effective count of a bin: `n_b = W_b` (the sum of its weights; the plain count at β = 1).
//! - Bin variance: `S_b / (W_b − 1)` — the ddof = 1 sample variance at β = 1. Under forgetting
//!   the exact reliability-weights correction would be `W − Σw²/W`; the difference is below
//!   one unit of `W` and negligible once a bin holds tens of residuals.
//! - Exponent k: weighted least squares of `ln SD_b` on the bin's mean `ln level`, weight
//!   `n_b − 1`, over bins with `n_b ≥ 2` and `SD_b > 0`; at least 3 such bins. Standard
//!   error: the larger of the model-based `sqrt(1 / (2 Σ w_b (x_b − x̄_w)²))` (from
//!   `Var(ln s) ≈ 1/(2(n − 1))` for normal residuals) and the residual-based WLS standard
//!   error (scale `Σ w r² / (m − 2)`). The model-based one is the floor because with a
//!   handful of bins the residual-based one is itself noisy and can be small by chance; the
//!   residual-based one wins when the bins scatter more than normal theory allows (heavy
//!   tails, a spread that is not a power of level), which the model-based one would hide.
//!   Under forgetting `W_b` is smaller than the Kish effective count of the bin (up to a
//!   factor 2 for a bin fed on every push), so the model-based error is conservative then.
//! - Koenker: `n = (Σw)² / Σw²` (Kish's effective sample size; exactly the count at β = 1),
//!   `R²` the weighted squared correlation of `e²` and level. `n·R²` is then approximately
//!   χ²(1) under constant spread with or without forgetting.
//!
//! # Invariants
//! - No method panics, for any input value (NaN, ±∞, subnormal, huge) and any configuration.
//! - A push with a non-finite or non-positive level, a non-finite residual, or one whose
//!   update would overflow any accumulator, changes nothing and returns `false`: the state
//!   stays finite.
//! - A push costs one `ln` (the bin index and the bin's log-level mean share it), two
//!   multiplies per bin for the forgetting (none when β = 1) and a few flops; no other
//!   transcendental. [`SpreadProfile::exponent`] costs one logarithm per usable bin,
//!   [`SpreadProfile::bin`] one `exp`.
//! - A profile built by [`SpreadProfile::new`] from an invalid configuration (see
//!   [`SpreadConfig::validate`]) accepts nothing; [`SpreadProfile::new_checked`] reports it.

use serde::{Deserialize, Serialize};

use crate::real::Real;

/// Least Kish effective sample size for [`SpreadProfile::koenker`] to report a statistic.
pub const KOENKER_MIN_SAMPLES: u32 = 10;

/// Least number of usable bins for [`SpreadProfile::exponent`].
pub const EXPONENT_MIN_BINS: u8 = 3;

/// Settings of a [`SpreadProfile`].
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct SpreadConfig<R> {
    /// Lower edge of the first bin (level above the origin, raw units, > 0).
    pub level_low: R,
    /// Upper edge of the last bin (> `level_low`). Levels outside go to the end bins.
    pub level_high: R,
    /// Forgetting factor of the bins and running sums, in (0, 1]; the fit's rate.
    pub forgetting: R,
}

/// Why a [`SpreadConfig`] is unusable.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum SpreadConfigError {
    /// `level_low` is not a finite number above zero.
    LevelLowNotPositive,
    /// `level_high` is not finite or not above `level_low`.
    LevelHighNotAboveLow,
    /// `forgetting` is not in (0, 1].
    ForgettingOutOfRange,
    /// The profile has no bins (`BINS == 0`).
    NoBins,
}

impl<R: Real> SpreadConfig<R> {
    /// Checks the settings, naming the first offending parameter.
    ///
    /// ```
    /// use steadycal_core::spread::{SpreadConfig, SpreadConfigError};
    /// let good = SpreadConfig { level_low: 1.0f64, level_high: 1e3, forgetting: 0.999 };
    /// assert_eq!(good.validate(), Ok(()));
    /// let bad = SpreadConfig { forgetting: 1.5, ..good };
    /// assert_eq!(bad.validate(), Err(SpreadConfigError::ForgettingOutOfRange));
    /// ```
    pub fn validate(&self) -> Result<(), SpreadConfigError> {
        if !(self.level_low.is_finite() && self.level_low > R::ZERO) {
            return Err(SpreadConfigError::LevelLowNotPositive);
        }
        if !(self.level_high.is_finite() && self.level_high > self.level_low) {
            return Err(SpreadConfigError::LevelHighNotAboveLow);
        }
        if !(self.forgetting > R::ZERO && self.forgetting <= R::ONE) {
            return Err(SpreadConfigError::ForgettingOutOfRange);
        }
        Ok(())
    }
}

/// The exponent k of SD ∝ level^k.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct SpreadExponent<R> {
    /// Estimated k.
    pub k: R,
    /// Its standard error.
    pub standard_error: R,
    /// Number of bins that took part.
    pub bins_used: u8,
}

/// Koenker's studentized Breusch–Pagan statistic of squared residuals on level.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct KoenkerStatistic<R> {
    /// n·R², asymptotically χ²(1) under constant spread.
    pub statistic: R,
    /// The (effective) n: Kish's `(Σw)²/Σw²`, the plain count when nothing is forgotten.
    pub samples: R,
}

/// Summary of one level bin.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct BinSummary<R> {
    /// Mean level of the residuals in the bin: the geometric mean, `exp` of the (weighted)
    /// mean of `ln level`, which is what the bin stores.
    pub level: R,
    /// Mean residual.
    pub mean: R,
    /// Residual standard deviation, `sqrt(S/(W − 1))`; zero while `W ≤ 1`.
    pub sd: R,
    /// (Effective) number of residuals, `W` (the sum of the forgetting weights).
    pub count: R,
}

/// One bin's forgetting Welford accumulator.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
struct BinAccumulator<R> {
    /// Sum of weights W.
    weight: R,
    /// Weighted mean residual μ.
    mean: R,
    /// Weighted sum of squared deviations S.
    comoment: R,
    /// Weighted mean of ln level.
    mean_log_level: R,
}

impl<R: Real> BinAccumulator<R> {
    const EMPTY: Self = Self {
        weight: R::ZERO,
        mean: R::ZERO,
        comoment: R::ZERO,
        mean_log_level: R::ZERO,
    };
}

/// Exponentially weighted co-moments of (level, residual²).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
struct KoenkerSums<R> {
    /// Σw.
    weight: R,
    /// Σw² (for Kish's effective sample size).
    weight_squares: R,
    /// Weighted mean level.
    mean_level: R,
    /// Weighted mean of e².
    mean_square: R,
    /// Σw (level − mean)².
    level_comoment: R,
    /// Σw (e² − mean)².
    square_comoment: R,
    /// Σw (level − mean)(e² − mean).
    cross_comoment: R,
}

impl<R: Real> KoenkerSums<R> {
    const EMPTY: Self = Self {
        weight: R::ZERO,
        weight_squares: R::ZERO,
        mean_level: R::ZERO,
        mean_square: R::ZERO,
        level_comoment: R::ZERO,
        square_comoment: R::ZERO,
        cross_comoment: R::ZERO,
    };
}

/// Residuals binned by level on log-spaced bins.
///
/// ```
/// use steadycal_core::spread::{SpreadConfig, SpreadProfile};
/// let config = SpreadConfig { level_low: 1.0f64, level_high: 1e3, forgetting: 1.0 };
/// let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config);
/// assert_eq!(profile.bin_of(1.0), Some(0));
/// assert_eq!(profile.bin_of(1e6), Some(15));
/// assert!(profile.push(10.0, 0.1));
/// assert!(!profile.push(f64::NAN, 0.1));
/// ```
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct SpreadProfile<R, const BINS: usize = 16> {
    config: SpreadConfig<R>,
    /// `ln level_low`.
    log_level_low: R,
    /// `BINS / (ln level_high − ln level_low)`.
    bins_per_log_unit: R,
    /// False when the configuration is invalid: nothing is accepted then.
    accepting: bool,
    koenker: KoenkerSums<R>,
    /// Bin weights and co-moments are stored inflated: true value = stored × `scale`.
    /// Forgetting multiplies `scale` by β instead of touching every bin on every push.
    scale: R,
    /// `1 / scale`: the stored weight of a new residual.
    sample_weight: R,
    #[serde(with = "serde_big_array::BigArray")]
    bins: [BinAccumulator<R>; BINS],
}

impl<R: Real, const BINS: usize> SpreadProfile<R, BINS> {
    /// An empty profile. An invalid configuration (see [`SpreadConfig::validate`]) gives a
    /// profile that accepts nothing; use [`SpreadProfile::new_checked`] to be told.
    pub fn new(config: SpreadConfig<R>) -> Self {
        let accepting = config.validate().is_ok() && BINS > 0;
        let (log_level_low, bins_per_log_unit) = if accepting {
            let low = config.level_low.ln();
            let width = config.level_high.ln() - low;
            (low, R::from_f64(BINS as f64) / width)
        } else {
            (R::ZERO, R::ZERO)
        };
        // ln of distinct positive finite values can still round to equal logs (a range of a
        // few ulps): refuse rather than divide by zero.
        let accepting = accepting && bins_per_log_unit.is_finite() && bins_per_log_unit > R::ZERO;
        Self {
            config,
            log_level_low,
            bins_per_log_unit,
            accepting,
            koenker: KoenkerSums::EMPTY,
            scale: R::ONE,
            sample_weight: R::ONE,
            bins: [BinAccumulator::EMPTY; BINS],
        }
    }

    /// An empty profile, or the reason the configuration is unusable.
    pub fn new_checked(config: SpreadConfig<R>) -> Result<Self, SpreadConfigError> {
        if BINS == 0 {
            return Err(SpreadConfigError::NoBins);
        }
        config.validate()?;
        let profile = Self::new(config);
        if profile.accepting {
            Ok(profile)
        } else {
            Err(SpreadConfigError::LevelHighNotAboveLow)
        }
    }

    /// The configuration the profile was built with.
    pub fn config(&self) -> &SpreadConfig<R> {
        &self.config
    }

    /// The residuals the profile holds, as an effective count (the sum of their
    /// forgetting weights; the plain count at β = 1).
    pub fn weight(&self) -> R {
        self.koenker.weight
    }

    /// Forgets everything (for example at the end of a warm-up); keeps the configuration.
    pub fn clear(&mut self) {
        self.koenker = KoenkerSums::EMPTY;
        self.scale = R::ONE;
        self.sample_weight = R::ONE;
        self.bins = [BinAccumulator::EMPTY; BINS];
    }

    /// The bin a level falls in (end bins take levels outside the range); `None` for a
    /// level that is not finite or not positive.
    pub fn bin_of(&self, level: R) -> Option<usize> {
        if !self.accepting || !level.is_positive_finite() {
            return None;
        }
        Some(self.bin_of_log(level.ln()))
    }

    /// The bin of a finite `ln level`.
    fn bin_of_log(&self, log_level: R) -> usize {
        let position = (log_level - self.log_level_low) * self.bins_per_log_unit;
        if position.is_nan() || position <= R::ZERO {
            return 0;
        }
        // Truncation is the floor for a positive position, and it saturates.
        let index = position.to_index();
        index.min(BINS - 1)
    }

    /// Adds one residual at a level (above the origin). Non-finite or non-positive levels
    /// and non-finite residuals are ignored and return `false`; so is a residual whose
    /// square or update would overflow the accumulators.
    pub fn push(&mut self, level: R, residual: R) -> bool {
        if !self.accepting || !level.is_positive_finite() || !residual.is_finite() {
            return false;
        }
        let log_level = level.ln();
        let index = self.bin_of_log(log_level);
        self.push_in(index, level, log_level, residual)
    }

    /// [`SpreadProfile::push`], returning [`SpreadProfile::bin_of`] the level (whether or not
    /// the residual was accepted): one logarithm serves both.
    pub fn push_binned(&mut self, level: R, residual: R) -> Option<usize> {
        if !self.accepting || !level.is_positive_finite() {
            return None;
        }
        let log_level = level.ln();
        let index = self.bin_of_log(log_level);
        if residual.is_finite() {
            self.push_in(index, level, log_level, residual);
        }
        Some(index)
    }

    /// [`SpreadProfile::push_binned`] for a caller that already has `log_level`, the
    /// natural logarithm of `level` (one logarithm fewer). A non-finite `log_level` is
    /// treated like a level that is not positive.
    pub fn push_binned_with_log(&mut self, level: R, log_level: R, residual: R) -> Option<usize> {
        if !self.accepting || !level.is_positive_finite() || !log_level.is_finite() {
            return None;
        }
        let index = self.bin_of_log(log_level);
        if residual.is_finite() {
            self.push_in(index, level, log_level, residual);
        }
        Some(index)
    }

    /// The update of [`SpreadProfile::push`] once the level is known to be usable.
    #[inline]
    fn push_in(&mut self, index: usize, level: R, log_level: R, residual: R) -> bool {
        let beta = self.config.forgetting;

        // Lazy forgetting: the new residual's stored weight grows as 1/β per push, which is
        // the same as shrinking every older weight by β (exact up to rounding).
        let (scale, sample_weight) = if beta < R::ONE {
            (self.scale * beta, self.sample_weight / beta)
        } else {
            (self.scale, self.sample_weight)
        };
        // The target bin, computed aside so a rejected update leaves the state untouched.
        let old = self.bins[index];
        let weight = old.weight + sample_weight;
        let share = sample_weight / weight;
        let delta = residual - old.mean;
        let mean = old.mean + delta * share;
        let comoment = old.comoment + sample_weight * delta * (residual - mean);
        let mean_log_level = old.mean_log_level + (log_level - old.mean_log_level) * share;

        // Koenker co-moments of (level, e²).
        let square = residual * residual;
        let k = &self.koenker;
        let k_weight = beta * k.weight + R::ONE;
        let k_weight_squares = beta * beta * k.weight_squares + R::ONE;
        let level_delta = level - k.mean_level;
        let square_delta = square - k.mean_square;
        let mean_level = k.mean_level + level_delta / k_weight;
        let mean_square = k.mean_square + square_delta / k_weight;
        let level_after = level - mean_level;
        let square_after = square - mean_square;
        let level_comoment = beta * k.level_comoment + level_delta * level_after;
        let square_comoment = beta * k.square_comoment + square_delta * square_after;
        let cross_comoment = beta * k.cross_comoment + level_delta * square_after;

        // All finite when v·0 sums to zero (a non-finite v makes it NaN); no loop. Only the
        // four co-moments need the probe, for finite inputs and a finite state:
        // - `weight`, `k_weight`, `k_weight_squares` are bounded sums of bounded weights;
        //   `mean_log_level` and `mean_level` move between finite values by a share ≤ 1
        //   (levels are positive, so `level − mean_level` cannot overflow either);
        // - `mean` can only overflow through `delta`, which then makes `comoment` NaN or
        //   infinite; `mean_square` only through `square` or `square_delta`, which then
        //   make `square_comoment` NaN or infinite.
        // (Checked on extreme values by the `state_stays_finite_*` property tests.)
        let zero = R::ZERO;
        let probe = comoment * zero
            + level_comoment * zero
            + square_comoment * zero
            + cross_comoment * zero;
        if !probe.is_finite() {
            return false;
        }

        self.bins[index] = BinAccumulator {
            weight,
            mean,
            comoment,
            mean_log_level,
        };
        self.scale = scale;
        self.sample_weight = sample_weight;
        // Renormalize long before the inflated weights could overflow (about every
        // 35,000 pushes at β = 0.999); bins whose true weight has decayed below machine
        // epsilon are emptied so that no weight ever becomes denormal.
        if sample_weight > R::from_f64(1e12) {
            for bin in self.bins.iter_mut() {
                bin.weight *= scale;
                bin.comoment *= scale;
                if bin.weight < R::EPSILON {
                    *bin = BinAccumulator::EMPTY;
                }
            }
            self.scale = R::ONE;
            self.sample_weight = R::ONE;
        }
        self.koenker = KoenkerSums {
            weight: k_weight,
            weight_squares: k_weight_squares,
            mean_level,
            mean_square,
            level_comoment,
            square_comoment,
            cross_comoment,
        };
        true
    }

    /// A bin with its true (deflated) weight and co-moment.
    fn actual(&self, bin: &BinAccumulator<R>) -> BinAccumulator<R> {
        BinAccumulator {
            weight: bin.weight * self.scale,
            comoment: bin.comoment * self.scale,
            ..*bin
        }
    }

    /// `(abscissa ln level, ordinate ln SD, weight n − 1)` of a bin usable for the exponent.
    fn exponent_point(&self, stored: &BinAccumulator<R>) -> Option<(R, R, R)> {
        let bin = &self.actual(stored);
        if !(bin.weight >= R::TWO && bin.comoment > R::ZERO) {
            return None;
        }
        let degrees = bin.weight - R::ONE;
        let log_sd = R::HALF * (bin.comoment / degrees).ln();
        log_sd
            .is_finite()
            .then_some((bin.mean_log_level, log_sd, degrees))
    }

    /// k and its standard error, when at least 3 bins have 2 or more residuals.
    ///
    /// See the module documentation for the weights and the choice of standard error.
    pub fn exponent(&self) -> Option<SpreadExponent<R>> {
        // The usable bins' points, computed once (one logarithm each) for the three passes.
        let mut points = [(R::ZERO, R::ZERO, R::ZERO); BINS];
        let mut used = 0usize;
        let usable = self.bins.iter().filter_map(|bin| self.exponent_point(bin));
        for (slot, point) in points.iter_mut().zip(usable) {
            *slot = point;
            used += 1;
        }
        let points = points.get(..used).unwrap_or(&[]);
        // First pass: weighted means.
        let bins_used = u8::try_from(used).unwrap_or(u8::MAX);
        let mut weight_sum = R::ZERO;
        let mut mean_x = R::ZERO;
        let mut mean_y = R::ZERO;
        for &(x, y, w) in points {
            weight_sum += w;
            mean_x += w * (x - mean_x) / weight_sum;
            mean_y += w * (y - mean_y) / weight_sum;
        }
        if bins_used < EXPONENT_MIN_BINS {
            return None;
        }
        // Second pass: centred sums.
        let mut sxx = R::ZERO;
        let mut sxy = R::ZERO;
        for &(x, y, w) in points {
            sxx += w * (x - mean_x).squared();
            sxy += w * (x - mean_x) * (y - mean_y);
        }
        if !sxx.is_positive_finite() {
            return None;
        }
        let k = sxy / sxx;
        // Third pass: weighted residual sum of squares.
        let mut rss = R::ZERO;
        for &(x, y, w) in points {
            rss += w * (y - mean_y - k * (x - mean_x)).squared();
        }
        let model_variance = R::ONE / (R::TWO * sxx);
        let residual_variance = rss / (R::from_u32(u32::from(bins_used) - 2) * sxx);
        let standard_error = model_variance.max(residual_variance).sqrt();
        (k.is_finite() && standard_error.is_finite()).then_some(SpreadExponent {
            k,
            standard_error,
            bins_used,
        })
    }

    /// Koenker's statistic, when enough residuals were seen: a Kish effective sample size of
    /// at least [`KOENKER_MIN_SAMPLES`], and some variation in both level and `e²` (else
    /// `R²` is undefined and the result is `None`).
    pub fn koenker(&self) -> Option<KoenkerStatistic<R>> {
        let k = &self.koenker;
        if !k.weight_squares.is_positive_finite() {
            return None;
        }
        let samples = k.weight * (k.weight / k.weight_squares);
        if samples.is_nan() || samples < R::from_u32(KOENKER_MIN_SAMPLES) {
            return None;
        }
        if !(k.level_comoment > R::ZERO && k.square_comoment > R::ZERO) {
            return None;
        }
        // Correlation by successive divisions so that f32 never overflows.
        let correlation = k.cross_comoment / k.level_comoment.sqrt() / k.square_comoment.sqrt();
        let r_squared = correlation.squared().min(R::ONE);
        let statistic = samples * r_squared;
        statistic
            .is_finite()
            .then_some(KoenkerStatistic { statistic, samples })
    }

    /// Summary of bin `index`.
    pub fn bin(&self, index: usize) -> Option<BinSummary<R>> {
        let bin = &self.actual(self.bins.get(index)?);
        let sd = if bin.weight > R::ONE && bin.comoment > R::ZERO {
            (bin.comoment / (bin.weight - R::ONE)).sqrt()
        } else {
            R::ZERO
        };
        let level = if bin.weight > R::ZERO {
            bin.mean_log_level.exp()
        } else {
            R::ZERO
        };
        Some(BinSummary {
            level,
            mean: bin.mean,
            sd,
            count: bin.weight,
        })
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] BinAccumulator<R> { weight, mean, comoment, mean_log_level });
crate::wire::walk_struct!(impl[R: Real] KoenkerSums<R> {
    weight, weight_squares, mean_level, mean_square, level_comoment, square_comoment,
    cross_comoment,
});
crate::wire::walk_struct!(impl[R: Real, const BINS: usize] SpreadProfile<R, BINS> {
    config, log_level_low, bins_per_log_unit, accepting, koenker, scale, sample_weight, bins,
});

impl<R: Real, const BINS: usize> SpreadProfile<R, BINS> {
    /// A profile of zeros to decode into (every field is then overwritten).
    pub(crate) fn blank() -> Self {
        let z = R::ZERO;
        SpreadProfile {
            config: SpreadConfig {
                level_low: z,
                level_high: z,
                forgetting: z,
            },
            log_level_low: z,
            bins_per_log_unit: z,
            accepting: false,
            koenker: KoenkerSums::EMPTY,
            scale: z,
            sample_weight: z,
            bins: [BinAccumulator::EMPTY; BINS],
        }
    }
}
crate::wire::walk_struct!(impl[R: Real] SpreadConfig<R> { level_low, level_high, forgetting });
crate::wire::walk_struct!(impl[R: Real] SpreadExponent<R> { k, standard_error, bins_used } blank: SpreadExponent {
    k: R::ZERO,
    standard_error: R::ZERO,
    bins_used: 0,
});

#[cfg(test)]
mod tests {
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
        // χ²(1) 0.999 quantile 10.83: from memory.
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
}
