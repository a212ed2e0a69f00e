//! The straight line with known uncertainties in both variables: generalized distance
//! regression (ISO/TS 28037:2010, clause 7, uncorrelated case).
//!
//! With standard uncertainties `u(xᵢ)` of the references and `u(yᵢ)` of the responses, the
//! line `y = a + b·x` minimizes
//!
//! `χ²(a, b) = Σ (yᵢ − a − b·xᵢ)² / (u²(yᵢ) + b²·u²(xᵢ))`,
//!
//! the sum of squared generalized distances (the footpoints `x*ᵢ` eliminated). It is solved
//! by Gauss–Newton from the weighted least-squares line that ignores `u(x)`, each step a QR
//! least-squares solve of the linearized residuals `rᵢ = (yᵢ − a − b·xᵢ)/sᵢ`,
//! `sᵢ = √(u²(yᵢ) + b²·u²(xᵢ))`, with Jacobian rows `[−1/sᵢ, −xᵢ/sᵢ − rᵢ·b·u²(xᵢ)/sᵢ²]`,
//! until a step changes neither parameter by more than `1e-14·(1 + |value|)`. The covariance is
//! `(JᵀJ)⁻¹` at the solution, not rescaled (the uncertainties are taken as known), and
//! `χ²` on `n − 2` degrees of freedom is the model-consistency check.
//!
//! Contract: bad input (lengths, non-finite values, a non-positive uncertainty, fewer than
//! three points) or a run that does not converge in 200 steps is a [`RegressionError`] or
//! `None`, never a panic.

use nalgebra::{DMatrix, DVector};

use super::regression::{LeastSquaresFit, QrSolver, RegressionError};

/// The most Gauss–Newton steps.
pub const MAX_STEPS: usize = 200;

/// Fits the straight line with uncertainties in both variables (module docs). `None` when the
/// iteration does not settle.
pub fn fit_line(
    x: &[f64],
    y: &[f64],
    u_x: &[f64],
    u_y: &[f64],
) -> Result<Option<LeastSquaresFit>, RegressionError> {
    let n = y.len();
    for (what, values) in [("reference", x), ("u(ref)", u_x), ("u(raw)", u_y)] {
        if values.len() != n {
            return Err(RegressionError::LengthMismatch {
                response: values.len(),
                rows: n,
            });
        }
        if let Some(row) = values.iter().position(|v| !v.is_finite()) {
            return Err(RegressionError::NonFinite { what, row });
        }
    }
    if n < 3 {
        return Err(RegressionError::TooFewObservations {
            observations: n,
            parameters: 2,
        });
    }
    if let Some(row) = u_y.iter().position(|u| !super::above(*u, 0.0)) {
        return Err(RegressionError::NonPositiveWeight { row });
    }
    if let Some(row) = u_x.iter().position(|u| *u < 0.0) {
        return Err(RegressionError::NonPositiveWeight { row });
    }
    let design = DMatrix::from_fn(n, 2, |i, j| if j == 0 { 1.0 } else { x[i] });
    let weights: Vec<f64> = u_y.iter().map(|u| 1.0 / (u * u)).collect();
    let start = super::regression::least_squares_known_variance(&design, y, &weights)?;
    let (mut a, mut b) = (start.params[0], start.params[1]);
    let mut settled = false;
    for _ in 0..MAX_STEPS {
        let (residuals, jacobian) = linearize(x, y, u_x, u_y, a, b);
        let solver = QrSolver::new(jacobian)?;
        let step = solver.solve(&(-residuals));
        if !(step[0].is_finite() && step[1].is_finite()) {
            return Ok(None);
        }
        a += step[0];
        b += step[1];
        if step[0].abs() <= 1e-14 * (1.0 + a.abs()) && step[1].abs() <= 1e-14 * (1.0 + b.abs()) {
            settled = true;
            break;
        }
    }
    if !settled {
        return Ok(None);
    }
    let (residuals, jacobian) = linearize(x, y, u_x, u_y, a, b);
    let solver = QrSolver::new(jacobian)?;
    let inverse_r = solver.inverse_r();
    let covariance_matrix = &inverse_r * inverse_r.transpose();
    let covariance: Vec<Vec<f64>> = (0..2)
        .map(|i| (0..2).map(|j| covariance_matrix[(i, j)]).collect())
        .collect();
    let chi_squared: f64 = residuals.iter().map(|r| r * r).sum();
    let df_resid = n - 2;
    let weights: Vec<f64> = (0..n)
        .map(|i| 1.0 / (u_y[i] * u_y[i] + b * b * u_x[i] * u_x[i]))
        .collect();
    let fitted: Vec<f64> = x.iter().map(|xi| a + b * xi).collect();
    let raw_residuals: Vec<f64> = (0..n).map(|i| y[i] - fitted[i]).collect();
    let weight_sum: f64 = weights.iter().sum();
    let mean = (0..n).map(|i| weights[i] * y[i]).sum::<f64>() / weight_sum;
    let total: f64 = (0..n).map(|i| weights[i] * (y[i] - mean).powi(2)).sum();
    Ok(Some(LeastSquaresFit {
        params: vec![a, b],
        param_se: vec![covariance[0][0].sqrt(), covariance[1][1].sqrt()],
        covariance,
        residual_sd: (chi_squared / df_resid as f64).sqrt(),
        residual_sum_of_squares: chi_squared,
        df_resid,
        r_squared: if total > 0.0 {
            1.0 - chi_squared / total
        } else {
            f64::NAN
        },
        residuals: raw_residuals,
        fitted,
        weights,
    }))
}

