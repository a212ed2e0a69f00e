//! `steadycal.Monitor`: one channel's monitor in Python, the host's engine (the core's
//! `Monitor` with the event counts `replay` keeps) in f32 or f64.
//!
//! Samples are numbered from the samples the monitor has counted, so a monitor restored
//! from a snapshot numbers on as `replay --resume` does. The event counts of `summary()`
//! are those of this object's life: a snapshot holds the monitor's state, not the
//! bookkeeping around it (as for `--resume`).

use anyhow::{anyhow, Result};
use arrow::pyarrow::{FromPyArrow, IntoPyArrow, Table};
use arrow::record_batch::RecordBatch;
use pyo3::prelude::*;
use pyo3::types::{PyBytes, PyDict, PyList, PyTuple};
use steadycal_cli::precision::Precision;
use steadycal_cli::replay::sink::events::event_json;
use steadycal_cli::replay::Engine;
use steadycal_cli::snapshot_file::{restore_bytes, Restored};
use steadycal_config::ConfigFile;
use steadycal_core::sample::Sample;
use steadycal_core::snapshot::max_snapshot_len;

use crate::columns::{BatchColumns, Names};
use crate::convert::{json_to_python, precision, precision_name, value_error};
use crate::tables::{Column, Events, Readings};

/// The name a snapshot's bytes go by in messages.
const SNAPSHOT_NAME: &str = "snapshot";

enum Inner {
    F32(Box<Engine<f32>>),
    F64(Box<Engine<f64>>),
}

macro_rules! with_engine {
    ($inner:expr, $engine:ident => $body:expr) => {
        match $inner {
            Inner::F32($engine) => $body,
            Inner::F64($engine) => $body,
        }
    };
}

/// One channel's calibration monitor (see the package documentation).
#[pyclass(module = "steadycal", name = "Monitor")]
pub struct Monitor {
    inner: Inner,
}

/// The configuration named by `config`: `None` (defaults), a path to a TOML file, or a
/// mapping of the file's sections.
fn config_of(py: Python<'_>, config: Option<&Bound<'_, PyAny>>) -> PyResult<ConfigFile> {
    let Some(config) = config else {
        return Ok(ConfigFile::default());
    };
    if config.is_instance_of::<PyDict>() {
        let text: String = py
            .import("json")?
            .call_method1("dumps", (config,))?
            .extract()?;
        let text = crate::cli::toml_of_json(&text).map_err(value_error)?;
        return ConfigFile::parse("config", &text).map_err(|e| value_error(e.into()));
    }
    let path: std::path::PathBuf = py
        .import("os")?
        .call_method1("fspath", (config,))?
        .extract()?;
    ConfigFile::read(&path).map_err(|e| value_error(e.into()))
}

fn engine<R: Column>(file: &ConfigFile) -> Result<Engine<R>> {
    let channel = file.channel("config")?;
    Engine::<R>::new(&channel.monitor, channel.baseline.as_ref())
}

fn push_one<'py, R: Column>(
    py: Python<'py>,
    engine: &mut Engine<R>,
    t: f64,
    raw: f64,
    reference: Option<f64>,
    temperature: Option<f64>,
) -> PyResult<Bound<'py, PyDict>> {
    let sample = Sample {
        seq: engine.monitor.counters().samples,
        t,
        raw: R::from_f64(raw),
        reference: reference.map(R::from_f64),
        temperature: temperature.map(R::from_f64),
        averaged: 1,
    };
    let mut events = Vec::new();
    let outcome = engine
        .push(&sample, |event| {
            events.push(event_json(event, t));
            Ok(())
        })
        .map_err(|e| value_error(e.into()))?;
    let out = PyDict::new(py);
    out.set_item("seq", sample.seq)?;
    let reading = match outcome.reading() {
        Some(r) => {
            let d = PyDict::new(py);
            d.set_item("value", r.value.to_f64())?;
            d.set_item("standard_uncertainty", r.standard_uncertainty.to_f64())?;
            d.set_item("expanded_uncertainty", r.expanded_uncertainty.to_f64())?;
            d.set_item("rung", r.rung.name())?;
            d.into_any()
        }
        None => py.None().into_bound(py),
    };
    out.set_item("reading", reading)?;
    out.set_item("flags", PyList::new(py, outcome.flags.names())?)?;
    let events: Vec<Bound<'py, PyAny>> = events
        .iter()
        .map(|e| json_to_python(py, e))
        .collect::<PyResult<_>>()?;
    out.set_item("events", PyList::new(py, events)?)?;
    Ok(out)
}

