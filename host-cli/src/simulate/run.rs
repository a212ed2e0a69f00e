//! The simulation itself: [`Simulation`] streams the rows of a scenario, [`generate`]
//! collects them with the [`GroundTruth`].

use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, StandardNormal};
use rand_pcg::Pcg64;
use serde::{Deserialize, Serialize};

use super::scenario::*;

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
