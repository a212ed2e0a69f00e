//! The floating-point abstraction every other module is generic over.
//!
//! [`Real`] is implemented for `f32` and `f64`. Every transcendental function calls
//! [`libm`] explicitly (`libm::logf`, `libm::exp`, ...), never the standard library and
//! never `num-traits`' `Float`: libm gives the same bits on x86_64 and on Cortex-M, so a
//! replay on a desktop reproduces the events of a board exactly. The standard library's
//! `f32::ln` does not (it calls the platform's libm), and Cargo feature unification in a
//! host build could silently switch a `num-traits` based implementation to it.
//!
//! # Invariants
//! - Arithmetic (`+ - * /`, comparisons, `sqrt`) is IEEE 754 and therefore bit-identical on
//!   every target; `ln`, `exp`, `powf` are bit-identical wherever the same libm build runs.
//! - With the `fast-math` feature, `ln`, `exp` and `powf` of `f32` go through micromath's
//!   approximations instead. They are no longer bit-identical with a default build and carry
//!   a relative error bound of [`FAST_MATH_RELATIVE_BOUND`] (checked by the unit tests over
//!   the ranges the monitor uses). `f64` always uses libm.

use core::fmt::Debug;
use core::ops::{Add, AddAssign, Div, DivAssign, Mul, MulAssign, Neg, Sub, SubAssign};

use serde::de::DeserializeOwned;
use serde::Serialize;

/// Relative error bound of the `fast-math` approximations of `ln`, `exp` and `powf` for
/// `f32`, over arguments in `[1e-6, 1e6]` (for `ln`) and results in `[1e-6, 1e6]` (for `exp`
/// and `powf`). Checked by this module's tests.
pub const FAST_MATH_RELATIVE_BOUND: f64 = 2e-2;

/// A floating-point scalar: `f32` or `f64`.
///
/// ```
/// use steadycal_core::real::Real;
/// fn hypot<R: Real>(a: R, b: R) -> R { (a * a + b * b).sqrt() }
/// assert_eq!(hypot(3.0f32, 4.0), 5.0);
/// assert_eq!(hypot(3.0f64, 4.0), 5.0);
/// ```
pub trait Real:
    Copy
    + Clone
    + Debug
    + Default
    + PartialEq
    + PartialOrd
    + Add<Output = Self>
    + Sub<Output = Self>
    + Mul<Output = Self>
    + Div<Output = Self>
    + Neg<Output = Self>
    + AddAssign
    + SubAssign
    + MulAssign
    + DivAssign
    + Serialize
    + DeserializeOwned
    + Send
    + Sync
    + 'static
{
    /// 0.
    const ZERO: Self;
    /// 1.
    const ONE: Self;
    /// 2.
    const TWO: Self;
    /// 1/2.
    const HALF: Self;
    /// Machine epsilon.
    const EPSILON: Self;
    /// Largest finite value.
    const MAX: Self;
    /// Smallest positive normal value.
    const MIN_POSITIVE: Self;
    /// Positive infinity.
    const INFINITY: Self;
    /// Not a number.
    const NAN: Self;
    /// Width of the type in bits (32 or 64).
    const BITS: u32;

    /// Converts from `f64`, rounding to nearest.
    fn from_f64(value: f64) -> Self;
    /// Converts to `f64` exactly.
    fn to_f64(self) -> f64;
    /// Converts a count to this type.
    fn from_u32(value: u32) -> Self;
    /// The IEEE 754 bit pattern, widened to `u64` for `f32`.
    fn to_bits_u64(self) -> u64;
    /// The value of an IEEE 754 bit pattern (for `f32` the low 32 bits of `bits`; the
    /// rest are ignored). Every bit comes back, a NaN's payload too: the inverse of
    /// [`Real::to_bits_u64`].
    fn from_bits_u64(bits: u64) -> Self;

    /// Natural logarithm (libm, or micromath with `fast-math`).
    fn ln(self) -> Self;
    /// Exponential (libm, or micromath with `fast-math`).
    fn exp(self) -> Self;
    /// `self` raised to `exponent` (libm, or micromath with `fast-math`).
    fn powf(self, exponent: Self) -> Self;
    /// Square root (IEEE correctly rounded).
    fn sqrt(self) -> Self;
    /// Absolute value.
    fn abs(self) -> Self;
    /// Largest integer not above `self`.
    fn floor(self) -> Self;
    /// True unless NaN or infinite.
    fn is_finite(self) -> bool;
    /// True for NaN.
    fn is_nan(self) -> bool;
    /// Truncation toward zero to an index, saturating at both ends (NaN gives 0), without
    /// a detour through `f64`.
    fn to_index(self) -> usize;
    /// True for a finite value above zero (false for NaN and for ±0): one unsigned
    /// comparison of the bit pattern, whose order is the numbers' order for positive
    /// values.
    fn is_positive_finite(self) -> bool;

    /// The larger of two values; a NaN argument loses to a number.
    #[inline]
    fn max(self, other: Self) -> Self {
        if self >= other || other.is_nan() {
            self
        } else {
            other
        }
    }
    /// The smaller of two values; a NaN argument loses to a number.
    #[inline]
    fn min(self, other: Self) -> Self {
        if self <= other || other.is_nan() {
            self
        } else {
            other
        }
    }
    /// `self` limited to `[low, high]`; NaN maps to `low`.
    #[inline]
    fn clamp_to(self, low: Self, high: Self) -> Self {
        if self.is_nan() {
            low
        } else {
            self.max(low).min(high)
        }
    }
    /// `self * self`.
    #[inline]
    fn squared(self) -> Self {
        self * self
    }
}