/// Pushes every row of the batches; the events and readings as tables.
fn push_batches<R: Column>(
    engine: &mut Engine<R>,
    batches: &[RecordBatch],
    names: &Names,
) -> Result<(RecordBatch, RecordBatch)> {
    let rows = batches.iter().map(RecordBatch::num_rows).sum();
    let mut readings = Readings::<R>::with_capacity(rows);
    let mut events = Events::default();
    for batch in batches {
        let columns = BatchColumns::new(batch, names)?;
        for i in 0..columns.rows() {
            let sample: Sample<R> = columns.sample(i, engine.monitor.counters().samples, names)?;
            let t = sample.t;
            let outcome = engine.push(&sample, |event| {
                events.push(event, t);
                Ok(())
            })?;
            readings.push(&sample, &outcome, engine.monitor.rung());
        }
    }
    Ok((events.finish()?, readings.finish()?))
}

fn snapshot_of<R: Column>(engine: &mut Engine<R>) -> Result<Vec<u8>> {
    let mut buffer = vec![0u8; max_snapshot_len::<R, 3, 16, 8>()];
    let len = engine
        .monitor
        .snapshot(&mut buffer)
        .map_err(|e| anyhow!("cannot encode the snapshot: {}", e.reason()))?;
    buffer.truncate(len);
    Ok(buffer)
}

fn to_table<'py>(py: Python<'py>, batch: RecordBatch) -> PyResult<Bound<'py, PyAny>> {
    let schema = batch.schema();
    Table::try_new(vec![batch], schema)
        .map_err(|e| value_error(e.into()))?
        .into_pyarrow(py)
}

#[pymethods]
impl Monitor {
    /// `Monitor(config=None, precision="f32")`: a fresh monitor. `config` is a path to a
    /// monitor configuration file (TOML) or a dict of its sections; `precision` the core's
    /// float type (`"f32"`, what a Cortex-M4F board runs, or `"f64"`).
    #[new]
    #[pyo3(signature = (config = None, precision = "f32"))]
    fn new(py: Python<'_>, config: Option<&Bound<'_, PyAny>>, precision: &str) -> PyResult<Self> {
        let precision = self::precision(precision)?;
        let file = config_of(py, config)?;
        let inner = match precision {
            Precision::F32 => Inner::F32(Box::new(engine::<f32>(&file).map_err(value_error)?)),
            Precision::F64 => Inner::F64(Box::new(engine::<f64>(&file).map_err(value_error)?)),
        };
        Ok(Monitor { inner })
    }

