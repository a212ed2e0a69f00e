//! `steadycal replay FEED`: run a recorded feed through the monitor exactly as a board would.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;

use super::{
    exit_alarms, exit_bad_input, human_summary, reaches, resolve, ChatterArgs, ColumnArgs, FailOn,
    MonitorArgs,
};
use crate::replay::{self, InputFormat, PersistOptions, ReplayOptions};

mod channels;
mod field_run;

/// Arguments of `replay`.
#[derive(Args, Debug)]
#[command(after_help = super::after_help(concat!(
    "Examples:\n",
    "  steadycal replay simulated-feeds/gas-cell.csv --events events.jsonl --summary summary.json\n",
    "  steadycal replay feed.csv --config monitor.toml --readings readings.csv --fail-on warn\n",
    "  cat feed.csv | steadycal replay - --summary - | jq .rung\n",
    "  steadycal replay logger.csv --raw-column counts --ref-column cal_gas --skip-bad-rows\n",
    "  steadycal replay first.csv --save-snapshot state.bin && steadycal replay rest.csv --resume state.bin\n",
    "  steadycal replay board.log --summary summary.json   (a device log, detected by content)\n",
    "  steadycal replay feed.parquet --raw-column counts --missing=-9999 --summary -\n",
    "  steadycal replay platform.csv --raw-column cell_a,cell_b,cell_c --summary -   (one monitor per sensor)",
)))]
pub struct ReplayArgs {
    /// Feed to replay: CSV with a header naming `raw` and optionally `t` (seconds or RFC
    /// 3339), `ref`, `temp` (`-` = stdin); or a Parquet file with columns of those names; or
    /// a device log.
    pub feed: PathBuf,
    /// Write events as JSON lines here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub events: Option<PathBuf>,
    /// Write the run summary as JSON here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub summary: Option<PathBuf>,
    /// Write calibrated readings (rows without reference) as CSV here (`-` = stdout):
    /// seq, t, raw, value, standard and expanded uncertainty, rung, flags.
    #[arg(long, value_name = "FILE")]
    pub readings: Option<PathBuf>,
    /// Write one CSV row per fitted check here (`-` = stdout), for `steadycal report`:
    /// seq, t, reference, raw, fitted, residual, standardized, rung, offset and gain with
    /// their uncertainties, the read-back value and its expanded uncertainty.
    #[arg(long, value_name = "FILE")]
    pub checks: Option<PathBuf>,
    /// Also write the HTML report of the run here (see `steadycal report`).
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
    /// Skip malformed rows (each is listed in the summary's `skipped_rows`) instead of
    /// stopping with exit code 2.
    #[arg(long)]
    pub skip_bad_rows: bool,
    /// Exit with code 1 when an event at or above this severity was raised.
    #[arg(long, value_enum, value_name = "LEVEL")]
    pub fail_on: Option<FailOn>,
    /// Start from this snapshot (written by a board or by --save-snapshot) instead of a
    /// fresh monitor; its configuration is used, and an explicit --config or range option
    /// must agree with it. CSV rows are numbered on from the samples it counted.
    #[arg(long, value_name = "SNAPSHOT")]
    pub resume: Option<PathBuf>,
    /// Write the monitor's final state as a snapshot here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub save_snapshot: Option<PathBuf>,
    /// What the feed is [default: auto, by content: a device log starts with a 0x00 byte].
    #[arg(long, value_enum, value_name = "FORMAT", default_value = "auto")]
    pub input_format: InputFormat,
    /// Also write the samples and events of this run as a device log here (the format a
    /// board records), for example to turn a CSV feed into a log.
    #[arg(long, value_name = "FILE")]
    pub device_log_out: Option<PathBuf>,
    #[command(flatten)]
    pub monitor: MonitorArgs,
    #[command(flatten)]
    pub columns: ColumnArgs,
    #[command(flatten)]
    pub chatter: ChatterArgs,
    #[command(flatten)]
    pub field: super::field::FieldArgs,
    #[command(flatten)]
    pub reference: super::field::ReferenceArgs,
}

impl ReplayArgs {
    /// The library's options for these arguments.
    pub fn options(&self) -> anyhow::Result<ReplayOptions> {
        let resolved = resolve(&self.monitor, &self.columns, None)?;
        let mut options = ReplayOptions::new(self.feed.clone(), resolved.config);
        options.events = self.events.clone();
        options.summary = self.summary.clone();
        options.readings = self.readings.clone();
        options.checks = self.checks.clone();
        options.precision = self.monitor.precision;
        options.columns = resolved.columns;
        options.baseline = resolved.baseline;
        options.skip_bad_rows = self.skip_bad_rows;
        options.progress = self.chatter.progress();
        options.warnings = !self.chatter.quiet;
        let config_has_range = match &self.monitor.config {
            Some(path) => {
                let file = crate::config::ConfigFile::read(path)?;
                file.range.low.is_some() || file.range.high.is_some()
            }
            None => false,
        };
        options.range_source = super::field::range_source(&self.monitor, config_has_range, false);
        options.persist = PersistOptions {
            resume: self.resume.clone(),
            save_snapshot: self.save_snapshot.clone(),
            input_format: self.input_format,
            device_log_out: self.device_log_out.clone(),
            config_explicit: self.monitor.config.is_some()
                || self.monitor.level_low.is_some()
                || self.monitor.level_high.is_some(),
        };
        Ok(options)
    }
}

/// The configuration file's `columns.missing`.
fn config_missing(args: &ReplayArgs) -> anyhow::Result<Vec<String>> {
    Ok(match &args.monitor.config {
        Some(path) => crate::config::ConfigFile::read(path)?
            .columns
            .missing
            .unwrap_or_default(),
        None => Vec::new(),
    })
}

