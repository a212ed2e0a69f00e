//! The per-check table: one row per check the monitor fitted (a sample with a finite
//! reference that the screen let through), written by `replay --checks FILE` and read by
//! `report`.
//!
//! Columns (header line first, names fixed):
//!
//! | column | meaning |
//! | --- | --- |
//! | `seq`, `t` | data-row index and time of the check |
//! | `reference`, `raw` | the check's reference value and raw output |
//! | `fitted` | the active rung's a-priori prediction of `raw` (raw units) |
//! | `residual` | `raw − fitted` |
//! | `standardized` | the residual standardized by the active rung's spread model at this level (empty until the fit has a residual variance) |
//! | `rung` | the rung active when the check arrived |
//! | `offset`, `offset_u`, `gain`, `gain_u` | the active calibration after the check, with standard uncertainties (physical units) |
//! | `value`, `value_u` | the check's raw output read back through the calibration after the check, and its expanded uncertainty (reference units; empty when no reading can be made) |
//!
//! # Contract
//! - Writing never changes the monitor: the a-priori values (`fitted`, `residual`,
//!   `standardized`, `rung`) are the ones the monitor's check step computed, carried by the
//!   push's [`steadycal_core::sample::CheckDetail`]; `value` and `value_u` are the
//!   monitor's reading of the check's raw output after the check (a check makes no
//!   reading of its own).
//! - Numbers are written with Rust's shortest round-trip formatting of the run's float type,
//!   so two runs write identical files.
//! - Reading a malformed file is an error naming the file, line and column.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::{bail, Context, Result};
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;
use steadycal_core::sample::{CheckDetail, Sample};

/// The header line of the per-check table.
pub const HEADER: &str =
    "seq,t,reference,raw,fitted,residual,standardized,rung,offset,offset_u,gain,gain_u,value,value_u";

/// One check.
#[derive(Clone, Debug, PartialEq)]
pub struct CheckRow {
    /// 0-based data-row index.
    pub seq: u64,
    /// Time, seconds.
    pub t: f64,
    /// Reference value.
    pub reference: f64,
    /// Raw output.
    pub raw: f64,
    /// A-priori prediction of the active rung (raw units).
    pub fitted: f64,
    /// `raw − fitted`.
    pub residual: f64,
    /// Standardized residual, once the fit has a residual variance.
    pub standardized: Option<f64>,
    /// Name of the active rung when the check arrived.
    pub rung: String,
    /// Offset after the check (raw units).
    pub offset: f64,
    /// Standard uncertainty of the offset.
    pub offset_u: f64,
    /// Gain after the check (raw units per reference unit).
    pub gain: f64,
    /// Standard uncertainty of the gain.
    pub gain_u: f64,
    /// The check's raw read back through the calibration (reference units).
    pub value: Option<f64>,
    /// Expanded uncertainty of `value`.
    pub value_u: Option<f64>,
}

fn optional<R: Display>(value: Option<R>) -> String {
    value.map(|v| v.to_string()).unwrap_or_default()
}

/// Writes the row of a check that the monitor fitted: call after the push, with the
/// check's detail from its outcome.
pub fn write_row<R: Real + Display>(
    out: &mut dyn Write,
    monitor: &Monitor<R>,
    sample: &Sample<R>,
    check: &CheckDetail<R>,
) -> std::io::Result<()> {
    let reference = sample.reference.unwrap_or(R::ZERO);
    let config = monitor.config();
    let fit = monitor.ladder().active_fit();
    let params = monitor.parameters();
    let factors: [R; 3] = config.basis.physical_factors();
    let covariance = fit.parameter_covariance();
    let offset_u = (covariance[0][0] * factors[0] * factors[0]).sqrt();
    let gain_u = (covariance[1][1] * factors[1] * factors[1]).sqrt();
    // The check's raw read back through the calibration the check left: a reading the
    // push did not make (a check makes none), so asked for here.
    let reading = monitor.reading(sample.raw, sample.temperature);
    writeln!(
        out,
        "{},{},{},{},{},{},{},{},{},{},{},{},{},{}",
        sample.seq,
        sample.t,
        reference,
        sample.raw,
        check.prediction,
        check.residual,
        optional(check.standardized),
        check.rung.name(),
        params[0],
        offset_u,
        params[1],
        gain_u,
        optional(reading.map(|r| r.value)),
        optional(reading.map(|r| r.expanded_uncertainty)),
    )
}

/// Reads a per-check table.
pub fn read(path: &Path) -> Result<Vec<CheckRow>> {
    let file = path.display().to_string();
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .from_path(path)
        .with_context(|| format!("{file}: cannot open"))?;
    let header = reader
        .headers()
        .with_context(|| format!("{file}:1: cannot read the header"))?
        .clone();
    let expected: Vec<&str> = HEADER.split(',').collect();
    let got: Vec<&str> = header.iter().collect();
    if got != expected {
        bail!("{file}:1:1: expected the per-check header `{HEADER}`");
    }
    let mut rows = Vec::new();
    for record in reader.records() {
        let record = record.with_context(|| format!("{file}: malformed CSV"))?;
        let line = record.position().map_or(0, |p| p.line());
        let field = |index: usize| record.get(index).unwrap_or("");
        let column = |index: usize| {
            // 1-based column: the byte offset of the field within the line, plus one.
            1 + (0..index).map(|i| field(i).len() + 1).sum::<usize>()
        };
        let number = |index: usize| -> Result<f64> {
            field(index).trim().parse::<f64>().map_err(|_| {
                anyhow::anyhow!(
                    "{file}:{line}:{}: `{}`: expected a number in column `{}`",
                    column(index),
                    field(index),
                    expected[index]
                )
            })
        };
        let maybe = |index: usize| -> Result<Option<f64>> {
            if field(index).trim().is_empty() {
                Ok(None)
            } else {
                number(index).map(Some)
            }
        };
        let seq = field(0).trim().parse::<u64>().map_err(|_| {
            anyhow::anyhow!(
                "{file}:{line}:1: `{}`: expected a non-negative integer in column `seq`",
                field(0)
            )
        })?;
        rows.push(CheckRow {
            seq,
            t: number(1)?,
            reference: number(2)?,
            raw: number(3)?,
            fitted: number(4)?,
            residual: number(5)?,
            standardized: maybe(6)?,
            rung: field(7).to_string(),
            offset: number(8)?,
            offset_u: number(9)?,
            gain: number(10)?,
            gain_u: number(11)?,
            value: maybe(12)?,
            value_u: maybe(13)?,
        });
    }
    Ok(rows)
}
