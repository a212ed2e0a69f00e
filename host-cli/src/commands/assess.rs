//! `steadycal assess FEED`: batch analysis of a lab calibration run.

use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

use clap::Args;

use super::ColumnArgs;
use crate::assess::WeightRule;
use crate::{commission, io};

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
#[command(after_help = super::after_help(concat!(
    "Examples:\n",
    "  steadycal assess simulated-feeds/lab/co_gas_cell.csv\n",
    "  steadycal assess simulated-feeds/lab/co_gas_cell.csv --json --out co.json --report co.html\n",
    "  steadycal assess run.csv --raw-column signal --ref-column conc --weights ref^-2\n",
    "  steadycal assess run.csv --raw-uncertainty-column u_signal --commission cell.monitor.toml",
)))]
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
    /// Monitor configuration (TOML): its `[acceptance]` criteria are judged on the run
    /// (exit code 1 when one fails), its `range.origin` is the level origin, and
    /// `--commission` starts from it.
    #[arg(long, short = 'c', value_name = "FILE")]
    pub config: Option<PathBuf>,
    /// Write the monitor configuration this run commissions (complete and commented:
    /// working range, level origin, initial rung, basis, and the calibration as the drift
    /// baseline) to FILE.
    #[arg(long, value_name = "FILE")]
    pub commission: Option<PathBuf>,
    /// Weights of the weighted fit: `auto` (from the estimated spread exponent; the headline
    /// fit only when weighting is advised), `none`, `ref^P` (e.g. `ref^-1` for 1/x, `ref^-2`
    /// for 1/x²) or `level^P` (of the fitted level above the origin). Chosen weights make
    /// the weighted fit the headline.
    #[arg(long, value_name = "RULE", default_value = "auto", value_parser = parse_weights)]
    pub weights: WeightRule,
    /// Column holding each response's known standard uncertainty u(raw): ISO/TS 28037
    /// weighted least squares (weights 1/u², covariance not rescaled, χ² check).
    #[arg(long, value_name = "NAME")]
    pub raw_uncertainty_column: Option<String>,
    /// Column holding each reference's known standard uncertainty u(ref) (with
    /// --raw-uncertainty-column: the errors-in-both-variables line of ISO/TS 28037).
    #[arg(long, value_name = "NAME", requires = "raw_uncertainty_column")]
    pub ref_uncertainty_column: Option<String>,
    /// Origin of levels for the spread model, the power transforms and level weights [default:
    /// the config's range.origin, else 0].
    #[arg(long, value_name = "RAW", allow_hyphen_values = true)]
    pub level_origin: Option<f64>,
    /// Coverage factor of the inverse table's expanded uncertainties [default: Student t at
    /// 95 % on the headline fit's degrees of freedom].
    #[arg(long, value_name = "K")]
    pub coverage_factor: Option<f64>,
    /// A cell text that means "no value" (repeatable; empty cells and NA always do, and the
    /// config's columns.missing adds its own), e.g. --missing=-200. A check whose raw cell is
    /// missing is left out and counted; a missing uncertainty is refused.
    #[arg(long, value_name = "TEXT", value_parser = crate::field::missing::parse_marker, allow_hyphen_values = true)]
    pub missing: Vec<String>,
    #[command(flatten)]
    pub columns: ColumnArgs,
}

fn parse_weights(text: &str) -> Result<WeightRule, String> {
    text.parse()
}

