//! Reading a lab calibration run from a feed CSV (the `replay` columns, named by
//! [`ColumnNames`]: `raw` is the response, `ref` the reference, `temp` optional) into
//! [`CalibrationData`], with optional columns of known standard uncertainties.
//!
//! Rows without a reference are ignored. A row with a reference whose `raw`, `ref` (or, when
//! every used row has one, `temp`) is not a finite number is refused with the file and line;
//! so is a used row whose uncertainty cell is empty, not a number or negative (a missing
//! uncertainty is never read as a measurement).

use std::collections::HashMap;
use std::path::Path;

use super::CalibrationData;
use crate::feed::{ColumnNames, CsvFeed};

/// Names of the optional uncertainty columns.
#[derive(Debug, Clone, Default)]
pub struct UncertaintyColumns {
    /// Column of `u(raw)`.
    pub raw: Option<String>,
    /// Column of `u(ref)`.
    pub reference: Option<String>,
}

/// Reads the checks (rows with a reference) of a feed CSV with the default column names.
pub fn read_calibration_run(path: &Path) -> anyhow::Result<CalibrationData> {
    read_calibration_run_with(
        path,
        &ColumnNames::default(),
        &UncertaintyColumns::default(),
    )
}

/// Reads the checks (rows with a reference) of a feed CSV.
pub fn read_calibration_run_with(
    path: &Path,
    names: &ColumnNames,
    uncertainty: &UncertaintyColumns,
) -> anyhow::Result<CalibrationData> {
    let mut feed = CsvFeed::open(path, names)?;
    let (mut raw, mut reference, mut temperature) = (Vec::new(), Vec::new(), Vec::new());
    let mut rows = Vec::new();
    let mut all_have_temperature = true;
    while let Some(sample) = feed.next_sample::<f64>() {
        let sample = sample?;
        let Some(reference_value) = sample.reference else {
            continue;
        };
        // Data row `seq` is on line seq + 2 (the header is line 1).
        let line = sample.seq + 2;
        for (name, value) in [("raw", sample.raw), ("ref", reference_value)] {
            if !value.is_finite() {
                anyhow::bail!(
                    "{}: line {line}: `{name}` is {value}; an assessment needs finite numbers on every row with a reference",
                    path.display()
                );
            }
        }
        raw.push(sample.raw);
        reference.push(reference_value);
        rows.push(sample.seq);
        match sample.temperature {
            Some(t) if t.is_finite() => temperature.push(t),
            _ => all_have_temperature = false,
        }
    }
    if raw.is_empty() {
        anyhow::bail!(
            "{}: no row has a reference value (`{}`)",
            path.display(),
            names.reference
        );
    }
    let (raw_uncertainty, reference_uncertainty) =
        if uncertainty.raw.is_some() || uncertainty.reference.is_some() {
            let mut columns = read_columns(path, uncertainty, &rows)?;
            (
                uncertainty.raw.as_ref().and_then(|n| columns.remove(n)),
                uncertainty
                    .reference
                    .as_ref()
                    .and_then(|n| columns.remove(n)),
            )
        } else {
            (None, None)
        };
    Ok(CalibrationData {
        raw,
        reference,
        temperature: all_have_temperature.then_some(temperature),
        raw_uncertainty,
        reference_uncertainty,
    })
}

/// The uncertainty columns at the given data rows (0-based `seq`, increasing).
fn read_columns(
    path: &Path,
    names: &UncertaintyColumns,
    rows: &[u64],
) -> anyhow::Result<HashMap<String, Vec<f64>>> {
    let mut reader = csv::ReaderBuilder::new()
        .flexible(true)
        .from_path(path)
        .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
    let header = reader
        .headers()
        .map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?
        .clone();
    let mut wanted = Vec::new();
    for name in [&names.raw, &names.reference].into_iter().flatten() {
        let index = header
            .iter()
            .position(|h| h.trim() == name)
            .ok_or_else(|| {
                anyhow::anyhow!(
                    "{}: line 1: no column `{name}` (the uncertainty column named on the command line)",
                    path.display()
                )
            })?;
        wanted.push((name.clone(), index));
    }
    let mut columns: HashMap<String, Vec<f64>> = wanted
        .iter()
        .map(|(n, _)| (n.clone(), Vec::new()))
        .collect();
    let mut next = rows.iter().peekable();
    for (seq, record) in reader.records().enumerate() {
        let Some(&&row) = next.peek() else { break };
        let record = record.map_err(|e| anyhow::anyhow!("{}: {e}", path.display()))?;
        if seq as u64 != row {
            continue;
        }
        next.next();
        let line = seq + 2;
        for (name, index) in &wanted {
            let cell = record.get(*index).unwrap_or("").trim();
            let value: f64 = cell.parse().map_err(|_| {
                anyhow::anyhow!(
                    "{}: line {line}, column `{name}`: `{cell}` is not a number (a standard uncertainty is needed on every row with a reference)",
                    path.display()
                )
            })?;
            if !(value.is_finite() && value >= 0.0) {
                anyhow::bail!(
                    "{}: line {line}, column `{name}`: {value} is not a finite number at or above 0",
                    path.display()
                );
            }
            if let Some(column) = columns.get_mut(name) {
                column.push(value);
            }
        }
    }
    Ok(columns)
}
