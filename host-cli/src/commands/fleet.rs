//! `steadycal fleet DIR`: replay every feed of a directory in parallel, one row per channel.
//!
//! Feeds are the `*.csv` and `*.parquet` files of the directory (not recursive), in name
//! order; each is one channel. A channel's configuration is `NAME.monitor.toml` beside
//! `NAME.csv` (or `NAME.parquet`) when it
//! exists, else `--config`, else the defaults. Feeds run on a rayon pool (`--jobs`, default:
//! one per core); the rows come out in file-name order whatever the scheduling.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::Context;
use clap::Args;
use rayon::prelude::*;
use serde::Serialize;
use steadycal_core::event::KindId;

use super::{exit_alarms, exit_bad_input, reaches, resolve, ColumnArgs, FailOn, MonitorArgs};
use crate::io::create_output;
use crate::replay::{self, ReplayOptions};

/// Arguments of `fleet`.
#[derive(Args, Debug)]
#[command(after_help = super::after_help(concat!(
    "Examples:\n",
    "  steadycal fleet simulated-feeds\n",
    "  steadycal fleet /data/site-7 --config site-7.toml --csv fleet.csv --json fleet.json\n",
    "  steadycal fleet logs --json - | jq '.[] | select(.alarms > 0) | .file'\n\n",
    "A channel's configuration is NAME.monitor.toml beside NAME.csv when present, else\n",
    "--config, else the defaults.",
)))]
pub struct FleetArgs {
    /// Directory of feeds (`*.csv`, `*.parquet`).
    pub dir: PathBuf,
    /// Write the table as CSV here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub csv: Option<PathBuf>,
    /// Write the table as JSON here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub json: Option<PathBuf>,
    /// Feeds replayed at once [default: one per core].
    #[arg(long, short, value_name = "N")]
    pub jobs: Option<usize>,
    /// Exit with code 1 when an event at or above this severity was raised on any channel.
    #[arg(long, value_enum, value_name = "LEVEL")]
    pub fail_on: Option<FailOn>,
    /// Do not print the table on standard output.
    #[arg(long, short)]
    pub quiet: bool,
    /// A cell text that means "no value" in every feed (repeatable; empty cells, NA and
    /// the configuration's columns.missing always do), e.g. --missing=-200.
    #[arg(long, value_name = "TEXT", value_parser = crate::field::missing::parse_marker, allow_hyphen_values = true)]
    pub missing: Vec<String>,
    #[command(flatten)]
    pub monitor: MonitorArgs,
    #[command(flatten)]
    pub columns: ColumnArgs,
}

/// One channel's row.
#[derive(Clone, Debug, Serialize)]
pub struct FleetRow {
    /// Feed file name.
    pub file: String,
    /// The channel, for one channel of a file of many sensors (`replay --raw-column
    /// s1,s2` or `--channel-column`); absent for a file of one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub channel: Option<String>,
    /// Samples.
    pub samples: u64,
    /// Checks.
    pub checks: u64,
    /// Active rung.
    pub rung: String,
    /// Spread exponent k.
    pub exponent: Option<f64>,
    /// Its standard error.
    pub exponent_se: Option<f64>,
    /// Gain of the active calibration.
    pub gain: Option<f64>,
    /// Offset.
    pub offset: Option<f64>,
    /// Switches of rung.
    pub transform_changes: u64,
    /// Events of severity `warn`.
    pub warnings: u64,
    /// Events of severity `alarm`.
    pub alarms: u64,
    /// Events by severity, for `--fail-on`.
    #[serde(skip)]
    pub raised: [u64; 3],
    /// `ok`, or what stopped the feed.
    pub status: String,
    /// The channel's whole replay summary, for one channel of a file of many sensors
    /// (`replay --summary`); absent in `fleet`'s table.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub summary: Option<serde_json::Value>,
}

