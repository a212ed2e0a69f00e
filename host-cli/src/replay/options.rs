//! What a replay reads and writes: [`ReplayOptions`], built by `commands::replay` (and
//! `fleet`, `report`) from the command line.

use std::path::PathBuf;

use serde::Serialize;
use steadycal_config::Commissioned;
use steadycal_core::monitor::MonitorConfig;

use crate::feed::ColumnNames;
use crate::field::missing::MissingMarkers;
use crate::precision::Precision;

/// What to replay and where to write.
#[derive(Clone, Debug)]
pub struct ReplayOptions {
    /// The feed (`-` for standard input).
    pub feed: PathBuf,
    /// Events as JSON lines (`-` for standard output).
    pub events: Option<PathBuf>,
    /// Summary as JSON (`-` for standard output).
    pub summary: Option<PathBuf>,
    /// Calibrated readings as CSV (`-` for standard output).
    pub readings: Option<PathBuf>,
    /// One row per fitted check as CSV, for `report` (`-` for standard output); see
    /// [`crate::report::checks`].
    pub checks: Option<PathBuf>,
    /// Float type.
    pub precision: Precision,
    /// Column names.
    pub columns: ColumnNames,
    /// Cells that mean "no value" (the defaults, empty and `NA`, plus `--missing` and the
    /// configuration's `columns.missing`); Arrow and Parquet sources also treat nulls so.
    pub missing: MissingMarkers,
    /// Monitor configuration (f64 values; rounded for f32 runs).
    pub config: MonitorConfig<f64>,
    /// The commissioned baseline of the drift test (the configuration's `[baseline]`);
    /// `None`: the monitor freezes its own.
    pub baseline: Option<Commissioned>,
    /// Skip malformed rows (listing each in the summary) instead of stopping.
    pub skip_bad_rows: bool,
    /// Show a progress bar on standard error for long feed files.
    pub progress: bool,
    /// Print warnings (time order, skipped rows) on standard error.
    pub warnings: bool,
    /// Where the working range came from, for the summary (`range_source`): `default`,
    /// `config`, `options` or `data`.
    pub range_source: &'static str,
    /// Snapshots and device logs: resume, save, input format, log output.
    pub persist: PersistOptions,
    /// The channel's name, when this run is one channel of a file of many sensors: every
    /// event, reading and check row then starts with it (`channel`), and the outputs are
    /// appended to, after the header the caller wrote (`sink::channel_headers`).
    pub channel: Option<String>,
    /// Parse the CSV on a second thread (default). `fleet` turns it off: there the
    /// channels run in parallel, one thread each. The results are the same either way.
    pub pipelined: bool,
}

/// What kind of input a feed is.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum InputFormat {
    /// Decide by content: a device log starts with a 0x00 byte, a Parquet file with `PAR1`,
    /// a CSV feed with neither.
    #[default]
    Auto,
    /// CSV with a header.
    Csv,
    /// A device log (COBS-framed postcard records, see `steadycal_core::record`).
    DeviceLog,
    /// A Parquet file (starts with `PAR1`), read one row group at a time.
    Parquet,
}

/// Snapshot and device-log options of a replay.
#[derive(Clone, Debug, Default)]
pub struct PersistOptions {
    /// Start from this snapshot instead of a fresh monitor.
    pub resume: Option<PathBuf>,
    /// Write the final state as a snapshot here.
    pub save_snapshot: Option<PathBuf>,
    /// Input format (default: by content).
    pub input_format: InputFormat,
    /// Write the samples and events of the run as a device log here.
    pub device_log_out: Option<PathBuf>,
    /// The configuration was given explicitly (a config file or range options): a resumed
    /// snapshot must carry the same one.
    pub config_explicit: bool,
}

impl ReplayOptions {
    /// Options with the defaults: no outputs, f32, default columns, stop at bad rows, no
    /// progress bar, warnings on.
    pub fn new(feed: PathBuf, config: MonitorConfig<f64>) -> Self {
        ReplayOptions {
            feed,
            events: None,
            summary: None,
            readings: None,
            checks: None,
            precision: Precision::F32,
            columns: ColumnNames::default(),
            missing: MissingMarkers::default(),
            config,
            baseline: None,
            skip_bad_rows: false,
            progress: false,
            warnings: true,
            range_source: "default",
            persist: PersistOptions::default(),
            channel: None,
            pipelined: true,
        }
    }
}
