//! Averaged checks end to end: `replay SENSOR --reference REF --average-over DURATION` on a
//! simulated co-location (invented, for the test) where the reference reports ten-minute
//! block values and the sensor logs every 30 s. Each reference row takes the mean of the
//! ten sensor samples of the last five minutes of its block (a check of m = 10); the ten
//! samples of the first five minutes stay single readings. The single readings' expanded
//! uncertainty (k = 2) must cover the truth about as often as ±2σ covers a normal value,
//! 95.45 % (from memory, any statistics table): a monitor that took each mean for one
//! value would learn a tenth of the single values' variance and cover about 47 %.

mod common;

use std::path::PathBuf;

use common::steadycal;
use serde_json::Value;

/// 2026-03-01T00:00:00Z in seconds since the epoch (Python 3 datetime).
const START: i64 = 1_772_323_200;
/// Blocks of ten minutes, sensor samples every 30 s, the reference's averaging window.
const BLOCKS: usize = 2_000;
const BLOCK_SECONDS: i64 = 600;
const SAMPLE_SECONDS: i64 = 30;
/// Single-value noise of the sensor (raw units), and its line `raw = 5 + 10·x`.
const SIGMA: f64 = 3.0;
const OFFSET: f64 = 5.0;
const GAIN: f64 = 10.0;
/// Blocks left out of the coverage count: the warm-up (200 checks) and the first fits.
const SETTLING_BLOCKS: usize = 400;

/// splitmix64 uniforms and Box–Muller normals (from memory).
struct Normal(u64);

impl Normal {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn next(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }
}

fn scratch() -> PathBuf {
    let dir = std::env::temp_dir().join(format!("steadycal-averaged-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

/// Rows of a CSV file with a header, by column name.
fn csv(text: &str) -> Vec<std::collections::HashMap<String, String>> {
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .unwrap()
        .split(',')
        .map(str::to_string)
        .collect();
    lines
        .map(|line| {
            header
                .iter()
                .cloned()
                .zip(line.split(',').map(str::to_string))
                .collect()
        })
        .collect()
}

#[test]
fn single_readings_beside_averaged_checks_carry_the_single_values_uncertainty() {
    let dir = scratch();
    let mut normal = Normal(16);
    let mut sensor = String::from("t,raw\n");
    let mut reference = String::from("t,ref\n");
    // The true value of each block.
    let mut truth = Vec::with_capacity(BLOCKS);
    for block in 0..BLOCKS as i64 {
        let x = 10.0 + 90.0 * normal.uniform();
        truth.push(x);
        let start = START + block * BLOCK_SECONDS;
        for j in 1..=BLOCK_SECONDS / SAMPLE_SECONDS {
            let raw = OFFSET + GAIN * x + SIGMA * normal.next();
            sensor.push_str(&format!("{},{raw:.6}\n", start + j * SAMPLE_SECONDS));
        }
        reference.push_str(&format!("{},{x:.6}\n", start + BLOCK_SECONDS));
    }
    let (sensor_path, reference_path) = (dir.join("sensor.csv"), dir.join("reference.csv"));
    std::fs::write(&sensor_path, sensor).unwrap();
    std::fs::write(&reference_path, reference).unwrap();
    let (summary_path, readings_path, checks_path) = (
        dir.join("summary.json"),
        dir.join("readings.csv"),
        dir.join("checks.csv"),
    );
    steadycal()
        .arg("replay")
        .arg(&sensor_path)
        .arg("--reference")
        .arg(&reference_path)
        .args(["--average-over", "5m"])
        .args(["--level-low", "50", "--level-high", "1100"])
        .arg("--summary")
        .arg(&summary_path)
        .arg("--readings")
        .arg(&readings_path)
        .arg("--checks")
        .arg(&checks_path)
        .assert()
        .success();
    let summary: Value = serde_json::from_slice(&std::fs::read(&summary_path).unwrap()).unwrap();
    // Every reference row took the ten samples of its window; the other ten of each block
    // are readings.
    let samples_per_block = (BLOCK_SECONDS / SAMPLE_SECONDS) as u64;
    assert_eq!(summary["join"]["paired"], BLOCKS as u64);
    assert_eq!(
        summary["join"]["averaged_samples"],
        BLOCKS as u64 * samples_per_block / 2
    );
    // Samples given to the monitor: one check per block and its ten single samples (the
    // first blocks' ones come before any calibration and make no reading).
    assert_eq!(
        summary["samples"],
        BLOCKS as u64 * (1 + samples_per_block / 2)
    );

    // Coverage of the single readings past the settling blocks.
    let readings = csv(&std::fs::read_to_string(&readings_path).unwrap());
    let (mut covered, mut counted) = (0usize, 0usize);
    for row in &readings {
        let t: f64 = row["t"].parse().unwrap();
        let block = ((t as i64 - START - 1) / BLOCK_SECONDS) as usize;
        if block < SETTLING_BLOCKS {
            continue;
        }
        let value: f64 = row["value"].parse().unwrap();
        let expanded: f64 = row["expanded_uncertainty"].parse().unwrap();
        counted += 1;
        if (value - truth[block]).abs() <= expanded {
            covered += 1;
        }
    }
    let n = counted as f64;
    let coverage = covered as f64 / n;
    // Tolerance: four standard errors of the coverage. The binomial one, p(1 − p)/n, and
    // the one the estimated σ adds (common to every reading): the coverage of ±2σ̂ moves by
    // 2·2φ(2)·δ for a relative error δ of σ̂, whose SE is 1/√(2·n_σ), n_σ the fit's Kish
    // effective count (1 + β)/(1 − β) = 1999 checks for β = 0.999 (normal theory, from
    // memory; φ(2) = 0.05399).
    let p = 0.9545;
    let binomial = p * (1.0 - p) / n;
    let sigma_part = 4.0 * 0.05399 / (2.0f64 * 1999.0).sqrt();
    let tolerance = 4.0 * (binomial + sigma_part * sigma_part).sqrt();
    eprintln!("coverage {coverage:.4} of {counted} single readings (tolerance {tolerance:.4})");
    assert!(
        (coverage - p).abs() <= tolerance,
        "coverage {coverage:.4} of {counted} single readings, expected {p} ± {tolerance:.4}"
    );

    // The averaged checks' standardized residuals have unit variance: mean z² within four
    // standard errors √(2/n) of 1 (normal theory).
    let checks = csv(&std::fs::read_to_string(&checks_path).unwrap());
    let z: Vec<f64> = checks
        .iter()
        .skip(SETTLING_BLOCKS)
        .filter_map(|row| row["standardized"].parse().ok())
        .collect();
    let mean_square = z.iter().map(|z| z * z).sum::<f64>() / z.len() as f64;
    eprintln!("mean z² {mean_square:.4} over {} averaged checks", z.len());
    assert!(
        (mean_square - 1.0).abs() <= 4.0 * (2.0 / z.len() as f64).sqrt(),
        "mean z² {mean_square} over {} averaged checks",
        z.len()
    );
    std::fs::remove_dir_all(&dir).unwrap();
}
