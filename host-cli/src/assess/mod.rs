//! Batch assessment of a lab calibration run (several reference levels, replicates at each).
//!
//! [`assess`] takes the responses (`raw`), the references and optional temperatures, and
//! returns an [`Assessment`]: OLS and WLS fits with their covariance and lack-of-fit tests
//! ([`regression`]), tests of constant scatter ([`heteroscedasticity`]), the spread model
//! `SD ∝ level^k` ([`spread_model`]), the transform-both-sides Box–Cox analysis with the
//! recommended rung ([`boxcox`]), detection and quantification limits ([`limits`]) and an
//! inverse-prediction table ([`inverse`]). [`render_text`] prints it for the screen; the
//! `Assessment` serializes to the `--json` document.
//!
//! Contract: bad input (unequal lengths, non-finite values, too few observations, a rank
//! deficient design) is an [`AssessError`], never a panic. A part of the analysis that the
//! data cannot support (no replicates, a response at or below the level origin for Box–Cox)
//! is `null` in the document and explained in `notes`.
//!
//! The weighted fit follows [`AssessOptions::weights`] ([`weights`]): by default
//! `wᵢ = (f_OLS(refᵢ) − o)^(−2k)` from the spread model's `k` (inverse variance under
//! `SD ∝ level^k`); `ref^P` and `level^P` weights a lab chooses; known uncertainties of the
//! responses (ISO/TS 28037 weighted least squares, weights `1/u²`, covariance not rescaled,
//! χ² check) or of both variables ([`errors_in_both`]). The headline fit (`headline_fit`),
//! which the limits and the inverse table use, is the weighted fit when the weights were
//! chosen or known, or (auto) when weighting is advised (the recommended rung is a power rung
//! and the Box–Cox interval excludes λ = 1; without Box–Cox, Koenker's test at level α and
//! the rung nearest to `λ = 1 − k`); OLS otherwise.
//!
//! [`assess`] runs one step per part of the assessment, in [`steps`].

pub mod boxcox;
pub mod design;
pub mod distributions;
pub mod errors_in_both;
pub mod heteroscedasticity;
pub mod inverse;
pub mod limits;
pub mod regression;
pub mod render;
pub mod replicates;
pub mod run_file;
pub mod spread_model;
mod steps;
pub mod weights;

use serde::Serialize;

pub use design::{Basis, CalibrationModel};
pub use render::render_text;
pub use weights::{ReadingSpread, WeightRule};

use boxcox::BoxCoxAnalysis;
use heteroscedasticity::{BreuschPagan, EndsOfRange, GoldfeldQuandt};
use inverse::InverseTable;
use limits::Limits;
use regression::{LackOfFit, LeastSquaresFit, RegressionError};
use spread_model::SpreadModel;

/// The safety caution every rendering of an assessment ends with.
pub const CAUTION: &str = "steadycal supports, and does not replace, calibration under the \
applicable standards, local codes and licensed practice; an assessment made with it is not a \
certified calibration.";

/// A lab calibration run: responses against references, optional temperatures and known
/// standard uncertainties.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct CalibrationData {
    /// The sensor's responses (`raw`).
    pub raw: Vec<f64>,
    /// The reference values (`ref`).
    pub reference: Vec<f64>,
    /// Temperatures, one per row, if recorded.
    pub temperature: Option<Vec<f64>>,
    /// Known standard uncertainty of each response `u(raw)`, if given.
    pub raw_uncertainty: Option<Vec<f64>>,
    /// Known standard uncertainty of each reference `u(ref)`, if given (needs `u(raw)`).
    pub reference_uncertainty: Option<Vec<f64>>,
}

