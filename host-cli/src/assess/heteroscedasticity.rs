//! Tests of constant scatter (homoscedasticity) of a calibration fit.
//!
//! - [`breusch_pagan`]: squared residuals regressed on `[1, fitted level]`. Koenker's
//!   studentized form (`robust = true`) is `n·R²` of that auxiliary regression; the classical
//!   Breusch–Pagan form divides the squared residuals by their mean `Σe²/n` and takes half the
//!   explained sum of squares. Both against χ² with 1 degree of freedom. This is exactly
//!   statsmodels' `het_breuschpagan(resid, [1, fitted], robust)`.
//! - [`goldfeld_quandt`]: rows sorted by reference level (a stable sort: ties keep the input
//!   order), the first `⌊n·split⌋` rows form the low group, the rows from
//!   `⌊n·split⌋ + ⌊n·drop⌋` on form the high group — statsmodels' `het_goldfeldquandt` split
//!   convention (its `split` and `drop` as fractions, applied to data already sorted).
//!   `F = s²_high / s²_low` from a separate fit of the calibration mean in each group, p-value
//!   `P(F(df_high, df_low) > F)` (alternative: scatter increases with level). statsmodels
//!   0.14.1 evaluates this tail with the degrees of freedom in the other order; the two agree
//!   when both groups have the same size, which the default split 0.4 / drop 0.2 gives
//!   whenever `⌊0.4n⌋ = n − ⌊0.4n⌋ − ⌊0.2n⌋`.
//! - [`ends_of_range`]: the variance-homogeneity test of analytical calibration practice
//!   (e.g. ISO 8466-1): replicates of the lowest and the highest standard,
//!   `F = s²_high / s²_low` with (`n_high − 1`, `n_low − 1`) degrees of freedom, two-sided at
//!   level α: homogeneous when `F(α/2) ≤ F ≤ F(1 − α/2)`.

use nalgebra::DMatrix;
use serde::Serialize;

use super::distributions;
use super::regression::{least_squares, RegressionError};
use super::replicates::{mean_and_sd, ReplicateGroups};

/// A Breusch–Pagan type statistic with its χ² reference.
#[derive(Debug, Clone, Serialize)]
pub struct BreuschPagan {
    /// The Lagrange-multiplier statistic.
    pub statistic: f64,
    /// Degrees of freedom of the χ² reference (regressors of the auxiliary fit minus one).
    pub df: usize,
    /// Upper tail probability of χ²(df).
    pub p_value: f64,
    /// F statistic of the auxiliary regression (statsmodels' `fval`).
    pub f_statistic: f64,
    /// Its p-value (statsmodels' `fpval`).
    pub f_p_value: f64,
}

/// Breusch–Pagan (`robust = false`) or Koenker (`robust = true`) test of the residuals against
/// `[1, level]`.
pub fn breusch_pagan(
    residuals: &[f64],
    level: &[f64],
    robust: bool,
) -> Result<BreuschPagan, RegressionError> {
    let observations = residuals.len();
    let mut squared: Vec<f64> = residuals.iter().map(|e| e * e).collect();
    if !robust {
        let mean = squared.iter().sum::<f64>() / observations as f64;
        for value in &mut squared {
            *value /= mean;
        }
    }
    let design = DMatrix::from_fn(observations, 2, |i, j| if j == 0 { 1.0 } else { level[i] });
    let auxiliary = least_squares(&design, &squared, None)?;
    let mean = squared.iter().sum::<f64>() / observations as f64;
    let total: f64 = squared.iter().map(|u| (u - mean).powi(2)).sum();
    let explained = total - auxiliary.residual_sum_of_squares;
    let statistic = if robust {
        observations as f64 * auxiliary.r_squared
    } else {
        explained / 2.0
    };
    let df = 1;
    let df_resid = auxiliary.df_resid as f64;
    let f_statistic = (explained / df as f64) / (auxiliary.residual_sum_of_squares / df_resid);
    Ok(BreuschPagan {
        statistic,
        df,
        p_value: distributions::chi_squared_upper_tail(statistic, df as f64).unwrap_or(f64::NAN),
        f_statistic,
        f_p_value: distributions::f_upper_tail(f_statistic, df as f64, df_resid)
            .unwrap_or(f64::NAN),
    })
}

/// The Goldfeld–Quandt test.
#[derive(Debug, Clone, Serialize)]
pub struct GoldfeldQuandt {
    /// `s²_high / s²_low`.
    pub statistic: f64,
    /// `P(F(df_high, df_low) > statistic)`.
    pub p_value: f64,
    /// Residual degrees of freedom of the low group fit.
    pub df_low: usize,
    /// Residual degrees of freedom of the high group fit.
    pub df_high: usize,
    /// Rows (after sorting) in the low group: `[0, low_rows)`.
    pub low_rows: usize,
    /// First row (after sorting) of the high group: `[high_start, n)`.
    pub high_start: usize,
}

