//! Reading a lab calibration run into [`CalibrationData`], through the field log reader
//! ([`crate::field::reader`]: the columns named by [`ColumnNames`], missing markers, optional
//! columns of known standard uncertainties read as further numeric columns).
//!
//! A row is a check when its reference is present; other rows are ignored. A check whose
//! `raw` is a missing marker is left out and counted ([`RunFile::checks_without_raw`]); one
//! whose `raw` or `ref` (or, when every check has one, `temp`) is not a finite number is
//! refused with the file and line. So is a check whose uncertainty cell is a missing marker,
//! not a number or negative: a missing uncertainty is never read as a measurement.

use std::path::Path;

use super::CalibrationData;
use crate::feed::ColumnNames;
use crate::field::missing::MissingMarkers;
use crate::field::reader::{LogLayout, LogReader, LogRow};

/// Names of the optional uncertainty columns.
#[derive(Debug, Clone, Default)]
pub struct UncertaintyColumns {
    /// Column of `u(raw)`.
    pub raw: Option<String>,
    /// Column of `u(ref)`.
    pub reference: Option<String>,
}

/// A run as read.
#[derive(Debug, Clone)]
pub struct RunFile {
    /// The checks.
    pub data: CalibrationData,
    /// Checks left out because their `raw` cell was a missing marker.
    pub checks_without_raw: usize,
}

/// Reads the checks (rows with a reference) of a feed CSV with the default column names and
/// missing markers.
pub fn read_calibration_run(path: &Path) -> anyhow::Result<CalibrationData> {
    Ok(read_calibration_run_with(
        path,
        &ColumnNames::default(),
        &UncertaintyColumns::default(),
        &MissingMarkers::default(),
    )?
    .data)
}

/// Reads the checks (rows with a reference) of a run.
pub fn read_calibration_run_with(
    path: &Path,
    names: &ColumnNames,
    uncertainty: &UncertaintyColumns,
    missing: &MissingMarkers,
) -> anyhow::Result<RunFile> {
    let mut raw_columns = vec![names.raw.clone()];
    raw_columns.extend(uncertainty.raw.iter().cloned());
    raw_columns.extend(uncertainty.reference.iter().cloned());
    let layout = LogLayout {
        time: (names.time != ColumnNames::default().time).then(|| vec![names.time.clone()]),
        raw: raw_columns,
        reference: Some(names.reference.clone()),
        reference_required: true,
        temperature: Some(names.temperature.clone()),
        missing: missing.clone(),
        ..LogLayout::default()
    };
    let file = path.display();
    let mut reader = LogReader::open(path, &layout)?;
    let mut row = LogRow::<f64>::default();
    let mut data = CalibrationData::default();
    let (mut u_raw, mut u_ref) = (Vec::new(), Vec::new());
    let mut temperature = Vec::new();
    let mut all_have_temperature = true;
    let mut checks_without_raw = 0;
    while let Some(result) = reader.next_row(&mut row) {
        result?;
        let Some(reference) = row.reference else {
            continue;
        };
        let line = row.line;
        let Some(raw) = row.raw.first().copied().flatten() else {
            checks_without_raw += 1;
            continue;
        };
        for (name, value) in [(&names.raw, raw), (&names.reference, reference)] {
            if !value.is_finite() {
                anyhow::bail!(
                    "{file}: line {line}: `{name}` is {value}; an assessment needs finite numbers on every row with a reference"
                );
            }
        }
        let mut next = 1;
        for (column, values) in [
            (&uncertainty.raw, &mut u_raw),
            (&uncertainty.reference, &mut u_ref),
        ] {
            let Some(name) = column else { continue };
            let cell = row.raw.get(next).copied().flatten();
            next += 1;
            match cell {
                Some(u) if u.is_finite() && u >= 0.0 => values.push(u),
                Some(u) => anyhow::bail!(
                    "{file}: line {line}, column `{name}`: {u} is not a standard uncertainty (a finite number at or above 0)"
                ),
                None => anyhow::bail!(
                    "{file}: line {line}, column `{name}`: the cell is a missing marker; a standard uncertainty is needed on every row with a reference"
                ),
            }
        }
        data.raw.push(raw);
        data.reference.push(reference);
        match row.temperature {
            Some(t) if t.is_finite() => temperature.push(t),
            _ => all_have_temperature = false,
        }
    }
    if data.raw.is_empty() {
        anyhow::bail!(
            "{file}: no row has both a reference value (`{}`) and a raw value (`{}`)",
            names.reference,
            names.raw
        );
    }
    data.temperature = all_have_temperature.then_some(temperature);
    data.raw_uncertainty = uncertainty.raw.as_ref().map(|_| u_raw);
    data.reference_uncertainty = uncertainty.reference.as_ref().map(|_| u_ref);
    Ok(RunFile {
        data,
        checks_without_raw,
    })
}
