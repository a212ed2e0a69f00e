//! Parameter drift: the active calibration against the commissioned baseline.
//!
//! The baseline θ₀ (physical `[offset, gain, quadratic, temperature]`, with its
//! covariance Σ₀) is set from outside (a commissioning run, a snapshot) or frozen from the
//! active fit `freeze_after` checks after the warm-up. At every `every`-th check the Wald
//! statistic `W = (θ − θ₀)ᵀ (Σ + Σ₀)⁻¹ (θ − θ₀)` is compared with the χ²(p) quantile,
//! `Σ = σ²P` the covariance of the active fit (with forgetting, the covariance of the
//! recent-window estimate; it overstates the variance of an exponentially weighted
//! estimate by up to a factor of 2, so the test is conservative). A drift is raised only
//! when the change is significant AND beyond the engineer's tolerance: the gain change
//! beyond `gain_tolerance_percent` of the baseline gain (`gain_drift`), the offset change
//! beyond `offset_tolerance` raw units (`offset_drift`). Significance alone is reported in
//! [`DriftStatus`], never raised.
//!
//! The Wald statistic is computed in the fit's scaled coordinates (better conditioned, and
//! the statistic is invariant under the rescaling); the physical covariance scales rows and
//! columns of σ²P by the same factors as `Basis::physical` (gain = θ₁/s, quadratic = θ₂/s²,
//! temperature = θ/s_T), computed here by [`CovarianceLayout`].
//!
//! Default quantiles χ²_p(0.999) for p = 1..4: 10.828, 13.816, 16.266, 18.467 (SciPy 1.11.4
//! `stats.chi2.ppf(0.999, p)`: 10.8276, 13.8155, 16.2662, 18.4668).
//!
//! # Invariants
//! - A baseline is finite with a non-negative covariance diagonal ([`Baseline::new`]).
//! - A status is only produced from finite inputs with a positive-definite Σ + Σ₀.

use serde::{Deserialize, Serialize};

use crate::basis::Basis;
use crate::real::Real;

/// Settings of the drift test.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct DriftConfig<R> {
    /// Gain tolerance, percent of the baseline gain (default 1 %).
    pub gain_tolerance_percent: R,
    /// Offset tolerance, raw units (default: the bottom of the working range).
    pub offset_tolerance: R,
    /// χ²_p quantiles for p = 1, 2, 3, 4 parameters (default α = 0.001).
    pub wald_quantiles: [R; 4],
    /// Checks after the warm-up at which the baseline is frozen from the active fit when
    /// none was set (default 1000, one memory length at β = 0.999).
    pub freeze_after: u32,
    /// Evaluate every this many checks (default 16).
    pub every: u32,
}

impl<R: Real> DriftConfig<R> {
    /// χ²_p(0.999), p = 1..4 (SciPy 1.11.4 `stats.chi2.ppf(0.999, p)`, rounded to 3 decimals).
    pub fn chi_square_999() -> [R; 4] {
        [10.828, 13.816, 16.266, 18.467].map(R::from_f64)
    }
}

/// Why a baseline is refused.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum BaselineError {
    /// A parameter or covariance entry is NaN or infinite.
    NonFinite,
    /// A variance (covariance diagonal) is negative.
    NegativeVariance,
}

/// The commissioned calibration the active one is compared with.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct Baseline<R> {
    /// Physical `[offset, gain, quadratic, temperature]`.
    pub parameters: [R; 4],
    /// Their covariance (zero for a baseline taken as exact).
    pub covariance: [[R; 4]; 4],
}

impl<R: Real> Baseline<R> {
    /// A checked baseline; `covariance` `None` means exact.
    pub fn new(parameters: [R; 4], covariance: Option<[[R; 4]; 4]>) -> Result<Self, BaselineError> {
        let covariance = covariance.unwrap_or([[R::ZERO; 4]; 4]);
        let finite = parameters
            .iter()
            .chain(covariance.iter().flatten())
            .all(|v| v.is_finite());
        if !finite {
            return Err(BaselineError::NonFinite);
        }
        if (0..4).any(|i| covariance[i][i] < R::ZERO) {
            return Err(BaselineError::NegativeVariance);
        }
        Ok(Baseline {
            parameters,
            covariance,
        })
    }
}

