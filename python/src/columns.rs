//! Samples from Arrow columns: the columns are found by name and read as numbers, a row at a
//! time, without Python. A column that is missing or not numeric, and a null `raw` or
//! `t`, is an error naming the column (and the row, counted from 0 over everything pushed).

use anyhow::{anyhow, bail, Result};
use arrow::array::{Array, AsArray, RecordBatch};
use arrow::compute::cast;
use arrow::datatypes::{DataType, Float64Type};
use steadycal_core::real::Real;
use steadycal_core::sample::Sample;

/// Column names of a pushed table: `time` may be absent (the row number is the time);
/// `reference` and `temperature` may be absent or null on a row.
#[derive(Clone, Debug)]
pub struct Names {
    /// Time, seconds.
    pub time: String,
    /// Raw output.
    pub raw: String,
    /// Reference.
    pub reference: String,
    /// Temperature.
    pub temperature: String,
}

/// The numeric columns of one batch, as `f64`.
pub struct BatchColumns {
    time: Option<arrow::array::Float64Array>,
    raw: arrow::array::Float64Array,
    reference: Option<arrow::array::Float64Array>,
    temperature: Option<arrow::array::Float64Array>,
    rows: usize,
}

fn numeric(
    batch: &RecordBatch,
    name: &str,
    required: bool,
) -> Result<Option<arrow::array::Float64Array>> {
    let Some(column) = batch.column_by_name(name) else {
        if required {
            let found: Vec<String> = batch
                .schema()
                .fields()
                .iter()
                .map(|f| format!("`{}`", f.name()))
                .collect();
            bail!(
                "no column `{name}` (the table has {}); name it with the column options",
                found.join(", ")
            );
        }
        return Ok(None);
    };
    let kind = column.data_type();
    if !(kind.is_numeric() || *kind == DataType::Null) {
        bail!("column `{name}`: expected numbers, found {kind}");
    }
    let column = cast(column, &DataType::Float64)
        .map_err(|e| anyhow!("column `{name}`: cannot read as numbers: {e}"))?;
    Ok(Some(column.as_primitive::<Float64Type>().clone()))
}

impl BatchColumns {
    /// Finds and reads the columns of `batch`.
    pub fn new(batch: &RecordBatch, names: &Names) -> Result<Self> {
        Ok(BatchColumns {
            time: numeric(batch, &names.time, false)?,
            raw: numeric(batch, &names.raw, true)?
                .ok_or_else(|| anyhow!("no column `{}`", names.raw))?,
            reference: numeric(batch, &names.reference, false)?,
            temperature: numeric(batch, &names.temperature, false)?,
            rows: batch.num_rows(),
        })
    }

    /// Rows in the batch.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Row `i` as the sample numbered `seq`.
    #[inline]
    pub fn sample<R: Real>(&self, i: usize, seq: u64, names: &Names) -> Result<Sample<R>> {
        let t = match &self.time {
            Some(time) if time.is_null(i) => {
                bail!(
                    "row {seq}: column `{}`: expected a number, found null",
                    names.time
                )
            }
            Some(time) => time.value(i),
            None => seq as f64,
        };
        if self.raw.is_null(i) {
            bail!(
                "row {seq}: column `{}`: expected a number, found null",
                names.raw
            );
        }
        let optional = |column: &Option<arrow::array::Float64Array>| {
            column
                .as_ref()
                .filter(|c| c.is_valid(i))
                .map(|c| R::from_f64(c.value(i)))
        };
        Ok(Sample {
            seq,
            t,
            raw: R::from_f64(self.raw.value(i)),
            reference: optional(&self.reference),
            temperature: optional(&self.temperature),
            averaged: 1,
        })
    }
}
