//! The monitor picks the rung that makes the scatter constant (issue 2, item 4).
//!
//! Feeds are simulated (invented data, for the test only): a straight-line sensor checked
//! against references spread log-uniformly over two decades (5 to 500), scatter
//! SD = sd·(level/100)^k. The expected rung is λ = 1 − k by the variance-stabilizing
//! argument (SD ∝ level^k ⇒ g(y) = y^(1−k) has constant scatter; Box & Cox 1964, from
//! memory). Release builds run the full size (100 seeds × 20,000 checks, and 100 × 10^5
//! constant-scatter checks); debug builds run a reduced size so `cargo test` stays quick.

use steadycal_cli::simulate::{generate, NoiseModel, ReferenceSchedule, Scenario, SensorModel};
use steadycal_core::event::EventKind;
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::sample::Sample;
use steadycal_core::transform::Rung;

const FULL: bool = !cfg!(debug_assertions);

fn seeds() -> u64 {
    if FULL {
        100
    } else {
        6
    }
}

struct RunResult {
    rung: Rung,
    k: Option<f32>,
    switches: usize,
}

fn scenario(seed: u64, rows: u64, offset: f64, noise: NoiseModel) -> Scenario {
    Scenario {
        description: "test feed".into(),
        seed,
        rows,
        interval: 1.0,
        sensor: SensorModel {
            offset,
            gain: 1.0,
            quadratic: 0.0,
        },
        noise,
        reference: ReferenceSchedule {
            low: 5.0,
            high: 500.0,
            log_uniform: true,
            levels: vec![],
            every: 1,
        },
        drift: vec![],
        ..Scenario::default()
    }
}

fn run(scenario: &Scenario) -> RunResult {
    let config = MonitorConfig::<f32>::default_for_range(2.0, 1000.0);
    let mut monitor: Monitor<f32> = Monitor::new(config).unwrap();
    let (rows, _) = generate(scenario);
    let mut switches = 0;
    for (seq, row) in rows.iter().enumerate() {
        let sample = Sample::check(
            seq as u64,
            row.t,
            row.raw as f32,
            row.reference.unwrap() as f32,
        );
        monitor.push(&sample);
        while let Some(event) = monitor.pop_event() {
            if matches!(event.kind, EventKind::TransformChanged { .. }) {
                switches += 1;
            }
        }
    }
    RunResult {
        rung: monitor.rung(),
        k: monitor.spread_exponent().map(|e| e.k),
        switches,
    }
}

fn run_seeds(rows: u64, offset: f64, noise: NoiseModel) -> Vec<RunResult> {
    let seeds: Vec<u64> = (1..=seeds()).collect();
    std::thread::scope(|scope| {
        let handles: Vec<_> = seeds
            .chunks(seeds.len().div_ceil(2))
            .map(|chunk| {
                scope.spawn(move || {
                    chunk
                        .iter()
                        .map(|&seed| run(&scenario(seed, rows, offset, noise)))
                        .collect::<Vec<_>>()
                })
            })
            .collect();
        handles
            .into_iter()
            .flat_map(|h| h.join().unwrap())
            .collect()
    })
}

fn assert_choice(name: &str, offset: f64, noise: NoiseModel, expected: Rung) {
    let results = run_seeds(20_000, offset, noise);
    let n = results.len() as f64;
    let right = results.iter().filter(|r| r.rung == expected).count() as f64;
    let k_close = results
        .iter()
        .filter(|r| {
            r.k.is_some_and(|k| (k as f64 - noise.exponent).abs() <= 0.1)
        })
        .count() as f64;
    let mean_k = results
        .iter()
        .filter_map(|r| r.k)
        .map(|k| k as f64)
        .sum::<f64>()
        / n;
    eprintln!(
        "{name}: rung {} in {:.0}% of {} seeds, k within 0.1 in {:.0}%, mean k {mean_k:.3} (truth {})",
        expected.name(),
        100.0 * right / n,
        n,
        100.0 * k_close / n,
        noise.exponent
    );
    assert!(
        right / n >= 0.95,
        "{name}: right rung in only {right} of {n} seeds"
    );
    assert!(
        k_close / n >= 0.95,
        "{name}: k within 0.1 in only {k_close} of {n} seeds"
    );
}

#[test]
fn constant_scatter_stays_identity() {
    assert_choice("constant", 0.0, NoiseModel::constant(1.0), Rung::Identity);
}

#[test]
fn proportional_scatter_picks_log() {
    assert_choice(
        "proportional",
        0.0,
        NoiseModel::power(2.0, 1.0, 100.0),
        Rung::Log,
    );
}

#[test]
fn counting_scatter_picks_sqrt() {
    assert_choice(
        "counting",
        0.0,
        NoiseModel::power(1.0, 0.5, 100.0),
        Rung::Sqrt,
    );
}

#[test]
fn steeper_scatter_picks_inv_sqrt() {
    assert_choice(
        "power 1.5",
        0.0,
        NoiseModel::power(2.0, 1.5, 100.0),
        Rung::InvSqrt,
    );
}

#[test]
fn proportional_scatter_with_offset_still_picks_log() {
    // Offset 1.0 raw units = 10 SDs at the lowest level (SD at level 5 is 0.1).
    assert_choice(
        "proportional + offset",
        1.0,
        NoiseModel::power(2.0, 1.0, 100.0),
        Rung::Log,
    );
}

#[test]
fn constant_scatter_never_switches_in_long_runs() {
    let rows = if FULL { 100_000 } else { 20_000 };
    let results = run_seeds(rows, 0.0, NoiseModel::constant(1.0));
    let switched = results.iter().filter(|r| r.switches > 0).count();
    eprintln!(
        "constant, {} seeds × {rows} checks: {switched} runs switched",
        results.len()
    );
    assert_eq!(switched, 0);
}
