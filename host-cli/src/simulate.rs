//! Seeded, reproducible synthetic feeds from a scenario description.
//!
//! A [`Scenario`] says how the true sensor behaves (offset, gain, optional curvature, a
//! temperature term `d·(T − T₀)` with a temperature profile), how its scatter depends on
//! the level (SD = `sd · (level / at_level)^exponent`: 0 constant, 0.5 counting, 1
//! proportional, any other power; plus outliers), how the reference is scheduled
//! (continuous co-location, periodic checks at chosen levels, gaps with no reference), how
//! gain and offset drift (ramp, step, random walk) and which faults strike (stuck, dropout
//! as NaN cells or missing rows, spikes, saturation). [`Simulation`] streams the rows,
//! [`generate`] collects them with a [`GroundTruth`], [`write_feed`] writes the CSV.
//!
//! # Reproducibility
//! The same scenario and seed always give the same rows on every machine. The main PCG64
//! stream (seeded with `seed`) draws, per row and in this order, the process value (when it
//! is random) and the noise; every other random effect (random walk, temperature noise,
//! outliers, spikes) draws from a second PCG64 stream seeded from `seed`, so adding an
//! effect to a scenario does not change the noise of the rows.

use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, StandardNormal};
use rand_pcg::Pcg64;
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
    fn span(&self) -> Span {
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

    fn start(&self) -> Option<time::OffsetDateTime> {
        time::OffsetDateTime::parse(
            &self.start_time,
            &time::format_description::well_known::Rfc3339,
        )
        .ok()
    }
}

/// One generated row.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Row {
    /// Time, seconds.
    pub t: f64,
    /// Sensor output (NaN for a dropout written as `nan`).
    pub raw: f64,
    /// Reference, on check rows.
    pub reference: Option<f64>,
    /// The true value the sensor saw (what a perfect calibration returns).
    pub truth: f64,
    /// Temperature, when the scenario records it.
    pub temperature: Option<f64>,
    /// The row is left out of the feed (a dropout with missing rows).
    pub missing: bool,
}

/// A span of rows in the ground truth, `[start, end)`.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct TruthSpan {
    /// What it is (`ramp`, `step`, `random_walk`, `stuck`, `dropout`, `spike`, `saturation`,
    /// `gap`).
    pub kind: String,
    /// First row.
    pub start: u64,
    /// One past the last row.
    pub end: u64,
}

/// The true sensor parameters.
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct TrueParameters {
    /// Offset, raw units.
    pub offset: f64,
    /// Gain, raw units per reference unit.
    pub gain: f64,
    /// Curvature.
    pub quadratic: f64,
    /// Temperature coefficient d, raw units per °C.
    pub temperature: f64,
}

/// What the scenario put into the feed.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct GroundTruth {
    /// The scatter exponent.
    pub exponent: f64,
    /// The rung that makes the scatter constant (λ = 1 − k).
    pub rung: String,
    /// Final gain and offset after all drifts.
    pub final_gain: f64,
    /// Final offset.
    pub final_offset: f64,
    /// Rows at which drifts start.
    pub onsets: Vec<u64>,
    /// Parameters at row 0.
    pub initial: TrueParameters,
    /// Parameters at the last row (drifts and random walk included).
    #[serde(rename = "final")]
    pub last: TrueParameters,
    /// Drifts, faults and reference gaps, as row spans.
    pub spans: Vec<TruthSpan>,
    /// Rows with an outlier added.
    pub outlier_rows: u64,
    /// Rows with a spike added.
    pub spike_rows: u64,
    /// Rows written to the feed (missing rows left out).
    pub rows_written: u64,
    /// Rows carrying a reference.
    pub checks: u64,
    /// What the monitor is expected to report (rung defaults to `rung`).
    pub expected: Expectations,
}

/// Gain and offset at a row, after the drifts.
pub fn sensor_at(scenario: &Scenario, row: u64) -> SensorModel {
    let mut sensor = scenario.sensor;
    let mut gain_factor = 1.0;
    for drift in &scenario.drift {
        if row < drift.start {
            continue;
        }
        let fraction = if drift.rows == 0 {
            1.0
        } else {
            ((row - drift.start) as f64 / drift.rows as f64).min(1.0)
        };
        gain_factor *= 1.0 + drift.gain * fraction;
        sensor.offset += drift.offset * fraction;
    }
    sensor.gain *= gain_factor;
    sensor.quadratic *= gain_factor;
    sensor
}

/// Seed of the second random stream (random walk, temperature noise, outliers, spikes).
fn effects_seed(seed: u64) -> u64 {
    seed ^ 0x9E37_79B9_7F4A_7C15
}

