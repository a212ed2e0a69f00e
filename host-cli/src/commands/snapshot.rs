//! `steadycal snapshot inspect|verify FILE`: look at a snapshot a board or a replay wrote.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Args, Subcommand};

use super::exit_bad_input;
use crate::snapshot_file;

/// Arguments of `snapshot`.
#[derive(Args, Debug)]
#[command(after_help = super::after_help(concat!(
    "Examples:\n",
    "  steadycal replay feed.csv --save-snapshot state.bin\n",
    "  steadycal snapshot inspect state.bin\n",
    "  steadycal snapshot inspect state.bin --json | jq .rung\n",
    "  steadycal snapshot verify state.bin && steadycal replay more.csv --resume state.bin",
)))]
pub struct SnapshotArgs {
    /// What to do with the snapshot.
    #[command(subcommand)]
    pub action: SnapshotAction,
}

/// What `snapshot` does.
#[derive(Subcommand, Debug)]
pub enum SnapshotAction {
    /// Print a summary: format version, size, CRC, samples and checks counted, rung,
    /// calibration parameters, raised alarms.
    Inspect {
        /// Snapshot file (`-` = stdin).
        file: PathBuf,
        /// Print the summary as JSON on standard output instead.
        #[arg(long)]
        json: bool,
    },
    /// Check a snapshot completely (header, CRC, decoding, configuration): exit 0 when it
    /// is good, 2 with the reason when it is not.
    Verify {
        /// Snapshot file (`-` = stdin).
        file: PathBuf,
        /// Print nothing when the snapshot is good.
        #[arg(long, short)]
        quiet: bool,
    },
}

/// Runs `snapshot`.
pub fn run(args: SnapshotArgs) -> anyhow::Result<ExitCode> {
    match args.action {
        SnapshotAction::Inspect { file, json } => {
            let bytes = snapshot_file::read_bytes(&file)?;
            let name = file.display().to_string();
            let restored = snapshot_file::restore_bytes(&name, &bytes)?;
            let description = snapshot_file::describe(&bytes, &restored);
            if json {
                println!("{}", serde_json::to_string_pretty(&description)?);
            } else {
                println!("{}", snapshot_file::human(&name, &description));
            }
            Ok(ExitCode::SUCCESS)
        }
        SnapshotAction::Verify { file, quiet } => {
            let bytes = snapshot_file::read_bytes(&file)?;
            let name = file.display().to_string();
            match snapshot_file::restore_bytes(&name, &bytes) {
                Ok(restored) => {
                    if !quiet {
                        let description = snapshot_file::describe(&bytes, &restored);
                        println!(
                            "{name}: good (format version {}, {}, {} bytes, CRC-32 {})",
                            description["format_version"],
                            description["precision"].as_str().unwrap_or("?"),
                            bytes.len(),
                            description["crc32"].as_str().unwrap_or("?")
                        );
                    }
                    Ok(ExitCode::SUCCESS)
                }
                Err(error) => {
                    eprintln!("steadycal: {error:#}");
                    Ok(exit_bad_input())
                }
            }
        }
    }
}
