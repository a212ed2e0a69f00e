//! The Box–Cox family of variance-stabilizing transforms and the five rungs of the ladder.
//!
//! For a level `y` above the configured origin `o`, write `u = (y − o) / scale`. Rung λ uses
//! `g_λ(u) = (u^λ − 1) / λ`, with `g_0(u) = ln u`. The rungs are
//! 1 (`identity`), 1/2 (`sqrt`), 0 (`log`), −1/2 (`inv_sqrt`) and −1 (`inverse`).
//! If the scatter of a sensor grows as SD ∝ level^k, the rung λ = 1 − k makes it constant.
//!
//! Every rung is evaluated with square roots, reciprocals and one logarithm at most: no
//! `powf` on the hot path, which keeps the monitor fast on a Cortex-M and exact enough in
//! `f32`.
//!
//! # Invariants
//! - [`Rung::apply`] returns `None` for a value at or below the origin on every rung except
//!   `identity`, and for non-finite values; it never returns a NaN.
//! - `inverse(apply(u)) == u` up to rounding for every `u > 0` (property-tested).
//! - [`Rung::derivative`] is `u^(λ−1)` and [`Rung::weight`] is its square `u^(2λ−2)`, the
//!   weight of the transform-both-sides fit of that rung, computed directly from `u` with
//!   reciprocals and products (no square root).

use serde::{Deserialize, Serialize};

use crate::real::Real;

/// One rung of the power ladder (a Box–Cox λ).
///
/// ```
/// use steadycal_core::transform::Rung;
/// assert_eq!(Rung::Log.name(), "log");
/// assert_eq!(Rung::from_name("inv_sqrt"), Some(Rung::InvSqrt));
/// assert_eq!(Rung::Sqrt.lambda::<f64>(), 0.5);
/// ```
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
pub enum Rung {
    /// λ = 1: no transform (constant scatter).
    Identity,
    /// λ = 1/2: square root (counting noise, SD ∝ √level).
    Sqrt,
    /// λ = 0: logarithm (proportional error, SD ∝ level).
    Log,
    /// λ = −1/2: reciprocal square root (SD ∝ level^1.5).
    InvSqrt,
    /// λ = −1: reciprocal (SD ∝ level²).
    Inverse,
}

/// Number of rungs on the ladder.
pub const RUNG_COUNT: usize = 5;

impl Rung {
    /// All rungs, from λ = 1 down to λ = −1; the position is [`Rung::index`].
    pub const ALL: [Rung; RUNG_COUNT] = [
        Rung::Identity,
        Rung::Sqrt,
        Rung::Log,
        Rung::InvSqrt,
        Rung::Inverse,
    ];

    /// Position of the rung in [`Rung::ALL`].
    pub const fn index(self) -> usize {
        match self {
            Rung::Identity => 0,
            Rung::Sqrt => 1,
            Rung::Log => 2,
            Rung::InvSqrt => 3,
            Rung::Inverse => 4,
        }
    }

    /// The rung at a position of [`Rung::ALL`], if any.
    pub const fn from_index(index: usize) -> Option<Rung> {
        if index < RUNG_COUNT {
            Some(Rung::ALL[index])
        } else {
            None
        }
    }

