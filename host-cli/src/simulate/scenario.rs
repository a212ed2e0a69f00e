//! What a simulation is asked for: the [`Scenario`] and its parts (sensor, noise, reference
//! schedule, drift, temperature, faults), read from TOML.

use serde::{Deserialize, Serialize};

/// How the scatter depends on the level.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NoiseModel {
    /// The SD at `at_level` (raw units).
    pub sd: f64,
    /// Exponent k of SD ∝ level^k: 0 constant, 0.5 counting, 1 proportional.
    pub exponent: f64,
    /// Level at which the SD equals `sd` (raw units above the origin).
    pub at_level: f64,
}

impl NoiseModel {
    /// Constant scatter.
    pub fn constant(sd: f64) -> Self {
        NoiseModel {
            sd,
            exponent: 0.0,
            at_level: 1.0,
        }
    }
    /// SD ∝ level^exponent, `sd` at `at_level`.
    pub fn power(sd: f64, exponent: f64, at_level: f64) -> Self {
        NoiseModel {
            sd,
            exponent,
            at_level,
        }
    }
    /// The SD at a level.
    pub fn sd_at(&self, level: f64) -> f64 {
        if self.exponent == 0.0 {
            self.sd
        } else {
            self.sd * (level.max(0.0) / self.at_level).powf(self.exponent)
        }
    }
}

/// How the reference values are spread.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReferenceSchedule {
    /// Lowest reference value.
    pub low: f64,
    /// Highest reference value.
    pub high: f64,
    /// Draw references log-uniformly (true) or uniformly (false) between low and high,
    /// unless `levels` is given.
    #[serde(default = "default_true")]
    pub log_uniform: bool,
    /// Fixed check levels, visited in turn (check standards, calibration gases).
    #[serde(default)]
    pub levels: Vec<f64>,
    /// One row in `every` carries the reference (1 = continuous co-location).
    #[serde(default = "default_one")]
    pub every: u64,
}

fn default_true() -> bool {
    true
}
fn default_one() -> u64 {
    1
}

/// The true sensor.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SensorModel {
    /// Offset (raw units).
    pub offset: f64,
    /// Gain (raw units per reference unit).
    pub gain: f64,
    /// Curvature (raw units per reference unit squared).
    #[serde(default)]
    pub quadratic: f64,
}

/// A change of gain or offset over time.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Drift {
    /// Row at which the change starts.
    pub start: u64,
    /// Rows over which it ramps to its full size (0 = a step).
    #[serde(default)]
    pub rows: u64,
    /// Relative gain change at full size (0.03 = +3 %).
    #[serde(default)]
    pub gain: f64,
    /// Offset change at full size (raw units).
    #[serde(default)]
    pub offset: f64,
}

/// A random walk of gain and offset: from `start` on, each row adds a normal step.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RandomWalk {
    /// Row at which the walk starts.
    #[serde(default)]
    pub start: u64,
    /// SD of the relative gain step per row (1e-5 = 0.001 % per row).
    #[serde(default)]
    pub gain_sd: f64,
    /// SD of the offset step per row (raw units).
    #[serde(default)]
    pub offset_sd: f64,
}

/// Gross errors added to a fraction of the rows.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Outliers {
    /// Fraction of rows with an outlier (0.001 = one in a thousand).
    pub rate: f64,
    /// Size of an outlier in multiples of the local SD (sign random).
    #[serde(default = "default_outlier_size")]
    pub size: f64,
}

fn default_outlier_size() -> f64 {
    10.0
}

/// The temperature the sensor sees and its effect `d·(T − T₀)` on the raw output.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TemperatureModel {
    /// d: raw units per °C.
    #[serde(default)]
    pub coefficient: f64,
    /// T₀: °C at which the effect is zero.
    #[serde(default = "default_temperature")]
    pub reference: f64,
    /// Mean temperature, °C.
    #[serde(default = "default_temperature")]
    pub mean: f64,
    /// Amplitude of the daily cycle, °C.
    #[serde(default)]
    pub amplitude: f64,
    /// Period of the cycle, seconds.
    #[serde(default = "default_period")]
    pub period: f64,
    /// Linear trend, °C per hour.
    #[serde(default)]
    pub ramp: f64,
    /// SD of the temperature sensor's noise, °C.
    #[serde(default)]
    pub noise_sd: f64,
    /// Write the `temp` column.
    #[serde(default = "default_true")]
    pub record: bool,
}