/// A streaming generator of a scenario's rows (memory independent of the row count).
pub struct Simulation<'a> {
    scenario: &'a Scenario,
    rng: Pcg64,
    effects: Pcg64,
    row: u64,
    level_index: usize,
    walk_gain: f64,
    walk_offset: f64,
    previous_raw: f64,
    stuck: Vec<Option<f64>>,
    /// Rows with an outlier so far.
    pub outlier_rows: u64,
    /// Rows with a spike so far.
    pub spike_rows: u64,
    /// Rows written (not missing) so far.
    pub rows_written: u64,
    /// Check rows so far.
    pub checks: u64,
    last: TrueParameters,
}

impl<'a> Simulation<'a> {
    /// Starts a simulation.
    pub fn new(scenario: &'a Scenario) -> Self {
        Simulation {
            scenario,
            rng: Pcg64::seed_from_u64(scenario.seed),
            effects: Pcg64::seed_from_u64(effects_seed(scenario.seed)),
            row: 0,
            level_index: 0,
            walk_gain: 0.0,
            walk_offset: 0.0,
            previous_raw: f64::NAN,
            stuck: vec![None; scenario.faults.len()],
            outlier_rows: 0,
            spike_rows: 0,
            rows_written: 0,
            checks: 0,
            last: TrueParameters {
                offset: scenario.sensor.offset,
                gain: scenario.sensor.gain,
                quadratic: scenario.sensor.quadratic,
                temperature: scenario.temperature.map(|t| t.coefficient).unwrap_or(0.0),
            },
        }
    }

    fn temperature(&mut self, t: f64) -> Option<f64> {
        let model = self.scenario.temperature?;
        let cycle = model.amplitude * (std::f64::consts::TAU * t / model.period).sin();
        let noise = if model.noise_sd > 0.0 {
            let z: f64 = StandardNormal.sample(&mut self.effects);
            model.noise_sd * z
        } else {
            0.0
        };
        Some(model.mean + cycle + model.ramp * t / 3600.0 + noise)
    }

    /// The ground truth, once every row has been drawn.
    pub fn truth(&self) -> GroundTruth {
        let scenario = self.scenario;
        let total = scenario.rows;
        let rung: String = steadycal_core::transform::Rung::nearest(1.0 - scenario.noise.exponent)
            .name()
            .into();
        let mut spans = Vec::new();
        for drift in &scenario.drift {
            spans.push(TruthSpan {
                kind: if drift.rows == 0 { "step" } else { "ramp" }.into(),
                start: drift.start,
                end: (drift.start + drift.rows.max(1)).min(total),
            });
        }
        if let Some(walk) = &scenario.random_walk {
            spans.push(TruthSpan {
                kind: "random_walk".into(),
                start: walk.start,
                end: total,
            });
        }
        for fault in &scenario.faults {
            let kind = serde_json::to_value(fault.kind)
                .ok()
                .and_then(|v| v.as_str().map(String::from))
                .unwrap_or_default();
            spans.push(TruthSpan {
                kind,
                start: fault.start,
                end: fault.span().end(total),
            });
        }
        for gap in &scenario.gaps {
            spans.push(TruthSpan {
                kind: "gap".into(),
                start: gap.start,
                end: gap.end(total),
            });
        }
        let mut expected = scenario.expect.clone();
        if expected.rung.is_none() {
            expected.rung = Some(rung.clone());
        }
        let mut onsets: Vec<u64> = scenario.drift.iter().map(|d| d.start).collect();
        if let Some(walk) = &scenario.random_walk {
            onsets.push(walk.start);
        }
        GroundTruth {
            exponent: scenario.noise.exponent,
            rung,
            final_gain: self.last.gain,
            final_offset: self.last.offset,
            onsets,
            initial: TrueParameters {
                offset: scenario.sensor.offset,
                gain: scenario.sensor.gain,
                quadratic: scenario.sensor.quadratic,
                temperature: scenario.temperature.map(|t| t.coefficient).unwrap_or(0.0),
            },
            last: self.last,
            spans,
            outlier_rows: self.outlier_rows,
            spike_rows: self.spike_rows,
            rows_written: self.rows_written,
            checks: self.checks,
            expected,
        }
    }
}