/// Where each packed fit parameter goes among the physical ones, and its scale factor.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CovarianceLayout<R> {
    /// Number of parameters in use.
    pub len: usize,
    /// Physical slot (0 offset, 1 gain, 2 quadratic, 3 temperature) of packed index i.
    pub slots: [usize; 4],
    /// physical = factor · scaled, for packed index i.
    pub factors: [R; 4],
}

impl<R: Real> CovarianceLayout<R> {
    /// The layout of a basis: `[1, ref/s, (ref/s)², ΔT/s_T]`, terms in use packed in order.
    pub fn of(basis: &Basis<R>) -> Self {
        let s = basis.reference_scale;
        let mut slots = [0, 1, 0, 0];
        let mut factors = [R::ONE, R::ONE / s, R::ZERO, R::ZERO];
        let mut len = 2;
        if basis.quadratic {
            slots[len] = 2;
            factors[len] = R::ONE / (s * s);
            len += 1;
        }
        if basis.temperature {
            slots[len] = 3;
            factors[len] = R::ONE / basis.temperature_scale;
            len += 1;
        }
        CovarianceLayout {
            len,
            slots,
            factors,
        }
    }

    /// Physical parameters from scaled ones. A slot outside `0..4` (not one `CovarianceLayout::of`
    /// makes) is skipped: checked indexing, so no panic path.
    pub fn physical<const P: usize>(&self, scaled: &[R; P]) -> [R; 4] {
        let mut out = [R::ZERO; 4];
        let packed = self.slots.iter().zip(&self.factors).zip(scaled);
        for ((&slot, &factor), &value) in packed.take(self.len) {
            if let Some(entry) = out.get_mut(slot) {
                *entry = factor * value;
            }
        }
        out
    }

    /// Physical covariance `D (σ²P) D` from the unscaled covariance `P` and σ².
    pub fn physical_covariance<const P: usize>(
        &self,
        covariance: &[[R; P]; P],
        variance: R,
    ) -> [[R; 4]; 4] {
        let mut out = [[R::ZERO; 4]; 4];
        // Checked indexing as in `physical`.
        let packed = || self.slots.iter().zip(&self.factors).take(self.len);
        for ((&slot_i, &f_i), row) in packed().zip(covariance) {
            for ((&slot_j, &f_j), &value) in packed().zip(row) {
                if let Some(entry) = out
                    .get_mut(slot_i)
                    .and_then(|out_row| out_row.get_mut(slot_j))
                {
                    *entry = f_i * f_j * variance * value;
                }
            }
        }
        out
    }
}

/// The drift test's latest result (reported in the summary whether or not it alarms).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct DriftStatus<R> {
    /// Relative gain change against the baseline (0.01 = 1 %); `None` for a zero baseline gain.
    pub gain_change: Option<R>,
    /// Standard uncertainty of `gain_change` (current and baseline).
    pub gain_uncertainty: Option<R>,
    /// Offset change, raw units.
    pub offset_change: R,
    /// Standard uncertainty of `offset_change`.
    pub offset_uncertainty: R,
    /// Wald statistic.
    pub wald: R,
    /// The χ²(p) quantile it was compared with.
    pub threshold: R,
    /// Degrees of freedom p.
    pub dof: u8,
    /// `wald > threshold`.
    pub significant: bool,
    /// The gain change is beyond the tolerance.
    pub gain_beyond_tolerance: bool,
    /// The offset change is beyond the tolerance.
    pub offset_beyond_tolerance: bool,
}

impl<R: Real> DriftStatus<R> {
    /// The `gain_drift` signal: significant and beyond tolerance.
    pub fn gain_signal(&self) -> bool {
        self.significant && self.gain_beyond_tolerance
    }
    /// The `offset_drift` signal: significant and beyond tolerance.
    pub fn offset_signal(&self) -> bool {
        self.significant && self.offset_beyond_tolerance
    }
}

