//! steadycal for Python: the extension module `steadycal._native` under the `steadycal`
//! package. Nothing of the monitor is written here: replays and assessments run the host
//! library's commands (`steadycal_cli::commands`), the monitor is `steadycal_core`'s through
//! the host's engine, and the tables are the CLI's files described as Arrow schemas.
//!
//! One job per module: [`schema`] (the Arrow schemas of the outputs, from the CLI's
//! formats), [`tables`] (building those tables from the engine), [`columns`] (samples from
//! Arrow columns), [`monitor`] (the `Monitor` class), [`cli`] (the CLI's commands from an
//! argument list), [`convert`] (values between Rust and Python, errors as `ValueError`).
#![forbid(unsafe_code)]

use pyo3::prelude::*;

mod cli;
mod columns;
mod convert;
mod monitor;
mod schema;
mod tables;

/// The extension module.
#[pymodule]
fn _native(m: &Bound<'_, PyModule>) -> PyResult<()> {
    m.add_class::<monitor::Monitor>()?;
    m.add_function(wrap_pyfunction!(monitor::restore_monitor, m)?)?;
    m.add_function(wrap_pyfunction!(cli::replay_command, m)?)?;
    m.add_function(wrap_pyfunction!(cli::replay_arrow, m)?)?;
    m.add_function(wrap_pyfunction!(cli::assess_command, m)?)?;
    m.add_function(wrap_pyfunction!(cli::fleet_row, m)?)?;
    m.add_function(wrap_pyfunction!(cli::config_text, m)?)?;
    m.add_function(wrap_pyfunction!(schema::schemas, m)?)?;
    m.add("__version__", env!("CARGO_PKG_VERSION"))?;
    Ok(())
}
