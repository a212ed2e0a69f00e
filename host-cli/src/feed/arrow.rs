//! Arrow record batches as samples ([`ArrowColumns`]): the columns found by name in the
//! schema, each batch's rows turned into samples.
//!
//! Columns are found by the same names as in a CSV feed ([`ColumnNames`]): `raw` is
//! required, `t`, `ref` and `temp` are optional. A value column holds numbers (any Arrow
//! integer or floating-point type); the time column holds seconds as numbers, or an Arrow
//! timestamp (read as seconds since 1970-01-01T00:00:00Z, its zone ignored: Arrow stores
//! instants in UTC). A column of any other type (text, dates, lists...) is refused before
//! the first row, naming the file, the column and its type.
//!
//! Missing values as in a CSV feed: an Arrow null, or a number equal to a declared numeric
//! missing marker ([`MissingMarkers`]), is a missing cell. A missing `raw` is no sample
//! (counted in `missing_raw` and by marker), a missing `ref` makes the row a reading, a
//! missing `temp` is passed on as absent. A missing time is a bad row. `NaN` and infinities
//! are data that the core rejects, as in CSV.
//!
//! Rows are numbered from 1 over the whole stream (errors name the row); `seq` is the
//! 0-based row index, missing and bad rows included, as a CSV feed's data-row index is, and
//! without a time column `t` is that index.
//!
//! Invariants: never panics on any value; memory is one batch's columns as `f64` at most.

use std::sync::Arc;

use arrow::array::{Array, ArrayRef, AsArray, RecordBatch};
use arrow::datatypes::{DataType, Float64Type, Int64Type, Schema, TimeUnit};
use steadycal_core::sample::Sample;

use super::{Batch, ColumnNames, FeedError, FeedFloat};
use crate::field::missing::{MissingMarkers, MissingTally};

/// How a time column is read.
#[derive(Clone, Copy, Debug, PartialEq)]
enum TimeColumn {
    /// Seconds as numbers.
    Seconds,
    /// An Arrow timestamp: integer ticks of this many per second.
    Ticks(f64),
}

#[derive(Clone, Copy, Debug)]
struct Found {
    time: Option<(usize, TimeColumn)>,
    raw: usize,
    reference: Option<usize>,
    temperature: Option<usize>,
}

/// The columns of an Arrow stream and what was counted while reading it.
#[derive(Clone, Debug)]
pub struct ArrowColumns {
    file: String,
    names: ColumnNames,
    found: Found,
    missing: MissingMarkers,
    schema: Arc<Schema>,
    rows: u64,
    /// Rows whose raw value was missing (no sample).
    pub missing_raw: u64,
    /// Missing cells by column and marker (`null` for an Arrow null).
    pub tally: MissingTally,
}

/// The marker an Arrow null is counted under.
pub const NULL_MARKER: &str = "null";

fn is_number(data_type: &DataType) -> bool {
    data_type.is_integer() || data_type.is_floating()
}

impl ArrowColumns {
    /// Finds the columns of `schema`; `file` names the source in errors.
    pub fn new(
        file: &str,
        schema: Arc<Schema>,
        names: &ColumnNames,
        missing: &MissingMarkers,
    ) -> Result<Self, FeedError> {
        let fields = schema.fields();
        let found_names = || {
            fields
                .iter()
                .map(|f| f.name().as_str())
                .collect::<Vec<_>>()
                .join(", ")
        };
        let find = |name: &str| fields.iter().position(|f| f.name() == name);
        let numeric = |index: usize| -> Result<usize, FeedError> {
            let field = &fields[index];
            if is_number(field.data_type()) {
                Ok(index)
            } else {
                Err(FeedError::ColumnType {
                    file: file.to_string(),
                    column: field.name().clone(),
                    found: field.data_type().to_string(),
                    expected: "numbers (an integer or floating-point type)",
                })
            }
        };
        let raw = find(&names.raw).ok_or_else(|| FeedError::NoColumn {
            file: file.to_string(),
            column: names.raw.clone(),
            found: found_names(),
        })?;
        let raw = numeric(raw)?;
        let reference = find(&names.reference).map(numeric).transpose()?;
        let temperature = find(&names.temperature).map(numeric).transpose()?;
        let time = match find(&names.time) {
            None => None,
            Some(index) => {
                let field = &fields[index];
                let kind = match field.data_type() {
                    DataType::Timestamp(unit, _) => TimeColumn::Ticks(match unit {
                        TimeUnit::Second => 1.0,
                        TimeUnit::Millisecond => 1e3,
                        TimeUnit::Microsecond => 1e6,
                        TimeUnit::Nanosecond => 1e9,
                    }),
                    other if is_number(other) => TimeColumn::Seconds,
                    other => {
                        return Err(FeedError::ColumnType {
                            file: file.to_string(),
                            column: field.name().clone(),
                            found: other.to_string(),
                            expected: "seconds as numbers, or a timestamp",
                        })
                    }
                };
                Some((index, kind))
            }
        };
        Ok(ArrowColumns {
            file: file.to_string(),
            names: names.clone(),
            found: Found {
                time,
                raw,
                reference,
                temperature,
            },
            missing: missing.clone(),
            schema,
            rows: 0,
            missing_raw: 0,
            tally: MissingTally::default(),
        })
    }

