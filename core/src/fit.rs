//! Recursive (weighted) least squares with exponential forgetting, in Bierman's UD form.
//!
//! The fit minimizes `Σ βⁿ⁻ⁱ·wᵢ·(yᵢ − xᵢᵀθ)²` (plus the fading prior `βⁿ·θᵀP₀⁻¹θ`). Its
//! unscaled covariance `P = (Σ βⁿ⁻ⁱ wᵢ xᵢxᵢᵀ)⁻¹` is held as `P = U·D·Uᵀ`, `U` unit upper
//! triangular and `D` diagonal (Bierman 1977, *Factorization Methods for Discrete Sequential
//! Estimation*). One update is Bierman's observational update with measurement variance
//! `β/w`, followed by the division of `D` by `β` that forgetting requires.
//!
//! A check that is the mean of `m` values (the `Averaging` of the `sample` module) has `m` times
//! a single value's weight: measurement variance `β/(m·w)`. The weighted residual sum
//! below then has the expectation of single values' residuals, so `σ²` (and everything
//! scaled by it: the parameter covariance, the readings' uncertainty) stays the variance
//! of one value, and each update counts as one sample in the effective count.
//!
//! # Invariants
//! - `D` stays in `[floor, initial_variance]`: positive, so `P` is symmetric positive
//!   definite by construction, and bounded, so a long stretch without excitation (a
//!   constant reference) cannot wind the covariance up.
//! - An update with a non-finite regressor, response or weight, or a non-positive weight,
//!   is refused and changes nothing; an update whose result would not be finite is rolled
//!   back. The state never holds a NaN.
//! - The weighted residual sum of squares is exact: `J ← β·J + β·e²/α`, with `e` the a-priori
//!   residual and `α = β/w + xᵀPx` (the a-priori × a-posteriori residual identity of RLS).
//!   With `β = 1` and a large `P₀`, `J/(n − p)` equals the batch residual variance.

// Index loops mirror the published algorithm's notation (U[i][j], D[j], f[j]).
#![allow(clippy::needless_range_loop)]

use serde::{Deserialize, Serialize};
use serde_big_array::Array;

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

/// The constants of one update derived from a [`FitConfig`]: `β`, `1/β` and the
/// covariance ceiling, and the factor of the measurement variance. Fits that share a
/// configuration (the ladder's rungs) take them once per check, held in registers, instead
/// of each reading its own copy.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(crate) struct Forgetting<R> {
    /// `β`.
    pub beta: R,
    /// `β/m`, the factor of the relative variance in the measurement variance of one
    /// update: `β` for a single value, `β/m` for a check that is the mean of `m` values
    /// (weight `m` times a single value's; see `Averaging` in the `sample` module).
    pub measurement: R,
    /// `1/β`.
    pub inverse_beta: R,
    /// The initial variance, also the ceiling of the covariance diagonal.
    pub ceiling: R,
}

impl<R: Real> Forgetting<R> {
    /// The constants of `config`.
    #[inline]
    pub fn of(config: &FitConfig<R>) -> Self {
        Self {
            beta: config.forgetting,
            measurement: config.forgetting,
            inverse_beta: R::ONE / config.forgetting,
            ceiling: config.initial_variance,
        }
    }