impl Iterator for Simulation<'_> {
    type Item = Row;

    fn next(&mut self) -> Option<Row> {
        let scenario = self.scenario;
        let row = self.row;
        if row >= scenario.rows {
            return None;
        }
        self.row += 1;
        let schedule = &scenario.reference;
        let is_check = (schedule.every <= 1 || row.is_multiple_of(schedule.every))
            && !scenario.gaps.iter().any(|gap| gap.contains(row));
        // Fixed levels: every row when every row is a check (the original behaviour), else
        // only the check rows (check standards), the others seeing the process.
        let use_level = !schedule.levels.is_empty() && (schedule.every <= 1 || is_check);
        let truth = if use_level {
            let value = schedule.levels[self.level_index % schedule.levels.len()];
            self.level_index += 1;
            value
        } else if schedule.log_uniform {
            let u: f64 = self.rng.gen();
            (schedule.low.ln() + u * (schedule.high.ln() - schedule.low.ln())).exp()
        } else {
            schedule.low + self.rng.gen::<f64>() * (schedule.high - schedule.low)
        };
        let t = row as f64 * scenario.interval;
        let mut sensor = sensor_at(scenario, row);
        if let Some(walk) = &scenario.random_walk {
            if row >= walk.start {
                let a: f64 = StandardNormal.sample(&mut self.effects);
                let b: f64 = StandardNormal.sample(&mut self.effects);
                self.walk_gain += walk.gain_sd * a;
                self.walk_offset += walk.offset_sd * b;
            }
            sensor.gain *= 1.0 + self.walk_gain;
            sensor.quadratic *= 1.0 + self.walk_gain;
            sensor.offset += self.walk_offset;
        }
        let temperature = self.temperature(t);
        let thermal = match (scenario.temperature, temperature) {
            (Some(model), Some(value)) => model.coefficient * (value - model.reference),
            _ => 0.0,
        };
        let mean = sensor.offset + sensor.gain * truth + sensor.quadratic * truth * truth + thermal;
        let z: f64 = StandardNormal.sample(&mut self.rng);
        let sd = scenario.noise.sd_at(mean);
        let mut raw = mean + sd * z;
        if let Some(outliers) = &scenario.outliers {
            let u: f64 = self.effects.gen();
            let sign: bool = self.effects.gen();
            if u < outliers.rate {
                self.outlier_rows += 1;
                raw += if sign { 1.0 } else { -1.0 } * outliers.size * sd;
            }
        }
        let mut missing = false;
        for (index, fault) in scenario.faults.iter().enumerate() {
            if !fault.span().contains(row) {
                self.stuck[index] = None;
                continue;
            }
            match fault.kind {
                FaultKind::Stuck => {
                    let held = *self.stuck[index].get_or_insert(self.previous_raw);
                    if held.is_finite() {
                        raw = held;
                    }
                }
                FaultKind::Dropout => {
                    if fault.missing {
                        missing = true;
                    } else {
                        raw = f64::NAN;
                    }
                }
                FaultKind::Spike => {
                    let u: f64 = self.effects.gen();
                    let sign: bool = self.effects.gen();
                    if u < fault.rate {
                        self.spike_rows += 1;
                        raw += if sign { fault.size } else { -fault.size };
                    }
                }
                FaultKind::Saturation => raw = raw.min(fault.level),
            }
        }
        if !missing {
            self.rows_written += 1;
            if is_check {
                self.checks += 1;
            }
        }
        if raw.is_finite() {
            self.previous_raw = raw;
        }
        self.last = TrueParameters {
            offset: sensor.offset,
            gain: sensor.gain,
            quadratic: sensor.quadratic,
            temperature: scenario.temperature.map(|t| t.coefficient).unwrap_or(0.0),
        };
        Some(Row {
            t,
            raw,
            reference: is_check.then_some(truth),
            truth,
            temperature: temperature.filter(|_| scenario.temperature.is_some_and(|m| m.record)),
            missing,
        })
    }
}

/// Generates the rows of a scenario.
pub fn generate(scenario: &Scenario) -> (Vec<Row>, GroundTruth) {
    let mut simulation = Simulation::new(scenario);
    let rows: Vec<Row> = simulation.by_ref().collect();
    (rows, simulation.truth())
}

/// Writes rows as a feed CSV (`t,raw,ref`, plus `temp` when the rows carry it), with
/// shortest round-trip numbers; missing rows are left out.
pub fn write_csv(rows: &[Row], out: &mut dyn std::io::Write) -> std::io::Result<()> {
    let with_temperature = rows.iter().any(|row| row.temperature.is_some());
    write_header(out, with_temperature)?;
    for row in rows {
        write_row(out, row, &row.t.to_string(), with_temperature)?;
    }
    Ok(())
}

fn write_header(out: &mut dyn std::io::Write, with_temperature: bool) -> std::io::Result<()> {
    if with_temperature {
        writeln!(out, "t,raw,ref,temp")
    } else {
        writeln!(out, "t,raw,ref")
    }
}

fn write_row(
    out: &mut dyn std::io::Write,
    row: &Row,
    t: &str,
    with_temperature: bool,
) -> std::io::Result<()> {
    if row.missing {
        return Ok(());
    }
    write!(out, "{t},{},", row.raw)?;
    if let Some(reference) = row.reference {
        write!(out, "{reference}")?;
    }
    if with_temperature {
        match row.temperature {
            Some(temperature) => write!(out, ",{temperature}")?,
            None => write!(out, ",")?,
        }
    }
    writeln!(out)
}