    /// The source's name as given.
    pub fn file(&self) -> &str {
        &self.file
    }

    /// Rows read so far.
    pub fn rows(&self) -> u64 {
        self.rows
    }

    /// A column of `batch` as `f64`, checked against the schema the columns were found in.
    fn column(&self, batch: &RecordBatch, index: usize) -> Result<ArrayRef, FeedError> {
        let name = self.schema.field(index).name();
        let wanted = self.schema.field(index).data_type();
        let column = batch
            .schema()
            .index_of(name)
            .ok()
            .map(|i| batch.column(i).clone())
            .filter(|c| c.data_type() == wanted)
            .ok_or_else(|| FeedError::BadRow {
                location: super::Location {
                    file: self.file.clone(),
                    line: self.rows + 1,
                    column: 0,
                },
                message: format!(
                    "a batch from row {} on has no column `{name}` of type {wanted}, unlike the stream's schema",
                    self.rows + 1
                ),
            })?;
        Ok(column)
    }

    fn as_f64(&self, batch: &RecordBatch, index: usize) -> Result<ArrayRef, FeedError> {
        let column = self.column(batch, index)?;
        if column.data_type() == &DataType::Float64 {
            return Ok(column);
        }
        arrow::compute::cast(&column, &DataType::Float64).map_err(|e| FeedError::ColumnType {
            file: self.file.clone(),
            column: self.schema.field(index).name().clone(),
            found: format!("{} ({e})", column.data_type()),
            expected: "numbers (an integer or floating-point type)",
        })
    }

    /// Appends the rows of `batch` to `out` (samples, their 1-based rows, and bad rows).
    /// An error here is about the whole batch (a column missing or of another type than
    /// the schema said) and ends the stream.
    pub fn fill_batch<R: FeedFloat>(
        &mut self,
        batch: &RecordBatch,
        out: &mut Batch<R>,
    ) -> Result<(), FeedError> {
        let raw = self.as_f64(batch, self.found.raw)?;
        let raw = raw.as_primitive::<Float64Type>();
        let reference = self
            .found
            .reference
            .map(|i| self.as_f64(batch, i))
            .transpose()?;
        let reference = reference.as_ref().map(|a| a.as_primitive::<Float64Type>());
        let temperature = self
            .found
            .temperature
            .map(|i| self.as_f64(batch, i))
            .transpose()?;
        let temperature = temperature
            .as_ref()
            .map(|a| a.as_primitive::<Float64Type>());
        let time = match self.found.time {
            None => None,
            Some((index, TimeColumn::Seconds)) => Some((self.as_f64(batch, index)?, None)),
            Some((index, TimeColumn::Ticks(per_second))) => {
                let ticks = self.column(batch, index)?;
                let ticks = arrow::compute::cast(&ticks, &DataType::Int64).map_err(|e| {
                    FeedError::ColumnType {
                        file: self.file.clone(),
                        column: self.names.time.clone(),
                        found: format!("{} ({e})", ticks.data_type()),
                        expected: "seconds as numbers, or a timestamp",
                    }
                })?;
                Some((ticks, Some(per_second)))
            }
        };
        let names = [
            &self.names.raw,
            &self.names.reference,
            &self.names.temperature,
        ];
        for i in 0..batch.num_rows() {
            let seq = self.rows;
            self.rows += 1;
            let row = self.rows;
            let t = match &time {
                None => seq as f64,
                Some((array, _)) if array.is_null(i) => {
                    out.errors
                        .push((out.samples.len(), self.bad(row, NULL_MARKER)));
                    continue;
                }
                Some((array, None)) => array.as_primitive::<Float64Type>().value(i),
                Some((array, Some(per_second))) => {
                    array.as_primitive::<Int64Type>().value(i) as f64 / per_second
                }
            };
            let missing = &self.missing;
            let tally = &mut self.tally;
            let raw_value = cell(Some(raw), i, names[0], missing, tally);
            let reference = cell(reference, i, names[1], missing, tally);
            let temperature = cell(temperature, i, names[2], missing, tally);
            let Some(raw_value) = raw_value else {
                self.missing_raw += 1;
                continue;
            };
            out.samples.push(Sample {
                seq,
                t,
                raw: R::from_f64(raw_value),
                reference: reference.map(R::from_f64),
                temperature: temperature.map(R::from_f64),
                averaged: 1,
            });
            out.lines.push(row);
        }
        Ok(())
    }

