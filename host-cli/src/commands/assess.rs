//! `steadycal assess FEED`: batch analysis of a lab calibration run (arguments moved here
//! unchanged from `main.rs`).

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;

use crate::replay;

/// Calibration mean of `assess`.
#[derive(clap::ValueEnum, Clone, Copy, Debug)]
pub enum BasisArg {
    /// offset + gain·ref
    Linear,
    /// offset + gain·ref + quadratic·ref²
    Quadratic,
}

/// Arguments of `assess`.
#[derive(Args, Debug)]
pub struct AssessArgs {
    /// Lab run: CSV with a header naming `raw` (response) and `ref` (reference); rows without
    /// `ref` are ignored.
    pub feed: PathBuf,
    /// Calibration mean.
    #[arg(long, value_enum, default_value = "linear")]
    pub basis: BasisArg,
    /// Write the JSON document instead of the text report.
    #[arg(long)]
    pub json: bool,
    /// Where to write (`-` = stdout).
    #[arg(long, value_name = "FILE", default_value = "-")]
    pub out: PathBuf,
    /// Also write the HTML report (calibration curve with its band, LOD/LOQ, residuals,
    /// spread against level) here.
    #[arg(long, value_name = "FILE")]
    pub report: Option<PathBuf>,
}

/// Runs `assess`.
pub fn run(args: AssessArgs) -> anyhow::Result<ExitCode> {
    use crate::assess::{self, AssessOptions, Basis};
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
    if let Some(path) = &args.report {
        let page = crate::report::assess_report(
            &args.feed.display().to_string(),
            &data,
            &assessment,
            &options,
        )?;
        super::report::write_page(path, &page)?;
    }
    Ok(ExitCode::SUCCESS)
}
