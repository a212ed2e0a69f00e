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
//! The WLS fit uses weights `wᵢ = (f_OLS(refᵢ) − o)^(−2k)` from the spread model's `k`
//! (inverse variance under `SD ∝ level^k`). The headline limits and the inverse table use the
//! WLS fit when weighting is preferable (Box–Cox interval excludes λ = 1; without Box–Cox,
//! Koenker's test at level α), the OLS fit otherwise.

pub mod boxcox;
pub mod design;
pub mod distributions;
pub mod heteroscedasticity;
pub mod inverse;
pub mod limits;
pub mod regression;
pub mod render;
pub mod replicates;
pub mod run_file;
pub mod spread_model;

use serde::Serialize;

pub use design::{Basis, CalibrationModel};
pub use render::render_text;

use boxcox::BoxCoxAnalysis;
use heteroscedasticity::{BreuschPagan, EndsOfRange, GoldfeldQuandt};
use inverse::{InverseModel, InverseTable};
use limits::{DetectionLimits, Limits};
use regression::{LackOfFit, LeastSquaresFit, RegressionError};
use replicates::ReplicateGroups;
use spread_model::SpreadModel;

/// The safety caution every rendering of an assessment ends with.
pub const CAUTION: &str = "steadycal supports, and does not replace, calibration under the \
applicable standards, local codes and licensed practice; an assessment made with it is not a \
certified calibration.";

