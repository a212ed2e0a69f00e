//! The calibration mean `raw = f(ref; θ)` as a design matrix: offset, gain, optional
//! quadratic term, optional temperature term `ΔT = temp − reference temperature`.
//!
//! Column order (and so the order of every parameter vector in the assessment): offset,
//! gain, quadratic (if chosen), temperature (if chosen).

use nalgebra::{DMatrix, DVector};
use serde::{Deserialize, Serialize};

/// Which powers of the reference the calibration mean holds.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum Basis {
    /// `a + b·ref`.
    #[default]
    Linear,
    /// `a + b·ref + c·ref²`.
    Quadratic,
}

impl Basis {
    /// The name used in options and reports.
    pub fn name(self) -> &'static str {
        match self {
            Basis::Linear => "linear",
            Basis::Quadratic => "quadratic",
        }
    }
}

/// How one reference value (and temperature offset) becomes a regressor row.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CalibrationModel {
    /// Powers of the reference.
    pub basis: Basis,
    /// The temperature the temperature term is centred on, when the model has one.
    pub reference_temperature: Option<f64>,
}

impl CalibrationModel {
    /// Number of parameters.
    pub fn parameter_count(&self) -> usize {
        let powers = match self.basis {
            Basis::Linear => 2,
            Basis::Quadratic => 3,
        };
        powers + usize::from(self.reference_temperature.is_some())
    }

    /// Names of the parameters, in column order.
    pub fn parameter_names(&self) -> Vec<&'static str> {
        let mut names = vec!["offset", "gain"];
        if self.basis == Basis::Quadratic {
            names.push("quadratic");
        }
        if self.reference_temperature.is_some() {
            names.push("temperature");
        }
        names
    }

    /// The regressor row for a reference value and temperature offset `delta_t`.
    pub fn row(&self, reference: f64, delta_t: f64) -> Vec<f64> {
        let mut row = vec![1.0, reference];
        if self.basis == Basis::Quadratic {
            row.push(reference * reference);
        }
        if self.reference_temperature.is_some() {
            row.push(delta_t);
        }
        row
    }

    /// The design matrix of a run (temperatures required when the model has a temperature
    /// term; otherwise ignored).
    pub fn design(&self, reference: &[f64], temperature: Option<&[f64]>) -> DMatrix<f64> {
        let columns = self.parameter_count();
        let mut design = DMatrix::zeros(reference.len(), columns);
        for (i, &x) in reference.iter().enumerate() {
            let delta_t = match (self.reference_temperature, temperature) {
                (Some(t0), Some(t)) => t[i] - t0,
                _ => 0.0,
            };
            for (j, value) in self.row(x, delta_t).into_iter().enumerate() {
                design[(i, j)] = value;
            }
        }
        design
    }

    /// The mean `f(ref; θ)` at `delta_t`.
    pub fn mean(&self, params: &[f64], reference: f64, delta_t: f64) -> f64 {
        self.row(reference, delta_t)
            .iter()
            .zip(params)
            .map(|(x, p)| x * p)
            .sum()
    }

    /// The slope `∂f/∂ref` at a reference value.
    pub fn slope(&self, params: &[f64], reference: f64) -> f64 {
        match self.basis {
            Basis::Linear => params[1],
            Basis::Quadratic => params[1] + 2.0 * params[2] * reference,
        }
    }
}

/// The design as an nalgebra vector row (for covariance products).
pub fn row_vector(row: &[f64]) -> DVector<f64> {
    DVector::from_column_slice(row)
}