/// Options of the assessment.
#[derive(Debug, Clone, PartialEq)]
pub struct AssessOptions {
    /// Powers of the reference in the calibration mean.
    pub basis: Basis,
    /// Add a temperature term (needs temperatures).
    pub temperature_term: bool,
    /// Temperature the temperature term is centred on (default: mean of the run).
    pub reference_temperature: Option<f64>,
    /// Levels are measured from this origin for the spread model and the power transforms.
    pub level_origin: f64,
    /// Level of every test (default 0.05).
    pub alpha: f64,
    /// Goldfeld–Quandt: fraction of sorted rows in the low group (default 0.4).
    pub goldfeld_quandt_split: f64,
    /// Goldfeld–Quandt: fraction of rows dropped after the low group (default 0.2).
    pub goldfeld_quandt_drop: f64,
    /// Raw readings for the inverse table (default: the mean response of each standard).
    pub inverse_readings: Option<Vec<f64>>,
    /// Readings averaged into each given inverse-table reading (default 1; the standards'
    /// mean responses average their replicates).
    pub readings_averaged: usize,
    /// Coverage factor of expanded uncertainties (default `None`: Student's t at 95 % on the
    /// headline fit's degrees of freedom).
    pub coverage_factor: Option<f64>,
    /// How the weighted fit is weighted (default `auto`).
    pub weights: WeightRule,
    /// α and β of the DIN 32645 limits (default 0.01, the standard's worked level).
    pub din32645_alpha: f64,
}

impl Default for AssessOptions {
    fn default() -> Self {
        AssessOptions {
            basis: Basis::Linear,
            temperature_term: false,
            reference_temperature: None,
            level_origin: 0.0,
            alpha: 0.05,
            goldfeld_quandt_split: 0.4,
            goldfeld_quandt_drop: 0.2,
            inverse_readings: None,
            readings_averaged: 1,
            coverage_factor: None,
            weights: WeightRule::Auto,
            din32645_alpha: 0.01,
        }
    }
}

/// Why an assessment could not be made.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum AssessError {
    /// Columns of different lengths.
    #[error("column `{column}` has {got} values, `raw` has {expected}")]
    LengthMismatch {
        /// The offending column.
        column: &'static str,
        /// Its length.
        got: usize,
        /// The length of `raw`.
        expected: usize,
    },
    /// A NaN or infinity in the data.
    #[error("column `{column}`, data row {row}: value is not a finite number")]
    NonFinite {
        /// The offending column.
        column: &'static str,
        /// 0-based data row.
        row: usize,
    },
    /// Not enough rows for the model.
    #[error("{got} observations are too few: the model needs at least {needed}")]
    TooFewObservations {
        /// Rows needed.
        needed: usize,
        /// Rows given.
        got: usize,
    },
    /// Not enough distinct reference levels for the model.
    #[error("{got} distinct reference levels are too few: the model needs at least {needed}")]
    TooFewLevels {
        /// Levels needed.
        needed: usize,
        /// Levels given.
        got: usize,
    },
    /// A temperature term without temperatures.
    #[error("a temperature term needs a temperature column")]
    MissingTemperature,
    /// An option out of its range.
    #[error("option `{name}`: {reason}")]
    InvalidOption {
        /// The option.
        name: &'static str,
        /// What is wrong.
        reason: &'static str,
    },
    /// Weights a rule cannot form.
    #[error("weights {rule}: data row {row}: {reason}")]
    WeightsUndefined {
        /// The rule.
        rule: String,
        /// 0-based data row.
        row: usize,
        /// Why.
        reason: &'static str,
    },
    /// The least-squares fit failed.
    #[error("calibration fit: {0}")]
    Regression(#[from] RegressionError),
}

/// The calibration model as reported.
#[derive(Debug, Clone, Serialize)]
pub struct ModelSummary {
    /// `linear` or `quadratic`.
    pub basis: Basis,
    /// Parameter names in order.
    pub parameter_names: Vec<&'static str>,
    /// Temperature the temperature term is centred on, if the model has one.
    pub reference_temperature: Option<f64>,
    /// Origin of levels.
    pub level_origin: f64,
}

/// A fit with its lack-of-fit test.
#[derive(Debug, Clone, Serialize)]
pub struct FitReport {
    /// The fit.
    #[serde(flatten)]
    pub fit: LeastSquaresFit,
    /// Lack-of-fit test (`null` without replicates).
    pub lack_of_fit: Option<LackOfFit>,
}