    fn bad(&self, row: u64, found: &str) -> FeedError {
        FeedError::BadValue {
            file: self.file.clone(),
            row,
            column: self.names.time.clone(),
            expected: "a time",
            found: found.to_string(),
        }
    }
}

/// Row `i` of a value column: `None` when the column is absent or the cell is missing (a
/// null, or a value equal to a numeric marker; counted in `tally`).
#[inline]
fn cell(
    array: Option<&arrow::array::Float64Array>,
    i: usize,
    column: &str,
    missing: &MissingMarkers,
    tally: &mut MissingTally,
) -> Option<f64> {
    let array = array?;
    if array.is_null(i) {
        tally.count(column, NULL_MARKER);
        return None;
    }
    let value = array.value(i);
    if !missing.values().is_empty() {
        if let Some(marker) = missing.marker_of_value(value) {
            tally.count(column, marker);
            return None;
        }
    }
    Some(value)
}

#[cfg(test)]
mod tests {
    use super::*;
    use arrow::array::{Float32Array, Float64Array, Int64Array, StringArray};
    use arrow::datatypes::Field;

    fn batch(columns: Vec<(&str, ArrayRef)>) -> RecordBatch {
        RecordBatch::try_from_iter(columns).unwrap()
    }

    #[test]
    fn nulls_and_markers_are_missing_cells() {
        let b = batch(vec![
            (
                "t",
                Arc::new(Int64Array::from(vec![10, 11, 12, 13])) as ArrayRef,
            ),
            (
                "raw",
                Arc::new(Float32Array::from(vec![
                    Some(1.5),
                    None,
                    Some(-200.0),
                    Some(4.0),
                ])),
            ),
            (
                "ref",
                Arc::new(Float64Array::from(vec![
                    Some(2.0),
                    Some(3.0),
                    None,
                    Some(-200.0),
                ])),
            ),
        ]);
        let markers = MissingMarkers::new(&["-200"]).unwrap();
        let mut columns =
            ArrowColumns::new("x", b.schema(), &ColumnNames::default(), &markers).unwrap();
        let mut out = Batch::<f64>::with_capacity(8);
        columns.fill_batch(&b, &mut out).unwrap();
        let got: Vec<_> = out
            .samples
            .iter()
            .map(|s| (s.seq, s.t, s.raw, s.reference))
            .collect();
        assert_eq!(got, [(0, 10.0, 1.5, Some(2.0)), (3, 13.0, 4.0, None)]);
        assert_eq!(out.lines, [1, 4]);
        assert_eq!(columns.missing_raw, 2);
        assert_eq!(columns.tally.by_column["raw"]["null"], 1);
        assert_eq!(columns.tally.by_column["raw"]["-200"], 1);
        assert_eq!(columns.tally.by_column["ref"]["-200"], 1);
    }

    #[test]
    fn text_columns_and_absent_columns_are_refused_by_name() {
        let schema = Arc::new(Schema::new(vec![
            Field::new("raw", DataType::Utf8, true),
            Field::new("ref", DataType::Float64, true),
        ]));
        let error = ArrowColumns::new(
            "feed.parquet",
            schema,
            &ColumnNames::default(),
            &MissingMarkers::default(),
        )
        .unwrap_err();
        assert_eq!(
            error.to_string(),
            "feed.parquet: column `raw` holds Utf8, expected numbers (an integer or floating-point type)"
        );
        let b = batch(vec![(
            "counts",
            Arc::new(StringArray::from(vec!["1"])) as ArrayRef,
        )]);
        let error = ArrowColumns::new(
            "feed.parquet",
            b.schema(),
            &ColumnNames::default(),
            &MissingMarkers::default(),
        )
        .unwrap_err();
        assert_eq!(
            error.to_string(),
            "feed.parquet: no column `raw`, expected one (found: counts)"
        );
    }

    #[test]
    fn a_null_time_is_a_bad_row_and_timestamps_are_seconds() {
        use arrow::array::TimestampMillisecondArray;
        let b = batch(vec![
            (
                "t",
                Arc::new(TimestampMillisecondArray::from(vec![Some(1_500), None])) as ArrayRef,
            ),
            ("raw", Arc::new(Float64Array::from(vec![1.0, 2.0]))),
        ]);
        let mut columns = ArrowColumns::new(
            "x",
            b.schema(),
            &ColumnNames::default(),
            &MissingMarkers::default(),
        )
        .unwrap();
        let mut out = Batch::<f32>::with_capacity(2);
        columns.fill_batch(&b, &mut out).unwrap();
        assert_eq!(out.samples[0].t, 1.5);
        assert_eq!(out.errors.len(), 1);
        assert_eq!(
            out.errors[0].1.to_string(),
            "x: row 2: column `t`: expected a time, found null"
        );
    }
}
