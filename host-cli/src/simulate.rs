//! Seeded, reproducible synthetic feeds from a scenario description.
//!
//! A [`Scenario`] says how the true sensor behaves (offset, gain, optional curvature),
//! how its scatter depends on the level (SD = `sd · (level / at_level)^exponent`), how the
//! reference is scheduled, and how gain and offset drift. [`generate`] turns it into rows
//! and a [`GroundTruth`]. The same scenario and seed always give the same rows on every
//! machine (PCG64 stream, Box–Muller free normal sampling from `rand_distr`).

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
    /// Drifts of gain and offset.
    #[serde(default)]
    pub drift: Vec<Drift>,
}

fn default_interval() -> f64 {
    1.0
}

/// One generated row.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Row {
    /// Time, seconds.
    pub t: f64,
    /// Sensor output.
    pub raw: f64,
    /// Reference, on check rows.
    pub reference: Option<f64>,
    /// The true value the sensor saw (what a perfect calibration returns).
    pub truth: f64,
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

/// Generates the rows of a scenario.
pub fn generate(scenario: &Scenario) -> (Vec<Row>, GroundTruth) {
    let mut rng = Pcg64::seed_from_u64(scenario.seed);
    let schedule = &scenario.reference;
    let mut rows = Vec::with_capacity(scenario.rows as usize);
    let mut level_index = 0usize;
    for row in 0..scenario.rows {
        let truth = if !schedule.levels.is_empty() {
            let value = schedule.levels[level_index % schedule.levels.len()];
            level_index += 1;
            value
        } else if schedule.log_uniform {
            let u: f64 = rng.gen();
            (schedule.low.ln() + u * (schedule.high.ln() - schedule.low.ln())).exp()
        } else {
            schedule.low + rng.gen::<f64>() * (schedule.high - schedule.low)
        };
        let sensor = sensor_at(scenario, row);
        let mean = sensor.offset + sensor.gain * truth + sensor.quadratic * truth * truth;
        let z: f64 = StandardNormal.sample(&mut rng);
        let raw = mean + scenario.noise.sd_at(mean) * z;
        let is_check = schedule.every <= 1 || row % schedule.every == 0;
        rows.push(Row {
            t: row as f64 * scenario.interval,
            raw,
            reference: is_check.then_some(truth),
            truth,
        });
    }
    let last = sensor_at(scenario, scenario.rows.saturating_sub(1));
    let truth = GroundTruth {
        exponent: scenario.noise.exponent,
        rung: steadycal_core::transform::Rung::nearest(1.0 - scenario.noise.exponent)
            .name()
            .into(),
        final_gain: last.gain,
        final_offset: last.offset,
        onsets: scenario.drift.iter().map(|d| d.start).collect(),
    };
    (rows, truth)
}

/// Writes rows as a feed CSV (`t,raw,ref`), with shortest round-trip numbers.
pub fn write_csv(rows: &[Row], out: &mut dyn std::io::Write) -> std::io::Result<()> {
    writeln!(out, "t,raw,ref")?;
    for row in rows {
        match row.reference {
            Some(reference) => writeln!(out, "{},{},{}", row.t, row.raw, reference)?,
            None => writeln!(out, "{},{},", row.t, row.raw)?,
        }
    }
    Ok(())
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