fn default_temperature() -> f64 {
    20.0
}
fn default_period() -> f64 {
    86_400.0
}

/// A span of rows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Span {
    /// First row.
    pub start: u64,
    /// Number of rows (absent: to the end of the feed).
    #[serde(default)]
    pub rows: Option<u64>,
}

impl Span {
    /// True when `row` is inside.
    pub fn contains(&self, row: u64) -> bool {
        row >= self.start
            && self
                .rows
                .is_none_or(|rows| row < self.start.saturating_add(rows))
    }
    /// One past the last row, capped at `total`.
    pub fn end(&self, total: u64) -> u64 {
        self.rows
            .map(|rows| self.start.saturating_add(rows))
            .unwrap_or(total)
            .min(total)
    }
}

/// Kinds of sensor fault.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FaultKind {
    /// The raw output repeats the last value before the span, exactly.
    Stuck,
    /// No value: a `nan` cell, or (with `missing = true`) no row at all.
    Dropout,
    /// Random spikes of `size` raw units (sign random), one row in `1/rate`.
    Spike,
    /// The raw output clips at `level`.
    Saturation,
}

/// A fault over a span of rows.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Fault {
    /// What goes wrong.
    pub kind: FaultKind,
    /// First row.
    pub start: u64,
    /// Number of rows (absent: to the end of the feed).
    #[serde(default)]
    pub rows: Option<u64>,
    /// Dropout: leave the rows out instead of writing `nan`.
    #[serde(default)]
    pub missing: bool,
    /// Spike: fraction of rows in the span with a spike.
    #[serde(default = "default_spike_rate")]
    pub rate: f64,
    /// Spike: size in raw units.
    #[serde(default)]
    pub size: f64,
    /// Saturation: the ceiling, raw units.
    #[serde(default)]
    pub level: f64,
}

fn default_spike_rate() -> f64 {
    0.01
}

impl Fault {
    pub(super) fn span(&self) -> Span {
        Span {
            start: self.start,
            rows: self.rows,
        }
    }
}

/// How the `t` column is written.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum TimeFormat {
    /// Seconds from the start of the feed.
    #[default]
    Seconds,
    /// RFC 3339 timestamps from `start_time`.
    Rfc3339,
}

/// What the monitor is expected to report on this feed (checked by the end-to-end tests
/// and listed in `simulated-feeds/README.md`).
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Expectations {
    /// Final rung (default: the rung that makes the true scatter constant).
    #[serde(default)]
    pub rung: Option<String>,
    /// Event kinds that must be raised at least once.
    #[serde(default)]
    pub events: Vec<String>,
    /// Event kinds that must not be raised.
    #[serde(default)]
    pub absent: Vec<String>,
}

/// Everything that defines a synthetic feed.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// What the scenario stands for (free text).
    #[serde(default)]
    pub description: String,
    /// Seed of the random stream.
    pub seed: u64,
    /// Number of rows.
    pub rows: u64,
    /// Seconds between rows.
    #[serde(default = "default_interval")]
    pub interval: f64,
    /// The true sensor.
    pub sensor: SensorModel,
    /// Its scatter.
    pub noise: NoiseModel,
    /// The reference schedule.
    pub reference: ReferenceSchedule,
    /// Drifts of gain and offset (ramps and steps).
    #[serde(default)]
    pub drift: Vec<Drift>,
    /// A random walk of gain and offset.
    #[serde(default)]
    pub random_walk: Option<RandomWalk>,
    /// Gross errors.
    #[serde(default)]
    pub outliers: Option<Outliers>,
    /// Temperature and its effect.
    #[serde(default)]
    pub temperature: Option<TemperatureModel>,
    /// Spans with no reference (`[[gap]]`).
    #[serde(default, rename = "gap")]
    pub gaps: Vec<Span>,
    /// Sensor faults (`[[fault]]`).
    #[serde(default, rename = "fault")]
    pub faults: Vec<Fault>,
    /// How `t` is written.
    #[serde(default)]
    pub time_format: TimeFormat,
    /// Time of row 0 for RFC 3339 timestamps.
    #[serde(default = "default_start_time")]
    pub start_time: String,
    /// What the monitor should report.
    #[serde(default)]
    pub expect: Expectations,
}