/// Runs `replay`.
pub fn run(args: ReplayArgs) -> anyhow::Result<ExitCode> {
    let mut options = args.options()?;
    let missing = config_missing(&args)?;
    if is_parquet(&options)? {
        return parquet_run(&args, options, &missing);
    }
    if super::field::FieldPlan::wanted(&args.field, &args.reference, &args.columns, &missing) {
        let time_given = args.columns.time_column.is_some()
            || args
                .monitor
                .config
                .as_deref()
                .map(crate::config::ConfigFile::read)
                .transpose()?
                .is_some_and(|f| f.columns.time.is_some());
        let plan = super::field::FieldPlan::new(
            &args.field,
            &args.reference,
            &options.columns,
            time_given,
            &missing,
        )?;
        if plan.channels.is_some() {
            return channels::run(&args, options, &plan);
        }
        let result = with_report(&args, &mut options, |options| {
            field_run::run(&args, options, &plan)
        })?;
        let strict_failed = plan.strict && !result.suspects.is_empty();
        return finish(&args, &options, result, strict_failed);
    }
    let result = with_report(&args, &mut options, |options| replay::replay(options))?;
    finish(&args, &options, result, false)
}

/// Runs `replay` (`run`) with `--report`: the side files the report reads back are
/// prepared first (the outputs asked for, or files in a private temporary directory), the
/// report written after the run.
fn with_report(
    args: &ReplayArgs,
    options: &mut ReplayOptions,
    run: impl FnOnce(&mut ReplayOptions) -> anyhow::Result<replay::ReplayResult>,
) -> anyhow::Result<replay::ReplayResult> {
    let Some(path) = &args.report else {
        return run(options);
    };
    let side = super::report::SideFiles::prepare(options)?;
    let result = run(options)?;
    side.write_report(options, &args.monitor, path)?;
    Ok(result)
}

/// True when the feed is a Parquet file (asked for, or by its first bytes).
fn is_parquet(options: &ReplayOptions) -> anyhow::Result<bool> {
    Ok(match options.persist.input_format {
        InputFormat::Parquet => true,
        InputFormat::Auto if options.feed.as_os_str() != "-" => {
            use std::io::Read;
            let mut head = [0u8; 4];
            let n = std::fs::File::open(&options.feed)
                .and_then(|mut f| f.read(&mut head))
                .unwrap_or(0);
            crate::feed::parquet::looks_like_parquet(&head[..n])
        }
        _ => false,
    })
}

/// Runs `replay` on a Parquet file: columns by name, nulls and `--missing` markers as
/// missing cells; the options about text cells do not apply.
fn parquet_run(
    args: &ReplayArgs,
    mut options: ReplayOptions,
    config_missing: &[String],
) -> anyhow::Result<ExitCode> {
    let field = &args.field;
    let text_only = [
        ("--time-format", field.time_format.is_some()),
        ("--time-unit", field.time_unit.is_some()),
        ("--timezone", field.timezone.is_some()),
        ("--separator", field.separator.is_some()),
        ("--decimal-comma", field.decimal_comma),
        ("--save-config", field.save_config.is_some()),
        ("--reference", args.reference.reference.is_some()),
    ];
    let many = field.channel_column.is_some()
        || args
            .columns
            .raw_column
            .as_deref()
            .is_some_and(|c| c.contains(','));
    if many {
        anyhow::bail!(
            "{}: many sensors in one file (several --raw-column names, --channel-column) are read from CSV logs, not from Parquet; replay one sensor column at a time",
            options.feed.display()
        );
    }
    if let Some((name, _)) = text_only.iter().find(|(_, given)| *given) {
        anyhow::bail!(
            "{}: {name} does not apply to a Parquet feed (its columns carry their types: numbers, or timestamps for the time column)",
            options.feed.display()
        );
    }
    let mut markers: Vec<String> = Vec::new();
    for marker in config_missing {
        markers.push(
            crate::field::missing::parse_marker(marker)
                .map_err(|e| anyhow::anyhow!("columns.missing: {e}"))?,
        );
    }
    markers.extend(field.missing.iter().cloned());
    options.missing = crate::field::missing::MissingMarkers::new(&markers)
        .map_err(|e| anyhow::anyhow!("--missing: {e}"))?;
    let result = with_report(args, &mut options, |options| replay::replay(options))?;
    let strict_failed = field.strict && !result.suspects.is_empty();
    finish(args, &options, result, strict_failed)
}

/// What every replay does after the run: reports a feed error (exit 2), prints the human
/// summary, applies `--fail-on`; `strict_failed` (a suspected undeclared missing marker
/// under `--strict`) gives exit 2 after everything was written.
pub fn finish(
    args: &ReplayArgs,
    options: &ReplayOptions,
    result: replay::ReplayResult,
    strict_failed: bool,
) -> anyhow::Result<ExitCode> {
    let _ = options;
    if let Some(error) = result.error {
        eprintln!("steadycal: {error}");
        eprintln!("steadycal: outputs up to the previous row were written");
        return Ok(exit_bad_input());
    }
    if args.chatter.human() {
        eprintln!(
            "{}",
            human_summary(&result.summary, crate::terminal::colour_enabled())
        );
    }
    if strict_failed {
        eprintln!("steadycal: --strict: values that look like undeclared missing markers were found (listed in the summary's `suspected_missing_markers`); declare them with --missing");
        return Ok(exit_bad_input());
    }
    if reaches(&result.raised, args.fail_on) {
        return Ok(exit_alarms());
    }
    Ok(ExitCode::SUCCESS)
}
