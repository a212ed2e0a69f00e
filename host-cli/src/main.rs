//! The `steadycal` command: a thin layer over the `steadycal_cli` library.
//!
//! Exit codes: 0 ok, 1 alarms raised when `--fail-on` asks, 2 bad input or usage.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Parser, Subcommand};
use steadycal_cli::feed::ColumnNames;
use steadycal_cli::replay::{self, Precision, ReplayOptions};
use steadycal_core::monitor::MonitorConfig;

/// Keeps a sensor's calibration honest: replays recorded feeds through the same monitor a
/// board runs, and assesses lab calibration runs.
///
/// steadycal supports, and does not replace, calibration under the applicable standards,
/// local codes and licensed practice.
#[derive(Parser, Debug)]
#[command(name = "steadycal", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Run a recorded feed through the monitor exactly as a board would.
    ///
    /// Example: steadycal replay simulated-feeds/gas-cell.csv --events events.jsonl --summary summary.json
    Replay(ReplayArgs),
    /// Write a seeded, reproducible synthetic feed from a scenario file (TOML).
    ///
    /// Example: steadycal simulate simulated-feeds/gas-cell.toml --out gas-cell.csv --truth gas-cell.truth.json
    Simulate(SimulateArgs),
    /// Assess a lab calibration run: fits, scatter tests, power transform, limits, inverse table.
    ///
    /// Example: steadycal assess simulated-feeds/lab/co_gas_cell.csv --json --out co.json
    Assess(AssessArgs),
}

/// Calibration mean of `assess`.
#[derive(clap::ValueEnum, Clone, Copy, Debug)]
enum BasisArg {
    /// offset + gain·ref
    Linear,
    /// offset + gain·ref + quadratic·ref²
    Quadratic,
}

#[derive(Args, Debug)]
struct AssessArgs {
    /// Lab run: CSV with a header naming `raw` (response) and `ref` (reference); rows without
    /// `ref` are ignored.
    feed: PathBuf,
    /// Calibration mean.
    #[arg(long, value_enum, default_value = "linear")]
    basis: BasisArg,
    /// Write the JSON document instead of the text report.
    #[arg(long)]
    json: bool,
    /// Where to write (`-` = stdout).
    #[arg(long, value_name = "FILE", default_value = "-")]
    out: PathBuf,
}

fn run_assess(args: AssessArgs) -> anyhow::Result<ExitCode> {
    use steadycal_cli::assess::{self, AssessOptions, Basis};
    let data = assess::run_file::read_calibration_run(&args.feed)?;
    let options = AssessOptions {
        basis: match args.basis {
            BasisArg::Linear => Basis::Linear,
            BasisArg::Quadratic => Basis::Quadratic,
        },
        ..AssessOptions::default()
    };
    let assessment = assess::assess(&data, &options)
        .map_err(|error| anyhow::anyhow!("{}: {error}", args.feed.display()))?;
    let mut out = replay::create_output(&args.out)?;
    if args.json {
        serde_json::to_writer_pretty(&mut out, &assessment)?;
        out.write_all(b"\n")?;
    } else {
        out.write_all(assess::render_text(&assessment).as_bytes())?;
    }
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}

#[derive(Args, Debug)]
struct SimulateArgs {
    /// Scenario file (TOML).
    scenario: PathBuf,
    /// Where to write the feed CSV (`-` = stdout).
    #[arg(long, value_name = "FILE", default_value = "-")]
    out: PathBuf,
    /// Where to write the ground truth JSON.
    #[arg(long, value_name = "FILE")]
    truth: Option<PathBuf>,
}

fn run_simulate(args: SimulateArgs) -> anyhow::Result<ExitCode> {
    use anyhow::Context;
    let text = std::fs::read_to_string(&args.scenario)
        .with_context(|| format!("{}: cannot read", args.scenario.display()))?;
    let scenario: steadycal_cli::simulate::Scenario = toml::from_str(&text)
        .map_err(|error| anyhow::anyhow!("{}: {error}", args.scenario.display()))?;
    let (rows, truth) = steadycal_cli::simulate::generate(&scenario);
    let mut out = replay::create_output(&args.out)?;
    steadycal_cli::simulate::write_csv(&rows, out.as_mut())?;
    out.flush()?;
    if let Some(path) = args.truth {
        let mut out = replay::create_output(&path)?;
        serde_json::to_writer_pretty(&mut out, &truth)?;
        out.write_all(b"\n")?;
        out.flush()?;
    }
    Ok(ExitCode::SUCCESS)
}

#[derive(Args, Debug)]
struct ReplayArgs {
    /// Feed to replay: CSV with a header naming `raw` and optionally `t`, `ref`, `temp` (`-` = stdin).
    feed: PathBuf,
    /// Write events as JSON lines here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    events: Option<PathBuf>,
    /// Write the run summary as JSON here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    summary: Option<PathBuf>,
    /// Write calibrated readings (rows without reference) as CSV here (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    readings: Option<PathBuf>,
    /// Float type of the core (f32 is what a Cortex-M4F board runs).
    #[arg(long, value_enum, default_value = "f32")]
    precision: Precision,
    /// Lower end of the working range, raw units above the origin.
    #[arg(long, default_value_t = 1.0)]
    level_low: f64,
    /// Upper end of the working range, raw units above the origin.
    #[arg(long, default_value_t = 1000.0)]
    level_high: f64,
    /// Print nothing on success.
    #[arg(long, short)]
    quiet: bool,
}

fn run_replay(args: ReplayArgs) -> anyhow::Result<ExitCode> {
    let options = ReplayOptions {
        feed: args.feed,
        events: args.events,
        summary: args.summary,
        readings: args.readings,
        precision: args.precision,
        columns: ColumnNames::default(),
        config: MonitorConfig::default_for_range(args.level_low, args.level_high),
    };
    let result = replay::replay(&options)?;
    if let Some(error) = result.error {
        eprintln!("steadycal: {error}");
        eprintln!("steadycal: outputs up to the previous row were written");
        return Ok(ExitCode::from(2));
    }
    if !args.quiet {
        let s = &result.summary;
        eprintln!(
            "{} samples, {} checks, {} rejected; rung {}; spread exponent {}; events {}",
            s["samples"],
            s["checks"],
            s["rejected"],
            s["rung"].as_str().unwrap_or("?"),
            s["spread_exponent"],
            s["events"]
        );
    }
    Ok(ExitCode::SUCCESS)
}

fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(cli) => cli,
        Err(error) => {
            let code = if error.use_stderr() { 2 } else { 0 };
            let _ = error.print();
            return ExitCode::from(code);
        }
    };
    let result = match cli.command {
        Command::Replay(args) => run_replay(args),
        Command::Simulate(args) => run_simulate(args),
        Command::Assess(args) => run_assess(args),
    };
    match result {
        Ok(code) => code,
        Err(error) => {
            eprintln!("steadycal: {error:#}");
            ExitCode::from(2)
        }
    }
}