/// Goldfeld–Quandt test with `split` and `drop` as fractions of the rows (see module docs).
pub fn goldfeld_quandt(
    design: &DMatrix<f64>,
    response: &[f64],
    sort_key: &[f64],
    split: f64,
    drop: f64,
) -> Result<GoldfeldQuandt, RegressionError> {
    let (rows, columns) = design.shape();
    let mut order: Vec<usize> = (0..rows).collect();
    order.sort_by(|&a, &b| sort_key[a].total_cmp(&sort_key[b]));
    let low_rows = (rows as f64 * split) as usize;
    let high_start = (low_rows + (rows as f64 * drop) as usize).min(rows);
    let subset = |range: &[usize]| {
        let sub_design = DMatrix::from_fn(range.len(), columns, |i, j| design[(range[i], j)]);
        let sub_response: Vec<f64> = range.iter().map(|&i| response[i]).collect();
        least_squares(&sub_design, &sub_response, None)
    };
    let low = subset(&order[..low_rows])?;
    let high = subset(&order[high_start..])?;
    let low_variance = low.residual_sum_of_squares / low.df_resid as f64;
    let high_variance = high.residual_sum_of_squares / high.df_resid as f64;
    let statistic = high_variance / low_variance;
    Ok(GoldfeldQuandt {
        statistic,
        p_value: distributions::f_upper_tail(statistic, high.df_resid as f64, low.df_resid as f64)
            .unwrap_or(f64::NAN),
        df_low: low.df_resid,
        df_high: high.df_resid,
        low_rows,
        high_start,
    })
}

/// The ends-of-range F test of variance homogeneity.
#[derive(Debug, Clone, Serialize)]
pub struct EndsOfRange {
    /// Reference value of the lowest standard.
    pub low_reference: f64,
    /// Reference value of the highest standard.
    pub high_reference: f64,
    /// Replicate SD of the response at the lowest standard.
    pub low_sd: f64,
    /// Replicate SD of the response at the highest standard.
    pub high_sd: f64,
    /// `s²_high / s²_low`.
    pub statistic: f64,
    /// Numerator degrees of freedom `n_high − 1`.
    pub df_high: usize,
    /// Denominator degrees of freedom `n_low − 1`.
    pub df_low: usize,
    /// Level of the test.
    pub alpha: f64,
    /// `F(α/2; df_high, df_low)`.
    pub critical_lower: f64,
    /// `F(1 − α/2; df_high, df_low)`.
    pub critical_upper: f64,
    /// Two-sided p-value `2·min(P(F ≤ x), P(F > x))`.
    pub p_value: f64,
    /// True when the statistic lies between the two critical values.
    pub homogeneous: bool,
}

/// The ends-of-range test; `None` when the lowest or highest standard has fewer than two
/// replicates, or a replicate SD is zero.
pub fn ends_of_range(
    groups: &ReplicateGroups,
    response: &[f64],
    alpha: f64,
) -> Option<EndsOfRange> {
    if groups.groups.len() < 2 {
        return None;
    }
    let low = groups.groups.first()?;
    let high = groups.groups.last()?;
    if low.members.len() < 2 || high.members.len() < 2 {
        return None;
    }
    let (_, low_sd) = mean_and_sd(response, &low.members);
    let (_, high_sd) = mean_and_sd(response, &high.members);
    if !(low_sd > 0.0 && high_sd > 0.0) {
        return None;
    }
    let statistic = (high_sd * high_sd) / (low_sd * low_sd);
    let df_high = high.members.len() - 1;
    let df_low = low.members.len() - 1;
    let (numerator, denominator) = (df_high as f64, df_low as f64);
    let critical_lower = distributions::f_quantile(alpha / 2.0, numerator, denominator)?;
    let critical_upper = distributions::f_quantile(1.0 - alpha / 2.0, numerator, denominator)?;
    let lower_tail = distributions::f_lower_tail(statistic, numerator, denominator)?;
    let upper_tail = distributions::f_upper_tail(statistic, numerator, denominator)?;
    Some(EndsOfRange {
        low_reference: low.reference,
        high_reference: high.reference,
        low_sd,
        high_sd,
        statistic,
        df_high,
        df_low,
        alpha,
        critical_lower,
        critical_upper,
        p_value: (2.0 * lower_tail.min(upper_tail)).min(1.0),
        homogeneous: statistic >= critical_lower && statistic <= critical_upper,
    })
}