/// Runs `assess`.
pub fn run(args: AssessArgs) -> anyhow::Result<ExitCode> {
    use crate::assess::{self, AssessOptions, Basis};
    let config = match &args.config {
        Some(path) => {
            let file = steadycal_config::ConfigFile::read(path)?;
            file.channel(&path.display().to_string())?;
            file
        }
        None => steadycal_config::ConfigFile::default(),
    };
    let columns = super::column_names(&config, &args.columns);
    let mut markers = config.columns.missing.clone().unwrap_or_default();
    markers.extend(args.missing.iter().cloned());
    let missing = crate::field::missing::MissingMarkers::new(&markers)
        .map_err(|e| anyhow::anyhow!("--missing / columns.missing: {e}"))?;
    let run_file = assess::run_file::read_calibration_run_with(
        &args.feed,
        &columns,
        &assess::run_file::UncertaintyColumns {
            raw: args.raw_uncertainty_column.clone(),
            reference: args.ref_uncertainty_column.clone(),
        },
        &missing,
    )?;
    if run_file.checks_without_raw > 0 {
        eprintln!(
            "steadycal: {}: {} row(s) with a reference but a missing `{}` were left out",
            args.feed.display(),
            run_file.checks_without_raw,
            columns.raw
        );
    }
    let data = run_file.data;
    if let Some(origin) = args.level_origin {
        if !origin.is_finite() {
            anyhow::bail!("--level-origin: {origin} is not a finite number");
        }
    }
    if let Some(k) = args.coverage_factor {
        if !(k.is_finite() && k > 0.0) {
            anyhow::bail!("--coverage-factor: {k} is not a positive finite number");
        }
    }
    let options = AssessOptions {
        basis: match args.basis {
            BasisArg::Linear => Basis::Linear,
            BasisArg::Quadratic => Basis::Quadratic,
        },
        level_origin: args
            .level_origin
            .or(config.range.origin.map(|origin| origin.0))
            .unwrap_or(0.0),
        weights: args.weights,
        coverage_factor: args.coverage_factor,
        ..AssessOptions::default()
    };
    let assessment = assess::assess(&data, &options)
        .map_err(|error| anyhow::anyhow!("{}: {error}", args.feed.display()))?;
    let acceptance = config.acceptance.as_ref().map(|criteria| {
        let verdicts = criteria.judge(&commission::figures(&data, &assessment));
        (criteria.source.as_deref(), verdicts)
    });
    let mut out = io::create_output(&args.out)?;
    if args.json {
        let mut document = serde_json::to_value(&assessment)?;
        if let (Some((source, verdicts)), serde_json::Value::Object(map)) =
            (&acceptance, &mut document)
        {
            map.insert(
                "acceptance".into(),
                serde_json::json!({
                    "source": source,
                    "pass": verdicts.iter().all(|v| v.pass),
                    "criteria": verdicts,
                }),
            );
        }
        serde_json::to_writer_pretty(&mut out, &document)?;
        out.write_all(b"\n")?;
    } else {
        out.write_all(assess::render_text(&assessment).as_bytes())?;
        if let Some((source, verdicts)) = &acceptance {
            out.write_all(commission::verdict_lines(*source, verdicts).as_bytes())?;
        }
    }
    out.flush()?;
    if let Some(path) = &args.commission {
        let file = commission::commission(
            &config,
            &args.feed.display().to_string(),
            &data,
            &assessment,
            &options,
        )?;
        let header = format!(
            "Monitor configuration commissioned by `steadycal assess` from {} ({} points):\n\
             working range, level origin, initial rung ({}), basis and the calibration as the\n\
             drift baseline come from that run; every other key is the value in force.\n\
             steadycal supports, and does not replace, calibration under the applicable\n\
             standards, local codes and licensed practice.",
            args.feed.display(),
            data.raw.len(),
            assessment.recommended,
        );
        let text = file.to_commented_toml(&header).map_err(|p| {
            anyhow::anyhow!("commissioned configuration: `{}`: {}", p.key, p.message)
        })?;
        std::fs::write(path, text)
            .map_err(|e| anyhow::anyhow!("{}: cannot write: {e}", path.display()))?;
    }
    if let Some(path) = &args.report {
        let page = crate::report::assess_report(
            &args.feed.display().to_string(),
            &data,
            &assessment,
            &options,
        )?;
        let page = match &acceptance {
            Some((source, verdicts)) => page.replacen(
                "\n</body>",
                &format!("\n{}\n</body>", commission::verdict_html(*source, verdicts)),
                1,
            ),
            None => page,
        };
        super::report::write_page(path, &page)?;
    }
    if acceptance.is_some_and(|(_, verdicts)| verdicts.iter().any(|v| !v.pass)) {
        return Ok(super::exit_alarms());
    }
    Ok(ExitCode::SUCCESS)
}