/// The weighted fit, its weighting rule and (known uncertainties) its χ² check.
#[derive(Debug, Clone, Serialize)]
pub struct WlsReport {
    /// The weighting rule: `auto`, `ref^P`, `level^P`, `known u(raw)` or `known u(raw),
    /// u(ref)` (errors in both variables).
    pub weights: String,
    /// What the weights are, in words.
    pub weights_formula: String,
    /// The exponent `k` of `SD ∝ basis^k` the weights assume (`null` for known
    /// uncertainties).
    pub exponent: f64,
    /// True when the parameter covariance is scaled by the residual variance (false when the
    /// uncertainties are known).
    pub covariance_rescaled: bool,
    /// Known uncertainties: `χ² = Σ rᵢ²` of the weighted residuals.
    pub chi_squared: Option<f64>,
    /// Its degrees of freedom `n − p`.
    pub chi_squared_df: Option<usize>,
    /// `P(χ² > observed)`: a small value says the data scatter more than the stated
    /// uncertainties allow (or the model misfits).
    pub chi_squared_p: Option<f64>,
    /// The fit and its lack-of-fit test.
    #[serde(flatten)]
    pub report: FitReport,
}

/// The result of [`assess`]; serializes to the `--json` document.
#[derive(Debug, Clone, Serialize)]
pub struct Assessment {
    /// Rows used.
    pub observations: usize,
    /// Distinct reference levels.
    pub reference_levels: usize,
    /// True when some level has replicates.
    pub replicates: bool,
    /// The calibration mean.
    pub model: ModelSummary,
    /// Ordinary least squares.
    pub ols: FitReport,
    /// Weighted least squares under the spread model (`null` when no spread model).
    pub wls: Option<WlsReport>,
    /// Spread model `SD ∝ level^k`.
    pub spread: Option<SpreadModel>,
    /// Koenker's studentized Breusch–Pagan test on the OLS residuals.
    pub koenker: BreuschPagan,
    /// Classical Breusch–Pagan test on the OLS residuals.
    pub breusch_pagan: BreuschPagan,
    /// Goldfeld–Quandt test.
    pub goldfeld_quandt: Option<GoldfeldQuandt>,
    /// Ends-of-range F test.
    pub ends_of_range: Option<EndsOfRange>,
    /// Box–Cox analysis.
    pub boxcox: Option<BoxCoxAnalysis>,
    /// The recommended rung's name.
    pub recommended: &'static str,
    /// True when weighting (a power rung) is preferable to constant scatter; never true when
    /// the recommended rung is `identity`.
    pub weighting_preferred: bool,
    /// The fit the limits and the inverse table use: `ols` or `wls`.
    pub headline_fit: &'static str,
    /// The SD of one reading under the headline fit.
    pub reading_spread: ReadingSpread,
    /// Headline limit of detection (reference units).
    pub lod: f64,
    /// Headline limit of quantification (reference units).
    pub loq: f64,
    /// Limits in detail.
    pub limits: Limits,
    /// Inverse-prediction table.
    pub inverse_prediction: InverseTable,
    /// Why parts of the analysis are missing, and other remarks.
    pub notes: Vec<String>,
    /// The safety caution.
    pub caution: &'static str,
}

/// `value > bound`, false for a NaN (spelled out so that negations read clearly).
pub(crate) fn above(value: f64, bound: f64) -> bool {
    value > bound
}

pub(crate) fn check_column(
    column: &'static str,
    values: &[f64],
    expected: usize,
) -> Result<(), AssessError> {
    if values.len() != expected {
        return Err(AssessError::LengthMismatch {
            column,
            got: values.len(),
            expected,
        });
    }
    match values.iter().position(|v| !v.is_finite()) {
        Some(row) => Err(AssessError::NonFinite { column, row }),
        None => Ok(()),
    }
}

