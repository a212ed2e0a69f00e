//! How a sample becomes the regressor vector of the calibration fit.
//!
//! The calibration mean is `raw = a + b·ref (+ c·ref²) (+ d·(T − T₀))`. The fit works on
//! scaled regressors `[1, r, r², τ]` with `r = ref / reference_scale` and
//! `τ = (T − T₀) / temperature_scale`, packed in that order (only the terms in use) and
//! zero-padded to the fit's capacity `P`; so the fit is well conditioned whatever the units.
//! [`Basis::physical`] maps the scaled parameters back to `[a, b, c, d]`.
//!
//! # Invariants
//! - `len()` is 2, 3 or 4 and equals the number of leading non-padding regressors.
//! - After [`Basis::validate`] succeeds, every scale is positive and finite and no method
//!   divides by zero; [`Basis::invert`] returns `None` rather than a non-finite value.

use serde::{Deserialize, Serialize};

use crate::real::Real;

/// Which terms the calibration mean `raw = f(ref; θ)` has, and the scales that keep the
/// fit well conditioned.
///
/// ```
/// use steadycal_core::basis::Basis;
/// let basis = Basis::linear(100.0f64);
/// let x: [f64; 3] = basis.regressors(50.0, None);
/// assert_eq!(x, [1.0, 0.5, 0.0]);
/// // Scaled parameters [offset, gain·scale] back to physical [offset, gain, 0, 0].
/// assert_eq!(basis.physical(&[2.0, 300.0, 0.0]), [2.0, 3.0, 0.0, 0.0]);
/// assert_eq!(basis.invert(&[2.0, 300.0, 0.0], 152.0, None), Some(50.0));
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Basis<R> {
    /// Include `c·ref²`.
    pub quadratic: bool,
    /// Include `d·(T − T₀)`.
    pub temperature: bool,
    /// Typical magnitude of the reference (for example the top of the range); regressors use
    /// `ref / reference_scale`.
    pub reference_scale: R,
    /// T₀, the temperature at which the temperature term is zero.
    pub temperature_reference: R,
    /// Typical magnitude of `T − T₀`.
    pub temperature_scale: R,
}

/// Why a basis is not usable.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub enum BasisError {
    /// A scale is zero, negative or not finite.
    BadScale,
    /// More terms than the fit's capacity `P`.
    TooManyTerms,
}

impl<R: Real> Basis<R> {
    /// Offset and gain only, with the given reference scale.
    pub fn linear(reference_scale: R) -> Self {
        Basis {
            quadratic: false,
            temperature: false,
            reference_scale,
            temperature_reference: R::from_f64(20.0),
            temperature_scale: R::from_f64(10.0),
        }
    }

    /// Number of terms (2 to 4).
    #[allow(clippy::len_without_is_empty)]
    pub fn len(&self) -> usize {
        2 + self.quadratic as usize + self.temperature as usize
    }

    /// Position of the temperature term in the regressor vector, if used.
    fn temperature_index(&self) -> Option<usize> {
        self.temperature.then_some(2 + self.quadratic as usize)
    }

    /// Checks scales and capacity.
    pub fn validate(&self, capacity: usize) -> Result<(), BasisError> {
        // `scale.is_finite() && scale > 0`, as one comparison of the bits.
        let good = |scale: R| scale.is_positive_finite();
        if !good(self.reference_scale)
            || (self.temperature
                && (!good(self.temperature_scale) || !self.temperature_reference.is_finite()))
        {
            return Err(BasisError::BadScale);
        }
        if self.len() > capacity {
            return Err(BasisError::TooManyTerms);
        }
        Ok(())
    }

    /// The scaled regressor vector `[1, ref/s, (ref/s)², ΔT/s_T]` (only the terms in use,
    /// packed in that order, zero-padded to `P`). A missing temperature counts as ΔT = 0.
    #[inline]
    pub fn regressors<const P: usize>(&self, reference: R, temperature: Option<R>) -> [R; P] {
        let mut x = [R::ZERO; P];
        let r = reference / self.reference_scale;
        let mut put = |index: usize, value: R| {
            if index < P {
                x[index] = value;
            }
        };
        put(0, R::ONE);
        put(1, r);
        if self.quadratic {
            put(2, r * r);
        }
        if let Some(index) = self.temperature_index() {
            let delta =
                temperature.map(|t| (t - self.temperature_reference) / self.temperature_scale);
            put(index, delta.unwrap_or(R::ZERO));
        }
        x
    }

    /// Factors that turn scaled parameters into physical ones: `physical[i] = scaled[i] ·
    /// factor[i]`, for the packed terms in use.
    pub fn physical_factors<const P: usize>(&self) -> [R; P] {
        let mut factors = [R::ZERO; P];
        let s = self.reference_scale;
        let mut put = |index: usize, value: R| {
            if index < P {
                factors[index] = value;
            }
        };
        put(0, R::ONE);
        put(1, R::ONE / s);
        if self.quadratic {
            put(2, R::ONE / (s * s));
        }
        if let Some(index) = self.temperature_index() {
            put(index, R::ONE / self.temperature_scale);
        }
        factors
    }

