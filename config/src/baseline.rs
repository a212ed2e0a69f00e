//! `[baseline]`: the commissioned calibration the drift test compares with (written by
//! `steadycal assess --commission`). With it, the monitor starts from this baseline instead
//! of freezing one from its own first checks.
//!
//! The parameters are physical (`raw = offset + gain·ref [+ quadratic·ref²]
//! [+ temperature·(T − T₀)]`), one key per term of the basis in use, no more and no fewer.
//! `covariance` is their covariance matrix, rows and columns in that order (offset, gain,
//! then the further terms in use); absent, the baseline is taken as exact. `residual_sd`
//! is the residual scale of the commissioning fit under its rung: the standard deviation of
//! a raw value at the level `√(range.low · range.high)` above the origin (the spread model
//! scales it to other levels); the summary reports it beside the field fit's.

use nalgebra::{DMatrix, SymmetricEigen};
use serde::{Deserialize, Serialize};
use steadycal_core::basis::Basis;

use crate::error::Problem;
use crate::values::{Finite, NonNegative};

/// `[baseline]`.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct BaselineSection {
    /// Offset, raw units.
    pub offset: Option<Finite>,
    /// Gain, raw units per reference unit.
    pub gain: Option<Finite>,
    /// Quadratic term, raw units per reference unit squared (with `basis.quadratic`).
    pub quadratic: Option<Finite>,
    /// Temperature term, raw units per °C (with `basis.temperature`).
    pub temperature: Option<Finite>,
    /// Covariance of the parameters in use, rows and columns in the order offset, gain,
    /// quadratic, temperature (terms in use only).
    pub covariance: Option<Vec<Vec<f64>>>,
    /// Residual scale of the commissioning fit, raw units at the level scale.
    pub residual_sd: Option<NonNegative>,
    /// Where the baseline comes from (the lab run, free text).
    pub source: Option<String>,
}

/// A checked commissioned baseline, in the core's physical layout.
#[derive(Clone, Debug, PartialEq)]
pub struct Commissioned {
    /// Physical `[offset, gain, quadratic, temperature]` (terms not in use are 0).
    pub parameters: [f64; 4],
    /// Their covariance in the same layout; `None`: taken as exact.
    pub covariance: Option<[[f64; 4]; 4]>,
    /// Residual scale, raw units at the level scale.
    pub residual_sd: Option<f64>,
    /// Where it comes from.
    pub source: Option<String>,
}

/// Physical slots (0 offset, 1 gain, 2 quadratic, 3 temperature) of the terms in use.
fn slots(basis: &Basis<f64>) -> Vec<usize> {
    let mut slots = vec![0, 1];
    if basis.quadratic {
        slots.push(2);
    }
    if basis.temperature {
        slots.push(3);
    }
    slots
}

impl BaselineSection {
    /// The checked baseline for `basis`.
    pub(crate) fn resolve(&self, basis: &Basis<f64>) -> Result<Commissioned, Problem> {
        let required = |value: Option<Finite>, key: &str| {
            value.map(|v| v.0).ok_or_else(|| {
                Problem::new(
                    format!("baseline.{key}"),
                    "missing: a baseline needs the offset and the gain",
                )
            })
        };
        let mut parameters = [0.0; 4];
        parameters[0] = required(self.offset, "offset")?;
        parameters[1] = required(self.gain, "gain")?;
        for (key, value, used, slot) in [
            ("quadratic", self.quadratic, basis.quadratic, 2),
            ("temperature", self.temperature, basis.temperature, 3),
        ] {
            match (value, used) {
                (Some(v), true) => parameters[slot] = v.0,
                (None, true) => {
                    return Err(Problem::new(
                        format!("baseline.{key}"),
                        format!("missing: `basis.{key}` is on, so the baseline needs this term"),
                    ))
                }
                (Some(_), false) => {
                    return Err(Problem::new(
                        format!("baseline.{key}"),
                        format!("`basis.{key}` is off, so the baseline has no such term"),
                    ))
                }
                (None, false) => {}
            }
        }
        let covariance = match &self.covariance {
            Some(rows) => Some(covariance(rows, &slots(basis))?),
            None => None,
        };
        Ok(Commissioned {
            parameters,
            covariance,
            residual_sd: self.residual_sd.map(|v| v.0),
            source: self.source.clone(),
        })
    }

    /// The section of a commissioned baseline for `basis`.
    pub fn of(baseline: &Commissioned, basis: &Basis<f64>) -> Self {
        let used = slots(basis);
        let p = baseline.parameters;
        BaselineSection {
            offset: Some(Finite(p[0])),
            gain: Some(Finite(p[1])),
            quadratic: basis.quadratic.then_some(Finite(p[2])),
            temperature: basis.temperature.then_some(Finite(p[3])),
            covariance: baseline.covariance.map(|c| {
                used.iter()
                    .map(|&i| used.iter().map(|&j| c[i][j]).collect())
                    .collect()
            }),
            residual_sd: baseline.residual_sd.map(NonNegative),
            source: baseline.source.clone(),
        }
    }
}

/// A checked covariance: square of the basis's size, finite, symmetric, positive
/// semi-definite; placed into the physical 4 × 4 layout.
fn covariance(rows: &[Vec<f64>], used: &[usize]) -> Result<[[f64; 4]; 4], Problem> {
    let n = used.len();
    let problem = |message: String| Problem::new("baseline.covariance", message);
    if rows.len() != n || rows.iter().any(|row| row.len() != n) {
        return Err(problem(format!(
            "expected a {n} × {n} matrix (one row and column per parameter in use)"
        )));
    }
    if rows.iter().flatten().any(|v| !v.is_finite()) {
        return Err(problem("every entry must be a finite number".into()));
    }
    let matrix = DMatrix::from_fn(n, n, |i, j| rows[i][j]);
    let scale = matrix.amax();
    for i in 0..n {
        for j in 0..i {
            if (matrix[(i, j)] - matrix[(j, i)]).abs() > 1e-9 * scale {
                return Err(problem(format!(
                    "not symmetric: row {} column {} differs from row {} column {}",
                    i + 1,
                    j + 1,
                    j + 1,
                    i + 1
                )));
            }
        }
    }
    let lowest = SymmetricEigen::new(matrix.clone()).eigenvalues.min();
    if lowest < -1e-9 * scale {
        return Err(problem(format!(
            "not positive semi-definite (smallest eigenvalue {lowest:e})"
        )));
    }
    let mut out = [[0.0; 4]; 4];
    for (i, &slot_i) in used.iter().enumerate() {
        for (j, &slot_j) in used.iter().enumerate() {
            out[slot_i][slot_j] = matrix[(i, j)];
        }
    }
    Ok(out)
}
