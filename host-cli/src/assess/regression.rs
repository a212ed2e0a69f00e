//! Ordinary and weighted least squares on a general design matrix, by Householder QR.
//!
//! The normal equations are never formed: the design (rows scaled by √weight) is equilibrated
//! column by column to unit norm, factorized `A = QR` with nalgebra, solved by back
//! substitution and refined by one step of iterative refinement on the same factors. The
//! parameter covariance is `s² R⁻¹R⁻ᵀ` (unscaled back to the caller's columns), with
//! `s² = Σ wᵢ eᵢ² / (n − p)`, the convention of statsmodels' `OLS`/`WLS` (`scale`).
//!
//! Contract: [`least_squares`] returns an error, never a panic, on a design with fewer rows
//! than columns plus one, a non-finite value, a non-positive weight or a numerically rank
//! deficient design (a diagonal of R below `p·ε` relative to the largest).
//!
//! [`lack_of_fit`] splits a residual sum of squares into pure error (scatter of replicates
//! about their group mean) and lack of fit, and tests their ratio against F.

use nalgebra::{DMatrix, DVector};
use serde::Serialize;

use super::distributions;
use super::replicates::ReplicateGroups;

/// Why a least-squares fit could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum RegressionError {
    /// Fewer observations than parameters plus one (no residual degree of freedom).
    #[error("{observations} observations are too few for {parameters} parameters")]
    TooFewObservations {
        /// Rows of the design.
        observations: usize,
        /// Columns of the design.
        parameters: usize,
    },
    /// The response, a weight or the design holds a NaN or an infinity.
    #[error("non-finite value in the {what} at row {row}")]
    NonFinite {
        /// Which input.
        what: &'static str,
        /// 0-based row.
        row: usize,
    },
    /// A weight is zero or negative.
    #[error("weight at row {row} is not positive")]
    NonPositiveWeight {
        /// 0-based row.
        row: usize,
    },
    /// The response length does not match the design.
    #[error("response has {response} values but the design has {rows} rows")]
    LengthMismatch {
        /// Length of the response.
        response: usize,
        /// Rows of the design.
        rows: usize,
    },
    /// The columns of the design are (numerically) linearly dependent.
    #[error("the design is rank deficient (column {column} depends on the others)")]
    RankDeficient {
        /// 0-based column index where the factorization broke down.
        column: usize,
    },
}

/// A least-squares fit: estimates, their covariance, and the residuals.
#[derive(Debug, Clone, Serialize)]
pub struct LeastSquaresFit {
    /// Estimated coefficients, one per design column.
    pub params: Vec<f64>,
    /// Standard errors of the coefficients (square roots of the covariance diagonal).
    pub param_se: Vec<f64>,
    /// Parameter covariance matrix, row by row.
    pub covariance: Vec<Vec<f64>>,
    /// Residual standard deviation `s = √(Σ wᵢ eᵢ² / (n − p))` (for WLS, in units of a
    /// weight-one observation).
    pub residual_sd: f64,
    /// Weighted residual sum of squares `Σ wᵢ eᵢ²`.
    pub residual_sum_of_squares: f64,
    /// Residual degrees of freedom `n − p`.
    pub df_resid: usize,
    /// Coefficient of determination, centred on the (weighted) mean of the response.
    pub r_squared: f64,
    /// Unweighted residuals `yᵢ − xᵢᵀβ`.
    #[serde(skip)]
    pub residuals: Vec<f64>,
    /// Fitted values `xᵢᵀβ`.
    #[serde(skip)]
    pub fitted: Vec<f64>,
    /// Weights used (all one for OLS).
    #[serde(skip)]
    pub weights: Vec<f64>,
}

/// Fits `y ≈ Xβ` by (weighted) least squares through a column-equilibrated Householder QR.
///
/// `weights` are inverse-variance weights (statsmodels' `WLS(weights=...)` convention);
/// `None` means OLS.
pub fn least_squares(
    design: &DMatrix<f64>,
    response: &[f64],
    weights: Option<&[f64]>,
) -> Result<LeastSquaresFit, RegressionError> {
    fit(design, response, weights, true)
}

