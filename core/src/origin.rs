//! Where levels are measured from: the sensor's baseline.
//!
//! The variance model and the power rungs work on the *level*, the signal above the
//! sensor's baseline: `level = raw − origin`. Many sensors do not read zero at zero
//! reference (an electrochemical cell reads a few counts below or above zero, an optical
//! cell has a dark signal), and a scatter proportional to the signal above that baseline
//! looks like no power of `raw` at all when the level is measured from zero.
//!
//! The rule:
//! - a configured origin (`MonitorConfig::find_baseline == false`, which is what the
//!   configuration file's `range.origin` gives) is used as it is, from the first check;
//! - otherwise the levels are measured from the configured origin (zero by default) during
//!   the warm-up, and from the end of the warm-up on from the **baseline**: the fitted raw
//!   output at zero reference (the temperature at its reference value), taken once, when
//!   the warm-up ends, and kept from then on (frozen, so the rungs' likelihoods compare the
//!   same levels over the whole run). The estimate is the `log` rung's (weights ∝
//!   level⁻², the middle of the ladder), with its standard error `√(σ²·x₀ᵀPx₀)`; it is
//!   taken only when it differs from the configured origin by more than [`BASELINE_Z`]
//!   standard errors: a sensor whose baseline cannot be told from the configured origin
//!   keeps it (a baseline known to ±20 % of the bottom of the range would do more harm
//!   than the origin). The steeper rungs' estimates look more precise but are not: under
//!   a scatter less steep than they assume, their standard errors are several times too
//!   small (measured in `tests/tests/sensor_shapes.rs`: with references spread evenly
//!   from zero, the most precise rung's estimate was off by up to 0.84 against 0.40 for
//!   the `log` rung's, and moved a true origin of zero by up to 0.45).
//! - The same estimate is taken once before, half-way through the warm-up, as a
//!   provisional origin: the power rungs then weight the second half of the warm-up by the
//!   levels above it, which makes their estimates at the end of the warm-up several times
//!   more precise when the baseline is far from the configured origin (levels near the
//!   bottom of the range were weighted as if they were near the configured origin). The
//!   likelihood comparison has not started then, so nothing measured on the old levels
//!   is kept.
//!
//! Values between the baseline and the configured origin are ordinary data: they are above
//! the sensor's baseline, so every rung uses them.
//!
//! # Invariants
//! - The origin is always finite: a baseline that is not finite is not taken (the origin
//!   stays where it was; the monitor tries again on the next check of the warm-up, and
//!   after the warm-up keeps the origin it has).
//! - Once settled, the origin never changes.
//! - Nothing here panics, for any value.

use serde::{Deserialize, Serialize};

use crate::real::Real;

/// Standard errors by which the fitted baseline must differ from the configured origin to
/// replace it: 3.29, the two-sided 0.1 % point of the standard normal distribution
/// (SciPy 1.11.4 `stats.norm.isf(0.0005)` = 3.2905).
pub const BASELINE_Z: f64 = 3.29;

/// A fitted raw output at zero reference and its standard error.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct BaselineEstimate<R> {
    /// The fitted raw output at zero reference.
    pub value: R,
    /// Its standard error.
    pub standard_error: R,
}

/// The origin levels are measured from, and whether it is settled.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct LevelOrigin<R> {
    /// The origin in raw units (finite).
    value: R,
    /// 0: the configured origin, not final; 1: the provisional baseline (half-way through
    /// the warm-up); 2: final (configured, or the baseline found at the end of the
    /// warm-up).
    stage: u8,
}

/// The stage of a final origin.
const SETTLED: u8 = 2;

impl<R: Real> LevelOrigin<R> {
    /// Levels from `origin` (finite: validated by the configuration); `find_baseline`: the
    /// baseline replaces it at the end of the warm-up.
    pub fn new(origin: R, find_baseline: bool) -> Self {
        LevelOrigin {
            value: origin,
            stage: if find_baseline { 0 } else { SETTLED },
        }
    }

