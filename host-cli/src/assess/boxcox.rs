//! Box–Cox maximum likelihood for the power of a calibration, transforming both sides.
//!
//! The calibration mean stays on the raw scale, `f(ref; θ) = Xθ`. For a power λ the model is
//! `g_λ(raw − o) = g_λ(f(ref; θ) − o) + ε`, ε ~ N(0, σ²), with `g_λ(u) = (u^λ − 1)/λ`
//! (`ln u` for λ = 0) and `o` the level origin (Carroll & Ruppert's transform-both-sides
//! model). Never the regressor alone: `g(raw) = a + b·g(ref)` bends the mean.
//!
//! For each λ, θ is fitted by Gauss–Newton (each step a QR least-squares solve of the
//! linearized problem, i.e. weighted iterations with weight `g_λ'(f)²`), started from the OLS
//! θ, with step halving whenever the residual sum of squares would grow or a fitted level
//! would fall to the origin. The profile log-likelihood on the raw scale is
//!
//! `ℓ(λ) = −(n/2)·ln(RSS_λ/n) + (λ − 1)·Σ ln(raw − o)`,
//!
//! `RSS_λ = Σ (g_λ(raw − o) − g_λ(f − o))²`. Internally levels are divided by their
//! geometric mean (which leaves ℓ unchanged) and `g_λ` is evaluated as `expm1(λ ln u)/λ`, exact
//! near λ = 0.
//!
//! λ̂ maximizes ℓ over [−3, 3]: a grid of step 0.05, then golden-section search to 1e-10 in the
//! best grid cell. The profile-likelihood interval is `{λ : ℓ(λ) ≥ ℓ(λ̂) − χ²₁(1 − α)/2}`,
//! endpoints found by bisection; an endpoint beyond ±3 is reported as absent. The
//! recommended rung is the ladder rung nearest to λ̂. Constant scatter is rejected when λ = 1
//! lies outside the interval (likelihood-ratio test at level α); weighting (equivalently a
//! power rung) is advised only when it is rejected **and** the recommended rung is a power
//! rung, so the advice never contradicts the rung (λ̂ > 1, scatter shrinking relative to the
//! level, keeps `identity` and no weighting).
//!
//! With a design of one constant column the profile is the plain Box–Cox log-likelihood of a
//! vector (scipy's `boxcox_llf`).

use nalgebra::DMatrix;
use serde::Serialize;
use steadycal_core::transform::Rung;

use super::distributions;
use super::regression::{lack_of_fit, solve_least_squares, LackOfFit, RegressionError};
use super::replicates::ReplicateGroups;

/// Lower end of the λ search.
pub const LAMBDA_MIN: f64 = -3.0;
/// Upper end of the λ search.
pub const LAMBDA_MAX: f64 = 3.0;

/// Why the Box–Cox analysis could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum BoxCoxError {
    /// A response is at or below the level origin (power transforms need positive levels).
    #[error("response at row {row} is not above the level origin {origin}")]
    NotAboveOrigin {
        /// 0-based row.
        row: usize,
        /// The level origin.
        origin: f64,
    },
    /// The starting calibration mean is at or below the origin at some row.
    #[error("fitted level at row {row} is not above the level origin")]
    FittedNotAboveOrigin {
        /// 0-based row.
        row: usize,
    },
    /// A least-squares step failed.
    #[error(transparent)]
    Regression(#[from] RegressionError),
}

/// `g_λ(u)` for `u > 0`.
pub fn box_cox(lambda: f64, u: f64) -> f64 {
    if lambda == 0.0 {
        u.ln()
    } else {
        (lambda * u.ln()).exp_m1() / lambda
    }
}

/// The profile at one λ: fitted θ and log-likelihood.
#[derive(Debug, Clone, Serialize)]
pub struct ProfilePoint {
    /// λ.
    pub lambda: f64,
    /// Raw-scale profile log-likelihood ℓ(λ).
    pub log_likelihood: f64,
    /// θ of the transform-both-sides fit at λ (raw-scale mean).
    pub params: Vec<f64>,
    /// `RSS_λ` in raw units.
    pub residual_sum_of_squares: f64,
    /// Gauss–Newton iterations used.
    pub iterations: usize,
}