/// Weighted least squares with weights `1/u²` from known standard uncertainties `u` (ISO/TS
/// 28037): the parameter covariance is `(XᵀWX)⁻¹`, **not** rescaled by the residual
/// variance; `residual_sum_of_squares` is then the χ² statistic on `n − p` degrees of
/// freedom.
pub fn least_squares_known_variance(
    design: &DMatrix<f64>,
    response: &[f64],
    weights: &[f64],
) -> Result<LeastSquaresFit, RegressionError> {
    fit(design, response, Some(weights), false)
}

fn fit(
    design: &DMatrix<f64>,
    response: &[f64],
    weights: Option<&[f64]>,
    rescale: bool,
) -> Result<LeastSquaresFit, RegressionError> {
    let (rows, columns) = design.shape();
    if response.len() != rows {
        return Err(RegressionError::LengthMismatch {
            response: response.len(),
            rows,
        });
    }
    if columns == 0 || rows <= columns {
        return Err(RegressionError::TooFewObservations {
            observations: rows,
            parameters: columns,
        });
    }
    let weights: Vec<f64> = match weights {
        Some(w) => {
            if w.len() != rows {
                return Err(RegressionError::LengthMismatch {
                    response: w.len(),
                    rows,
                });
            }
            w.to_vec()
        }
        None => vec![1.0; rows],
    };
    for row in 0..rows {
        if !response[row].is_finite() {
            return Err(RegressionError::NonFinite {
                what: "response",
                row,
            });
        }
        if !weights[row].is_finite() {
            return Err(RegressionError::NonFinite {
                what: "weights",
                row,
            });
        }
        if weights[row] <= 0.0 {
            return Err(RegressionError::NonPositiveWeight { row });
        }
        for column in 0..columns {
            if !design[(row, column)].is_finite() {
                return Err(RegressionError::NonFinite {
                    what: "design",
                    row,
                });
            }
        }
    }
    let root_weights: Vec<f64> = weights.iter().map(|w| w.sqrt()).collect();
    let mut scaled = design.clone();
    for row in 0..rows {
        for column in 0..columns {
            scaled[(row, column)] *= root_weights[row];
        }
    }
    let column_norms: Vec<f64> = (0..columns).map(|c| scaled.column(c).norm()).collect();
    for (column, norm) in column_norms.iter().enumerate() {
        if *norm == 0.0 {
            return Err(RegressionError::RankDeficient { column });
        }
    }
    for (column, norm) in column_norms.iter().enumerate() {
        scaled.column_mut(column).unscale_mut(*norm);
    }
    let weighted_response =
        DVector::from_iterator(rows, (0..rows).map(|i| response[i] * root_weights[i]));

    let factors = QrSolver::new(scaled.clone())?;
    let mut scaled_params = factors.solve(&weighted_response);
    // One step of iterative refinement on the same factors.
    let correction = factors.solve(&(&weighted_response - &scaled * &scaled_params));
    scaled_params += correction;

    let params: Vec<f64> = (0..columns)
        .map(|c| scaled_params[c] / column_norms[c])
        .collect();
    let params_vector = DVector::from_column_slice(&params);
    let fitted_vector = design * &params_vector;
    let fitted: Vec<f64> = fitted_vector.iter().copied().collect();
    let residuals: Vec<f64> = (0..rows).map(|i| response[i] - fitted[i]).collect();
    let residual_sum_of_squares: f64 = (0..rows)
        .map(|i| weights[i] * residuals[i] * residuals[i])
        .sum();
    let df_resid = rows - columns;
    let variance = residual_sum_of_squares / df_resid as f64;
    let covariance_scale = if rescale { variance } else { 1.0 };

    let inverse_r = factors.inverse_r();
    let scaled_covariance = &inverse_r * inverse_r.transpose();
    let covariance: Vec<Vec<f64>> = (0..columns)
        .map(|i| {
            (0..columns)
                .map(|j| {
                    covariance_scale * scaled_covariance[(i, j)]
                        / (column_norms[i] * column_norms[j])
                })
                .collect()
        })
        .collect();
    let param_se = (0..columns).map(|i| covariance[i][i].sqrt()).collect();

    let weight_sum: f64 = weights.iter().sum();
    let weighted_mean: f64 = (0..rows).map(|i| weights[i] * response[i]).sum::<f64>() / weight_sum;
    let total: f64 = (0..rows)
        .map(|i| weights[i] * (response[i] - weighted_mean).powi(2))
        .sum();
    let r_squared = if total > 0.0 {
        1.0 - residual_sum_of_squares / total
    } else {
        f64::NAN
    };

    Ok(LeastSquaresFit {
        params,
        param_se,
        covariance,
        residual_sd: variance.sqrt(),
        residual_sum_of_squares,
        df_resid,
        r_squared,
        residuals,
        fitted,
        weights,
    })
}

