//! Recursive least squares with exponential forgetting, in Bierman's UD factorization.
//!
//! STUB: signatures fixed, bodies to be written (see the module plan in ARCHITECTURE.md).

use serde::{Deserialize, Serialize};

use crate::real::Real;

/// Settings of a [`RecursiveFit`].
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct FitConfig<R> {
    /// Forgetting factor β in (0, 1]; 1 means no forgetting. Effective memory 1/(1 − β).
    pub forgetting: R,
    /// Initial covariance diagonal (scaled regressor units). Also the ceiling that bounds
    /// covariance wind-up when the regressors carry no excitation.
    pub initial_variance: R,
}

/// Why an update was refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum FitError {
    /// A regressor, the response or the weight is NaN or infinite.
    NonFinite,
    /// The weight is zero or negative.
    NonPositiveWeight,
}

/// Recursive (weighted) least squares for up to `P` parameters.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct RecursiveFit<R, const P: usize> {
    _placeholder: core::marker::PhantomData<R>,
}

impl<R: Real, const P: usize> RecursiveFit<R, P> {
    /// A fit of `dim ≤ P` parameters, all zero, covariance `initial_variance · I`.
    pub fn new(dim: usize, config: FitConfig<R>) -> Self {
        let _ = (dim, config);
        unimplemented!()
    }
    /// Number of parameters in use.
    pub fn dim(&self) -> usize {
        unimplemented!()
    }
    /// xᵀθ for a regressor vector (entries past `dim` ignored).
    pub fn predict(&self, x: &[R; P]) -> R {
        let _ = x;
        unimplemented!()
    }
    /// One update with response `y` and weight `weight` (1/relative variance). Returns the a
    /// priori residual `y − xᵀθ`. On error nothing changes.
    pub fn update(&mut self, x: &[R; P], y: R, weight: R) -> Result<R, FitError> {
        let _ = (x, y, weight);
        unimplemented!()
    }
    /// θ (entries past `dim` are zero).
    pub fn parameters(&self) -> [R; P] {
        unimplemented!()
    }
    /// The unscaled covariance matrix P = U D Uᵀ (so that Cov(θ) = σ² P).
    pub fn covariance(&self) -> [[R; P]; P] {
        unimplemented!()
    }
    /// xᵀ P x.
    pub fn leverage(&self, x: &[R; P]) -> R {
        let _ = x;
        unimplemented!()
    }
    /// Weighted residual variance σ² = weighted SSE / (effective samples − dim).
    pub fn residual_variance(&self) -> R {
        unimplemented!()
    }
    /// Effective number of samples Σ β^(n−i).
    pub fn effective_samples(&self) -> R {
        unimplemented!()
    }
    /// Number of accepted updates.
    pub fn updates(&self) -> u32 {
        unimplemented!()
    }
}