/// Baseline and latest status.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct DriftDetector<R> {
    baseline: Option<Baseline<R>>,
    status: Option<DriftStatus<R>>,
}

/// Solves `A y = b` for a symmetric positive-definite `n × n` block (Cholesky) and
/// returns `bᵀ A⁻¹ b`; `None` when `A` is not positive definite.
#[allow(clippy::needless_range_loop)] // index notation mirrors the textbook algorithm
fn quadratic_form<R: Real>(a: &[[R; 4]; 4], b: &[R; 4], n: usize) -> Option<R> {
    let mut l = [[R::ZERO; 4]; 4];
    for i in 0..n {
        for j in 0..=i {
            let mut sum = a[i][j];
            for k in 0..j {
                sum -= l[i][k] * l[j][k];
            }
            if i == j {
                if !(sum > R::ZERO) {
                    return None;
                }
                l[i][i] = sum.sqrt();
            } else {
                l[i][j] = sum / l[j][j];
            }
        }
    }
    // Forward substitution L y = b; bᵀA⁻¹b = |y|².
    let mut y = [R::ZERO; 4];
    let mut total = R::ZERO;
    for i in 0..n {
        let mut sum = b[i];
        for k in 0..i {
            sum -= l[i][k] * y[k];
        }
        y[i] = sum / l[i][i];
        total += y[i] * y[i];
    }
    total.is_finite().then_some(total)
}

impl<R: Real> DriftDetector<R> {
    /// No baseline yet.
    pub fn new() -> Self {
        Self::default()
    }

    /// The baseline, once set or frozen.
    pub fn baseline(&self) -> Option<&Baseline<R>> {
        self.baseline.as_ref()
    }

    /// Sets (or replaces) the baseline; the status restarts.
    pub fn set_baseline(&mut self, baseline: Baseline<R>) {
        self.baseline = Some(baseline);
        self.status = None;
    }

    /// The latest status.
    pub fn status(&self) -> Option<DriftStatus<R>> {
        self.status
    }

    /// Tests the active fit (scaled parameters `theta`, unscaled covariance `covariance`,
    /// residual variance `variance`) against the baseline. `None` without a baseline or
    /// with unusable inputs (the previous status is kept).
    pub fn evaluate<const P: usize>(
        &mut self,
        config: &DriftConfig<R>,
        basis: &Basis<R>,
        theta: &[R; P],
        covariance: &[[R; P]; P],
        variance: R,
    ) -> Option<DriftStatus<R>> {
        let baseline = self.baseline?;
        let layout = CovarianceLayout::of(basis);
        let n = layout.len.min(P);
        if n == 0 || !variance.is_finite() {
            return None;
        }
        let mut difference = [R::ZERO; 4];
        let mut sigma = [[R::ZERO; 4]; 4];
        // Checked indexing (a slot outside `0..4` makes the inputs unusable): no panic
        // path.
        for i in 0..n.min(4) {
            let (slot_i, f_i) = (layout.slots[i], layout.factors[i]);
            difference[i] = theta[i] - *baseline.parameters.get(slot_i)? / f_i;
            let baseline_row = baseline.covariance.get(slot_i)?;
            for j in 0..n.min(4) {
                let (slot_j, f_j) = (layout.slots[j], layout.factors[j]);
                sigma[i][j] =
                    variance * covariance[i][j] + *baseline_row.get(slot_j)? / (f_i * f_j);
            }
        }
        let wald = quadratic_form(&sigma, &difference, n)?;
        let threshold = config.wald_quantiles[n - 1];
        // Physical gain and offset with their variances (offset factor is 1, gain 1/s).
        let physical = layout.physical(theta);
        let f_gain = layout.factors[1];
        let gain_variance =
            f_gain * f_gain * variance * covariance[1][1] + baseline.covariance[1][1];
        let offset_variance = variance * covariance[0][0] + baseline.covariance[0][0];
        let offset_change = physical[0] - baseline.parameters[0];
        let offset_uncertainty = offset_variance.max(R::ZERO).sqrt();
        let gain0 = baseline.parameters[1];
        let (gain_change, gain_uncertainty) = if gain0 != R::ZERO {
            let change = (physical[1] - gain0) / gain0;
            (
                Some(change),
                Some(gain_variance.max(R::ZERO).sqrt() / gain0.abs()),
            )
        } else {
            (None, None)
        };
        if !(offset_change.is_finite() && offset_uncertainty.is_finite()) {
            return None;
        }
        let percent = R::from_f64(100.0);
        let status = DriftStatus {
            gain_change,
            gain_uncertainty,
            offset_change,
            offset_uncertainty,
            wald,
            threshold,
            dof: n as u8,
            significant: wald > threshold,
            gain_beyond_tolerance: gain_change.is_some_and(|c| {
                c.is_finite() && c.abs() * percent > config.gain_tolerance_percent
            }),
            offset_beyond_tolerance: offset_change.abs() > config.offset_tolerance,
        };
        self.status = Some(status);
        Some(status)
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] DriftDetector<R> { baseline, status });
crate::wire::walk_struct!(impl[R: Real] DriftConfig<R> {
    gain_tolerance_percent, offset_tolerance, wald_quantiles, freeze_after, every
});
crate::wire::walk_struct!(impl[R: Real] Baseline<R> { parameters, covariance } blank: Baseline {
    parameters: [R::ZERO; 4],
    covariance: [[R::ZERO; 4]; 4],
});
crate::wire::walk_struct!(impl[R: Real] DriftStatus<R> {
    gain_change, gain_uncertainty, offset_change, offset_uncertainty, wald, threshold, dof,
    significant, gain_beyond_tolerance, offset_beyond_tolerance,
} blank: DriftStatus {
    gain_change: None,
    gain_uncertainty: None,
    offset_change: R::ZERO,
    offset_uncertainty: R::ZERO,
    wald: R::ZERO,
    threshold: R::ZERO,
    dof: 0,
    significant: false,
    gain_beyond_tolerance: false,
    offset_beyond_tolerance: false,
});