/// A run prepared for profiling: scaled levels and the starting θ.
pub struct Profiler<'a> {
    design: &'a DMatrix<f64>,
    scaled_response: Vec<f64>,
    scale: f64,
    origin: f64,
    sum_ln_response: f64,
    start: Vec<f64>,
}

impl<'a> Profiler<'a> {
    /// Prepares the profile of `response` (raw readings) on `design`, starting every fit from
    /// `start` (the OLS θ).
    pub fn new(
        design: &'a DMatrix<f64>,
        response: &[f64],
        origin: f64,
        start: &[f64],
    ) -> Result<Profiler<'a>, BoxCoxError> {
        for (row, &y) in response.iter().enumerate() {
            if !super::above(y - origin, 0.0) || !y.is_finite() {
                return Err(BoxCoxError::NotAboveOrigin { row, origin });
            }
        }
        let sum_ln_response: f64 = response.iter().map(|y| (y - origin).ln()).sum();
        let scale = (sum_ln_response / response.len() as f64).exp();
        let scaled_response = response.iter().map(|y| (y - origin) / scale).collect();
        let profiler = Profiler {
            design,
            scaled_response,
            scale,
            origin,
            sum_ln_response,
            start: start.to_vec(),
        };
        let fitted = profiler.scaled_fitted(start);
        if let Some(row) = fitted.iter().position(|u| !super::above(*u, 0.0)) {
            return Err(BoxCoxError::FittedNotAboveOrigin { row });
        }
        Ok(profiler)
    }

    fn scaled_fitted(&self, params: &[f64]) -> Vec<f64> {
        let rows = self.design.nrows();
        (0..rows)
            .map(|i| {
                let level: f64 = (0..params.len())
                    .map(|j| self.design[(i, j)] * params[j])
                    .sum();
                (level - self.origin) / self.scale
            })
            .collect()
    }

    /// Transformed residuals and their sum of squares (scaled units); `None` when a fitted
    /// level is not above the origin.
    fn residuals(&self, lambda: f64, params: &[f64]) -> Option<(Vec<f64>, Vec<f64>, f64)> {
        let fitted = self.scaled_fitted(params);
        if fitted.iter().any(|u| !(*u > 0.0 && u.is_finite())) {
            return None;
        }
        let residuals: Vec<f64> = self
            .scaled_response
            .iter()
            .zip(&fitted)
            .map(|(&y, &f)| box_cox(lambda, y) - box_cox(lambda, f))
            .collect();
        let sum_squares = residuals.iter().map(|r| r * r).sum();
        Some((residuals, fitted, sum_squares))
    }

    /// Fits θ at λ and evaluates ℓ(λ).
    pub fn profile(&self, lambda: f64) -> Result<ProfilePoint, BoxCoxError> {
        let rows = self.design.nrows();
        let columns = self.design.ncols();
        let mut params = self.start.clone();
        let (mut residuals, mut fitted, mut sum_squares) = self
            .residuals(lambda, &params)
            .ok_or(BoxCoxError::FittedNotAboveOrigin { row: 0 })?;
        let mut iterations = 0;
        for _ in 0..200 {
            iterations += 1;
            // Linearized problem: r ≈ g'(u_f)·X/scale · δ.
            let jacobian = DMatrix::from_fn(rows, columns, |i, j| {
                ((lambda - 1.0) * fitted[i].ln()).exp() * self.design[(i, j)] / self.scale
            });
            let step = solve_least_squares(&jacobian, &residuals)?;
            let mut factor = 1.0;
            let mut accepted = None;
            for _ in 0..40 {
                let trial: Vec<f64> = params
                    .iter()
                    .zip(&step)
                    .map(|(p, d)| p + factor * d)
                    .collect();
                if let Some((r, f, s)) = self.residuals(lambda, &trial) {
                    if s <= sum_squares {
                        accepted = Some((trial, r, f, s));
                        break;
                    }
                }
                factor *= 0.5;
            }
            let Some((trial, r, f, s)) = accepted else {
                break;
            };
            let step_size: f64 = step
                .iter()
                .zip(&params)
                .map(|(d, p)| (factor * d).abs() / (p.abs() + f64::MIN_POSITIVE))
                .fold(0.0, f64::max);
            let decrease = sum_squares - s;
            params = trial;
            residuals = r;
            fitted = f;
            sum_squares = s;
            if step_size < 1e-13 || decrease <= 1e-15 * sum_squares {
                break;
            }
        }
        let n = rows as f64;
        // RSS in raw units = scale^(2λ) · RSS in scaled units.
        let log_likelihood = -0.5 * n * (sum_squares / n).ln() - n * lambda * self.scale.ln()
            + (lambda - 1.0) * self.sum_ln_response;
        Ok(ProfilePoint {
            lambda,
            log_likelihood,
            residual_sum_of_squares: sum_squares * self.scale.powf(2.0 * lambda),
            params,
            iterations,
        })
    }

    /// Transformed responses `g_λ(raw − o)` and residuals (scaled units) at θ.
    pub fn transformed(&self, lambda: f64, params: &[f64]) -> Option<(Vec<f64>, Vec<f64>, f64)> {
        let (residuals, _, sum_squares) = self.residuals(lambda, params)?;
        let values = self
            .scaled_response
            .iter()
            .map(|&y| box_cox(lambda, y))
            .collect();
        Some((values, residuals, sum_squares))
    }
}