/// Streams a scenario's feed as CSV (memory flat in the row count) and returns its truth.
pub fn write_feed(
    scenario: &Scenario,
    out: &mut dyn std::io::Write,
) -> std::io::Result<GroundTruth> {
    let with_temperature = scenario.temperature.is_some_and(|m| m.record);
    write_header(out, with_temperature)?;
    let start = scenario.start();
    let mut simulation = Simulation::new(scenario);
    for row in simulation.by_ref() {
        let t = match (scenario.time_format, start) {
            (TimeFormat::Rfc3339, Some(start)) => {
                let time = start + time::Duration::seconds_f64(row.t);
                time.format(&time::format_description::well_known::Rfc3339)
                    .unwrap_or_else(|_| row.t.to_string())
            }
            _ => row.t.to_string(),
        };
        write_row(out, &row, &t, with_temperature)?;
    }
    Ok(simulation.truth())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scenario() -> Scenario {
        Scenario {
            description: String::new(),
            seed: 3,
            rows: 2000,
            interval: 1.0,
            sensor: SensorModel {
                offset: 1.0,
                gain: 2.0,
                quadratic: 0.0,
            },
            noise: NoiseModel::power(0.05, 1.0, 100.0),
            reference: ReferenceSchedule {
                low: 5.0,
                high: 500.0,
                log_uniform: true,
                levels: vec![],
                every: 1,
            },
            drift: vec![Drift {
                start: 1000,
                rows: 0,
                gain: 0.02,
                offset: 0.0,
            }],
            ..Scenario::default()
        }
    }

    #[test]
    fn reproducible_and_seed_dependent() {
        let (a, truth) = generate(&scenario());
        let (b, _) = generate(&scenario());
        assert_eq!(a, b);
        let mut other = scenario();
        other.seed = 4;
        assert_ne!(generate(&other).0, a);
        assert_eq!(truth.rung, "log");
        assert!((truth.final_gain - 2.04).abs() < 1e-12);
    }

    #[test]
    fn effects_do_not_change_the_noise_stream() {
        let base = scenario();
        let mut with_effects = scenario();
        with_effects.outliers = Some(Outliers {
            rate: 0.0,
            size: 10.0,
        });
        with_effects.faults.push(Fault {
            kind: FaultKind::Stuck,
            start: 100,
            rows: Some(50),
            missing: false,
            rate: 0.01,
            size: 0.0,
            level: 0.0,
        });
        let (a, _) = generate(&base);
        let (b, truth) = generate(&with_effects);
        assert_eq!(a[..100], b[..100]);
        assert!(b[100..150].iter().all(|row| row.raw == a[99].raw));
        assert_eq!(a[150..], b[150..]);
        assert_eq!(truth.spans[1].kind, "stuck");
        assert_eq!((truth.spans[1].start, truth.spans[1].end), (100, 150));
    }

    #[test]
    fn gaps_dropouts_and_temperature() {
        let mut s = scenario();
        s.gaps.push(Span {
            start: 10,
            rows: Some(10),
        });
        s.faults.push(Fault {
            kind: FaultKind::Dropout,
            start: 30,
            rows: Some(5),
            missing: true,
            rate: 0.01,
            size: 0.0,
            level: 0.0,
        });
        s.temperature = Some(TemperatureModel {
            coefficient: 0.5,
            reference: 20.0,
            mean: 25.0,
            amplitude: 0.0,
            period: 86_400.0,
            ramp: 0.0,
            noise_sd: 0.0,
            record: true,
        });
        let (rows, truth) = generate(&s);
        assert!(rows[10..20].iter().all(|r| r.reference.is_none()));
        assert_eq!(truth.rows_written, 2000 - 5);
        assert_eq!(rows[0].temperature, Some(25.0));
        let mut out = Vec::new();
        write_csv(&rows[..3], &mut out).unwrap();
        let text = String::from_utf8(out).unwrap();
        assert!(text.starts_with("t,raw,ref,temp\n0,"), "{text}");
    }

    #[test]
    fn scatter_follows_the_model() {
        let mut s = scenario();
        s.rows = 20000;
        s.drift.clear();
        let (rows, _) = generate(&s);
        // Relative residual SD should be about 0.05/100 per unit level → 5e-4·level.
        let relative: Vec<f64> = rows
            .iter()
            .map(|r| (r.raw - (1.0 + 2.0 * r.truth)) / (1.0 + 2.0 * r.truth))
            .collect();
        let sd = (relative.iter().map(|v| v * v).sum::<f64>() / relative.len() as f64).sqrt();
        assert!((sd - 5e-4).abs() < 2e-5, "{sd}");
    }
}
