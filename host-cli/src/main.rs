//! The `steadycal` command: a thin layer over the `steadycal_cli` library. Each subcommand's
//! arguments and run function live in `steadycal_cli::commands`.
//!
//! Exit codes: 0 ok, 1 alarms raised when `--fail-on` asks, 2 bad input or usage.

use std::process::ExitCode;

use clap::{Parser, Subcommand};
use steadycal_cli::commands::{self, assess, fleet, replay, report, simulate, snapshot, watch};

/// Keeps a sensor's calibration honest: replays recorded feeds through the same monitor a
/// board runs, watches live streams, checks fleets of channels, assesses lab calibration runs,
/// simulates feeds.
///
/// steadycal supports, and does not replace, calibration under the applicable standards,
/// local codes and licensed practice.
#[derive(Parser, Debug)]
#[command(name = "steadycal", version, about, after_help = commands::EXIT_CODES)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Run a recorded feed through the monitor exactly as a board would.
    ///
    /// Example: steadycal replay simulated-feeds/gas-cell.csv --events events.jsonl --summary summary.json
    Replay(Box<replay::ReplayArgs>),
    /// Write a seeded, reproducible synthetic feed from a scenario file (TOML).
    ///
    /// Example: steadycal simulate simulated-feeds/gas-cell.toml --out gas-cell.csv --truth gas-cell.truth.json
    Simulate(simulate::SimulateArgs),
    /// Assess a lab calibration run: fits, scatter tests, power transform, limits, inverse table.
    ///
    /// Example: steadycal assess simulated-feeds/lab/co_gas_cell.csv --json --out co.json
    Assess(assess::AssessArgs),
    /// Run the monitor on a live line stream (serial port, pipe), printing events as they happen.
    ///
    /// Example: tail -f -n +1 logger.csv | steadycal watch -
    Watch(watch::WatchArgs),
    /// Replay every feed of a directory in parallel and summarize them in one table.
    ///
    /// Example: steadycal fleet simulated-feeds --csv fleet.csv
    Fleet(fleet::FleetArgs),
    /// Write a self-contained HTML report (inline SVG plots) of a replay run.
    ///
    /// Example: steadycal report run/ --out report.html
    Report(report::ReportArgs),
    /// Inspect or verify a monitor snapshot (the state a board or `replay --save-snapshot` wrote).
    ///
    /// Example: steadycal snapshot inspect state.bin --json
    Snapshot(snapshot::SnapshotArgs),
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
        Command::Replay(args) => replay::run(*args),
        Command::Simulate(args) => simulate::run(args),
        Command::Assess(args) => assess::run(args),
        Command::Watch(args) => watch::run(args),
        Command::Fleet(args) => fleet::run(args),
        Command::Report(args) => report::run(args),
        Command::Snapshot(args) => snapshot::run(args),
    };
    match result {
        Ok(code) => code,
        Err(error) if commands::is_broken_pipe(&error) => commands::exit_broken_pipe(),
        Err(error) => {
            eprintln!("steadycal: {error:#}");
            commands::exit_bad_input()
        }
    }
}