fn check_options(options: &AssessOptions) -> Result<(), AssessError> {
    let invalid = |name, reason| Err(AssessError::InvalidOption { name, reason });
    if !(options.alpha > 0.0 && options.alpha < 0.5) {
        return invalid("alpha", "must be between 0 and 0.5");
    }
    if !options.level_origin.is_finite() {
        return invalid("level_origin", "must be finite");
    }
    if !(options.goldfeld_quandt_split > 0.0 && options.goldfeld_quandt_split < 1.0) {
        return invalid("goldfeld_quandt_split", "must be between 0 and 1");
    }
    if !(options.goldfeld_quandt_drop >= 0.0
        && options.goldfeld_quandt_split + options.goldfeld_quandt_drop < 1.0)
    {
        return invalid("goldfeld_quandt_drop", "split + drop must be below 1");
    }
    if let Some(k) = options.coverage_factor {
        if !(k > 0.0 && k.is_finite()) {
            return invalid("coverage_factor", "must be a positive number");
        }
    }
    if !(options.din32645_alpha > 0.0 && options.din32645_alpha < 0.5) {
        return invalid("din32645_alpha", "must be between 0 and 0.5");
    }
    if options.readings_averaged == 0 {
        return invalid("readings_averaged", "must be at least 1");
    }
    if let Some(readings) = &options.inverse_readings {
        if readings.iter().any(|r| !r.is_finite()) {
            return invalid("inverse_readings", "must be finite numbers");
        }
    }
    Ok(())
}

/// Assesses a lab calibration run (see module docs): one step per part.
pub fn assess(data: &CalibrationData, options: &AssessOptions) -> Result<Assessment, AssessError> {
    check_options(options)?;
    let run = steps::prepare(data, options)?;
    let mut notes = Vec::new();
    let ols = steps::ordinary_fit(&run, data, options, &mut notes)?;
    let scatter = steps::scatter_tests(&run, data, &ols.fit, options, &mut notes)?;
    let spread = steps::spread(&run, data, &ols.fit, options, &mut notes);
    let boxcox = steps::power_transform(&run, data, &ols.fit, options, &mut notes);
    let (recommended, weighting_preferred) = steps::advice(
        boxcox.as_ref(),
        &scatter.koenker,
        spread.as_ref(),
        options.alpha,
        &mut notes,
    );
    let weighted = steps::weighted_fit(&run, data, options, &ols.fit, spread.as_ref(), &mut notes)?;
    let use_wls = steps::headline_is_weighted(options, data, weighting_preferred, &weighted);
    let (headline_fit, reading_spread) = match (&weighted, use_wls) {
        (Some((_, spread)), true) => ("wls", spread.clone()),
        _ => (
            "ols",
            ReadingSpread::Constant {
                sd: ols.fit.residual_sd,
            },
        ),
    };
    let limits = steps::detection_limits(&run, data, options, &ols.fit, weighted.as_ref(), use_wls);
    let headline = match (&weighted, use_wls) {
        (Some((wls, _)), true) => &wls.report.fit,
        _ => &ols.fit,
    };
    let inverse_prediction =
        steps::inverse_table(&run, data, options, headline, &reading_spread, headline_fit);
    Ok(Assessment {
        observations: data.raw.len(),
        reference_levels: run.groups.groups.len(),
        replicates: run.groups.has_replicates(),
        model: ModelSummary {
            basis: run.model.basis,
            parameter_names: run.model.parameter_names(),
            reference_temperature: run.model.reference_temperature,
            level_origin: options.level_origin,
        },
        ols,
        wls: weighted.map(|(wls, _)| wls),
        spread,
        koenker: scatter.koenker,
        breusch_pagan: scatter.breusch_pagan,
        goldfeld_quandt: scatter.goldfeld_quandt,
        ends_of_range: scatter.ends_of_range,
        boxcox,
        recommended,
        weighting_preferred,
        headline_fit,
        reading_spread,
        lod: limits.lod,
        loq: limits.loq,
        limits,
        inverse_prediction,
        notes,
        caution: CAUTION,
    })
}

impl Assessment {
    /// The headline fit (the one the limits and the inverse table use).
    pub fn headline(&self) -> &LeastSquaresFit {
        match (&self.wls, self.headline_fit) {
            (Some(wls), "wls") => &wls.report.fit,
            _ => &self.ols.fit,
        }
    }
}