    /// The same constants for a check whose variance is `inverse` (`1/m`) times a single
    /// value's: the measurement factor `β·inverse` (exactly `β` for `inverse = 1`).
    #[inline(always)]
    pub fn averaged(self, inverse: R) -> Self {
        Self {
            measurement: self.beta * inverse,
            ..self
        }
    }
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
///
/// ```
/// use steadycal_core::fit::{FitConfig, RecursiveFit};
/// let config = FitConfig { forgetting: 1.0, initial_variance: 1e12 };
/// let mut fit: RecursiveFit<f64, 2> = RecursiveFit::new(2, config);
/// for i in 0..10 {
///     let x = i as f64;
///     fit.update(&[1.0, x], 3.0 + 2.0 * x, 1.0).unwrap();
/// }
/// let theta = fit.parameters();
/// assert!((theta[0] - 3.0).abs() < 1e-9 && (theta[1] - 2.0).abs() < 1e-9);
/// ```
///
/// Serialized compactly (see `fit_encoding`): only the numbers the fit uses, without its
/// [`FitConfig`], which the owner restores with [`RecursiveFit::set_config`].
#[derive(Clone, Debug)]
pub struct RecursiveFit<R, const P: usize> {
    pub(crate) config: FitConfig<R>,
    pub(crate) dim: u8,
    pub(crate) theta: [R; P],
    /// Strictly upper part of U by rows (`u[i][j]`, i < j); the rest is unused.
    pub(crate) u: [Array<R, P>; P],
    pub(crate) d: [R; P],
    pub(crate) weighted_sse: R,
    pub(crate) effective: R,
    pub(crate) updates: u32,
}

impl<R: Real, const P: usize> RecursiveFit<R, P> {
    /// A fit of `dim ≤ P` parameters (more are cut to `P`), all zero, covariance
    /// `initial_variance · I`.
    pub fn new(dim: usize, config: FitConfig<R>) -> Self {
        let dim = dim.min(P).min(u8::MAX as usize);
        let mut d = [R::ZERO; P];
        for value in d.iter_mut().take(dim) {
            *value = config.initial_variance;
        }
        RecursiveFit {
            config,
            dim: dim as u8,
            theta: [R::ZERO; P],
            u: [Array([R::ZERO; P]); P],
            d,
            weighted_sse: R::ZERO,
            effective: R::ZERO,
            updates: 0,
        }
    }

    /// The forgetting factor and initial variance in use.
    pub fn config(&self) -> FitConfig<R> {
        self.config
    }

    /// Puts back the configuration after decoding (the encoding leaves it out: it belongs
    /// to the owner's configuration).
    pub fn set_config(&mut self, config: FitConfig<R>) {
        self.config = config;
    }

    /// Number of parameters in use.
    pub fn dim(&self) -> usize {
        self.dim as usize
    }

    /// xᵀθ for a regressor vector (entries past `dim` meet zero parameters).
    #[inline]
    pub fn predict(&self, x: &[R; P]) -> R {
        let t = &self.theta;
        // Written out for the common dimensions (the same sum, in the same order).
        match self.dim() {
            2 if P >= 2 => x[0] * t[0] + x[1] * t[1],
            3 if P >= 3 => x[0] * t[0] + x[1] * t[1] + x[2] * t[2],
            _ => {
                let mut sum = R::ZERO;
                for (xi, ti) in x.iter().zip(t.iter()) {
                    sum += *xi * *ti;
                }
                sum
            }
        }
    }

    fn floor() -> R {
        R::MIN_POSITIVE / R::EPSILON
    }

    /// One update with response `y` and weight `weight` (1/relative variance). Returns the a
    /// priori residual `y − xᵀθ`. On error nothing changes.
    ///
    /// Regressor entries past `dim` must be zero (as [`crate::basis::Basis::regressors`]
    /// pads them); they meet zero parameters and are not otherwise read.
    #[inline]
    pub fn update(&mut self, x: &[R; P], y: R, weight: R) -> Result<R, FitError> {
        if !(Self::all_finite(x, y) && weight.is_finite()) {
            return Err(FitError::NonFinite);
        }
        if !(weight > R::ZERO) {
            return Err(FitError::NonPositiveWeight);
        }
        let residual = y - self.predict(x);
        let forgetting = Forgetting::of(&self.config);
        self.update_relative_variance(x, residual, R::ONE / weight, forgetting)?;
        Ok(residual)
    }

    /// True when every regressor and the response are finite.
    #[inline]
    pub(crate) fn all_finite(x: &[R; P], y: R) -> bool {
        // NaN-or-infinity probe: v·0 is 0 for every finite v and NaN otherwise, and a sum
        // of zeros cannot overflow.
        let mut probe = y * R::ZERO;
        for value in x.iter() {
            probe += *value * R::ZERO;
        }
        probe.is_finite()
    }

