//! Residual spread against signal level, with streaming statistics.
//!
//! STUB: signatures fixed, bodies to be written.

use serde::{Deserialize, Serialize};

use crate::real::Real;

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
    /// The (effective) n.
    pub samples: R,
}

/// Summary of one level bin.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct BinSummary<R> {
    /// Mean level of the residuals in the bin.
    pub level: R,
    /// Mean residual.
    pub mean: R,
    /// Residual standard deviation.
    pub sd: R,
    /// (Effective) number of residuals.
    pub count: R,
}

/// Residuals binned by level on log-spaced bins.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct SpreadProfile<R, const BINS: usize = 16> {
    _placeholder: core::marker::PhantomData<R>,
}

impl<R: Real, const BINS: usize> SpreadProfile<R, BINS> {
    /// An empty profile.
    pub fn new(config: SpreadConfig<R>) -> Self {
        let _ = config;
        unimplemented!()
    }
    /// The bin a level falls in (end bins take levels outside the range); `None` for a
    /// level that is not finite or not positive.
    pub fn bin_of(&self, level: R) -> Option<usize> {
        let _ = level;
        unimplemented!()
    }
    /// Adds one residual at a level (above the origin). Non-finite or non-positive levels
    /// and non-finite residuals are ignored and return `false`.
    pub fn push(&mut self, level: R, residual: R) -> bool {
        let _ = (level, residual);
        unimplemented!()
    }
    /// k and its standard error, when at least 3 bins have 2 or more residuals.
    pub fn exponent(&self) -> Option<SpreadExponent<R>> {
        unimplemented!()
    }
    /// Koenker's statistic, when enough residuals were seen.
    pub fn koenker(&self) -> Option<KoenkerStatistic<R>> {
        unimplemented!()
    }
    /// Summary of bin `index`.
    pub fn bin(&self, index: usize) -> Option<BinSummary<R>> {
        let _ = index;
        unimplemented!()
    }
}