impl Real for f64 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const TWO: Self = 2.0;
    const HALF: Self = 0.5;
    const EPSILON: Self = f64::EPSILON;
    const MAX: Self = f64::MAX;
    const MIN_POSITIVE: Self = f64::MIN_POSITIVE;
    const INFINITY: Self = f64::INFINITY;
    const NAN: Self = f64::NAN;
    const BITS: u32 = 64;

    #[inline]
    fn from_f64(value: f64) -> Self {
        value
    }
    #[inline]
    fn to_f64(self) -> f64 {
        self
    }
    #[inline]
    fn from_u32(value: u32) -> Self {
        value as f64
    }
    #[inline]
    fn to_bits_u64(self) -> u64 {
        self.to_bits()
    }
    #[inline]
    fn from_bits_u64(bits: u64) -> Self {
        f64::from_bits(bits)
    }
    #[inline]
    fn ln(self) -> Self {
        libm::log(self)
    }
    #[inline]
    fn exp(self) -> Self {
        libm::exp(self)
    }
    #[inline]
    fn powf(self, exponent: Self) -> Self {
        libm::pow(self, exponent)
    }
    #[inline]
    fn sqrt(self) -> Self {
        libm::sqrt(self)
    }
    #[inline]
    fn abs(self) -> Self {
        libm::fabs(self)
    }
    #[inline]
    fn floor(self) -> Self {
        libm::floor(self)
    }
    #[inline]
    fn is_finite(self) -> bool {
        f64::is_finite(self)
    }
    #[inline]
    fn is_nan(self) -> bool {
        f64::is_nan(self)
    }
    #[inline]
    fn to_index(self) -> usize {
        self as usize
    }
    #[inline]
    fn is_positive_finite(self) -> bool {
        self.to_bits().wrapping_sub(1) < f64::INFINITY.to_bits() - 1
    }
}

impl Real for f32 {
    const ZERO: Self = 0.0;
    const ONE: Self = 1.0;
    const TWO: Self = 2.0;
    const HALF: Self = 0.5;
    const EPSILON: Self = f32::EPSILON;
    const MAX: Self = f32::MAX;
    const MIN_POSITIVE: Self = f32::MIN_POSITIVE;
    const INFINITY: Self = f32::INFINITY;
    const NAN: Self = f32::NAN;
    const BITS: u32 = 32;

    #[inline]
    fn from_f64(value: f64) -> Self {
        value as f32
    }
    #[inline]
    fn to_f64(self) -> f64 {
        self as f64
    }
    #[inline]
    fn from_u32(value: u32) -> Self {
        value as f32
    }
    #[inline]
    fn to_bits_u64(self) -> u64 {
        self.to_bits() as u64
    }
    #[inline]
    fn from_bits_u64(bits: u64) -> Self {
        f32::from_bits(bits as u32)
    }
    #[inline]
    fn ln(self) -> Self {
        #[cfg(feature = "fast-math")]
        {
            micromath::F32Ext::ln(self)
        }
        #[cfg(not(feature = "fast-math"))]
        {
            libm::logf(self)
        }
    }
    #[inline]
    fn exp(self) -> Self {
        #[cfg(feature = "fast-math")]
        {
            micromath::F32Ext::exp(self)
        }
        #[cfg(not(feature = "fast-math"))]
        {
            libm::expf(self)
        }
    }
    #[inline]
    fn powf(self, exponent: Self) -> Self {
        #[cfg(feature = "fast-math")]
        {
            micromath::F32Ext::powf(self, exponent)
        }
        #[cfg(not(feature = "fast-math"))]
        {
            libm::powf(self, exponent)
        }
    }
    #[inline]
    fn sqrt(self) -> Self {
        // The FPU's instruction on hard-float Arm, libm elsewhere: the same bits (IEEE 754
        // requires a correctly rounded square root).
        steadycal_fpu::sqrt_f32(self)
    }
    #[inline]
    fn abs(self) -> Self {
        libm::fabsf(self)
    }
    #[inline]
    fn floor(self) -> Self {
        libm::floorf(self)
    }
    #[inline]
    fn is_finite(self) -> bool {
        f32::is_finite(self)
    }
    #[inline]
    fn is_nan(self) -> bool {
        f32::is_nan(self)
    }
    #[inline]
    fn to_index(self) -> usize {
        self as usize
    }
    #[inline]
    fn is_positive_finite(self) -> bool {
        self.to_bits().wrapping_sub(1) < f32::INFINITY.to_bits() - 1
    }
}