    /// `"f32"` or `"f64"`.
    #[getter]
    fn precision(&self) -> &'static str {
        precision_name(match self.inner {
            Inner::F32(_) => Precision::F32,
            Inner::F64(_) => Precision::F64,
        })
    }

    /// Samples pushed so far (the next sample's `seq`), counting those before a snapshot.
    #[getter]
    fn samples(&self) -> u64 {
        with_engine!(&self.inner, e => e.monitor.counters().samples)
    }

    /// The active rung's name.
    #[getter]
    fn rung(&self) -> &'static str {
        with_engine!(&self.inner, e => e.monitor.rung().name())
    }

    /// `push(t, raw, ref=None, temp=None)`: one sample; returns a dict with `seq`,
    /// `reading` (`value`, `standard_uncertainty`, `expanded_uncertainty`, `rung`; `None`
    /// for a check or when no reading could be made), `flags` and `events` (each as the
    /// CLI's event line).
    #[pyo3(signature = (t, raw, r#ref = None, temp = None))]
    fn push<'py>(
        &mut self,
        py: Python<'py>,
        t: f64,
        raw: f64,
        r#ref: Option<f64>,
        temp: Option<f64>,
    ) -> PyResult<Bound<'py, PyDict>> {
        with_engine!(&mut self.inner, e => push_one(py, e, t, raw, r#ref, temp))
    }

    /// `push_batch(table, *, time="t", raw="raw", ref="ref", temp="temp")`: every row of a
    /// pyarrow Table or RecordBatch (or any object with `__arrow_c_stream__`, such as a
    /// Polars DataFrame), in order, without a Python loop. Returns `(events, readings)` as
    /// pyarrow Tables with the columns of the CLI's `--events` and `--readings`. `time`
    /// may be absent (the sample number is the time); `ref` and `temp` may be absent or
    /// null on a row. Rows before a bad one stay pushed.
    #[pyo3(signature = (table, *, time = "t", raw = "raw", r#ref = "ref", temp = "temp"))]
    fn push_batch<'py>(
        &mut self,
        py: Python<'py>,
        table: &Bound<'py, PyAny>,
        time: &str,
        raw: &str,
        r#ref: &str,
        temp: &str,
    ) -> PyResult<Bound<'py, PyTuple>> {
        let batches: Vec<RecordBatch> = if table.hasattr("__arrow_c_stream__")? {
            Table::from_pyarrow_bound(table)?.into_inner().0
        } else {
            vec![RecordBatch::from_pyarrow_bound(table)?]
        };
        let names = Names {
            time: time.into(),
            raw: raw.into(),
            reference: r#ref.into(),
            temperature: temp.into(),
        };
        let inner = &mut self.inner;
        let (events, readings) = py
            .detach(|| with_engine!(inner, e => push_batches(e, &batches, &names)))
            .map_err(value_error)?;
        PyTuple::new(py, [to_table(py, events)?, to_table(py, readings)?])
    }

    /// The monitor's whole state as snapshot bytes (the format a board saves and
    /// `steadycal replay --resume` reads).
    fn snapshot<'py>(&mut self, py: Python<'py>) -> PyResult<Bound<'py, PyBytes>> {
        let bytes = with_engine!(&mut self.inner, e => snapshot_of(e)).map_err(value_error)?;
        Ok(PyBytes::new(py, &bytes))
    }

    /// `Monitor.restore(data)`: a monitor from snapshot bytes (a board's, the CLI's
    /// `--save-snapshot`, or `snapshot()`), in the precision they hold. A damaged snapshot
    /// raises `ValueError` naming the byte and what is wrong.
    #[staticmethod]
    fn restore(data: &[u8]) -> PyResult<Self> {
        let inner = match restore_bytes(SNAPSHOT_NAME, data).map_err(value_error)? {
            Restored::F32(m) => Inner::F32(Box::new(Engine::with_monitor(*m))),
            Restored::F64(m) => Inner::F64(Box::new(Engine::with_monitor(*m))),
        };
        Ok(Monitor { inner })
    }

    /// The summary document of the monitor (the engine's part of the CLI's summary JSON:
    /// counters, rung, spread exponent, calibration, drift, alarms, detectors, events).
    fn summary<'py>(&self, py: Python<'py>) -> PyResult<Bound<'py, PyAny>> {
        let precision = self.precision();
        let summary = with_engine!(&self.inner, e => e.summary(
            "(monitor)",
            crate::convert::precision(precision)?,
            None
        ));
        json_to_python(py, &summary)
    }

    /// Pickling goes through the snapshot.
    fn __reduce__<'py>(&mut self, py: Python<'py>) -> PyResult<Bound<'py, PyTuple>> {
        let restore = py
            .import("steadycal._native")?
            .getattr("_restore_monitor")?;
        let bytes = self.snapshot(py)?;
        PyTuple::new(py, [restore, PyTuple::new(py, [bytes])?.into_any()])
    }

    fn __repr__(&self) -> String {
        format!(
            "Monitor(precision={:?}, samples={}, rung={:?})",
            self.precision(),
            self.samples(),
            self.rung()
        )
    }
}

/// `_restore_monitor(data)`: `Monitor.restore`, as a module function for pickle.
#[pyfunction]
#[pyo3(name = "_restore_monitor")]
pub fn restore_monitor(data: &[u8]) -> PyResult<Monitor> {
    Monitor::restore(data)
}
