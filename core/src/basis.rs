//! How a sample becomes the regressor vector of the calibration fit.
//!
//! STUB: signatures fixed, bodies to be written.

use serde::{Deserialize, Serialize};

use crate::real::Real;

/// Which terms the calibration mean `raw = f(ref; θ)` has, and the scales that keep the
/// fit well conditioned.
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
        let _ = reference_scale;
        unimplemented!()
    }
    /// Number of terms (2 to 4).
    pub fn len(&self) -> usize {
        unimplemented!()
    }
    /// Checks scales and capacity.
    pub fn validate(&self, capacity: usize) -> Result<(), BasisError> {
        let _ = capacity;
        unimplemented!()
    }
    /// The scaled regressor vector `[1, ref/s, (ref/s)², ΔT/s_T]` (only the terms in use,
    /// packed in that order, zero-padded to `P`). A missing temperature counts as ΔT = 0.
    pub fn regressors<const P: usize>(&self, reference: R, temperature: Option<R>) -> [R; P] {
        let _ = (reference, temperature);
        unimplemented!()
    }
    /// Converts scaled-fit parameters to physical ones: `[offset, gain, quadratic, temperature]`
    /// (absent terms are zero) in raw units per reference unit (per degree).
    pub fn physical<const P: usize>(&self, scaled: &[R; P]) -> [R; 4] {
        let _ = scaled;
        unimplemented!()
    }
    /// d f / d ref at `reference` from scaled parameters (the sensitivity).
    pub fn slope<const P: usize>(&self, scaled: &[R; P], reference: R) -> R {
        let _ = (scaled, reference);
        unimplemented!()
    }
    /// Inverse prediction: the reference value whose mean raw output is `raw`, or `None`
    /// when there is none (zero slope, no real root, non-finite input).
    pub fn invert<const P: usize>(
        &self,
        scaled: &[R; P],
        raw: R,
        temperature: Option<R>,
    ) -> Option<R> {
        let _ = (scaled, raw, temperature);
        unimplemented!()
    }
}