/// A configuration value that must be finite and above zero (`x.is_finite() && x > 0`).
/// Out of line on purpose: the configuration checks call it once per setting, and on a
/// board each inlined copy of the test would take some forty bytes of bit tests.
#[inline(never)]
pub(crate) fn positive_setting<R: Real>(x: R) -> bool {
    x.is_positive_finite()
}

/// A configuration value that must be finite and not below zero
/// (`x.is_finite() && x >= 0`, true for `-0` as well); out of line like
/// [`positive_setting`].
#[inline(never)]
pub(crate) fn non_negative_setting<R: Real>(x: R) -> bool {
    x == R::ZERO || x.is_positive_finite()
}

/// `count` is a multiple of `period` (a mask for a power of two, which the defaults are:
/// a 64-bit remainder is a library call on a 32-bit board).
#[inline]
pub(crate) fn every(count: u64, period: u32) -> bool {
    if period.is_power_of_two() {
        // The mask fits in 32 bits: only the low word of the count matters.
        (count as u32) & (period - 1) == 0
    } else {
        count.is_multiple_of(period as u64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn libm_matches_known_values() {
        // ln 2 and e to 15 digits: from memory, and checked against f64 constants.
        assert!((2.0f64.ln() - core::f64::consts::LN_2).abs() < 1e-15);
        assert!((Real::exp(1.0f64) - core::f64::consts::E).abs() < 1e-15);
        assert_eq!(Real::sqrt(2.0f32), core::f32::consts::SQRT_2);
    }

    #[test]
    fn max_min_ignore_nan() {
        assert_eq!(Real::max(1.0f32, f32::NAN), 1.0);
        assert_eq!(Real::min(f32::NAN, 2.0f32), 2.0);
        assert_eq!(f64::NAN.clamp_to(0.0, 1.0), 0.0);
        assert_eq!(5.0f64.clamp_to(0.0, 1.0), 1.0);
    }

    #[cfg(feature = "fast-math")]
    #[test]
    fn fast_math_within_documented_bound() {
        let mut x = 1e-6f64;
        while x < 1e6 {
            let fast = (x as f32).ln() as f64;
            let exact = libm::log(x);
            let err = if exact.abs() > 1.0 {
                (fast - exact).abs() / exact.abs()
            } else {
                (fast - exact).abs()
            };
            assert!(err <= FAST_MATH_RELATIVE_BOUND, "ln({x}) err {err}");
            x *= 1.37;
        }
        let mut x = -13.0f64;
        while x < 13.0 {
            let fast = Real::exp(x as f32) as f64;
            let exact = libm::exp(x);
            assert!(
                (fast - exact).abs() / exact <= FAST_MATH_RELATIVE_BOUND,
                "exp({x})"
            );
            x += 0.173;
        }
        for &base in &[1e-3f64, 0.5, 1.0, 3.7, 100.0, 1e4] {
            for &e in &[-1.0f64, -0.5, 0.5, 1.0, 1.5, 2.0] {
                let exact = libm::pow(base, e);
                if !(1e-6..=1e6).contains(&exact) {
                    continue;
                }
                let fast = Real::powf(base as f32, e as f32) as f64;
                assert!(
                    (fast - exact).abs() / exact <= FAST_MATH_RELATIVE_BOUND,
                    "pow({base},{e})"
                );
            }
        }
    }

    #[test]
    fn bit_comparisons_agree_with_float_comparisons() {
        let values = [
            0.0f32,
            -0.0,
            1e-45,
            1e-38,
            0.5,
            1.0,
            3.0,
            1e6,
            1e30,
            f32::MAX,
            f32::INFINITY,
            -1.0,
            -f32::INFINITY,
            f32::NAN,
            -f32::NAN,
        ];
        for &v in &values {
            assert_eq!(Real::is_positive_finite(v), v.is_finite() && v > 0.0, "{v}");
            let w = v as f64;
            assert_eq!(Real::is_positive_finite(w), w.is_finite() && w > 0.0, "{w}");
        }
    }
}
