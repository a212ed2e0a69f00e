//! Values between Rust and Python: errors as `ValueError` (the CLI's message, `{error:#}`
//! as `steadycal` prints it), JSON documents as Python objects, the precision by name.

use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use steadycal_cli::precision::Precision;

/// An error of the host library as the `ValueError` carrying the CLI's message.
pub fn value_error(error: anyhow::Error) -> PyErr {
    PyValueError::new_err(format!("{error:#}"))
}

/// A JSON document as the Python object `json.loads` makes of it.
pub fn json_to_python<'py>(
    py: Python<'py>,
    value: &serde_json::Value,
) -> PyResult<Bound<'py, PyAny>> {
    let text = serde_json::to_string(value).map_err(|e| value_error(e.into()))?;
    py.import("json")?.call_method1("loads", (text,))
}

/// `"f32"` or `"f64"`.
pub fn precision(name: &str) -> PyResult<Precision> {
    match name {
        "f32" => Ok(Precision::F32),
        "f64" => Ok(Precision::F64),
        other => Err(PyValueError::new_err(format!(
            "precision: expected \"f32\" or \"f64\", found {other:?}"
        ))),
    }
}

/// The name of a precision.
pub fn precision_name(precision: Precision) -> &'static str {
    match precision {
        Precision::F32 => "f32",
        Precision::F64 => "f64",
    }
}
