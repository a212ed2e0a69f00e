//! Reading a lab calibration run from a feed CSV (the `replay` columns: `raw` is the
//! response, `ref` the reference, `temp` optional) into [`CalibrationData`].
//!
//! Rows without a reference are ignored. A row with a reference whose `raw`, `ref` (or, when
//! every used row has one, `temp`) is not a finite number is refused with the file and line.

use std::path::Path;

use super::CalibrationData;
use crate::feed::{ColumnNames, CsvFeed};

/// Reads the checks (rows with a reference) of a feed CSV.
pub fn read_calibration_run(path: &Path) -> anyhow::Result<CalibrationData> {
    let mut feed = CsvFeed::open(path, &ColumnNames::default())?;
    let (mut raw, mut reference, mut temperature) = (Vec::new(), Vec::new(), Vec::new());
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
        match sample.temperature {
            Some(t) if t.is_finite() => temperature.push(t),
            _ => all_have_temperature = false,
        }
    }
    if raw.is_empty() {
        anyhow::bail!("{}: no row has a reference value (`ref`)", path.display());
    }
    Ok(CalibrationData {
        raw,
        reference,
        temperature: all_have_temperature.then_some(temperature),
    })
}
