//! The spread model `SD ∝ level^k`: how the scatter of the response grows with the level.
//!
//! Points (`method`): `replicates` when the run is built of replicate groups (at least three
//! groups with two or more members, holding at least half of the rows): one point per group,
//! the group's fitted level (OLS mean at its reference, minus the level origin) and the sample
//! SD (n − 1) of its responses. Otherwise (field-style data, references mostly distinct)
//! `binned`: the rows are sorted by fitted level and cut into `min(10, n / 5)` bins of equal
//! count (so every bin holds at least [`MIN_BIN_POINTS`] rows; at least three bins, so at
//! least 15 rows); a point per bin is the mean fitted level and the SD of the OLS residuals
//! about their bin mean.
//!
//! `k` is the slope of a weighted least-squares fit of `ln SD` on `ln level`, weight `count − 1`
//! per point (the variance of `ln s` is close to `1 / (2(count − 1))`). Its standard error is
//! the regression's (scale estimated from the points), the confidence interval
//! `k ± t(1 − α/2; points − 2)·se`. Points with a level or SD that is not positive are left out
//! and counted.

use nalgebra::DMatrix;
use serde::Serialize;

use super::distributions;
use super::regression::least_squares;
use super::replicates::{mean_and_sd, ReplicateGroups};

/// Fewest rows in a bin of residuals.
pub const MIN_BIN_POINTS: usize = 5;
/// Most bins of residuals.
pub const MAX_BINS: usize = 10;

/// One point of the spread profile.
#[derive(Debug, Clone, Serialize)]
pub struct SpreadPoint {
    /// Fitted level above the origin.
    pub level: f64,
    /// Standard deviation of the responses (or residuals) at that level.
    pub sd: f64,
    /// Observations behind the SD.
    pub count: usize,
}

/// Where the spread points came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub enum SpreadSource {
    /// One point per replicate group.
    #[serde(rename = "replicates")]
    ReplicateGroups,
    /// One point per bin of residuals sorted by fitted level.
    #[serde(rename = "binned")]
    BinnedResiduals,
}

/// The fitted spread model.
#[derive(Debug, Clone, Serialize)]
pub struct SpreadModel {
    /// Exponent `k` of `SD ∝ level^k`.
    pub k: f64,
    /// Standard error of `k`.
    pub k_se: f64,
    /// Confidence interval of `k` at level `1 − α`.
    pub k_ci: [f64; 2],
    /// Intercept of the log–log fit: `ln SD ≈ ln_sd_at_unit_level + k·ln level`.
    pub ln_sd_at_unit_level: f64,
    /// Where the points came from (`replicates` or `binned`).
    #[serde(rename = "method")]
    pub source: SpreadSource,
    /// The points used.
    pub points: Vec<SpreadPoint>,
    /// Points left out because their level or SD was not positive.
    pub points_left_out: usize,
}

/// Fits the spread model; `None` when fewer than three usable points exist.
pub fn fit_spread_model(
    groups: &ReplicateGroups,
    response: &[f64],
    level: &[f64],
    residuals: &[f64],
    alpha: f64,
) -> Option<SpreadModel> {
    let replicate_groups: Vec<_> = groups
        .groups
        .iter()
        .filter(|g| g.members.len() >= 2)
        .collect();
    let replicated_rows: usize = replicate_groups.iter().map(|g| g.members.len()).sum();
    let (source, candidates) = if replicate_groups.len() >= 3 && 2 * replicated_rows >= level.len()
    {
        let points = replicate_groups
            .iter()
            .map(|g| {
                let (_, sd) = mean_and_sd(response, &g.members);
                let level =
                    g.members.iter().map(|&i| level[i]).sum::<f64>() / g.members.len() as f64;
                SpreadPoint {
                    level,
                    sd,
                    count: g.members.len(),
                }
            })
            .collect::<Vec<_>>();
        (SpreadSource::ReplicateGroups, points)
    } else {
        let rows = level.len();
        let bins = (rows / MIN_BIN_POINTS).min(MAX_BINS);
        if bins < 3 {
            return None;
        }
        let mut order: Vec<usize> = (0..rows).collect();
        order.sort_by(|&a, &b| level[a].total_cmp(&level[b]));
        let base = rows / bins;
        let mut points = Vec::with_capacity(bins);
        for bin in 0..bins {
            let start = bin * base;
            let end = if bin + 1 == bins { rows } else { start + base };
            let members = &order[start..end];
            let (_, sd) = mean_and_sd(residuals, members);
            let mean_level = members.iter().map(|&i| level[i]).sum::<f64>() / members.len() as f64;
            points.push(SpreadPoint {
                level: mean_level,
                sd,
                count: members.len(),
            });
        }
        (SpreadSource::BinnedResiduals, points)
    };
    let total = candidates.len();
    let points: Vec<SpreadPoint> = candidates
        .into_iter()
        .filter(|p| p.level > 0.0 && p.sd > 0.0 && p.level.is_finite() && p.sd.is_finite())
        .collect();
    if points.len() < 3 {
        return None;
    }
    let design = DMatrix::from_fn(points.len(), 2, |i, j| {
        if j == 0 {
            1.0
        } else {
            points[i].level.ln()
        }
    });
    let ln_sd: Vec<f64> = points.iter().map(|p| p.sd.ln()).collect();
    let weights: Vec<f64> = points.iter().map(|p| (p.count - 1) as f64).collect();
    let fit = least_squares(&design, &ln_sd, Some(&weights)).ok()?;
    let k = fit.params[1];
    let k_se = fit.param_se[1];
    let t = distributions::t_quantile(1.0 - alpha / 2.0, fit.df_resid as f64)?;
    Some(SpreadModel {
        k,
        k_se,
        k_ci: [k - t * k_se, k + t * k_se],
        ln_sd_at_unit_level: fit.params[0],
        source,
        points_left_out: total - points.len(),
        points,
    })
}
