//! Average run length of the two-sided tabular CUSUM on standard normal scores, and the
//! decision interval h that gives a chosen in-control run length (the false-alarm budget).
//!
//! Method (published):
//! - One-sided CUSUM `C = max(0, C + z − k)`, signal when `C > h`: the Markov-chain
//!   approximation of Brook & Evans (1972, Biometrika 59(3), 539–549). The interval
//!   `[0, h]` is cut into `m` states of width `w = 2h/(2m − 1)`; state 0 is the atom at
//!   zero, state `i` has midpoint `i·w`; the transition probabilities come from the normal
//!   distribution function, and the run lengths from the start states solve
//!   `(I − R) L = 1`. The approximation converges as `1/m²`; the value returned is the
//!   Richardson extrapolation of `m = 100` and `m = 200`, `L₂₀₀ + (L₂₀₀ − L₁₀₀)/3`
//!   (measured against `m = 800`: within 0.05 % for h ≤ 30).
//! - Two-sided: the upper and lower sums combined as `1/L = 1/L⁺ + 1/L⁻` (Kemp 1971;
//!   Lucas & Crosier 1982, Technometrics 24(3), 199–205, whose two-sided table gives for
//!   k = 0.5 an in-control run length of 168 at h = 4 and 465 at h = 5; the conformance
//!   test reproduces both).
//! - h for a run length N: the in-control two-sided run length grows monotonically with h;
//!   `ln L(h) − ln N` is nearly linear in h, so the Illinois variant of regula falsi on a
//!   bracket converges in a few solves.
//!
//! # Contract
//! - Inputs are checked: k ≥ 0 and h > 0 finite, N > 1; out-of-range inputs are an
//!   [`SizingError`], never a panic.

use nalgebra::{DMatrix, DVector};
use statrs::distribution::{ContinuousCDF, Normal};

/// Why no decision interval was found.
#[derive(Clone, Copy, Debug, PartialEq, thiserror::Error)]
pub enum SizingError {
    /// k or N is outside what the method supports.
    #[error("reference value must be finite and non-negative, run length above 1")]
    Input,
    /// The run length is below what the smallest decision interval gives.
    #[error("a run length of {wanted} checks is below the {shortest:.2} checks of the smallest decision interval")]
    TooShort {
        /// The run length asked for.
        wanted: f64,
        /// The run length at h = [`H_MIN`].
        shortest: f64,
    },
    /// The run length needs a decision interval beyond [`H_MAX`].
    #[error("a run length of {wanted} checks needs a decision interval above {H_MAX} at this reference value")]
    TooLong {
        /// The run length asked for.
        wanted: f64,
    },
}

/// Smallest decision interval the sizing considers.
pub const H_MIN: f64 = 0.01;
/// Largest decision interval the sizing considers.
pub const H_MAX: f64 = 60.0;

fn phi(x: f64) -> f64 {
    // Normal::new(0, 1) cannot fail.
    Normal::new(0.0, 1.0).map(|n| n.cdf(x)).unwrap_or(f64::NAN)
}

/// Brook & Evans's run length from zero with `m` states, for the upper sum with reference
/// value `k` when the scores have mean `shift` (σ = 1).
fn markov_chain(k: f64, h: f64, shift: f64, m: usize) -> f64 {
    let w = 2.0 * h / (2 * m - 1) as f64;
    let mut transient = DMatrix::<f64>::identity(m, m);
    for i in 0..m {
        let from = i as f64 * w;
        // From state i, the next value is from + z − k, z ~ N(shift, 1).
        let cdf = |to: f64| phi(to - from + k - shift);
        transient[(i, 0)] -= cdf(0.5 * w);
        for j in 1..m {
            let j = j as f64;
            transient[(i, j as usize)] -= cdf((j + 0.5) * w) - cdf((j - 0.5) * w);
        }
    }
    let ones = DVector::<f64>::from_element(m, 1.0);
    transient
        .lu()
        .solve(&ones)
        .map(|lengths| lengths[0])
        .unwrap_or(f64::NAN)
}

/// In-control or shifted run length of the one-sided upper CUSUM (Brook & Evans, Richardson
/// extrapolated; module docs). `NaN` for invalid inputs.
pub fn one_sided(k: f64, h: f64, shift: f64) -> f64 {
    if !(k.is_finite() && k >= 0.0 && h.is_finite() && h > 0.0 && shift.is_finite()) {
        return f64::NAN;
    }
    let coarse = markov_chain(k, h, shift, 100);
    let fine = markov_chain(k, h, shift, 200);
    fine + (fine - coarse) / 3.0
}

