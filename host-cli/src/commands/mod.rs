//! The subcommands of `steadycal`: their arguments (clap-derived) and how they run.
//!
//! Each subcommand lives in its own module with an `Args` struct and a `run` function that
//! returns the process exit code; `main.rs` only dispatches. Arguments are parsed raw by
//! clap, then resolved here into ready-to-use options (config file + overrides).
//!
//! # Exit codes (the contract, in every `--help` through [`EXIT_CODES`] and in the README)
//! - 0: the run completed (and no event reached the `--fail-on` level, no acceptance
//!   criterion failed),
//! - 1: the run completed and an event of the `--fail-on` level or above was raised, or an
//!   acceptance criterion failed,
//! - 2: bad input or usage: unreadable or malformed input, bad config file, bad arguments.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, ValueEnum};
use steadycal_core::event::Severity;
use steadycal_core::monitor::MonitorConfig;

use crate::config::ConfigFile;
use crate::feed::ColumnNames;
use crate::precision::Precision;

pub mod assess;
mod choices;
pub mod field;
pub mod fleet;
pub mod replay;
pub mod report;
pub mod simulate;
pub mod snapshot;
pub mod watch;
pub mod watch_mqtt;

/// The exit-code contract, shown at the end of every `--help` (through [`after_help`]).
pub const EXIT_CODES: &str = "\
Exit codes:
  0  the run completed (nothing reached the --fail-on level, no acceptance criterion failed)
  1  the run completed and an event at or above the --fail-on level was raised, or an
     acceptance criterion of the configuration failed
  2  bad input or usage (unreadable or malformed input or snapshot, bad config, bad arguments)";

/// A subcommand's closing help: its own `text` (examples, notes), then [`EXIT_CODES`].
pub fn after_help(text: &str) -> String {
    format!("{text}\n\n{EXIT_CODES}")
}

/// Exit code 1: alarms raised at the `--fail-on` level.
pub fn exit_alarms() -> ExitCode {
    ExitCode::from(1)
}

/// Exit code 2: bad input or usage.
pub fn exit_bad_input() -> ExitCode {
    ExitCode::from(2)
}