/// ℓ at one ladder rung.
#[derive(Debug, Clone, Serialize)]
pub struct RungLikelihood {
    /// Rung name.
    pub name: &'static str,
    /// Its λ.
    pub lambda: f64,
    /// ℓ(λ).
    pub log_likelihood: f64,
}

/// The Box–Cox analysis of a run.
#[derive(Debug, Clone, Serialize)]
pub struct BoxCoxAnalysis {
    /// Maximum-likelihood λ.
    pub lambda: f64,
    /// Profile-likelihood confidence interval `[low, high]` (`null` where beyond ±3).
    pub ci: [Option<f64>; 2],
    /// Confidence level of the interval.
    pub confidence: f64,
    /// ℓ(λ̂).
    pub log_likelihood: f64,
    /// True when λ̂ sits on an end of the search range.
    pub at_search_bound: bool,
    /// ℓ at each rung of the ladder.
    pub rungs: Vec<RungLikelihood>,
    /// `2(ℓ(λ̂) − ℓ(1))`, likelihood ratio against constant scatter.
    pub constant_scatter_lr: f64,
    /// Its χ²₁ p-value.
    pub constant_scatter_p_value: f64,
    /// True when λ = 1 is outside the interval (constant scatter rejected).
    pub constant_scatter_rejected: bool,
    /// True when constant scatter is rejected and the recommended rung is a power rung:
    /// weighting is preferable.
    pub weighting_preferred: bool,
    /// The recommended rung (nearest to λ̂).
    pub recommended: &'static str,
    /// θ of the transform-both-sides fit at the recommended rung (raw-scale mean).
    pub recommended_params: Vec<f64>,
    /// Lack of fit on the transformed scale at the recommended rung (`null` without
    /// replicates).
    pub mean_adequacy: Option<LackOfFit>,
}