/// A lab calibration run: responses against references, optional temperatures.
#[derive(Debug, Clone, PartialEq)]
pub struct CalibrationData {
    /// The sensor's responses (`raw`).
    pub raw: Vec<f64>,
    /// The reference values (`ref`).
    pub reference: Vec<f64>,
    /// Temperatures, one per row, if recorded.
    pub temperature: Option<Vec<f64>>,
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
    /// Readings averaged into each inverse-table reading (default 1).
    pub readings_averaged: usize,
    /// Coverage factor of expanded uncertainties (default 2).
    pub coverage_factor: f64,
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
            coverage_factor: 2.0,
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

/// The WLS fit with the spread exponent its weights came from.
#[derive(Debug, Clone, Serialize)]
pub struct WlsReport {
    /// How the weights were formed.
    pub weights: &'static str,
    /// The exponent `k` in the weights.
    pub exponent: f64,
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
    /// True when weighting (a power rung) is preferable to constant scatter.
    pub weighting_preferred: bool,
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

fn check_column(column: &'static str, values: &[f64], expected: usize) -> Result<(), AssessError> {
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
    if !(options.coverage_factor > 0.0 && options.coverage_factor.is_finite()) {
        return invalid("coverage_factor", "must be a positive number");
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

/// Assesses a lab calibration run (see module docs).
pub fn assess(data: &CalibrationData, options: &AssessOptions) -> Result<Assessment, AssessError> {
    check_options(options)?;
    let rows = data.raw.len();
    check_column("raw", &data.raw, rows)?;
    check_column("ref", &data.reference, rows)?;
    let temperature = match (&data.temperature, options.temperature_term) {
        (Some(t), true) => {
            check_column("temp", t, rows)?;
            Some(t.as_slice())
        }
        (None, true) => return Err(AssessError::MissingTemperature),
        _ => None,
    };
    let reference_temperature = temperature.map(|t| {
        options
            .reference_temperature
            .unwrap_or_else(|| t.iter().sum::<f64>() / t.len() as f64)
    });
    let model = CalibrationModel {
        basis: options.basis,
        reference_temperature,
    };
    let parameters = model.parameter_count();
    if rows < parameters + 2 {
        return Err(AssessError::TooFewObservations {
            needed: parameters + 2,
            got: rows,
        });
    }
    let groups = ReplicateGroups::from_reference(&data.reference);
    let power_count = parameters - usize::from(reference_temperature.is_some());
    if groups.groups.len() < power_count + 1 {
        return Err(AssessError::TooFewLevels {
            needed: power_count + 1,
            got: groups.groups.len(),
        });
    }
    let alpha = options.alpha;
    let origin = options.level_origin;
    let mut notes = Vec::new();
    let design = model.design(&data.reference, temperature);
    let raw = &data.raw;

    // Ordinary least squares.
    let ols_fit = regression::least_squares(&design, raw, None)?;
    let ols_lack_of_fit = regression::lack_of_fit(
        raw,
        &ols_fit.weights,
        ols_fit.residual_sum_of_squares,
        &groups,
        parameters,
        alpha,
    );
    if ols_lack_of_fit.is_none() {
        notes.push(
            "no lack-of-fit test: it needs replicates and more levels than parameters".into(),
        );
    }
    let fitted_level: Vec<f64> = ols_fit.fitted.iter().map(|f| f - origin).collect();

    // Constant-scatter tests.
    let koenker = heteroscedasticity::breusch_pagan(&ols_fit.residuals, &ols_fit.fitted, true)?;
    let breusch_pagan =
        heteroscedasticity::breusch_pagan(&ols_fit.residuals, &ols_fit.fitted, false)?;
    let goldfeld_quandt = match heteroscedasticity::goldfeld_quandt(
        &design,
        raw,
        &data.reference,
        options.goldfeld_quandt_split,
        options.goldfeld_quandt_drop,
    ) {
        Ok(test) => Some(test),
        Err(error) => {
            notes.push(format!("no Goldfeld-Quandt test: {error}"));
            None
        }
    };
    let ends_of_range = heteroscedasticity::ends_of_range(&groups, raw, alpha);
    if ends_of_range.is_none() {
        notes.push(
            "no ends-of-range F test: it needs two or more replicates at the lowest and highest standard"
                .into(),
        );
    }

    // Spread model and WLS.
    let spread =
        spread_model::fit_spread_model(&groups, raw, &fitted_level, &ols_fit.residuals, alpha);
    let wls = match &spread {
        None => {
            notes.push("no spread model: fewer than three usable levels or bins".into());
            None
        }
        Some(spread) if fitted_level.iter().any(|l| !above(*l, 0.0)) => {
            let _ = spread;
            notes.push("no WLS fit: a fitted level is not above the level origin".into());
            None
        }
        Some(spread) => {
            let weights: Vec<f64> = fitted_level
                .iter()
                .map(|l| (-2.0 * spread.k * l.ln()).exp())
                .collect();
            match regression::least_squares(&design, raw, Some(&weights)) {
                Ok(fit) => {
                    let lack_of_fit = regression::lack_of_fit(
                        raw,
                        &fit.weights,
                        fit.residual_sum_of_squares,
                        &groups,
                        parameters,
                        alpha,
                    );
                    Some(WlsReport {
                        weights: "(fitted OLS level - origin)^(-2k)",
                        exponent: spread.k,
                        report: FitReport { fit, lack_of_fit },
                    })
                }
                Err(error) => {
                    notes.push(format!("no WLS fit: {error}"));
                    None
                }
            }
        }
    };

    // Box–Cox.
    let boxcox = match boxcox::analyse(&design, raw, origin, &ols_fit.params, &groups, alpha) {
        Ok(analysis) => Some(analysis),
        Err(error) => {
            notes.push(format!("no Box-Cox analysis: {error}"));
            None
        }
    };
    let (recommended, weighting_preferred) = match &boxcox {
        Some(analysis) => (analysis.recommended, analysis.weighting_preferred),
        None => ("identity", koenker.p_value < alpha),
    };
    if let Some(analysis) = &boxcox {
        if analysis.at_search_bound {
            notes.push("Box-Cox lambda sits on the end of the search range [-3, 3]".into());
        }
        if let Some(adequacy) = &analysis.mean_adequacy {
            if !adequacy.adequate {
                notes.push(format!(
                    "the calibration mean misfits on the {} scale (lack-of-fit p = {:.3}): try the quadratic or the temperature term",
                    recommended, adequacy.p_value
                ));
            }
        }
    }

    // Limits.
    let lowest = groups.groups.first().map_or(f64::NAN, |g| g.reference);
    let highest = groups.groups.last().map_or(f64::NAN, |g| g.reference);
    let constant_sigma =
        DetectionLimits::new(ols_fit.residual_sd, model.slope(&ols_fit.params, lowest));
    let spread_limits = match (&wls, &spread) {
        (Some(wls), Some(spread)) => {
            let low_level = model.mean(&ols_fit.params, lowest, 0.0) - origin;
            let sigma = wls.report.fit.residual_sd * low_level.powf(spread.k);
            Some(DetectionLimits::new(
                sigma,
                model.slope(&wls.report.fit.params, lowest),
            ))
        }
        _ => None,
    };
    let use_wls = weighting_preferred && wls.is_some();
    let limits = limits::limits(constant_sigma, spread_limits, use_wls, lowest, highest);

    // Inverse prediction.
    let readings: Vec<f64> = match &options.inverse_readings {
        Some(readings) => readings.clone(),
        None => groups
            .groups
            .iter()
            .map(|g| replicates::mean_and_sd(raw, &g.members).0)
            .collect(),
    };
    let range = [lowest, highest];
    let inverse_prediction = match (&wls, &spread, use_wls) {
        (Some(wls), Some(spread), true) => {
            let scale = wls.report.fit.residual_sd;
            let k = spread.k;
            let reading_sd = move |y: f64| {
                let level = y - origin;
                if level > 0.0 {
                    scale * level.powf(k)
                } else {
                    f64::NAN
                }
            };
            table(
                &model,
                &wls.report.fit,
                &reading_sd,
                range,
                &readings,
                options,
                "wls",
            )
        }
        _ => {
            let scale = ols_fit.residual_sd;
            let reading_sd = move |_: f64| scale;
            table(
                &model,
                &ols_fit,
                &reading_sd,
                range,
                &readings,
                options,
                "ols",
            )
        }
    };

    Ok(Assessment {
        observations: rows,
        reference_levels: groups.groups.len(),
        replicates: groups.has_replicates(),
        model: ModelSummary {
            basis: model.basis,
            parameter_names: model.parameter_names(),
            reference_temperature,
            level_origin: origin,
        },
        ols: FitReport {
            fit: ols_fit,
            lack_of_fit: ols_lack_of_fit,
        },
        wls,
        spread,
        koenker,
        breusch_pagan,
        goldfeld_quandt,
        ends_of_range,
        boxcox,
        recommended,
        weighting_preferred,
        lod: limits.lod,
        loq: limits.loq,
        limits,
        inverse_prediction,
        notes,
        caution: CAUTION,
    })
}

fn table(
    model: &CalibrationModel,
    fit: &LeastSquaresFit,
    reading_sd: &dyn Fn(f64) -> f64,
    range: [f64; 2],
    readings: &[f64],
    options: &AssessOptions,
    name: &'static str,
) -> InverseTable {
    let inverse_model = InverseModel {
        model,
        params: &fit.params,
        covariance: &fit.covariance,
        reading_sd,
        range,
    };
    InverseTable {
        fit: name,
        coverage_factor: options.coverage_factor,
        readings_averaged: options.readings_averaged,
        rows: readings
            .iter()
            .map(|&raw| {
                inverse::inverse_row(
                    &inverse_model,
                    raw,
                    options.readings_averaged,
                    options.coverage_factor,
                )
            })
            .collect(),
    }
}