/// True when the error is a write to a closed pipe (a reader such as `head` stopped
/// reading): the run then ends quietly.
pub fn is_broken_pipe(error: &anyhow::Error) -> bool {
    error.chain().any(|cause| {
        cause
            .downcast_ref::<std::io::Error>()
            .is_some_and(|e| e.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

/// The status of a process ended by a closed pipe: 128 + SIGPIPE (13), as POSIX shells
/// report it (common practice, no source).
pub fn exit_broken_pipe() -> ExitCode {
    ExitCode::from(141)
}

/// The levels `--fail-on` accepts.
#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum FailOn {
    /// Any event with a severity (every event but `cleared`).
    Info,
    /// Warnings and alarms.
    Warn,
    /// Alarms only.
    Alarm,
}

impl FailOn {
    /// The core's severity.
    pub fn severity(self) -> Severity {
        match self {
            FailOn::Info => Severity::Info,
            FailOn::Warn => Severity::Warn,
            FailOn::Alarm => Severity::Alarm,
        }
    }
}

/// True when `raised` (`[info, warn, alarm]` counts) reaches `fail_on`.
pub fn reaches(raised: &[u64; 3], fail_on: Option<FailOn>) -> bool {
    match fail_on {
        Some(level) => raised[level.severity() as usize..].iter().any(|&n| n > 0),
        None => false,
    }
}

/// How the monitor is configured: a config file, then command-line overrides.
#[derive(Args, Debug, Clone)]
pub struct MonitorArgs {
    /// Monitor configuration file (TOML; every key is listed in the README).
    #[arg(long, short = 'c', value_name = "FILE")]
    pub config: Option<PathBuf>,
    /// Lower end of the working range, raw units above the origin [default: 1, or the
    /// config's `range.low`].
    #[arg(long, value_name = "RAW")]
    pub level_low: Option<f64>,
    /// Upper end of the working range, raw units above the origin [default: 1000, or the
    /// config's `range.high`].
    #[arg(long, value_name = "RAW")]
    pub level_high: Option<f64>,
    /// Float type of the core (f32 is what a Cortex-M4F board runs).
    #[arg(long, value_enum, default_value = "f32")]
    pub precision: Precision,
}

/// Header names of the feed's columns.
#[derive(Args, Debug, Clone, Default)]
pub struct ColumnArgs {
    /// Name of the time column [default: t].
    #[arg(long, value_name = "NAME")]
    pub time_column: Option<String>,
    /// Name of the raw output column [default: raw].
    #[arg(long, value_name = "NAME")]
    pub raw_column: Option<String>,
    /// Name of the reference column [default: ref].
    #[arg(long, value_name = "NAME")]
    pub ref_column: Option<String>,
    /// Name of the temperature column [default: temp].
    #[arg(long, value_name = "NAME")]
    pub temp_column: Option<String>,
}

/// What a person sees.
#[derive(Args, Debug, Clone, Default)]
pub struct ChatterArgs {
    /// Print nothing but errors (no human summary, no warnings, no progress bar).
    #[arg(long, short)]
    pub quiet: bool,
    /// Print the human summary on standard error even when it is not a terminal.
    #[arg(long, conflicts_with = "quiet")]
    pub human_summary: bool,
    /// No progress bar, even on a terminal.
    #[arg(long)]
    pub no_progress: bool,
}

impl ChatterArgs {
    /// True when the human summary is printed: asked for, or standard error is a terminal.
    pub fn human(&self) -> bool {
        !self.quiet && (self.human_summary || crate::terminal::stderr_is_terminal())
    }
    /// True when a progress bar may be drawn.
    pub fn progress(&self) -> bool {
        !self.quiet && !self.no_progress && crate::terminal::stderr_is_terminal()
    }
}

/// A configuration resolved from file and arguments.
#[derive(Clone, Debug)]
pub struct Resolved {
    /// The monitor configuration.
    pub config: MonitorConfig<f64>,
    /// The commissioned baseline (the file's `[baseline]`), if any.
    pub baseline: Option<steadycal_config::Commissioned>,
    /// The column names.
    pub columns: ColumnNames,
    /// The missing markers: the defaults (empty, `NA`) and the file's `columns.missing`.
    pub missing: crate::field::missing::MissingMarkers,
}

/// Reads the config file (if any) and applies the overrides.
pub fn resolve(
    monitor: &MonitorArgs,
    columns: &ColumnArgs,
    config_file: Option<&std::path::Path>,
) -> anyhow::Result<Resolved> {
    let path = config_file.or(monitor.config.as_deref());
    let (file, name) = match path {
        Some(path) => (ConfigFile::read(path)?, path.display().to_string()),
        None => (ConfigFile::default(), String::from("(defaults)")),
    };
    let mut file = file;
    if let Some(low) = monitor.level_low {
        file.range.low = Some(crate::config::Positive(positive_arg("--level-low", low)?));
    }
    if let Some(high) = monitor.level_high {
        file.range.high = Some(crate::config::Positive(positive_arg("--level-high", high)?));
    }
    let channel = file.channel(&name)?;
    let names = column_names(&file, columns);
    let missing = crate::field::missing::MissingMarkers::new(
        file.columns.missing.as_deref().unwrap_or_default(),
    )
    .map_err(|e| anyhow::anyhow!("{name}: columns.missing: {e}"))?;
    Ok(Resolved {
        config: channel.monitor,
        baseline: channel.baseline,
        columns: names,
        missing,
    })
}

/// The markers of a configuration plus those of `--missing`.
pub fn with_markers(
    markers: crate::field::missing::MissingMarkers,
    extra: &[String],
) -> anyhow::Result<crate::field::missing::MissingMarkers> {
    if extra.is_empty() {
        return Ok(markers);
    }
    let all: Vec<&str> = markers
        .texts()
        .iter()
        .map(String::as_str)
        .chain(extra.iter().map(String::as_str))
        .collect();
    crate::field::missing::MissingMarkers::new(&all).map_err(|e| anyhow::anyhow!("--missing: {e}"))
}

/// The feed's column names: the command line's, else the file's `[columns]`, else the
/// defaults.
pub fn column_names(file: &ConfigFile, columns: &ColumnArgs) -> ColumnNames {
    let mut names = ColumnNames::default();
    let section = &file.columns;
    let pick = |arg: &Option<String>, key: &Option<String>, default: &mut String| {
        if let Some(value) = arg.as_ref().or(key.as_ref()) {
            *default = value.clone();
        }
    };
    pick(&columns.time_column, &section.time, &mut names.time);
    pick(&columns.raw_column, &section.raw, &mut names.raw);
    pick(
        &columns.ref_column,
        &section.reference,
        &mut names.reference,
    );
    pick(
        &columns.temp_column,
        &section.temperature,
        &mut names.temperature,
    );
    names
}

fn positive_arg(name: &str, value: f64) -> anyhow::Result<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        anyhow::bail!("{name}: out of range: {value}, expected a positive finite number")
    }
}

/// A short human summary of a replay's summary document (a few lines).
pub fn human_summary(summary: &serde_json::Value, colour: bool) -> String {
    use crate::terminal::{paint, Colour};
    let get = |key: &str| summary.get(key).cloned().unwrap_or_default();
    let number = |value: serde_json::Value| match value.as_f64() {
        Some(v) => format!("{v:.3}"),
        None => "-".into(),
    };
    let rung = get("rung").as_str().unwrap_or("?").to_string();
    let params = get("params");
    let mut text = format!(
        "{}: {} samples, {} checks, {} rejected; calibration rung {}, spread exponent {} ± {}; gain {}, offset {}",
        get("feed").as_str().unwrap_or("?"),
        get("samples"),
        get("checks"),
        get("rejected"),
        paint(&rung, Colour::Bold, colour),
        number(get("spread_exponent")),
        number(get("spread_exponent_se")),
        number(params.get("gain").cloned().unwrap_or_default()),
        number(params.get("offset").cloned().unwrap_or_default()),
    );
    let raised = get("raised");
    let count = |level: &str| raised.get(level).and_then(|v| v.as_u64()).unwrap_or(0);
    let events: Vec<String> = get("events")
        .as_object()
        .map(|map| {
            map.iter()
                .filter(|(_, n)| n.as_u64().unwrap_or(0) > 0)
                .map(|(kind, n)| format!("{kind} ×{n}"))
                .collect()
        })
        .unwrap_or_default();
    let events = if events.is_empty() {
        "none".to_string()
    } else {
        events.join(", ")
    };
    let alarms = count("alarm");
    let warnings = count("warn");
    let verdict = if alarms > 0 {
        paint(&format!("{alarms} alarms"), Colour::Red, colour)
    } else if warnings > 0 {
        paint(&format!("{warnings} warnings"), Colour::Yellow, colour)
    } else {
        paint("no warnings or alarms", Colour::Green, colour)
    };
    text.push_str(&format!("\n  events: {events}; {verdict}"));
    let skipped = get("rows_skipped").as_u64().unwrap_or(0);
    if skipped > 0 {
        text.push_str(&format!(
            "\n  {skipped} bad rows skipped (listed in the summary)"
        ));
    }
    if let Some(spans) = get("damaged_spans").as_array().filter(|s| !s.is_empty()) {
        let list: Vec<String> = spans
            .iter()
            .map(|s| format!("{}..{}", s["start"], s["end"]))
            .collect();
        text.push_str(&format!(
            "\n  device log: {} damaged span(s) skipped, bytes {}",
            spans.len(),
            list.join(", ")
        ));
    }
    let order = get("time_order");
    let repeated = order.get("repeated").and_then(|v| v.as_u64()).unwrap_or(0);
    let backwards = order.get("backwards").and_then(|v| v.as_u64()).unwrap_or(0);
    if repeated + backwards > 0 {
        text.push_str(&format!(
            "\n  time order: {repeated} repeated, {backwards} backwards"
        ));
    }
    text
}
