//! `steadycal simulate SCENARIO.toml`: a seeded, reproducible synthetic feed.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::Context;
use clap::Args;

use crate::io::create_output;
use crate::simulate::{write_feed, Scenario};

/// Arguments of `simulate`.
#[derive(Args, Debug)]
#[command(after_help = super::after_help(concat!(
    "Examples:\n",
    "  steadycal simulate simulated-feeds/gas-cell.toml --out gas-cell.csv --truth gas-cell.truth.json\n",
    "  steadycal simulate simulated-feeds/gas-cell.toml --rows 10000000 --out big.csv\n",
    "  steadycal simulate scenario.toml | steadycal replay - --summary -",
)))]
pub struct SimulateArgs {
    /// Scenario file (TOML; see simulated-feeds/README.md for the keys).
    pub scenario: PathBuf,
    /// Where to write the feed CSV (`-` = stdout).
    #[arg(long, short, value_name = "FILE", default_value = "-")]
    pub out: PathBuf,
    /// Where to write the ground truth JSON (`-` = stdout).
    #[arg(long, value_name = "FILE")]
    pub truth: Option<PathBuf>,
    /// Override the scenario's row count.
    #[arg(long, value_name = "N")]
    pub rows: Option<u64>,
    /// Override the scenario's seed.
    #[arg(long, value_name = "N")]
    pub seed: Option<u64>,
}

/// Reads a scenario file, naming the file (toml's message carries line and column).
pub fn read_scenario(path: &std::path::Path) -> anyhow::Result<Scenario> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("{}: cannot read", path.display()))?;
    let scenario: Scenario = toml::from_str(&text)
        .map_err(|error| anyhow::anyhow!("{}: {}", path.display(), error.to_string().trim_end()))?;
    scenario
        .validate()
        .map_err(|error| anyhow::anyhow!("{}: {error}", path.display()))?;
    Ok(scenario)
}

/// Runs `simulate`.
pub fn run(args: SimulateArgs) -> anyhow::Result<ExitCode> {
    let mut scenario = read_scenario(&args.scenario)?;
    if let Some(rows) = args.rows {
        scenario.rows = rows;
    }
    if let Some(seed) = args.seed {
        scenario.seed = seed;
    }
    let mut out = create_output(&args.out)?;
    let truth = write_feed(&scenario, out.as_mut())?;
    out.flush()?;
    if let Some(path) = args.truth {
        let mut out = create_output(&path)?;
        serde_json::to_writer_pretty(&mut out, &truth)?;
        out.write_all(b"\n")?;
        out.flush()?;
    }
    Ok(ExitCode::SUCCESS)
}