    /// The update for a caller that has computed the a-priori `residual = y − xᵀθ` on the
    /// same state: `relative_variance` is `1/w`, the sample's variance relative to the
    /// fit's σ² (a positive value), and
    /// `forgetting` holds this fit's `β`, `1/β`, ceiling and measurement factor (`β/m`, see
    /// [`Forgetting::averaged`]) (so that several fits fed the same
    /// check share that work; it must match the fit's own configuration).
    /// A non-finite regressor, residual or relative variance needs no check beforehand:
    /// it makes the new state non-finite, which the update refuses (leaving the fit as it
    /// was), like any update that would overflow.
    #[inline]
    pub(crate) fn update_relative_variance(
        &mut self,
        x: &[R; P],
        residual: R,
        relative_variance: R,
        forgetting: Forgetting<R>,
    ) -> Result<(), FitError> {
        // Measurement variance β/w of Bierman's observational update (β/(m·w) for the
        // mean of m values).
        let alpha0 = forgetting.measurement * relative_variance;
        // The loops run over the dimension in use; the common dimensions are written out
        // (the same operations in the same order, so the same bits). Bare-metal builds
        // leave the three-parameter form out: about 460 bytes of a board's flash, against
        // about a third fewer host instructions per check on quadratic fits.
        match self.dim() {
            2 if P >= 2 => self.update_two(x, alpha0, residual, forgetting),
            #[cfg(not(target_os = "none"))]
            3 if P >= 3 => self.update_three(x, alpha0, residual, forgetting),
            n => self.update_dim(n, x, alpha0, residual, forgetting),
        }
    }

    /// [`RecursiveFit::predict`] for a fit whose caller knows it uses two parameters (the
    /// same sum in the same order).
    #[inline(always)]
    pub(crate) fn predict_two(&self, x: &[R; P]) -> R {
        x[0] * self.theta[0] + x[1] * self.theta[1]
    }

    /// [`RecursiveFit::update_relative_variance`] for a fit whose caller has checked that it
    /// uses two parameters (`dim() == 2`, so `P ≥ 2`): the written-out update, inlined.
    #[inline(always)]
    pub(crate) fn update_relative_variance_two(
        &mut self,
        x: &[R; P],
        residual: R,
        relative_variance: R,
        forgetting: Forgetting<R>,
    ) -> Result<(), FitError> {
        let alpha0 = forgetting.measurement * relative_variance;
        self.update_two(x, alpha0, residual, forgetting)
    }

    /// The weighted SSE after an update, `β·(J + e·(e/α))` with `correction = e/α`, or
    /// `None` when the update produced a non-finite value (`probe` is a sum of the new
    /// values, and of `α`, times zero: an `α` that overflowed would otherwise pass as a
    /// zero gain).
    #[inline(always)]
    fn new_sse(&self, residual: R, correction: R, probe: R, beta: R) -> Option<R> {
        let sse = beta * (self.weighted_sse + residual * correction);
        (probe + sse * R::ZERO).is_finite().then_some(sse)
    }

    /// Counts an accepted update.
    #[inline(always)]
    fn commit(&mut self, sse: R, beta: R) {
        self.weighted_sse = sse;
        self.effective = beta * self.effective + R::ONE;
        self.updates = self.updates.saturating_add(1);
    }

    /// `value / β` clamped to `[floor, initial_variance]` (NaN goes to the floor).
    #[inline(always)]
    fn forget(&self, value: R, forgetting: Forgetting<R>) -> R {
        let value = value * forgetting.inverse_beta;
        let ceiling = forgetting.ceiling;
        if value >= Self::floor() {
            if value <= ceiling {
                value
            } else {
                ceiling
            }
        } else {
            Self::floor()
        }
    }