/// Run length of the two-sided CUSUM when the scores have mean `shift` (0: in control):
/// `1/L = 1/L⁺ + 1/L⁻`.
pub fn two_sided(k: f64, h: f64, shift: f64) -> f64 {
    let upper = one_sided(k, h, shift);
    let lower = if shift == 0.0 {
        upper
    } else {
        one_sided(k, h, -shift)
    };
    1.0 / (1.0 / upper + 1.0 / lower)
}

/// The decision interval h at which the two-sided CUSUM with reference value `k` has the
/// in-control run length `run_length` (checks), to within 1e-6 in h.
pub fn decision_interval(k: f64, run_length: f64) -> Result<f64, SizingError> {
    if !(k.is_finite() && k >= 0.0 && run_length.is_finite() && run_length > 1.0) {
        return Err(SizingError::Input);
    }
    let target = run_length.ln();
    let gap = |h: f64| two_sided(k, h, 0.0).ln() - target;
    let (mut low, mut high) = (H_MIN, 2.0);
    let mut f_low = gap(low);
    if f_low > 0.0 {
        return Err(SizingError::TooShort {
            wanted: run_length,
            shortest: two_sided(k, H_MIN, 0.0),
        });
    }
    let mut f_high = gap(high);
    while f_high < 0.0 {
        if high >= H_MAX {
            return Err(SizingError::TooLong { wanted: run_length });
        }
        (low, f_low) = (high, f_high);
        high = (high * 2.0).min(H_MAX);
        f_high = gap(high);
    }
    // Illinois regula falsi: the retained end's value is halved when the same end stays.
    let mut side = 0i8;
    for _ in 0..100 {
        let h = (low * f_high - high * f_low) / (f_high - f_low);
        let f = gap(h);
        if f == 0.0 || (high - low) < 1e-9 {
            return Ok(h);
        }
        if f < 0.0 {
            (low, f_low) = (h, f);
            if side == -1 {
                f_high /= 2.0;
            }
            side = -1;
        } else {
            (high, f_high) = (h, f);
            if side == 1 {
                f_low /= 2.0;
            }
            side = 1;
        }
        if (high - low) < 1e-6 {
            break;
        }
    }
    Ok((low * f_high - high * f_low) / (f_high - f_low))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markov_chain_converges_and_richardson_lands_between() {
        // Computed here with m = 800 (no outside source): 930.878 one-sided at k = 0.5,
        // h = 5; the extrapolation of 100 and 200 states is within 0.01 % of it.
        let extrapolated = one_sided(0.5, 5.0, 0.0);
        let fine = markov_chain(0.5, 5.0, 0.0, 800);
        assert!(
            (extrapolated / fine - 1.0).abs() < 1e-4,
            "{extrapolated} {fine}"
        );
    }

    #[test]
    fn a_shift_shortens_the_run_and_sides_are_symmetric() {
        let in_control = two_sided(0.5, 5.0, 0.0);
        let shifted = two_sided(0.5, 5.0, 1.0);
        assert!(shifted < in_control / 20.0, "{shifted} {in_control}");
        assert!((two_sided(0.5, 5.0, -1.0) - shifted).abs() < 1e-9 * shifted);
    }

    #[test]
    fn sizing_inverts_the_run_length() {
        for (k, n) in [(0.5, 465.0), (0.5, 10_000.0), (0.25, 2_000.0), (1.0, 50.0)] {
            let h = decision_interval(k, n).unwrap();
            let back = two_sided(k, h, 0.0);
            assert!(
                (back / n - 1.0).abs() < 1e-5,
                "k {k} n {n}: h {h} gives {back}"
            );
        }
    }

    #[test]
    fn sizing_refuses_what_it_cannot_reach() {
        assert_eq!(decision_interval(-1.0, 100.0), Err(SizingError::Input));
        assert_eq!(decision_interval(0.5, 1.0), Err(SizingError::Input));
        assert!(matches!(
            decision_interval(0.5, 1.2),
            Err(SizingError::TooShort { .. })
        ));
        assert!(matches!(
            decision_interval(0.0, 1e12),
            Err(SizingError::TooLong { .. })
        ));
        assert!(one_sided(0.5, f64::NAN, 0.0).is_nan());
    }
}
