//! The steadycal monitor configuration file (TOML): its schema, parsing and validation, and
//! the complete commented file `assess --commission` writes.
//!
//! One file configures a channel everywhere: the host commands (`replay`, `watch`, `fleet`,
//! `report`, `assess`) and the firmware's build script read it through this crate, so the
//! board and the desktop validate it with the same code. Every key, its unit, default and
//! valid range is listed in the README section "Configuration file".
//!
//! α levels and false-alarm budgets are turned into thresholds here, on the host (the core
//! only carries thresholds):
//! - `ladder.switch_alpha` → switch margin `χ²₁(1 − α) / 2` (a log-likelihood lead),
//! - `spread.alpha` → Koenker threshold `χ²₁(1 − α)`,
//! - `mean_check.alpha` → normal quantile `z = Φ⁻¹(1 − α)`,
//! - `spread.interval_level` → `z = Φ⁻¹((1 + level) / 2)` for the interval reported for k,
//! - `detect.drift.alpha` → Wald quantiles `χ²_p(1 − α)`, p = 1..4,
//! - `detect.cusum.in_control_run_length` (or `in_control_time` × `checks_per_hour`) →
//!   decision interval h ([`arl`], Brook & Evans's Markov chain).
//!
//! Each threshold can instead be given directly; giving both forms is an error.
//!
//! # Contract
//! - Unknown keys, wrong types and out-of-range values are errors that name the key; those
//!   found while parsing carry toml's line and column and a snippet of the offending line,
//!   those found after parsing the line and column of the key ([`error::locate`]).
//! - A configuration that resolves without error passes the core's
//!   `MonitorConfig::validate`, and its baseline the core's `Baseline::new`.
//!
//! # Adding a key
//! Add the field to its section struct (a checked type from [`values`] refuses bad values
//! while parsing), apply it in the section's `apply` and fill it in `complete`, give it a
//! line in [`keys::KEYS`] (unit, default, range, meaning: the written file's comment and the
//! README row, which a test compares), and test it in `tests/keys.rs`.

pub mod acceptance;
pub mod arl;
pub mod baseline;
pub mod detect;
pub mod error;
pub mod keys;
mod resolve;
pub mod rust_literal;
pub mod sections;
pub mod values;
mod write;

use std::path::Path;

use serde::{Deserialize, Serialize};
use steadycal_core::monitor::MonitorConfig;

pub use acceptance::AcceptanceSection;
pub use baseline::{BaselineSection, Commissioned};
pub use detect::{CusumSizing, DetectSection};
pub use error::{ConfigError, Problem};
pub use resolve::{chi_squared_1_quantile, normal_quantile};
pub use sections::{
    BasisSection, ColumnsSection, FitSection, LadderSection, MeanCheckSection, RangeSection,
    ReadingsSection, SpreadSection,
};
pub use values::{Alpha, AtLeastOne, Finite, Forgetting, Positive, RungName};

/// The whole configuration file.
#[derive(Clone, Debug, Default, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct ConfigFile {
    /// `[range]`.
    #[serde(default)]
    pub range: RangeSection,
    /// `[basis]`.
    #[serde(default)]
    pub basis: BasisSection,
    /// `[fit]`.
    #[serde(default)]
    pub fit: FitSection,
    /// `[ladder]`.
    #[serde(default)]
    pub ladder: LadderSection,
    /// `[spread]`.
    #[serde(default)]
    pub spread: SpreadSection,
    /// `[mean_check]`.
    #[serde(default)]
    pub mean_check: MeanCheckSection,
    /// `[readings]`.
    #[serde(default)]
    pub readings: ReadingsSection,
    /// `[columns]`.
    #[serde(default)]
    pub columns: ColumnsSection,
    /// `[detect]`.
    #[serde(default)]
    pub detect: DetectSection,
    /// `[baseline]`: the commissioned calibration (none: the monitor freezes its own).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub baseline: Option<BaselineSection>,
    /// `[acceptance]`: criteria for a lab run (used by `assess`, ignored by the monitor).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub acceptance: Option<AcceptanceSection>,
    /// The text the file was parsed from (to locate keys in errors found after parsing).
    #[serde(skip)]
    text: Option<String>,
}

/// Everything a channel is configured with, resolved and checked.
#[derive(Clone, Debug, PartialEq)]
pub struct ChannelConfig {
    /// The monitor configuration (f64; a board or an f32 run converts it).
    pub monitor: MonitorConfig<f64>,
    /// The commissioned baseline, when the file has one.
    pub baseline: Option<Commissioned>,
    /// How the CUSUM's decision interval was set.
    pub cusum_sizing: CusumSizing,
}

impl ConfigFile {
    /// Parses TOML text; `file` names it in errors.
    pub fn parse(file: &str, text: &str) -> Result<Self, ConfigError> {
        let mut config: ConfigFile = toml::from_str(text).map_err(|error| ConfigError::Parse {
            file: file.into(),
            message: error.to_string().trim_end().to_string(),
        })?;
        config.text = Some(text.to_string());
        Ok(config)
    }

    /// Reads and parses a file.
    pub fn read(path: &Path) -> Result<Self, ConfigError> {
        let file = path.display().to_string();
        let text = std::fs::read_to_string(path).map_err(|source| ConfigError::Io {
            file: file.clone(),
            source,
        })?;
        Self::parse(&file, &text)
    }

    /// The channel's configuration: the defaults of `MonitorConfig::default_for_range`
    /// over `[range]` (detectors over the origin and range), every key given overriding
    /// them, checked; `file` names the file in errors.
    pub fn channel(&self, file: &str) -> Result<ChannelConfig, ConfigError> {
        self.resolve()
            .map_err(|problem| problem.in_file(file, self.text.as_deref()))
    }

    /// The monitor configuration alone (see [`ConfigFile::channel`]).
    pub fn monitor_config(&self, file: &str) -> Result<MonitorConfig<f64>, ConfigError> {
        self.channel(file).map(|channel| channel.monitor)
    }
}