fn feeds(dir: &Path) -> anyhow::Result<Vec<PathBuf>> {
    let mut feeds: Vec<PathBuf> = std::fs::read_dir(dir)
        .with_context(|| format!("{}: cannot read directory", dir.display()))?
        .filter_map(|entry| entry.ok().map(|e| e.path()))
        .filter(|path| {
            path.is_file()
                && path
                    .extension()
                    .is_some_and(|e| e == "csv" || e == "parquet")
        })
        .collect();
    feeds.sort();
    Ok(feeds)
}

impl FleetRow {
    /// The row of a channel whose replay did not run: `status` says why.
    pub fn failed(file: String, status: String) -> FleetRow {
        FleetRow {
            file,
            channel: None,
            samples: 0,
            checks: 0,
            rung: String::new(),
            exponent: None,
            exponent_se: None,
            gain: None,
            offset: None,
            transform_changes: 0,
            warnings: 0,
            alarms: 0,
            raised: [0; 3],
            status,
            summary: None,
        }
    }

    /// The row of a channel from its replay's summary document (the one place a fleet row
    /// is made: `fleet` and the Python package's cluster replay both call it).
    pub fn from_summary(file: String, s: &serde_json::Value) -> FleetRow {
        let f = |value: &serde_json::Value| value.as_f64();
        let count = |value: &serde_json::Value| value.as_u64().unwrap_or(0);
        let raised = [
            count(&s["raised"]["info"]),
            count(&s["raised"]["warn"]),
            count(&s["raised"]["alarm"]),
        ];
        FleetRow {
            file,
            channel: None,
            samples: count(&s["samples"]),
            checks: count(&s["checks"]),
            rung: s["rung"].as_str().unwrap_or("").into(),
            exponent: f(&s["spread_exponent"]),
            exponent_se: f(&s["spread_exponent_se"]),
            gain: f(&s["params"]["gain"]),
            offset: f(&s["params"]["offset"]),
            transform_changes: count(&s["events"][KindId::TransformChanged.name()]),
            warnings: raised[1],
            alarms: raised[2],
            raised,
            status: match s["stopped_at"].as_str() {
                Some(error) => error.to_string(),
                None => "ok".into(),
            },
            summary: None,
        }
    }

    /// What names the row in messages: the channel when there is one, else the file.
    pub fn label(&self) -> String {
        match &self.channel {
            Some(channel) => format!("channel {channel}"),
            None => self.file.clone(),
        }
    }
}

fn channel(args: &FleetArgs, feed: &Path) -> FleetRow {
    let file = feed
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let beside = feed.with_extension("monitor.toml");
    let config_file = beside.is_file().then_some(beside.as_path());
    let resolved = match resolve(&args.monitor, &args.columns, config_file) {
        Ok(resolved) => resolved,
        Err(error) => return FleetRow::failed(file, format!("{error:#}")),
    };
    let mut options = ReplayOptions::new(feed.to_path_buf(), resolved.config);
    options.precision = args.monitor.precision;
    options.columns = resolved.columns;
    options.baseline = resolved.baseline;
    options.missing = match super::with_markers(resolved.missing, &args.missing) {
        Ok(markers) => markers,
        Err(error) => return FleetRow::failed(file, format!("{error:#}")),
    };
    options.warnings = false;
    // Channels run in parallel on the pool, one thread each: no parser thread per channel,
    // so `--jobs N` keeps N cores busy and no more.
    options.pipelined = false;
    match replay::replay(&options) {
        Ok(result) => FleetRow::from_summary(file, &result.summary),
        Err(error) => FleetRow::failed(file, format!("{error:#}")),
    }
}

fn cell(value: Option<f64>, digits: usize) -> String {
    value
        .map(|v| format!("{v:.digits$}"))
        .unwrap_or_else(|| "-".into())
}