/// The least-squares solution of `design · x ≈ rhs` (unweighted), by column-equilibrated QR.
pub fn solve_least_squares(
    design: &DMatrix<f64>,
    rhs: &[f64],
) -> Result<Vec<f64>, RegressionError> {
    let columns = design.ncols();
    let mut scaled = design.clone();
    let mut norms = Vec::with_capacity(columns);
    for column in 0..columns {
        let norm = scaled.column(column).norm();
        if !(norm > 0.0 && norm.is_finite()) {
            return Err(RegressionError::RankDeficient { column });
        }
        scaled.column_mut(column).unscale_mut(norm);
        norms.push(norm);
    }
    let solver = QrSolver::new(scaled)?;
    let solution = solver.solve(&DVector::from_column_slice(rhs));
    Ok((0..columns).map(|c| solution[c] / norms[c]).collect())
}

/// A Householder QR factorization of a full-column-rank matrix, ready to solve least-squares
/// problems `min ‖Ax − b‖`.
pub struct QrSolver {
    qr: nalgebra::linalg::QR<f64, nalgebra::Dyn, nalgebra::Dyn>,
    r: DMatrix<f64>,
}

impl QrSolver {
    /// Factorizes `matrix` (rows ≥ columns), refusing a numerically rank-deficient one.
    pub fn new(matrix: DMatrix<f64>) -> Result<QrSolver, RegressionError> {
        let (rows, columns) = matrix.shape();
        if rows < columns || columns == 0 {
            return Err(RegressionError::TooFewObservations {
                observations: rows,
                parameters: columns,
            });
        }
        let qr = matrix.qr();
        let r = qr.r();
        let largest = (0..columns)
            .map(|i| r[(i, i)].abs())
            .fold(0.0_f64, f64::max);
        for column in 0..columns {
            let diagonal = r[(column, column)].abs();
            if !super::above(diagonal, columns as f64 * f64::EPSILON * largest) {
                return Err(RegressionError::RankDeficient { column });
            }
        }
        Ok(QrSolver { qr, r })
    }

    /// The least-squares solution of `A x ≈ rhs`.
    pub fn solve(&self, rhs: &DVector<f64>) -> DVector<f64> {
        let columns = self.r.ncols();
        let mut rotated = rhs.clone();
        self.qr.q_tr_mul(&mut rotated);
        let head = DVector::from_iterator(columns, rotated.iter().take(columns).copied());
        self.r
            .solve_upper_triangular(&head)
            .unwrap_or_else(|| DVector::from_element(columns, f64::NAN))
    }

    /// `R⁻¹` (upper triangular).
    pub fn inverse_r(&self) -> DMatrix<f64> {
        let columns = self.r.ncols();
        self.r
            .solve_upper_triangular(&DMatrix::identity(columns, columns))
            .unwrap_or_else(|| DMatrix::from_element(columns, columns, f64::NAN))
    }
}

