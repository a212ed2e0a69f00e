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
//!
//! One job per module: [`scenario`] (the description), [`run`] (the rows and their
//! ground truth), [`feed_file`] (the CSV).

pub mod feed_file;
pub mod run;
pub mod scenario;

pub use feed_file::*;
pub use run::*;
pub use scenario::*;

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