/// The rows as an aligned text table (the first column names the channel when the rows
/// are the channels of one file, the file otherwise).
pub fn table(rows: &[FleetRow]) -> String {
    let first = if rows.iter().any(|r| r.channel.is_some()) {
        "channel"
    } else {
        "file"
    };
    let header = [
        first, "samples", "checks", "rung", "k", "k_se", "gain", "offset", "switches", "warnings",
        "alarms", "status",
    ];
    let mut lines: Vec<Vec<String>> = vec![header.iter().map(|s| s.to_string()).collect()];
    for row in rows {
        lines.push(vec![
            row.channel.clone().unwrap_or_else(|| row.file.clone()),
            row.samples.to_string(),
            row.checks.to_string(),
            row.rung.clone(),
            cell(row.exponent, 3),
            cell(row.exponent_se, 3),
            cell(row.gain, 5),
            cell(row.offset, 4),
            row.transform_changes.to_string(),
            row.warnings.to_string(),
            row.alarms.to_string(),
            row.status.clone(),
        ]);
    }
    let widths: Vec<usize> = (0..header.len())
        .map(|i| {
            lines
                .iter()
                .map(|l| l[i].chars().count())
                .max()
                .unwrap_or(0)
        })
        .collect();
    let mut out = String::new();
    for line in &lines {
        let cells: Vec<String> = line
            .iter()
            .zip(&widths)
            .enumerate()
            .map(|(i, (text, width))| {
                if i == 0 || i == 3 || i + 1 == header.len() {
                    format!("{text:<width$}")
                } else {
                    format!("{text:>width$}")
                }
            })
            .collect();
        out.push_str(cells.join("  ").trim_end());
        out.push('\n');
    }
    out
}

/// Runs `fleet`.
pub fn run(args: FleetArgs) -> anyhow::Result<ExitCode> {
    let feeds = feeds(&args.dir)?;
    if feeds.is_empty() {
        anyhow::bail!(
            "{}: no *.csv or *.parquet feeds in this directory",
            args.dir.display()
        );
    }
    let mut pool = rayon::ThreadPoolBuilder::new();
    if let Some(jobs) = args.jobs {
        if jobs == 0 {
            anyhow::bail!("--jobs: out of range: 0, expected at least 1");
        }
        pool = pool.num_threads(jobs);
    }
    let pool = pool.build()?;
    let rows: Vec<FleetRow> =
        pool.install(|| feeds.par_iter().map(|f| channel(&args, f)).collect());
    let stdout_taken = [&args.csv, &args.json]
        .iter()
        .any(|p| p.as_deref().is_some_and(|p| p.as_os_str() == "-"));
    if !args.quiet && !stdout_taken {
        print!("{}", table(&rows));
    }
    if let Some(path) = &args.csv {
        let mut out = create_output(path)?;
        let mut writer = csv::Writer::from_writer(&mut out);
        for row in &rows {
            writer.serialize(row)?;
        }
        writer.flush()?;
        drop(writer);
        out.flush()?;
    }
    if let Some(path) = &args.json {
        let mut out = create_output(path)?;
        serde_json::to_writer_pretty(&mut out, &rows)?;
        out.write_all(b"\n")?;
        out.flush()?;
    }
    Ok(exit_status(&rows, args.fail_on))
}

/// How a run over channels ends, once every channel ran and every output was written: the
/// channels that could not be read are listed on standard error and the exit code is 2;
/// otherwise 1 when an event reached `--fail-on` on any channel; otherwise success.
/// `fleet` and `replay` on a file of many sensors both end here.
pub fn exit_status(rows: &[FleetRow], fail_on: Option<FailOn>) -> ExitCode {
    if rows.iter().any(|row| row.status != "ok") {
        for row in rows.iter().filter(|row| row.status != "ok") {
            eprintln!("steadycal: {}: {}", row.label(), row.status);
        }
        return exit_bad_input();
    }
    if rows.iter().any(|row| reaches(&row.raised, fail_on)) {
        return exit_alarms();
    }
    ExitCode::SUCCESS
}
