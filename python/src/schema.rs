//! The Arrow schemas of a run's tables, derived from the formats the CLI writes: the
//! readings and checks CSV headers (`replay::sink::readings::HEADER`,
//! `report::checks::HEADER`) and the core's list of event kinds (`KindId::fields`).
//!
//! Column types: `seq` is `uint64`, `t` is `float64`, `rung`, `flags` and `kind` are
//! strings, every other readings or checks column is the run's float type (`float32` in
//! an f32 run: the value the CSV's shortest decimal reads back as). Event fields follow
//! their shape: numbers are `float64` holding what the JSON line's number reads as (the
//! shortest decimal in the run's float type), integers `uint32`, flags `bool`, names
//! strings. Every column is nullable: an empty CSV cell, a JSON `null` or a field another
//! kind has is null.

use std::sync::Arc;

use arrow::datatypes::{DataType, Field, Schema, SchemaRef};
use arrow::pyarrow::ToPyArrow;
use pyo3::prelude::*;
use pyo3::types::PyDict;
use steadycal_cli::precision::Precision;
use steadycal_core::event::{KindId, Shape};

use crate::convert::precision;

/// The Arrow type of the run's float type.
pub fn real(precision: Precision) -> DataType {
    match precision {
        Precision::F32 => DataType::Float32,
        Precision::F64 => DataType::Float64,
    }
}

fn csv_schema(header: &str, precision: Precision) -> SchemaRef {
    let fields: Vec<Field> = header
        .split(',')
        .map(|name| {
            let kind = match name {
                "seq" => DataType::UInt64,
                "t" => DataType::Float64,
                "rung" | "flags" => DataType::Utf8,
                _ => real(precision),
            };
            Field::new(name, kind, true)
        })
        .collect();
    Arc::new(Schema::new(fields))
}

/// The readings table: the columns of `--readings`.
pub fn readings(precision: Precision) -> SchemaRef {
    csv_schema(steadycal_cli::replay::sink::readings::HEADER, precision)
}

/// The checks table: the columns of `--checks`.
pub fn checks(precision: Precision) -> SchemaRef {
    csv_schema(steadycal_cli::report::checks::HEADER, precision)
}

/// The type of an event field of `shape`.
pub fn field_type(shape: Shape) -> DataType {
    match shape {
        Shape::Real | Shape::Wide => DataType::Float64,
        Shape::Integer => DataType::UInt32,
        Shape::Flag => DataType::Boolean,
        Shape::Name => DataType::Utf8,
    }
}

/// Every event field in the order of the list of kinds (first appearance), with its
/// shape. A key two kinds give different shapes would make no column: it is refused.
pub fn event_fields() -> Result<Vec<(&'static str, Shape)>, String> {
    let mut fields: Vec<(&'static str, Shape)> = Vec::new();
    for kind in KindId::ALL {
        for info in kind.fields() {
            match fields.iter().find(|(key, _)| *key == info.key) {
                Some((_, shape)) if field_type(*shape) != field_type(info.shape) => {
                    return Err(format!(
                        "event field `{}` has two shapes ({shape:?} and {:?})",
                        info.key, info.shape
                    ))
                }
                Some(_) => {}
                None => fields.push((info.key, info.shape)),
            }
        }
    }
    Ok(fields)
}

/// The events table: `seq`, `t`, `kind`, then every event field.
pub fn events() -> SchemaRef {
    let mut columns = vec![
        Field::new("seq", DataType::UInt64, true),
        Field::new("t", DataType::Float64, true),
        Field::new("kind", DataType::Utf8, true),
    ];
    // The list of kinds is fixed at build time; a clash is caught by the package's tests.
    for (key, shape) in event_fields().unwrap_or_default() {
        columns.push(Field::new(key, field_type(shape), true));
    }
    Arc::new(Schema::new(columns))
}

/// `schemas(precision)`: the pyarrow schemas of `events`, `readings` and `checks`.
#[pyfunction]
#[pyo3(signature = (precision = "f32"))]
pub fn schemas<'py>(py: Python<'py>, precision: &str) -> PyResult<Bound<'py, PyDict>> {
    let precision = self::precision(precision)?;
    event_fields().map_err(pyo3::exceptions::PyValueError::new_err)?;
    let out = PyDict::new(py);
    out.set_item("events", events().to_pyarrow(py)?)?;
    out.set_item("readings", readings(precision).to_pyarrow(py)?)?;
    out.set_item("checks", checks(precision).to_pyarrow(py)?)?;
    Ok(out)
}
