//! Two-sided tabular CUSUM on standardized residuals.
//!
//! With `z` a residual standardized by the spread model at its own level (so `z ~ N(0, 1)`
//! when the calibration is right, whatever the level), the upper and lower sums are
//! `C⁺ = max(0, C⁺ + z − k)` and `C⁻ = max(0, C⁻ − z − k)`, with reference value `k` and
//! decision interval `h` in sigma units (Montgomery, Introduction to Statistical Quality
//! Control, tabular CUSUM; from memory: no edition could be reached here). A sum above `h`
//! is a signal; the estimated shift is `k + C⁺/N⁺` (or `−k − C⁻/N⁻`), `N` the number of
//! consecutive checks the sum has been positive, and both sums restart from zero after a
//! signal.
//!
//! Defaults k = 0.5, h = 5: in-control average run length 465 checks, 10.4 checks for a
//! 1σ shift (Montgomery's table for the two-sided tabular CUSUM, from memory, no edition
//! could be reached here; reproduced by simulation in the conformance tests).
//!
//! # Invariants
//! - Both sums are finite and non-negative; a non-finite input is ignored.

use serde::{Deserialize, Serialize};

use crate::event::Direction;
use crate::real::{non_negative_setting, positive_setting, Real};

/// Settings of a [`TabularCusum`], in sigma units.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct CusumConfig<R> {
    /// Reference value k (half the shift to detect fastest; default 0.5).
    pub reference_value: R,
    /// Decision interval h (default 5).
    pub decision_interval: R,
}

impl<R: Real> CusumConfig<R> {
    /// k = 0.5, h = 5.
    pub fn standard() -> Self {
        CusumConfig {
            reference_value: R::HALF,
            decision_interval: R::from_f64(5.0),
        }
    }

    /// True when k ≥ 0 and h > 0, both finite.
    pub fn is_valid(&self) -> bool {
        non_negative_setting(self.reference_value) && positive_setting(self.decision_interval)
    }
}

/// A CUSUM signal.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct CusumSignal<R> {
    /// Which sum crossed: `Up` when the residuals are positive (the sensor reads high).
    pub direction: Direction,
    /// Estimated size of the shift, in sigma units (positive).
    pub size: R,
    /// Consecutive checks the crossing sum had been positive.
    pub run: u32,
}

/// The state of a two-sided tabular CUSUM.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(bound = "R: Real")]
pub struct TabularCusum<R> {
    upper: R,
    lower: R,
    upper_run: u32,
    lower_run: u32,
}

impl<R: Real> TabularCusum<R> {
    /// Both sums at zero.
    pub fn new() -> Self {
        TabularCusum {
            upper: R::ZERO,
            lower: R::ZERO,
            upper_run: 0,
            lower_run: 0,
        }
    }

    /// Restarts both sums from zero.
    pub fn reset(&mut self) {
        *self = Self::new();
    }

    /// The upper and lower sums.
    pub fn sums(&self) -> (R, R) {
        (self.upper, self.lower)
    }

    /// One standardized residual. Returns a signal (and restarts) when a sum exceeds `h`.
    #[inline]
    pub fn update(&mut self, config: &CusumConfig<R>, z: R) -> Option<CusumSignal<R>> {
        if !z.is_finite() {
            return None;
        }
        let k = config.reference_value;
        let upper = self.upper + z - k;
        if upper > R::ZERO {
            self.upper = upper;
            self.upper_run = self.upper_run.saturating_add(1);
        } else {
            self.upper = R::ZERO;
            self.upper_run = 0;
        }
        let lower = self.lower - z - k;
        if lower > R::ZERO {
            self.lower = lower;
            self.lower_run = self.lower_run.saturating_add(1);
        } else {
            self.lower = R::ZERO;
            self.lower_run = 0;
        }
        let h = config.decision_interval;
        let signal = if self.upper > h && self.upper - h >= self.lower - h {
            let run = self.upper_run.max(1);
            Some(CusumSignal {
                direction: Direction::Up,
                size: k + self.upper / R::from_u32(run),
                run,
            })
        } else if self.lower > h {
            let run = self.lower_run.max(1);
            Some(CusumSignal {
                direction: Direction::Down,
                size: k + self.lower / R::from_u32(run),
                run,
            })
        } else {
            None
        };
        if signal.is_some() {
            self.reset();
        }
        signal
    }
}

// The snapshot and device-log codec of this module's types (bytes: see `crate::wire`).
crate::wire::walk_struct!(impl[R: Real] TabularCusum<R> { upper, lower, upper_run, lower_run });
crate::wire::walk_struct!(impl[R: Real] CusumConfig<R> { reference_value, decision_interval });

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn montgomery_worked_pattern() {
        // A constant shift of +1σ: C⁺ grows by 0.5 per check, so it first exceeds h = 5 at
        // the 11th check (5.5 > 5), and the estimated shift is k + C⁺/N = 0.5 + 5.5/11 = 1.
        let config = CusumConfig::<f64>::standard();
        let mut cusum = TabularCusum::new();
        for _ in 0..10 {
            assert_eq!(cusum.update(&config, 1.0), None);
        }
        let signal = cusum.update(&config, 1.0).unwrap();
        assert_eq!(signal.direction, Direction::Up);
        assert_eq!(signal.run, 11);
        assert!((signal.size - 1.0).abs() < 1e-12);
        assert_eq!(cusum.sums(), (0.0, 0.0));
    }

    #[test]
    fn downward_shift_and_non_finite_input() {
        let config = CusumConfig::<f32>::standard();
        let mut cusum = TabularCusum::new();
        assert_eq!(cusum.update(&config, f32::NAN), None);
        assert_eq!(cusum.update(&config, f32::INFINITY), None);
        let signal = cusum.update(&config, -6.0).unwrap();
        assert_eq!(signal.direction, Direction::Down);
        assert!((signal.size - 6.0).abs() < 1e-6);
        let no_interval = CusumConfig::<f32> {
            reference_value: 0.5,
            decision_interval: 0.0,
        };
        assert!(!no_interval.is_valid());
    }
}
