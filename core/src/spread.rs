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
mod tests;
