//! The events and readings of pushed samples as Arrow tables, row for row what the CLI's
//! `--events` and `--readings` files hold (see [`crate::schema`] for the types): a reading
//! row per sample without a reference (value columns null when the monitor gave none), an
//! event row per event with its own fields set and the others null.

use std::fmt::Write as _;
use std::sync::Arc;

use arrow::array::{
    ArrayRef, BooleanBuilder, Float32Array, Float64Array, Float64Builder, RecordBatch,
    StringBuilder, UInt32Builder, UInt64Array, UInt64Builder,
};
use arrow::error::ArrowError;
use steadycal_cli::number::shortest_f64;
use steadycal_cli::precision::Precision;
use steadycal_core::event::{Event, FieldValue, Shape};
use steadycal_core::real::Real;
use steadycal_core::sample::{Outcome, Sample};
use steadycal_core::transform::Rung;

use crate::schema;

/// A float type of the core as an Arrow column.
pub trait Column: Real + std::fmt::Display + Send + 'static {
    /// The run's precision.
    const PRECISION: Precision;
    /// Values as an array.
    fn array(values: Vec<Self>) -> ArrayRef;
    /// Optional values as an array (`None` is null).
    fn optional(values: Vec<Option<Self>>) -> ArrayRef;
}

impl Column for f32 {
    const PRECISION: Precision = Precision::F32;
    fn array(values: Vec<f32>) -> ArrayRef {
        Arc::new(Float32Array::from(values))
    }
    fn optional(values: Vec<Option<f32>>) -> ArrayRef {
        Arc::new(Float32Array::from(values))
    }
}

impl Column for f64 {
    const PRECISION: Precision = Precision::F64;
    fn array(values: Vec<f64>) -> ArrayRef {
        Arc::new(Float64Array::from(values))
    }
    fn optional(values: Vec<Option<f64>>) -> ArrayRef {
        Arc::new(Float64Array::from(values))
    }
}

/// Readings rows (the columns of `replay::sink::readings::HEADER`).
pub struct Readings<R> {
    seq: Vec<u64>,
    t: Vec<f64>,
    raw: Vec<R>,
    value: Vec<Option<R>>,
    standard: Vec<Option<R>>,
    expanded: Vec<Option<R>>,
    rung: StringBuilder,
    flags: StringBuilder,
}

impl<R: Column> Readings<R> {
    /// Room for about `rows` readings.
    pub fn with_capacity(rows: usize) -> Self {
        Readings {
            seq: Vec::with_capacity(rows),
            t: Vec::with_capacity(rows),
            raw: Vec::with_capacity(rows),
            value: Vec::with_capacity(rows),
            standard: Vec::with_capacity(rows),
            expanded: Vec::with_capacity(rows),
            rung: StringBuilder::with_capacity(rows, rows * 8),
            flags: StringBuilder::with_capacity(rows, rows * 8),
        }
    }

    /// The row of `sample` when it has no reference (checks make no reading row);
    /// `rung` is the monitor's active rung after the push.
    #[inline]
    pub fn push(&mut self, sample: &Sample<R>, outcome: &Outcome<R>, rung: Rung) {
        if sample.reference.is_some() {
            return;
        }
        self.seq.push(sample.seq);
        self.t.push(sample.t);
        self.raw.push(sample.raw);
        let reading = outcome.reading();
        self.value.push(reading.map(|r| r.value));
        self.standard.push(reading.map(|r| r.standard_uncertainty));
        self.expanded.push(reading.map(|r| r.expanded_uncertainty));
        self.rung
            .append_value(reading.map_or(rung, |r| r.rung).name());
        for (i, name) in outcome.flags.names().enumerate() {
            if i > 0 {
                let _ = self.flags.write_char('|');
            }
            let _ = self.flags.write_str(name);
        }
        self.flags.append_value("");
    }

    /// The table.
    pub fn finish(mut self) -> Result<RecordBatch, ArrowError> {
        let columns: Vec<ArrayRef> = vec![
            Arc::new(UInt64Array::from(self.seq)),
            Arc::new(Float64Array::from(self.t)),
            R::array(self.raw),
            R::optional(self.value),
            R::optional(self.standard),
            R::optional(self.expanded),
            Arc::new(self.rung.finish()),
            Arc::new(self.flags.finish()),
        ];
        RecordBatch::try_new(schema::readings(R::PRECISION), columns)
    }
}