/// Runs the Box–Cox analysis (see module docs).
pub fn analyse(
    design: &DMatrix<f64>,
    response: &[f64],
    origin: f64,
    start: &[f64],
    groups: &ReplicateGroups,
    alpha: f64,
) -> Result<BoxCoxAnalysis, BoxCoxError> {
    let profiler = Profiler::new(design, response, origin, start)?;
    let log_likelihood = |lambda: f64| profiler.profile(lambda).map(|p| p.log_likelihood);

    let grid_step = 0.05;
    let steps = ((LAMBDA_MAX - LAMBDA_MIN) / grid_step).round() as usize;
    let mut best_lambda = LAMBDA_MIN;
    let mut best_value = f64::NEG_INFINITY;
    for i in 0..=steps {
        let lambda = LAMBDA_MIN + i as f64 * grid_step;
        let value = log_likelihood(lambda)?;
        if value > best_value {
            best_value = value;
            best_lambda = lambda;
        }
    }
    let mut low = (best_lambda - grid_step).max(LAMBDA_MIN);
    let mut high = (best_lambda + grid_step).min(LAMBDA_MAX);
    let ratio = 0.5 * (5.0_f64.sqrt() - 1.0);
    let mut left = high - ratio * (high - low);
    let mut right = low + ratio * (high - low);
    let mut left_value = log_likelihood(left)?;
    let mut right_value = log_likelihood(right)?;
    while high - low > 1e-10 {
        if left_value > right_value {
            high = right;
            right = left;
            right_value = left_value;
            left = high - ratio * (high - low);
            left_value = log_likelihood(left)?;
        } else {
            low = left;
            left = right;
            left_value = right_value;
            right = low + ratio * (high - low);
            right_value = log_likelihood(right)?;
        }
    }
    let mut lambda = 0.5 * (low + high);
    let mut maximum = log_likelihood(lambda)?;
    if best_value > maximum {
        lambda = best_lambda;
        maximum = best_value;
    }
    let at_search_bound = lambda - LAMBDA_MIN < 1e-6 || LAMBDA_MAX - lambda < 1e-6;

    let chi_squared = distributions::chi_squared_quantile(1.0 - alpha, 1.0).unwrap_or(f64::NAN);
    let cut = maximum - 0.5 * chi_squared;
    let endpoint = |direction: f64| -> Result<Option<f64>, BoxCoxError> {
        let mut inside = lambda;
        loop {
            let outside = (inside + direction * 0.1).clamp(LAMBDA_MIN, LAMBDA_MAX);
            if outside == inside {
                return Ok(None);
            }
            if log_likelihood(outside)? < cut {
                let (mut a, mut b) = (inside, outside);
                while (a - b).abs() > 1e-12 {
                    let middle = 0.5 * (a + b);
                    if log_likelihood(middle)? >= cut {
                        a = middle;
                    } else {
                        b = middle;
                    }
                }
                return Ok(Some(0.5 * (a + b)));
            }
            inside = outside;
        }
    };
    let ci = [endpoint(-1.0)?, endpoint(1.0)?];

    let mut rungs = Vec::with_capacity(Rung::ALL.len());
    let mut identity_value = f64::NAN;
    for rung in Rung::ALL {
        let value = log_likelihood(rung.lambda_f64())?;
        if rung == Rung::Identity {
            identity_value = value;
        }
        rungs.push(RungLikelihood {
            name: rung.name(),
            lambda: rung.lambda_f64(),
            log_likelihood: value,
        });
    }
    let constant_scatter_lr = (2.0 * (maximum - identity_value)).max(0.0);
    let constant_scatter_p_value =
        distributions::chi_squared_upper_tail(constant_scatter_lr, 1.0).unwrap_or(f64::NAN);
    let constant_scatter_rejected = match ci {
        [Some(a), Some(b)] => !(a <= 1.0 && 1.0 <= b),
        [None, Some(b)] => b < 1.0,
        [Some(a), None] => a > 1.0,
        [None, None] => false,
    };

    let recommended = Rung::nearest(lambda);
    let weighting_preferred = constant_scatter_rejected && recommended != Rung::Identity;
    let rung_fit = profiler.profile(recommended.lambda_f64())?;
    let mean_adequacy = profiler
        .transformed(recommended.lambda_f64(), &rung_fit.params)
        .and_then(|(values, _, sum_squares)| {
            let weights = vec![1.0; values.len()];
            lack_of_fit(
                &values,
                &weights,
                sum_squares,
                groups,
                design.ncols(),
                alpha,
            )
        });
    Ok(BoxCoxAnalysis {
        lambda,
        ci,
        confidence: 1.0 - alpha,
        log_likelihood: maximum,
        at_search_bound,
        rungs,
        constant_scatter_lr,
        constant_scatter_p_value,
        constant_scatter_rejected,
        weighting_preferred,
        recommended: recommended.name(),
        recommended_params: rung_fit.params,
        mean_adequacy,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn box_cox_is_continuous_at_zero() {
        assert!((box_cox(1e-12, 2.0) - 2.0_f64.ln()).abs() < 1e-11);
        assert_eq!(box_cox(1.0, 3.0), 2.0);
    }

    #[test]
    fn values_at_origin_are_refused() {
        let design = DMatrix::from_element(3, 1, 1.0);
        assert!(matches!(
            Profiler::new(&design, &[1.0, 0.0, 2.0], 0.0, &[1.0]),
            Err(BoxCoxError::NotAboveOrigin { row: 1, .. })
        ));
    }
}