fn default_interval() -> f64 {
    1.0
}
fn default_start_time() -> String {
    "2026-01-01T00:00:00Z".into()
}

impl Default for Scenario {
    /// An empty scenario (no rows) of a unit-gain sensor with constant unit scatter, to be
    /// filled in with struct-update syntax.
    fn default() -> Self {
        Scenario {
            description: String::new(),
            seed: 0,
            rows: 0,
            interval: 1.0,
            sensor: SensorModel {
                offset: 0.0,
                gain: 1.0,
                quadratic: 0.0,
            },
            noise: NoiseModel::constant(1.0),
            reference: ReferenceSchedule {
                low: 1.0,
                high: 100.0,
                log_uniform: true,
                levels: vec![],
                every: 1,
            },
            drift: vec![],
            random_walk: None,
            outliers: None,
            temperature: None,
            gaps: vec![],
            faults: vec![],
            time_format: TimeFormat::Seconds,
            start_time: default_start_time(),
            expect: Expectations::default(),
        }
    }
}

/// Why a scenario cannot be simulated.
#[derive(Debug, thiserror::Error)]
#[error("`{key}`: {message}")]
pub struct ScenarioError {
    /// The offending key.
    pub key: String,
    /// What is wrong.
    pub message: String,
}

impl Scenario {
    /// Checks the values serde cannot: ranges and consistency, naming the key.
    pub fn validate(&self) -> Result<(), ScenarioError> {
        let fail = |key: &str, message: &str| {
            Err(ScenarioError {
                key: key.into(),
                message: message.into(),
            })
        };
        let schedule = &self.reference;
        if !(self.interval.is_finite() && self.interval > 0.0) {
            return fail("interval", "must be positive");
        }
        if !(schedule.low.is_finite() && schedule.high.is_finite() && schedule.low <= schedule.high)
        {
            return fail(
                "reference.low",
                "must be finite and at most `reference.high`",
            );
        }
        if schedule.log_uniform
            && schedule.levels.is_empty()
            && schedule.low.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)
        {
            return fail(
                "reference.low",
                "must be positive for log-uniform references",
            );
        }
        if !(self.noise.sd.is_finite() && self.noise.sd >= 0.0) {
            return fail("noise.sd", "must be non-negative");
        }
        if !(self.noise.at_level.is_finite() && self.noise.at_level > 0.0) {
            return fail("noise.at_level", "must be positive");
        }
        if let Some(outliers) = &self.outliers {
            if !(0.0..=1.0).contains(&outliers.rate) {
                return fail("outliers.rate", "must be a fraction in [0, 1]");
            }
        }
        if let Some(temperature) = &self.temperature {
            if !(temperature.period.is_finite() && temperature.period > 0.0) {
                return fail("temperature.period", "must be positive");
            }
        }
        for fault in &self.faults {
            if !(0.0..=1.0).contains(&fault.rate) {
                return fail("fault.rate", "must be a fraction in [0, 1]");
            }
        }
        if self.time_format == TimeFormat::Rfc3339 && self.start().is_none() {
            return fail("start_time", "must be an RFC 3339 timestamp");
        }
        Ok(())
    }

    pub(super) fn start(&self) -> Option<time::OffsetDateTime> {
        time::OffsetDateTime::parse(
            &self.start_time,
            &time::format_description::well_known::Rfc3339,
        )
        .ok()
    }
}