    /// [`RecursiveFit::update_dim`] written out for two parameters (the same operations in
    /// the same order).
    #[inline(always)]
    fn update_two(
        &mut self,
        x: &[R; P],
        alpha0: R,
        residual: R,
        forgetting: Forgetting<R>,
    ) -> Result<(), FitError> {
        let u01 = self.u[0][1];
        let f0 = x[0];
        let f1 = x[1] + u01 * x[0];
        let g0 = self.d[0] * f0;
        let g1 = self.d[1] * f1;
        // j = 0
        let alpha1 = alpha0 + f0 * g0;
        let inverse1 = R::ONE / alpha1;
        let d0 = self.d[0] * (alpha0 * inverse1);
        // j = 1
        let alpha = alpha1 + f1 * g1;
        let inverse = R::ONE / alpha;
        let d1 = self.d[1] * (alpha1 * inverse);
        let p1 = -f1 * inverse1;
        let new_u01 = u01 + g0 * p1;
        let gain0 = g0 + u01 * g1;
        let gain1 = g1;
        let correction = residual * inverse;
        let theta0 = self.theta[0] + gain0 * correction;
        let theta1 = self.theta[1] + gain1 * correction;
        // d0 and d1 need no probe: with α finite, α₀ ≤ α₁ ≤ α (each step adds f·g = d·f² ≥ 0)
        // makes both ratios at most 1, so d0 ≤ d[0] and d1 ≤ d[1]; a NaN or infinite α₀, α₁
        // or α reaches α itself.
        let probe = theta0 * R::ZERO + theta1 * R::ZERO + new_u01 * R::ZERO + alpha * R::ZERO;
        let Some(sse) = self.new_sse(residual, correction, probe, forgetting.beta) else {
            return Err(FitError::NonFinite);
        };
        self.d[0] = self.forget(d0, forgetting);
        self.d[1] = self.forget(d1, forgetting);
        self.theta[0] = theta0;
        self.theta[1] = theta1;
        self.u[0][1] = new_u01;
        self.commit(sse, forgetting.beta);
        Ok(())
    }

    /// [`RecursiveFit::update_dim`] written out for three parameters (the same operations
    /// in the same order). Hosted targets only (see `update_relative_variance`).
    #[cfg(not(target_os = "none"))]
    #[inline(always)]
    fn update_three(
        &mut self,
        x: &[R; P],
        alpha0: R,
        residual: R,
        forgetting: Forgetting<R>,
    ) -> Result<(), FitError> {
        let (u01, u02, u12) = (self.u[0][1], self.u[0][2], self.u[1][2]);
        let f0 = x[0];
        let f1 = x[1] + u01 * x[0];
        let f2 = x[2] + u02 * x[0] + u12 * x[1];
        let g0 = self.d[0] * f0;
        let g1 = self.d[1] * f1;
        let g2 = self.d[2] * f2;
        // j = 0
        let alpha1 = alpha0 + f0 * g0;
        let inverse1 = R::ONE / alpha1;
        let d0 = self.d[0] * (alpha0 * inverse1);
        // j = 1
        let alpha2 = alpha1 + f1 * g1;
        let inverse2 = R::ONE / alpha2;
        let d1 = self.d[1] * (alpha1 * inverse2);
        let p1 = -f1 * inverse1;
        let new_u01 = u01 + g0 * p1;
        let gain0 = g0 + u01 * g1;
        let gain1 = g1;
        // j = 2
        let alpha = alpha2 + f2 * g2;
        let inverse = R::ONE / alpha;
        let d2 = self.d[2] * (alpha2 * inverse);
        let p2 = -f2 * inverse2;
        let new_u02 = u02 + gain0 * p2;
        let gain0 = gain0 + u02 * g2;
        let new_u12 = u12 + gain1 * p2;
        let gain1 = gain1 + u12 * g2;
        let gain2 = g2;
        let correction = residual * inverse;
        let theta0 = self.theta[0] + gain0 * correction;
        let theta1 = self.theta[1] + gain1 * correction;
        let theta2 = self.theta[2] + gain2 * correction;
        let probe = theta0 * R::ZERO
            + theta1 * R::ZERO
            + theta2 * R::ZERO
            + new_u01 * R::ZERO
            + new_u02 * R::ZERO
            + new_u12 * R::ZERO;
        let probe = probe + d0 * R::ZERO + d1 * R::ZERO + d2 * R::ZERO + alpha * R::ZERO;
        let Some(sse) = self.new_sse(residual, correction, probe, forgetting.beta) else {
            return Err(FitError::NonFinite);
        };
        self.d[0] = self.forget(d0, forgetting);
        self.d[1] = self.forget(d1, forgetting);
        self.d[2] = self.forget(d2, forgetting);
        self.theta[0] = theta0;
        self.theta[1] = theta1;
        self.theta[2] = theta2;
        self.u[0][1] = new_u01;
        self.u[0][2] = new_u02;
        self.u[1][2] = new_u12;
        self.commit(sse, forgetting.beta);
        Ok(())
    }

