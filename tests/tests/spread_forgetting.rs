//! The streaming spread profile with forgetting factor 0.999 against a batch computation
//! with explicit weights.
//!
//! Reference values: `tests/reference/spread_forgetting_expected.json`, written by
//! `tests/reference/spread_forgetting_reference.py` (statsmodels 0.14.1 WLS for the exponent
//! and for the weighted R² of Koenker's auxiliary regression, numpy 1.26.4; pinned in
//! `tests/reference/requirements.txt`, re-run by CI with `--check`): residual i of N carries
//! the weight 0.999^(N − 1 − i), which is what multiplying every bin and the Koenker sums by
//! β on each push amounts to. The same stored feeds go through `SpreadProfile<f64, 16>`.
//! Agreement required: 1e-9 relative on the Koenker statistic, its Kish sample size and the
//! standard error of k, 1e-9 absolute on k.

use std::path::{Path, PathBuf};

use serde_json::Value;
use steadycal_core::spread::{SpreadConfig, SpreadProfile};

fn reference_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("reference")
}

fn read_pairs(path: &Path) -> Vec<(f64, f64)> {
    let mut reader = csv::Reader::from_path(path).unwrap_or_else(|e| panic!("{path:?}: {e}"));
    reader
        .records()
        .map(|record| {
            let record = record.unwrap();
            (record[0].parse().unwrap(), record[1].parse().unwrap())
        })
        .collect()
}

fn relative(ours: f64, reference: f64) -> f64 {
    (ours - reference).abs() / reference.abs()
}

#[test]
fn forgetting_profile_matches_the_weighted_batch_reference() {
    let expected: Value = serde_json::from_str(
        &std::fs::read_to_string(reference_dir().join("spread_forgetting_expected.json")).unwrap(),
    )
    .unwrap();
    let beta = expected["forgetting"].as_f64().unwrap();
    assert_eq!(beta, 0.999);
    let config = SpreadConfig {
        level_low: 1.0,
        level_high: 1000.0,
        forgetting: beta,
    };
    let feeds = expected["feeds"].as_object().unwrap();
    assert_eq!(feeds.len(), 3);
    for (file, values) in feeds {
        let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config);
        for (level, residual) in read_pairs(&reference_dir().join(file)) {
            assert!(profile.push(level, residual), "{file}");
        }
        let exponent = profile.exponent().expect("exponent");
        let koenker = profile.koenker().expect("Koenker");
        let k = values["k"].as_f64().unwrap();
        let se = values["standard_error"].as_f64().unwrap();
        let lm = values["koenker"].as_f64().unwrap();
        let samples = values["koenker_samples"].as_f64().unwrap();
        println!(
            "{file}: k {} vs {k} ({:.1e}); SE {} vs {se} ({:.1e}); Koenker {} vs {lm} ({:.1e}); n {} vs {samples}",
            exponent.k,
            (exponent.k - k).abs(),
            exponent.standard_error,
            relative(exponent.standard_error, se),
            koenker.statistic,
            relative(koenker.statistic, lm),
            koenker.samples
        );
        assert!((exponent.k - k).abs() <= 1e-9, "{file}: k");
        assert!(relative(exponent.standard_error, se) <= 1e-9, "{file}: SE");
        assert!(relative(koenker.statistic, lm) <= 1e-9, "{file}: Koenker");
        assert!(
            relative(koenker.samples, samples) <= 1e-9,
            "{file}: samples"
        );
        assert_eq!(
            u64::from(exponent.bins_used),
            values["bins_used"].as_u64().unwrap()
        );
    }
}
