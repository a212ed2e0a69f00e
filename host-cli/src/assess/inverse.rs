//! Inverse prediction: the calibrated reference value for a raw reading, with its standard
//! and expanded uncertainty.
//!
//! `x̂₀` solves `f(x̂₀; θ) = y₀` (temperature term, if any, at the reference temperature). For
//! the quadratic the root nearest to the middle of the calibrated range is taken. By the delta
//! method
//!
//! `u²(x̂₀) = [σ²(y₀)/m + r(x̂₀)ᵀ Σ_θ r(x̂₀)] / f'(x̂₀)²`,
//!
//! with `r` the regressor row, `Σ_θ` the parameter covariance, `m` the number of readings
//! averaged into `y₀`, and `σ(y₀)` the SD of one reading (OLS: `s_y/x`; WLS: `s_w·(y₀ − o)^k`).
//! For the straight line under OLS this is exactly the classical
//! `s_x0 = (s_y/x / b)·√(1/m + 1/n + (y₀ − ȳ)² / (b²·Σ(xᵢ − x̄)²))` (Miller & Miller).
//! The expanded uncertainty is `U = k·u`. By default `k = t(0.975; ν)` with ν the residual
//! degrees of freedom of the headline fit (95 % coverage; `ν = ∞` when the uncertainties are
//! known, `k = 1.96`); a fixed k can be given. Each row states its `m`: a standard's mean
//! response averages that standard's replicates.

use nalgebra::DMatrix;
use serde::Serialize;

use super::design::{row_vector, Basis, CalibrationModel};

/// One row of the inverse-prediction table.
#[derive(Debug, Clone, Serialize)]
pub struct InverseRow {
    /// The raw reading `y₀` (mean of `m` readings).
    pub raw: f64,
    /// `m`, the readings averaged into `y₀`.
    pub readings_averaged: usize,
    /// The calibrated value `x̂₀` in reference units (`null` when the mean cannot reach `y₀`).
    pub value: Option<f64>,
    /// Standard uncertainty `u(x̂₀)`.
    pub standard_uncertainty: Option<f64>,
    /// Expanded uncertainty `k·u(x̂₀)`.
    pub expanded_uncertainty: Option<f64>,
    /// True when `x̂₀` lies within the calibrated range.
    pub within_range: bool,
}

/// The inverse-prediction table.
#[derive(Debug, Clone, Serialize)]
pub struct InverseTable {
    /// Which fit the table uses (`ols` or `wls`).
    pub fit: &'static str,
    /// Coverage factor of the expanded uncertainty.
    pub coverage_factor: f64,
    /// How the coverage factor was chosen.
    pub coverage: String,
    /// Readings averaged into each given `y₀` (rows state their own `m`).
    pub readings_averaged: usize,
    /// What the standard uncertainty propagates.
    pub uncertainty_sources: &'static str,
    /// The rows.
    pub rows: Vec<InverseRow>,
}

/// Everything the inverse needs from a fit.
pub struct InverseModel<'a> {
    /// The calibration mean.
    pub model: &'a CalibrationModel,
    /// θ.
    pub params: &'a [f64],
    /// Σ_θ.
    pub covariance: &'a [Vec<f64>],
    /// σ of one reading at a raw level.
    pub reading_sd: &'a dyn Fn(f64) -> f64,
    /// Calibrated range `[lowest, highest]` standard.
    pub range: [f64; 2],
}

/// Solves `f(x; θ) = raw` (ΔT = 0).
pub fn solve_mean(
    model: &CalibrationModel,
    params: &[f64],
    raw: f64,
    range: [f64; 2],
) -> Option<f64> {
    let (a, b) = (params[0], params[1]);
    let value = match model.basis {
        Basis::Linear => (raw - a) / b,
        Basis::Quadratic => {
            let c = params[2];
            let middle = 0.5 * (range[0] + range[1]);
            if c == 0.0 {
                (raw - a) / b
            } else {
                let discriminant = b * b - 4.0 * c * (a - raw);
                if discriminant < 0.0 {
                    return None;
                }
                let root = discriminant.sqrt();
                // Numerically stable pair of roots.
                let q = -0.5 * (b + b.signum() * root);
                let first = q / c;
                let second = if q != 0.0 { (a - raw) / q } else { first };
                if (first - middle).abs() <= (second - middle).abs() {
                    first
                } else {
                    second
                }
            }
        }
    };
    value.is_finite().then_some(value)
}

/// One row of the table for a reading `raw` averaged over `readings` readings.
pub fn inverse_row(
    fit: &InverseModel<'_>,
    raw: f64,
    readings: usize,
    coverage_factor: f64,
) -> InverseRow {
    let Some(value) = solve_mean(fit.model, fit.params, raw, fit.range) else {
        return InverseRow {
            raw,
            readings_averaged: readings,
            value: None,
            standard_uncertainty: None,
            expanded_uncertainty: None,
            within_range: false,
        };
    };
    let row = row_vector(&fit.model.row(value, 0.0));
    let p = row.len();
    let covariance = DMatrix::from_fn(p, p, |i, j| fit.covariance[i][j]);
    let mean_variance = (row.transpose() * &covariance * &row)[(0, 0)];
    let sd = (fit.reading_sd)(raw);
    let slope = fit.model.slope(fit.params, value);
    let variance = (sd * sd / readings.max(1) as f64 + mean_variance) / (slope * slope);
    let standard = variance.sqrt();
    let finite = standard.is_finite().then_some(standard);
    InverseRow {
        raw,
        readings_averaged: readings,
        value: Some(value),
        standard_uncertainty: finite,
        expanded_uncertainty: finite.map(|u| coverage_factor * u),
        within_range: value >= fit.range[0] && value <= fit.range[1],
    }
}