    /// Bierman's update for any dimension `n ≤ P` (loops over the parameters in use), with
    /// measurement variance `alpha0 = β/w`. One reciprocal per parameter: `1/α_j` serves
    /// `D_j`'s update and, at the next parameter, `p = −f/α_j`.
    #[inline(never)]
    fn update_dim(
        &mut self,
        n: usize,
        x: &[R; P],
        alpha0: R,
        residual: R,
        forgetting: Forgetting<R>,
    ) -> Result<(), FitError> {
        let n = n.min(P);

        // f = Uᵀx, g = D f.
        let mut f = [R::ZERO; P];
        let mut g = [R::ZERO; P];
        for j in 0..n {
            let mut value = x[j];
            for i in 0..j {
                value += self.u[i][j] * x[i];
            }
            f[j] = value;
            g[j] = self.d[j] * value;
        }

        // Bierman's observational update.
        let mut u = self.u;
        let mut d = self.d;
        let mut gain = [R::ZERO; P];
        let mut alpha = alpha0;
        let mut inverse_previous = R::ZERO;
        for j in 0..n {
            let alpha_previous = alpha;
            alpha += f[j] * g[j];
            let inverse = R::ONE / alpha;
            d[j] *= alpha_previous * inverse;
            if j > 0 {
                let p = -f[j] * inverse_previous;
                for i in 0..j {
                    let u_old = u[i][j];
                    u[i][j] = u_old + gain[i] * p;
                    gain[i] += u_old * g[j];
                }
            }
            gain[j] = g[j];
            inverse_previous = inverse;
        }
        let correction = residual * inverse_previous;
        let mut theta = self.theta;
        let mut probe = R::ZERO;
        for j in 0..n {
            theta[j] += gain[j] * correction;
            probe += theta[j] * R::ZERO;
        }
        for j in 1..n {
            for i in 0..j {
                probe += u[i][j] * R::ZERO;
            }
        }
        for value in d.iter().take(n) {
            probe += *value * R::ZERO;
        }
        probe += alpha * R::ZERO;
        let Some(sse) = self.new_sse(residual, correction, probe, forgetting.beta) else {
            return Err(FitError::NonFinite);
        };
        // Forgetting, with the wind-up ceiling and the positivity floor (parameters in use).
        for value in d.iter_mut().take(n) {
            *value = self.forget(*value, forgetting);
        }
        self.theta = theta;
        self.u = u;
        self.d = d;
        self.commit(sse, forgetting.beta);
        Ok(())
    }

    /// θ (entries past `dim` are zero).
    pub fn parameters(&self) -> [R; P] {
        self.theta
    }

    /// The diagonal factor D of `P = U D Uᵀ`.
    pub fn diagonal(&self) -> [R; P] {
        self.d
    }

