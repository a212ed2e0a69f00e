//! The CLI's commands run from an argument list, so the Python functions take exactly the
//! CLI's options and give its files and messages: `replay` and `assess` are parsed by the
//! commands' own clap arguments and run by the commands' own `run`.

use anyhow::{anyhow, Result};
use clap::Parser;
use pyo3::exceptions::PyValueError;
use pyo3::prelude::*;
use steadycal_cli::commands::{assess::AssessArgs, fleet::FleetRow, replay::ReplayArgs};

use crate::convert::value_error;

#[derive(Parser)]
#[command(name = "steadycal replay")]
struct Replay {
    #[command(flatten)]
    args: ReplayArgs,
}

#[derive(Parser)]
#[command(name = "steadycal assess")]
struct Assess {
    #[command(flatten)]
    args: AssessArgs,
}

/// A clap error as a `ValueError` with clap's first line (what was wrong).
fn usage_error(error: clap::Error) -> PyErr {
    let text = error.render().to_string();
    let first = text
        .lines()
        .next()
        .unwrap_or("")
        .trim_start_matches("error: ");
    PyValueError::new_err(first.to_string())
}

/// `replay_command(argv)`: `steadycal replay ARGS...` (argv without the program name).
/// Errors before the run raise `ValueError`; an error in the feed is in the summary
/// (`stopped_at`), written with every output up to it.
#[pyfunction]
pub fn replay_command(py: Python<'_>, argv: Vec<String>) -> PyResult<()> {
    let parsed = Replay::try_parse_from(std::iter::once("replay".to_string()).chain(argv))
        .map_err(usage_error)?;
    py.detach(|| steadycal_cli::commands::replay::run(parsed.args))
        .map_err(value_error)?;
    Ok(())
}

/// `assess_command(argv)`: `steadycal assess ARGS...`.
#[pyfunction]
pub fn assess_command(py: Python<'_>, argv: Vec<String>) -> PyResult<()> {
    let parsed = Assess::try_parse_from(std::iter::once("assess".to_string()).chain(argv))
        .map_err(usage_error)?;
    py.detach(|| steadycal_cli::commands::assess::run(parsed.args))
        .map_err(value_error)?;
    Ok(())
}

/// `fleet_row(name, summary_json)`: the row `steadycal fleet` makes of a channel's summary,
/// as JSON (the keys of `fleet --json`, `file` holding `name`).
#[pyfunction]
pub fn fleet_row(name: String, summary_json: &str) -> PyResult<String> {
    let summary: serde_json::Value =
        serde_json::from_str(summary_json).map_err(|e| value_error(e.into()))?;
    serde_json::to_string(&FleetRow::from_summary(name, &summary))
        .map_err(|e| value_error(e.into()))
}

/// A JSON object as TOML text (a configuration given as a dict).
pub fn toml_of_json(json: &str) -> Result<String> {
    let value: serde_json::Value = serde_json::from_str(json)?;
    if !value.is_object() {
        return Err(anyhow!(
            "config: expected a mapping of sections, found {value}"
        ));
    }
    let table: toml::Value = serde_json::from_value(value)
        .map_err(|e| anyhow!("config: cannot be written as TOML: {e}"))?;
    toml::to_string(&table).map_err(|e| anyhow!("config: cannot be written as TOML: {e}"))
}

/// `config_text(json)`: a configuration given as a dict (in JSON) as the TOML file text.
#[pyfunction]
pub fn config_text(json: &str) -> PyResult<String> {
    toml_of_json(json).map_err(value_error)
}

/// `replay_arrow(source, name, argv)`: `steadycal replay` on an Arrow stream (a pyarrow
/// Table, or any object with `__arrow_c_stream__`) through the host library's
/// `replay_record_batches`, with the same options (columns, `--missing` and the
/// configuration's `columns.missing`, outputs); `name` stands for the feed in messages and
/// in the summary. Batches are read as the replay goes.
#[pyfunction]
pub fn replay_arrow(
    py: Python<'_>,
    source: &Bound<'_, PyAny>,
    name: String,
    argv: Vec<String>,
) -> PyResult<()> {
    use arrow::pyarrow::{FromPyArrow, Table};
    let parsed =
        Replay::try_parse_from(["replay".to_string(), name.clone()].into_iter().chain(argv))
            .map_err(usage_error)?;
    let args = parsed.args;
    let mut options = args.options().map_err(value_error)?;
    let mut markers = Vec::new();
    if let Some(path) = &args.monitor.config {
        let file =
            steadycal_cli::config::ConfigFile::read(path).map_err(|e| value_error(e.into()))?;
        for marker in file.columns.missing.unwrap_or_default() {
            markers.push(
                steadycal_cli::field::missing::parse_marker(&marker)
                    .map_err(|e| value_error(anyhow!("columns.missing: {e}")))?,
            );
        }
    }
    markers.extend(args.field.missing.iter().cloned());
    options.missing = steadycal_cli::field::missing::MissingMarkers::new(&markers)
        .map_err(|e| value_error(anyhow!("--missing: {e}")))?;
    let table = Table::from_pyarrow_bound(source)?;
    let (batches, schema) = table.into_inner();
    py.detach(|| {
        steadycal_cli::replay::replay_record_batches(
            &name,
            schema,
            batches.into_iter().map(Ok),
            &options,
        )
    })
    .map_err(value_error)?;
    Ok(())
}