fn linearize(
    x: &[f64],
    y: &[f64],
    u_x: &[f64],
    u_y: &[f64],
    a: f64,
    b: f64,
) -> (DVector<f64>, DMatrix<f64>) {
    let n = y.len();
    let mut residuals = DVector::zeros(n);
    let mut jacobian = DMatrix::zeros(n, 2);
    for i in 0..n {
        let vx = u_x[i] * u_x[i];
        let s = (u_y[i] * u_y[i] + b * b * vx).sqrt();
        let r = (y[i] - a - b * x[i]) / s;
        residuals[i] = r;
        jacobian[(i, 0)] = -1.0 / s;
        jacobian[(i, 1)] = -x[i] / s - r * b * vx / (s * s);
    }
    (residuals, jacobian)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn zero_reference_uncertainty_is_the_weighted_line() {
        let x = [1.0, 2.0, 3.0, 4.0, 5.0];
        let y = [2.1, 3.9, 6.2, 7.8, 10.1];
        let u = [0.1, 0.2, 0.1, 0.3, 0.2];
        let fit = fit_line(&x, &y, &[0.0; 5], &u).unwrap().unwrap();
        let design = DMatrix::from_fn(5, 2, |i, j| if j == 0 { 1.0 } else { x[i] });
        let w: Vec<f64> = u.iter().map(|u| 1.0 / (u * u)).collect();
        let wls = super::super::regression::least_squares_known_variance(&design, &y, &w).unwrap();
        for j in 0..2 {
            assert!((fit.params[j] - wls.params[j]).abs() < 1e-12);
            assert!((fit.param_se[j] - wls.param_se[j]).abs() < 1e-12);
        }
    }

    #[test]
    fn bad_input_is_an_error() {
        assert!(fit_line(&[1.0, 2.0], &[1.0, 2.0], &[0.1; 2], &[0.1; 2]).is_err());
        assert!(fit_line(
            &[1.0, 2.0, 3.0],
            &[1.0, 2.0, 3.0],
            &[0.1; 3],
            &[0.1, 0.0, 0.1]
        )
        .is_err());
        assert!(fit_line(
            &[1.0, f64::NAN, 3.0],
            &[1.0, 2.0, 3.0],
            &[0.1; 3],
            &[0.1; 3]
        )
        .is_err());
    }
}