    /// The unscaled covariance matrix P = U D Uᵀ (so that Cov(θ) = σ² P); zero past `dim`.
    pub fn covariance(&self) -> [[R; P]; P] {
        if P == 2 {
            self.covariance_two()
        } else {
            self.covariance_by_loop()
        }
    }

    /// [`RecursiveFit::covariance`] written out for a capacity of two (a board's straight
    /// line): the loop's sums with their terms in the same order, `0 + (1·d₀)·1 +
    /// (u₀₁·d₁)·u₀₁` and `0 + (u₀₁·d₁)·1`, so the same bits in less code.
    fn covariance_two(&self) -> [[R; P]; P] {
        let mut out = [[R::ZERO; P]; P];
        let d0 = R::ZERO + self.d[0];
        if self.dim() < 2 || P < 2 {
            out[0][0] = d0;
            return out;
        }
        let cross = self.u[0][1] * self.d[1];
        out[0][0] = d0 + cross * self.u[0][1];
        out[0][1] = R::ZERO + cross;
        out[1][0] = out[0][1];
        out[1][1] = R::ZERO + self.d[1];
        out
    }

    /// [`RecursiveFit::covariance`] for any capacity.
    fn covariance_by_loop(&self) -> [[R; P]; P] {
        let n = self.dim();
        let unit = |i: usize, k: usize| -> R {
            if i == k {
                R::ONE
            } else if i < k {
                self.u[i][k]
            } else {
                R::ZERO
            }
        };
        let mut out = [[R::ZERO; P]; P];
        for i in 0..n {
            for j in i..n {
                let mut sum = R::ZERO;
                for k in j..n {
                    sum += unit(i, k) * self.d[k] * unit(j, k);
                }
                out[i][j] = sum;
                out[j][i] = sum;
            }
        }
        out
    }

    /// The parameter covariance σ²·P.
    pub fn parameter_covariance(&self) -> [[R; P]; P] {
        let variance = self.residual_variance();
        let mut out = self.covariance();
        for row in out.iter_mut() {
            for value in row.iter_mut() {
                *value *= variance;
            }
        }
        out
    }

    /// xᵀ P x, computed from `f = Uᵀx` as `Σ D_j f_j²`.
    #[inline]
    pub fn leverage(&self, x: &[R; P]) -> R {
        let (u, d) = (&self.u, &self.d);
        // Written out for the common dimensions (the same sums, in the same order).
        match self.dim() {
            2 if P >= 2 => {
                let f1 = x[1] + u[0][1] * x[0];
                d[0] * x[0] * x[0] + d[1] * f1 * f1
            }
            3 if P >= 3 => {
                let f1 = x[1] + u[0][1] * x[0];
                let f2 = x[2] + u[0][2] * x[0] + u[1][2] * x[1];
                d[0] * x[0] * x[0] + d[1] * f1 * f1 + d[2] * f2 * f2
            }
            n => self.leverage_dim(n, x),
        }
    }

    fn leverage_dim(&self, n: usize, x: &[R; P]) -> R {
        let mut sum = R::ZERO;
        for j in 0..n.min(P) {
            let mut f = x[j];
            for i in 0..j {
                f += self.u[i][j] * x[i];
            }
            sum += self.d[j] * f * f;
        }
        sum
    }

    /// Weighted residual variance σ² = weighted SSE / max(effective samples − dim, 1).
    pub fn residual_variance(&self) -> R {
        // Both terms are finite counts: a plain comparison (no NaN to order).
        let dof = self.effective - R::from_u32(self.dim as u32);
        self.weighted_sse / if dof > R::ONE { dof } else { R::ONE }
    }

    /// Exponentially weighted residual sum of squares.
    pub fn weighted_sse(&self) -> R {
        self.weighted_sse
    }

    /// Effective number of samples Σ β^(n−i).
    pub fn effective_samples(&self) -> R {
        self.effective
    }

    /// Number of accepted updates.
    pub fn updates(&self) -> u32 {
        self.updates
    }
}

#[cfg(test)]
mod tests;