/// The lack-of-fit F test: residual sum of squares split into pure error and lack of fit.
#[derive(Debug, Clone, Serialize)]
pub struct LackOfFit {
    /// Pure-error sum of squares (scatter of replicates about their group means).
    pub pure_error_ss: f64,
    /// Pure-error degrees of freedom `n − groups`.
    pub pure_error_df: usize,
    /// Lack-of-fit sum of squares (residual SS − pure-error SS).
    pub lack_of_fit_ss: f64,
    /// Lack-of-fit degrees of freedom `groups − p`.
    pub lack_of_fit_df: usize,
    /// `F = (SS_lof / df_lof) / (SS_pe / df_pe)`.
    pub statistic: f64,
    /// Upper tail probability of F under an adequate mean.
    pub p_value: f64,
    /// True when `p_value ≥ α`: the mean function is not contradicted by the replicates.
    pub adequate: bool,
}

/// Lack-of-fit test for a fit with `parameters` coefficients and (weighted) residual sum of
/// squares `residual_ss`, from the (weighted) scatter of `values` within replicate groups.
///
/// `None` when there are no replicates (`n − groups = 0`), no more groups than parameters, or
/// no pure-error scatter at all.
pub fn lack_of_fit(
    values: &[f64],
    weights: &[f64],
    residual_ss: f64,
    groups: &ReplicateGroups,
    parameters: usize,
    alpha: f64,
) -> Option<LackOfFit> {
    let observations = values.len();
    let group_count = groups.groups.len();
    if observations <= group_count || group_count <= parameters {
        return None;
    }
    let mut pure_error_ss = 0.0;
    for group in &groups.groups {
        let weight_sum: f64 = group.members.iter().map(|&i| weights[i]).sum();
        let mean: f64 = group
            .members
            .iter()
            .map(|&i| weights[i] * values[i])
            .sum::<f64>()
            / weight_sum;
        pure_error_ss += group
            .members
            .iter()
            .map(|&i| weights[i] * (values[i] - mean).powi(2))
            .sum::<f64>();
    }
    if !super::above(pure_error_ss, 0.0) {
        return None;
    }
    let pure_error_df = observations - group_count;
    let lack_of_fit_df = group_count - parameters;
    let lack_of_fit_ss = (residual_ss - pure_error_ss).max(0.0);
    let statistic =
        (lack_of_fit_ss / lack_of_fit_df as f64) / (pure_error_ss / pure_error_df as f64);
    let p_value =
        distributions::f_upper_tail(statistic, lack_of_fit_df as f64, pure_error_df as f64)?;
    Some(LackOfFit {
        pure_error_ss,
        pure_error_df,
        lack_of_fit_ss,
        lack_of_fit_df,
        statistic,
        p_value,
        adequate: p_value >= alpha,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_line_is_recovered() {
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let design = DMatrix::from_fn(5, 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let y: Vec<f64> = x
            .iter()
            .map(|x| 2.0 + 0.5 * x + if *x == 2.0 { 0.1 } else { 0.0 })
            .collect();
        let fit = least_squares(&design, &y, None).unwrap();
        assert!((fit.params[1] - 0.5).abs() < 1e-12);
        assert_eq!(fit.df_resid, 3);
    }

    #[test]
    fn bad_inputs_are_errors() {
        let design = DMatrix::from_fn(3, 2, |_, _| 1.0);
        assert!(matches!(
            least_squares(&design, &[1.0, 2.0, 3.0], None),
            Err(RegressionError::RankDeficient { .. })
        ));
        let design = DMatrix::from_fn(3, 2, |i, j| if j == 0 { 1.0 } else { i as f64 });
        assert!(matches!(
            least_squares(&design, &[1.0, f64::NAN, 3.0], None),
            Err(RegressionError::NonFinite { .. })
        ));
        assert!(matches!(
            least_squares(&design, &[1.0, 2.0, 3.0], Some(&[1.0, 0.0, 1.0])),
            Err(RegressionError::NonPositiveWeight { row: 1 })
        ));
        assert!(matches!(
            least_squares(&design, &[1.0, 2.0], None),
            Err(RegressionError::LengthMismatch { .. })
        ));
    }
}