#[cfg(test)]
mod tests {
    use super::*;

    fn basis() -> Basis<f64> {
        Basis {
            quadratic: false,
            temperature: false,
            reference_scale: 100.0,
            temperature_reference: 20.0,
            temperature_scale: 10.0,
        }
    }

    fn config() -> DriftConfig<f64> {
        DriftConfig {
            gain_tolerance_percent: 1.0,
            offset_tolerance: 0.5,
            wald_quantiles: DriftConfig::chi_square_999(),
            freeze_after: 100,
            every: 1,
        }
    }

    #[test]
    fn a_slot_outside_the_four_is_skipped_not_a_panic() {
        // A layout `CovarianceLayout::of` never makes (the fields are public).
        let layout = CovarianceLayout {
            len: 2,
            slots: [0, 9, 0, 0],
            factors: [1.0, 0.5, 0.0, 0.0],
        };
        assert_eq!(layout.physical(&[2.0, 4.0]), [2.0, 0.0, 0.0, 0.0]);
        let covariance = layout.physical_covariance(&[[1.0, 0.5], [0.5, 2.0]], 3.0);
        let mut expected = [[0.0; 4]; 4];
        expected[0][0] = 3.0;
        assert_eq!(covariance, expected);
    }

    #[test]
    fn layout_scales_like_the_basis() {
        let mut b = basis();
        b.quadratic = true;
        b.temperature = true;
        let layout = CovarianceLayout::of(&b);
        assert_eq!(layout.len, 4);
        let physical = layout.physical(&[1.0, 200.0, 3e4, 5.0]);
        assert_eq!(physical, [1.0, 2.0, 3.0, 0.5]);
        let covariance = layout.physical_covariance(&[[1.0; 4]; 4], 4.0);
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-15 * b.abs();
        assert!(close(covariance[1][1], 4.0 / 1e4));
        assert!(close(covariance[0][1], 4.0 / 100.0));
        assert!(close(covariance[3][3], 4.0 / 100.0));
        assert!(close(covariance[2][2], 4.0 / 1e8));
    }

