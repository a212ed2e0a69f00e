//! `steadycal report RUN_DIR|SUMMARY --out report.html`: the HTML report of a replay run from
//! its files, and the `--report` hooks of `replay` and `assess`.

use std::path::{Path, PathBuf};
use std::process::ExitCode;

use anyhow::{Context, Result};
use clap::Args;

use super::{resolve, ColumnArgs, MonitorArgs};
use crate::precision::Precision;
use crate::report::model::{self, RunConfig, RunFiles};

/// Arguments of `report`.
#[derive(Args, Debug)]
#[command(after_help = super::after_help(concat!(
    "A run directory holds summary.json, events.jsonl, checks.csv and optionally monitor.toml;\n",
    "a summary path NAME.summary.json finds NAME.events.jsonl, NAME.checks.csv and\n",
    "NAME.monitor.toml beside it. Write them with\n",
    "  steadycal replay FEED --summary run/summary.json --events run/events.jsonl --checks run/checks.csv\n\n",
    "Examples:\n",
    "  steadycal report run/ --out report.html\n",
    "  steadycal report gas.summary.json --config gas.monitor.toml --out gas.html",
)))]
pub struct ReportArgs {
    /// A run directory, or the path of a run's summary JSON.
    pub run: PathBuf,
    /// Where to write the HTML page.
    #[arg(long, short, value_name = "FILE")]
    pub out: PathBuf,
    /// The run's events (JSON lines) [default: beside the summary].
    #[arg(long, value_name = "FILE")]
    pub events: Option<PathBuf>,
    /// The run's per-check table (`replay --checks`) [default: beside the summary].
    #[arg(long, value_name = "FILE")]
    pub checks: Option<PathBuf>,
    /// The monitor configuration the run used [default: monitor.toml beside the summary,
    /// else the defaults].
    #[arg(long, short = 'c', value_name = "FILE")]
    pub config: Option<PathBuf>,
    /// Lower end of the working range the run used (as for `replay`).
    #[arg(long, value_name = "RAW")]
    pub level_low: Option<f64>,
    /// Upper end of the working range the run used (as for `replay`).
    #[arg(long, value_name = "RAW")]
    pub level_high: Option<f64>,
}

/// The configuration as the report shows it: resolved from a file (or the defaults) and the
/// working-range overrides.
pub fn run_config(
    config: Option<&Path>,
    level_low: Option<f64>,
    level_high: Option<f64>,
) -> Result<RunConfig> {
    let monitor = MonitorArgs {
        config: config.map(Path::to_path_buf),
        level_low,
        level_high,
        precision: Precision::F32,
    };
    let resolved = resolve(&monitor, &ColumnArgs::default(), None)?;
    let (source, text) = match config {
        Some(path) => (
            path.display().to_string(),
            Some(
                std::fs::read_to_string(path)
                    .with_context(|| format!("{}: cannot read", path.display()))?,
            ),
        ),
        None => ("(defaults)".to_string(), None),
    };
    let mut source = source;
    if level_low.is_some() || level_high.is_some() {
        source.push_str(" with --level-low/--level-high");
    }
    Ok(RunConfig {
        source,
        text,
        config: resolved.config,
    })
}

/// Writes a page.
pub fn write_page(path: &Path, page: &str) -> Result<()> {
    std::fs::write(path, page).with_context(|| format!("{}: cannot write", path.display()))
}

/// Runs `report`.
pub fn run(args: ReportArgs) -> Result<ExitCode> {
    let mut files = RunFiles::locate(&args.run);
    if let Some(events) = &args.events {
        files.events = events.clone();
    }
    if let Some(checks) = &args.checks {
        files.checks = checks.clone();
    }
    if args.config.is_some() {
        files.config = args.config.clone();
    }
    let config = run_config(files.config.as_deref(), args.level_low, args.level_high)?;
    let run = model::read_run(&files, config)?;
    let page = crate::report::run_report(&run)?;
    write_page(&args.out, &page)?;
    Ok(ExitCode::SUCCESS)
}

/// The files `replay --report` reads back: the ones asked for, or side files in a private
/// temporary directory that is removed afterwards.
pub struct SideFiles {
    dir: Option<PathBuf>,
    files: RunFiles,
}

impl SideFiles {
    /// Makes sure the replay writes a summary, events and checks to files.
    pub fn prepare(options: &mut crate::replay::ReplayOptions) -> Result<SideFiles> {
        let is_file = |p: &Option<PathBuf>| p.as_ref().is_some_and(|p| p.as_os_str() != "-");
        let is_stdout = |p: &Option<PathBuf>| p.as_ref().is_some_and(|p| p.as_os_str() == "-");
        if is_stdout(&options.summary) || is_stdout(&options.events) || is_stdout(&options.checks) {
            anyhow::bail!(
                "--report needs --summary, --events and --checks to be files (not `-`) when given"
            );
        }
        let needs_dir =
            !(is_file(&options.summary) && is_file(&options.events) && is_file(&options.checks));
        let dir = if needs_dir {
            let dir = std::env::temp_dir().join(format!(
                "steadycal-report-{}-{}",
                std::process::id(),
                std::time::SystemTime::now()
                    .duration_since(std::time::UNIX_EPOCH)
                    .map_or(0, |d| d.as_nanos())
            ));
            std::fs::create_dir_all(&dir)
                .with_context(|| format!("{}: cannot create", dir.display()))?;
            Some(dir)
        } else {
            None
        };
        for (slot, name) in [
            (&mut options.summary, "summary.json"),
            (&mut options.events, "events.jsonl"),
            (&mut options.checks, "checks.csv"),
        ] {
            if slot.is_none() {
                if let Some(dir) = &dir {
                    *slot = Some(dir.join(name));
                }
            }
        }
        let files = RunFiles {
            summary: options.summary.clone().unwrap_or_default(),
            events: options.events.clone().unwrap_or_default(),
            checks: options.checks.clone().unwrap_or_default(),
            config: None,
        };
        Ok(SideFiles { dir, files })
    }

    /// Writes the report of the finished replay.
    pub fn write_report(
        &self,
        options: &crate::replay::ReplayOptions,
        monitor: &MonitorArgs,
        path: &Path,
    ) -> Result<()> {
        let config = run_config(
            monitor.config.as_deref(),
            monitor.level_low,
            monitor.level_high,
        )?;
        let mut run = model::read_run(&self.files, config)?;
        run.title = options.feed.display().to_string();
        if self.dir.is_some() {
            run.inputs.retain(|(key, _)| key == "config");
            run.inputs
                .insert(0, ("feed".into(), options.feed.display().to_string()));
        }
        let page = crate::report::run_report(&run)?;
        write_page(path, &page)
    }
}

impl Drop for SideFiles {
    fn drop(&mut self) {
        if let Some(dir) = &self.dir {
            let _ = std::fs::remove_dir_all(dir);
        }
    }
}