/// One event field's column.
enum FieldColumn {
    Number(Float64Builder),
    Integer(UInt32Builder),
    Flag(BooleanBuilder),
    Name(StringBuilder),
}

impl FieldColumn {
    fn new(shape: Shape) -> Self {
        match shape {
            Shape::Real | Shape::Wide => FieldColumn::Number(Float64Builder::new()),
            Shape::Integer => FieldColumn::Integer(UInt32Builder::new()),
            Shape::Flag => FieldColumn::Flag(BooleanBuilder::new()),
            Shape::Name => FieldColumn::Name(StringBuilder::new()),
        }
    }

    fn null(&mut self) {
        match self {
            FieldColumn::Number(b) => b.append_null(),
            FieldColumn::Integer(b) => b.append_null(),
            FieldColumn::Flag(b) => b.append_null(),
            FieldColumn::Name(b) => b.append_null(),
        }
    }

    /// The value as the JSON line writes it (numbers: the shortest decimal read back).
    fn value<R: Column>(&mut self, value: FieldValue<R>) {
        match (self, value) {
            (FieldColumn::Number(b), FieldValue::Real(v)) => b.append_option(shortest_f64(v)),
            (FieldColumn::Number(b), FieldValue::Wide(v)) => b.append_option(shortest_f64(v)),
            (FieldColumn::Integer(b), FieldValue::Integer(n)) => b.append_value(n),
            (FieldColumn::Flag(b), FieldValue::Flag(f)) => b.append_value(f),
            (FieldColumn::Name(b), FieldValue::Name(n)) => b.append_value(n),
            (column, _) => column.null(),
        }
    }

    fn finish(self) -> ArrayRef {
        match self {
            FieldColumn::Number(mut b) => Arc::new(b.finish()),
            FieldColumn::Integer(mut b) => Arc::new(b.finish()),
            FieldColumn::Flag(mut b) => Arc::new(b.finish()),
            FieldColumn::Name(mut b) => Arc::new(b.finish()),
        }
    }
}

/// Event rows (the lines of `--events`).
pub struct Events {
    seq: UInt64Builder,
    t: Float64Builder,
    kind: StringBuilder,
    keys: Vec<&'static str>,
    fields: Vec<FieldColumn>,
    set: Vec<bool>,
}

impl Default for Events {
    fn default() -> Self {
        let described = schema::event_fields().unwrap_or_default();
        Events {
            seq: UInt64Builder::new(),
            t: Float64Builder::new(),
            kind: StringBuilder::new(),
            keys: described.iter().map(|(key, _)| *key).collect(),
            fields: described
                .iter()
                .map(|(_, shape)| FieldColumn::new(*shape))
                .collect(),
            set: vec![false; described.len()],
        }
    }
}

impl Events {
    /// The row of `event`, raised by the sample at time `t`.
    pub fn push<R: Column>(&mut self, event: &Event<R>, t: f64) {
        self.seq.append_value(event.seq);
        self.t.append_option(shortest_f64(t));
        self.kind.append_value(event.kind.name());
        self.set.iter_mut().for_each(|s| *s = false);
        let (keys, fields, set) = (&self.keys, &mut self.fields, &mut self.set);
        let _ = event
            .kind
            .for_each_field(&mut |key: &'static str, value: FieldValue<R>| {
                if let Some(at) = keys.iter().position(|k| *k == key) {
                    fields[at].value(value);
                    set[at] = true;
                }
                Ok::<(), ()>(())
            });
        for (field, set) in self.fields.iter_mut().zip(&self.set) {
            if !set {
                field.null();
            }
        }
    }

    /// The table.
    pub fn finish(mut self) -> Result<RecordBatch, ArrowError> {
        let mut columns: Vec<ArrayRef> = vec![
            Arc::new(self.seq.finish()),
            Arc::new(self.t.finish()),
            Arc::new(self.kind.finish()),
        ];
        columns.extend(self.fields.into_iter().map(FieldColumn::finish));
        RecordBatch::try_new(schema::events(), columns)
    }
}