    #[test]
    fn layout_agrees_with_basis_physical() {
        for (quadratic, temperature) in [(false, false), (true, false), (false, true), (true, true)]
        {
            let mut b = basis();
            b.quadratic = quadratic;
            b.temperature = temperature;
            let scaled = [0.5, 123.0, -7.0, 2.5];
            let ours = CovarianceLayout::of(&b).physical(&scaled);
            let theirs = b.physical(&scaled);
            for (a, c) in ours.iter().zip(theirs) {
                assert!((a - c).abs() <= 1e-15 * c.abs(), "{ours:?} {theirs:?}");
            }
        }
    }

    #[test]
    fn wald_matches_hand_computation() {
        // Diagonal case: W = Σ Δ²/var. Scaled θ = [1.3, 100.5] (gain 1.005), P = diag(0.01,
        // 1e-4), σ² = 1: offset Δ = 0.3 (var 0.01) → 9, scaled gain Δ = 0.5 (var 1e-4) → 2500.
        let mut detector = DriftDetector::new();
        detector.set_baseline(Baseline::new([1.0, 1.0, 0.0, 0.0], None).unwrap());
        let p = [[0.01, 0.0], [0.0, 1e-4]];
        let status = detector
            .evaluate(&config(), &basis(), &[1.3, 100.5], &p, 1.0)
            .unwrap();
        assert!((status.wald - 2509.0).abs() < 1e-6, "{}", status.wald);
        assert!(status.significant);
        assert!((status.gain_change.unwrap() - 0.005).abs() < 1e-12);
        assert!(!status.gain_beyond_tolerance); // 0.5 % is inside 1 %
        assert!((status.gain_uncertainty.unwrap() - 1e-4).abs() < 1e-12);
        assert!((status.offset_change - 0.3).abs() < 1e-12);
        assert!(!status.offset_beyond_tolerance);
        assert!(!status.gain_signal() && !status.offset_signal());
        let status = detector
            .evaluate(&config(), &basis(), &[1.6, 102.0], &p, 1.0)
            .unwrap();
        assert!(status.gain_signal() && status.offset_signal());
    }

    #[test]
    fn beyond_tolerance_but_not_significant_does_not_signal() {
        let mut detector = DriftDetector::new();
        let covariance = [
            [1.0, 0.0, 0.0, 0.0],
            [0.0, 1.0, 0.0, 0.0],
            [0.0; 4],
            [0.0; 4],
        ];
        detector.set_baseline(Baseline::new([0.0, 1.0, 0.0, 0.0], Some(covariance)).unwrap());
        let status = detector
            .evaluate(
                &config(),
                &basis(),
                &[1.0, 105.0],
                &[[1.0, 0.0], [0.0, 1.0]],
                1.0,
            )
            .unwrap();
        assert!(status.gain_beyond_tolerance && status.offset_beyond_tolerance);
        assert!(!status.significant);
        assert!(!status.gain_signal());
    }

    #[test]
    fn bad_inputs_are_refused() {
        assert_eq!(
            Baseline::new([f64::NAN, 1.0, 0.0, 0.0], None),
            Err(BaselineError::NonFinite)
        );
        let mut covariance = [[0.0; 4]; 4];
        covariance[1][1] = -1.0;
        assert_eq!(
            Baseline::new([0.0; 4], Some(covariance)),
            Err(BaselineError::NegativeVariance)
        );
        let mut detector = DriftDetector::new();
        assert!(detector
            .evaluate(
                &config(),
                &basis(),
                &[1.0, 1.0],
                &[[1.0, 0.0], [0.0, 1.0]],
                1.0
            )
            .is_none());
        detector.set_baseline(Baseline::new([0.0, 1.0, 0.0, 0.0], None).unwrap());
        // Not positive definite.
        assert!(detector
            .evaluate(
                &config(),
                &basis(),
                &[1.0, 1.0],
                &[[0.0, 0.0], [0.0, 1.0]],
                1.0
            )
            .is_none());
        assert!(detector
            .evaluate(
                &config(),
                &basis(),
                &[1.0, 1.0],
                &[[1.0, 0.0], [0.0, 1.0]],
                f64::NAN
            )
            .is_none());
    }
}