    /// The rung's name as written in configs, events and reports.
    pub const fn name(self) -> &'static str {
        match self {
            Rung::Identity => "identity",
            Rung::Sqrt => "sqrt",
            Rung::Log => "log",
            Rung::InvSqrt => "inv_sqrt",
            Rung::Inverse => "inverse",
        }
    }

    /// Parses a rung name written by [`Rung::name`].
    pub fn from_name(name: &str) -> Option<Rung> {
        Rung::ALL.iter().copied().find(|rung| rung.name() == name)
    }

    /// The Box–Cox exponent λ.
    pub fn lambda<R: Real>(self) -> R {
        R::from_f64(self.lambda_f64())
    }

    /// The Box–Cox exponent λ as `f64`.
    pub const fn lambda_f64(self) -> f64 {
        match self {
            Rung::Identity => 1.0,
            Rung::Sqrt => 0.5,
            Rung::Log => 0.0,
            Rung::InvSqrt => -0.5,
            Rung::Inverse => -1.0,
        }
    }

    /// The rung whose λ is nearest to `lambda` (ties go to the larger λ).
    pub fn nearest(lambda: f64) -> Rung {
        let mut best = Rung::Identity;
        let mut best_distance = f64::INFINITY;
        for rung in Rung::ALL {
            let distance = (rung.lambda_f64() - lambda).abs();
            if distance < best_distance {
                best = rung;
                best_distance = distance;
            }
        }
        best
    }

    /// True for every rung that needs values above the origin (all but `identity`).
    pub const fn needs_positive(self) -> bool {
        !matches!(self, Rung::Identity)
    }

    /// `g_λ(u)` for a scaled level `u = (y − o)/scale`. `None` when `u` is not finite, or
    /// when `u ≤ 0` on a rung that needs positive values.
    #[inline]
    pub fn apply<R: Real>(self, u: R) -> Option<R> {
        if !u.is_finite() || (self.needs_positive() && u <= R::ZERO) {
            return None;
        }
        let two = R::TWO;
        let value = match self {
            Rung::Identity => u - R::ONE,
            Rung::Sqrt => two * (u.sqrt() - R::ONE),
            Rung::Log => u.ln(),
            Rung::InvSqrt => two * (R::ONE - R::ONE / u.sqrt()),
            Rung::Inverse => R::ONE - R::ONE / u,
        };
        if value.is_finite() {
            Some(value)
        } else {
            None
        }
    }

    /// `g_λ(u)` on every rung at once, with one square root and one logarithm; `None` when
    /// `u` is not finite and positive. Also returns `ln u`.
    #[inline]
    pub fn apply_every<R: Real>(u: R) -> Option<([R; RUNG_COUNT], R)> {
        if !u.is_positive_finite() {
            return None;
        }
        let root = u.sqrt();
        let ln_u = u.ln();
        let two = R::TWO;
        let values = [
            u - R::ONE,
            two * (root - R::ONE),
            ln_u,
            two * (R::ONE - R::ONE / root),
            R::ONE - R::ONE / u,
        ];
        // For a finite u > 0 only `1/u` can overflow (u below about 1/MAX, a subnormal):
        // `u − 1`, √u − 1 and ln u are finite, and √u ≥ √(smallest subnormal) keeps
        // `1/√u` finite in both widths (tested on the extreme values).
        if values[4].is_finite() {
            Some((values, ln_u))
        } else {
            None
        }
    }

    /// The inverse transform: the scaled level `u` with `g_λ(u) = z`. `None` when no
    /// positive level maps to `z` (for example `z ≥ 1` on `inverse`) or `z` is not finite.
    #[inline]
    pub fn invert<R: Real>(self, z: R) -> Option<R> {
        if !z.is_finite() {
            return None;
        }
        let two = R::TWO;
        let u = match self {
            Rung::Identity => z + R::ONE,
            Rung::Sqrt => {
                let root = R::ONE + z / two;
                if root < R::ZERO {
                    return None;
                }
                root * root
            }
            Rung::Log => z.exp(),
            Rung::InvSqrt => {
                let inverse_root = R::ONE - z / two;
                if inverse_root <= R::ZERO {
                    return None;
                }
                let root = R::ONE / inverse_root;
                root * root
            }
            Rung::Inverse => {
                let denominator = R::ONE - z;
                if denominator <= R::ZERO {
                    return None;
                }
                R::ONE / denominator
            }
        };
        if u.is_finite() {
            Some(u)
        } else {
            None
        }
    }

    /// `g_λ'(u) = u^(λ−1)`. Returns 0 for `u ≤ 0` on rungs that need positive values.
    #[inline]
    pub fn derivative<R: Real>(self, u: R) -> R {
        if self.needs_positive() && !(u > R::ZERO) {
            return R::ZERO;
        }
        match self {
            Rung::Identity => R::ONE,
            Rung::Sqrt => R::ONE / u.sqrt(),
            Rung::Log => R::ONE / u,
            Rung::InvSqrt => R::ONE / (u * u.sqrt()),
            Rung::Inverse => R::ONE / (u * u),
        }
    }

    /// Weight of the transform-both-sides fit at scaled level `u`: `g_λ'(u)² = u^(2λ−2)`.
    #[inline]
    pub fn weight<R: Real>(self, u: R) -> R {
        if self.needs_positive() && !(u > R::ZERO) {
            return R::ZERO;
        }
        // u^(2λ−2) directly: no square root on any rung.
        match self {
            Rung::Identity => R::ONE,
            Rung::Sqrt => R::ONE / u,
            Rung::Log => {
                let inverse = R::ONE / u;
                inverse * inverse
            }
            Rung::InvSqrt => R::ONE / (u * u * u),
            Rung::Inverse => {
                let inverse = R::ONE / (u * u);
                inverse * inverse
            }
        }
    }

    /// Relative variance of the transform-both-sides fit at scaled level `u`, the reciprocal
    /// of [`Rung::weight`]: `u^(2−2λ)` (1, `u`, `u²`, `u³`, `u⁴`), by multiplication only.
    /// For `u > 0` it is positive (or `+∞` past the range of the type); the caller keeps
    /// `u` above a positive floor.
    ///
    /// ```
    /// use steadycal_core::transform::Rung;
    /// assert_eq!(Rung::Log.relative_variance(3.0f64), 9.0);
    /// assert_eq!(Rung::Inverse.relative_variance(2.0f32), 16.0);
    /// ```
    #[inline(always)]
    pub fn relative_variance<R: Real>(self, u: R) -> R {
        match self {
            Rung::Identity => R::ONE,
            Rung::Sqrt => u,
            Rung::Log => u * u,
            Rung::InvSqrt => u * u * u,
            Rung::Inverse => {
                let square = u * u;
                square * square
            }
        }
    }

    /// Log-Jacobian `(λ − 1)·ln u` of the transform at `u`, given `ln u`.
    #[inline]
    pub fn log_jacobian<R: Real>(self, ln_u: R) -> R {
        (self.lambda::<R>() - R::ONE) * ln_u
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::wire_unit_enum!(Rung {
    Identity,
    Sqrt,
    Log,
    InvSqrt,
    Inverse
});

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    #[test]
    fn names_round_trip() {
        for rung in Rung::ALL {
            assert_eq!(Rung::from_name(rung.name()), Some(rung));
            assert_eq!(Rung::from_index(rung.index()), Some(rung));
        }
        assert_eq!(Rung::from_name("cube"), None);
    }

    #[test]
    fn matches_general_box_cox_formula() {
        // (u^λ − 1)/λ evaluated with libm's pow as the independent formula.
        for rung in Rung::ALL {
            let lambda = rung.lambda_f64();
            for &u in &[0.01, 0.5, 1.0, 2.0, 37.0, 1e4] {
                let general = if lambda == 0.0 {
                    libm::log(u)
                } else {
                    (libm::pow(u, lambda) - 1.0) / lambda
                };
                let special = rung.apply(u).unwrap();
                assert!((general - special).abs() <= 1e-12 * general.abs().max(1.0));
                let derivative = libm::pow(u, lambda - 1.0);
                assert!((rung.derivative(u) - derivative).abs() <= 1e-12 * derivative);
                let weight = libm::pow(u, 2.0 * lambda - 2.0);
                assert!((rung.weight(u) - weight).abs() <= 1e-12 * weight);
                let relative = rung.relative_variance(u);
                assert!((relative * weight - 1.0).abs() <= 1e-12, "{rung:?} {u}");
            }
        }
    }

    #[test]
    fn rejects_non_positive_and_non_finite() {
        for rung in Rung::ALL {
            assert_eq!(rung.apply(f32::NAN), None);
            assert_eq!(rung.apply(f32::INFINITY), None);
            if rung.needs_positive() {
                assert_eq!(rung.apply(0.0f32), None);
                assert_eq!(rung.apply(-1.0f32), None);
                assert_eq!(rung.derivative(-1.0f32), 0.0);
            }
        }
        assert_eq!(Rung::Inverse.invert(1.5f64), None);
        assert_eq!(Rung::Sqrt.invert(-3.0f64), None);
    }

    #[test]
    fn apply_every_matches_apply() {
        for &u in &[1e-3f64, 0.3, 1.0, 2.5, 1e3] {
            let (values, ln_u) = Rung::apply_every(u).unwrap();
            assert_eq!(ln_u, u.ln());
            for rung in Rung::ALL {
                assert_eq!(values[rung.index()], rung.apply(u).unwrap());
            }
        }
        assert!(Rung::apply_every(0.0f32).is_none());
        assert!(Rung::apply_every(f32::NAN).is_none());
        assert!(Rung::apply_every(f32::INFINITY).is_none());
        assert!(Rung::apply_every(-1.0f32).is_none());
    }

    /// `apply_every` checks only the `inverse` value for overflow: on the extreme positive
    /// values of both widths it agrees with applying each rung alone.
    #[test]
    fn apply_every_agrees_at_the_extremes() {
        fn check<R: Real + core::fmt::Debug>(values: &[R]) {
            for &u in values {
                let every = Rung::apply_every(u);
                let each: Option<[R; RUNG_COUNT]> = Rung::ALL
                    .map(|rung| rung.apply(u))
                    .into_iter()
                    .collect::<Option<std::vec::Vec<R>>>()
                    .map(|v| [v[0], v[1], v[2], v[3], v[4]]);
                assert_eq!(every.map(|(values, _)| values), each, "u = {u:?}");
            }
        }
        let tiny32 = f32::from_bits(1);
        check::<f32>(&[
            tiny32,
            1e-39,
            2.9e-39,
            3.0e-39,
            f32::MIN_POSITIVE,
            1e-30,
            f32::MAX,
            1e38,
        ]);
        let tiny64 = f64::from_bits(1);
        check::<f64>(&[
            tiny64,
            1e-310,
            5.6e-309,
            5.57e-309,
            f64::MIN_POSITIVE,
            f64::MAX,
        ]);
    }

    #[test]
    fn nearest_rung() {
        assert_eq!(Rung::nearest(0.93), Rung::Identity);
        assert_eq!(Rung::nearest(0.1), Rung::Log);
        assert_eq!(Rung::nearest(-0.6), Rung::InvSqrt);
        assert_eq!(Rung::nearest(-7.0), Rung::Inverse);
    }

    proptest! {
        #[test]
        fn inverse_round_trips_f64(u in 1e-4f64..1e4, index in 0usize..RUNG_COUNT) {
            let rung = Rung::ALL[index];
            let back = rung.invert(rung.apply(u).unwrap()).unwrap();
            prop_assert!((back - u).abs() <= 1e-9 * u);
        }

        #[test]
        fn inverse_round_trips_f32(u in 1e-3f32..1e3, index in 0usize..RUNG_COUNT) {
            let rung = Rung::ALL[index];
            let back = rung.invert(rung.apply(u).unwrap()).unwrap();
            prop_assert!((back - u).abs() <= 1e-3 * u);
        }

        #[test]
        fn never_nan(u in proptest::num::f64::ANY, index in 0usize..RUNG_COUNT) {
            let rung = Rung::ALL[index];
            if let Some(z) = rung.apply(u) { prop_assert!(z.is_finite()); }
            if let Some(v) = rung.invert(u) { prop_assert!(v.is_finite()); }
            prop_assert!(!rung.derivative(u).is_nan() || u.is_nan());
        }
    }
}