    /// Converts scaled-fit parameters to physical ones: `[offset, gain, quadratic, temperature]`
    /// (absent terms are zero) in raw units per reference unit (per degree).
    pub fn physical<const P: usize>(&self, scaled: &[R; P]) -> [R; 4] {
        let factors: [R; P] = self.physical_factors();
        let term = |index: usize| {
            if index < P {
                scaled[index] * factors[index]
            } else {
                R::ZERO
            }
        };
        [
            term(0),
            term(1),
            if self.quadratic { term(2) } else { R::ZERO },
            self.temperature_index().map(term).unwrap_or(R::ZERO),
        ]
    }

    /// d f / d ref at `reference` from scaled parameters (the sensitivity).
    pub fn slope<const P: usize>(&self, scaled: &[R; P], reference: R) -> R {
        let [_, gain, quadratic, _] = self.physical(scaled);
        gain + R::TWO * quadratic * reference
    }

    /// Inverse prediction: the reference value whose mean raw output is `raw`, or `None`
    /// when there is none (zero slope, no real root, non-finite input).
    ///
    /// With a quadratic term the root nearest the straight-line solution is taken, computed
    /// with the cancellation-free form `2q / (−b ∓ √(b² − 4cq))`.
    pub fn invert<const P: usize>(
        &self,
        scaled: &[R; P],
        raw: R,
        temperature: Option<R>,
    ) -> Option<R> {
        let [offset, gain, quadratic, temperature_gain] = self.physical(scaled);
        let delta = match (self.temperature, temperature) {
            (true, Some(t)) => t - self.temperature_reference,
            _ => R::ZERO,
        };
        // Solve quadratic·r² + gain·r + q = 0 with q = offset + d·ΔT − raw.
        let q = offset + temperature_gain * delta - raw;
        let value = if quadratic == R::ZERO {
            if gain == R::ZERO {
                return None;
            }
            -q / gain
        } else {
            let discriminant = gain * gain - R::from_f64(4.0) * quadratic * q;
            if discriminant < R::ZERO {
                return None;
            }
            let root = discriminant.sqrt();
            // The root nearest −q/gain (the linear solution) is 2q / (−gain − sign(gain)·√D).
            let denominator = if gain >= R::ZERO {
                -gain - root
            } else {
                -gain + root
            };
            if denominator == R::ZERO {
                return None;
            }
            R::TWO * q / denominator
        };
        value.is_finite().then_some(value)
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] Basis<R> {
    quadratic, temperature, reference_scale, temperature_reference, temperature_scale
});

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn packs_terms_in_order() {
        let mut basis = Basis::linear(10.0f64);
        basis.quadratic = true;
        basis.temperature = true;
        assert_eq!(basis.len(), 4);
        let x: [f64; 4] = basis.regressors(5.0, Some(30.0));
        assert_eq!(x, [1.0, 0.5, 0.25, 1.0]);
        let x: [f64; 4] = basis.regressors(5.0, None);
        assert_eq!(x[3], 0.0);
        assert_eq!(basis.validate(3), Err(BasisError::TooManyTerms));
        assert_eq!(basis.validate(4), Ok(()));
        basis.reference_scale = 0.0;
        assert_eq!(basis.validate(4), Err(BasisError::BadScale));
    }

    #[test]
    fn quadratic_inverse_recovers_reference() {
        let mut basis = Basis::linear(100.0f64);
        basis.quadratic = true;
        // Physical a = 0.5, b = 2, c = −0.001 → scaled [0.5, 200, −10].
        let scaled = [0.5, 200.0, -10.0];
        for &reference in &[0.0, 1.0, 37.5, 250.0] {
            let raw = 0.5 + 2.0 * reference - 0.001 * reference * reference;
            let back = basis.invert(&scaled, raw, None).unwrap();
            assert!((back - reference).abs() < 1e-9, "{reference} → {back}");
        }
        assert!((basis.slope(&scaled, 100.0) - 1.8).abs() < 1e-12);
        // No real root far above the vertex.
        assert_eq!(basis.invert(&scaled, 5000.0, None), None);
    }

    #[test]
    fn temperature_term_is_subtracted() {
        let mut basis = Basis::linear(1.0f64);
        basis.temperature = true;
        // scaled [a, b, d·s_T] with a = 1, b = 2, d = 0.1 per degree, s_T = 10.
        let scaled = [1.0, 2.0, 1.0];
        let raw = 1.0 + 2.0 * 3.0 + 0.1 * (25.0 - 20.0);
        assert!((basis.invert(&scaled, raw, Some(25.0)).unwrap() - 3.0).abs() < 1e-12);
        assert_eq!(basis.physical(&scaled), [1.0, 2.0, 0.0, 0.1]);
    }

    #[test]
    fn never_non_finite() {
        let basis = Basis::linear(1.0f32);
        assert_eq!(basis.invert(&[0.0, 0.0], 1.0, None), None);
        assert_eq!(basis.invert(&[0.0, 1.0], f32::NAN, None), None);
        assert_eq!(basis.invert(&[0.0, 1e-30], 1e30, None), None);
    }
}