    /// The origin in raw units.
    pub fn value(&self) -> R {
        self.value
    }

    /// True once the origin is final (configured, or the baseline found).
    pub fn settled(&self) -> bool {
        self.stage >= SETTLED
    }

    /// True when, `checks` checks into a warm-up of `warm_up`, an estimate is due: the
    /// provisional one half-way through, the final one at the end.
    pub fn due(&self, checks: u32, warm_up: u32) -> bool {
        match self.stage {
            0 => checks >= warm_up / 2,
            1 => checks >= warm_up,
            _ => false,
        }
    }

    /// Takes `baseline` (the fitted raw output at zero reference) as the origin, unless the
    /// origin is already settled or the value is not finite. Returns true when it was
    /// taken.
    pub fn settle(&mut self, baseline: R) -> bool {
        if self.settled() || !baseline.is_finite() {
            return false;
        }
        self.value = baseline;
        self.stage = SETTLED;
        true
    }

    /// Takes the next stage from an estimate of the baseline: the estimate when it differs
    /// from `configured` (the configured origin) by more than [`BASELINE_Z`] standard
    /// errors, `configured` otherwise; provisional at the first call, final at the
    /// second (or at the first when `final_stage`). An estimate that is not finite changes
    /// nothing. Returns true when the origin changed.
    pub fn take_estimate(
        &mut self,
        estimate: BaselineEstimate<R>,
        configured: R,
        final_stage: bool,
    ) -> bool {
        let BaselineEstimate {
            value,
            standard_error,
        } = estimate;
        if self.settled() || !(value.is_finite() && standard_error.is_finite()) {
            return false;
        }
        let distinct = (value - configured).abs() > R::from_f64(BASELINE_Z) * standard_error;
        let next = if distinct { value } else { configured };
        let changed = next != self.value;
        self.value = next;
        self.stage = if final_stage { SETTLED } else { self.stage + 1 };
        changed
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] LevelOrigin<R> { value, stage });

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_configured_origin_is_final() {
        let mut origin = LevelOrigin::new(-5.0f32, false);
        assert!(origin.settled());
        assert!(!origin.settle(3.0));
        assert_eq!(origin.value(), -5.0);
    }

    #[test]
    fn the_baseline_is_taken_once_and_only_when_finite() {
        let mut origin = LevelOrigin::new(0.0f64, true);
        assert!(!origin.settled());
        for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            assert!(!origin.settle(bad));
            assert_eq!(origin.value(), 0.0);
        }
        assert!(origin.settle(-4.5));
        assert!(!origin.settle(7.0));
        assert_eq!(origin.value(), -4.5);
        assert!(origin.settled());
    }

    #[test]
    fn an_estimate_moves_the_origin_only_when_it_is_distinct() {
        let estimate = |value, standard_error| BaselineEstimate {
            value,
            standard_error,
        };
        let mut origin = LevelOrigin::new(0.0f64, true);
        assert!(!origin.due(99, 200));
        assert!(origin.due(100, 200));
        assert!(!origin.take_estimate(estimate(0.3, 0.1), 0.0, true));
        assert!(origin.settled());
        assert_eq!(origin.value(), 0.0);
        assert!(!origin.due(1000, 200));
        let mut origin = LevelOrigin::new(0.0f64, true);
        assert!(!origin.take_estimate(estimate(f64::NAN, 0.1), 0.0, false));
        assert!(!origin.settled());
        // Provisional, then final; the final estimate is judged against the configured
        // origin, not the provisional one.
        assert!(origin.take_estimate(estimate(-5.0, 0.1), 0.0, false));
        assert_eq!(origin.value(), -5.0);
        assert!(!origin.settled());
        assert!(!origin.due(199, 200));
        assert!(origin.due(200, 200));
        assert!(origin.take_estimate(estimate(-0.2, 0.1), 0.0, false));
        assert!(origin.settled());
        assert_eq!(origin.value(), 0.0);
    }
}
