//! The sections of the file other than `[detect]`, `[baseline]` and `[acceptance]`: the
//! working range, the calibration basis, the fits, the ladder, the spread model, the mean
//! check, readings and the feed's column names.

use serde::{Deserialize, Serialize};

use crate::values::{Alpha, AtLeastOne, Finite, Forgetting, Positive, RungName};

/// `[range]`: the working range of the sensor, raw units.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RangeSection {
    /// Lower end of the working range, raw units above the origin (default 1).
    pub low: Option<Positive>,
    /// Upper end, raw units above the origin (default 1000).
    pub high: Option<Positive>,
    /// Level origin, raw units: power rungs need values above it (default 0).
    pub origin: Option<Finite>,
}

/// `[basis]`: the terms of the calibration mean.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct BasisSection {
    /// Include `c·ref²` (default false).
    pub quadratic: Option<bool>,
    /// Include `d·(T − T₀)` (default false).
    pub temperature: Option<bool>,
    /// Typical magnitude of the reference, reference units (default `range.high`).
    pub reference_scale: Option<Positive>,
    /// T₀, the temperature where the temperature term is zero, °C (default 20).
    pub temperature_reference: Option<Finite>,
    /// Typical magnitude of T − T₀, °C (default 10).
    pub temperature_scale: Option<Positive>,
}

/// `[fit]`: the recursive fits.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct FitSection {
    /// Forgetting factor β in (0, 1] (default 0.999, a memory of about 1000 checks).
    pub forgetting: Option<Forgetting>,
    /// Initial covariance diagonal, also the wind-up ceiling (default 1e6).
    pub initial_variance: Option<Positive>,
    /// Checks before the spread bins and the ladder's likelihoods start (default 200).
    pub warm_up: Option<u32>,
}

/// `[ladder]`: the choice of rung.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct LadderSection {
    /// Rung to start on (default `identity`).
    pub initial_rung: Option<RungName>,
    /// α of the switch: margin = χ²₁(1 − α)/2 (default 0.001 → 5.414).
    pub switch_alpha: Option<Alpha>,
    /// The switch margin itself, log-likelihood units (instead of `switch_alpha`).
    pub switch_margin: Option<Positive>,
    /// Consecutive winning checks before a switch (default 200).
    pub switch_hold: Option<u32>,
}

/// `[spread]`: the spread-against-level model.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct SpreadSection {
    /// α of the Koenker test: threshold = χ²₁(1 − α) (default 0.001 → 10.83).
    pub alpha: Option<Alpha>,
    /// The Koenker threshold itself (instead of `alpha`).
    pub threshold: Option<Positive>,
    /// Checks between evaluations of k and the Koenker statistic (default 32).
    pub every: Option<AtLeastOne>,
    /// Confidence level of the interval reported for k (default 0.95 → z = 1.960).
    pub interval_level: Option<Alpha>,
    /// The interval's normal quantile itself (instead of `interval_level`).
    pub interval_z: Option<Positive>,
}

/// `[mean_check]`: the mean-adequacy check after a switch.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct MeanCheckSection {
    /// α of the check: z = Φ⁻¹(1 − α) (default 0.001 → 3.090).
    pub alpha: Option<Alpha>,
    /// The normal quantile itself (instead of `alpha`).
    pub z: Option<Positive>,
    /// Checks after a switch before the check runs (default 1000).
    pub after: Option<u32>,
    /// Residuals a level bin needs to take part (default 20).
    pub min_per_bin: Option<u32>,
}

/// `[readings]`: calibrated readings.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ReadingsSection {
    /// Coverage factor of the expanded uncertainty (default 2).
    pub coverage_factor: Option<Positive>,
}

/// `[columns]`: header names of the feed's columns (the command-line options win).
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ColumnsSection {
    /// Time column (default `t`).
    pub time: Option<String>,
    /// Raw output column (default `raw`).
    pub raw: Option<String>,
    /// Reference column (default `ref`).
    pub reference: Option<String>,
    /// Temperature column (default `temp`).
    pub temperature: Option<String>,
    /// Cells that mean "no value", besides the empty cell and `NA` (the command line's
    /// `--missing` adds to them).
    pub missing: Option<Vec<String>>,
}
