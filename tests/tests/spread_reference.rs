//! The spread profile against general-purpose reference libraries (issue 2, item 5).
//!
//! Reference values: `tests/reference/spread_expected.json`, written by
//! `tests/reference/spread_reference.py` with the pinned versions of
//! `tests/reference/requirements.txt`:
//! - Koenker statistic: statsmodels 0.14.1 `het_breuschpagan(resid, add_constant(level),
//!   robust=True)`, the LM statistic n·R²;
//! - exponent k: statsmodels 0.14.1 WLS of ln SD on mean ln level per bin (weights n − 1,
//!   variance with ddof = 1), cross-checked with numpy 1.26.4 `linalg.lstsq`;
//! - bin means and SDs: numpy 1.26.4 `mean`, `std(ddof=1)`.
//!
//! The same (level, residual) pairs go through `SpreadProfile<f64, 16>` with forgetting 1.

use std::path::{Path, PathBuf};

use serde_json::Value;
use steadycal_core::spread::{SpreadConfig, SpreadProfile};

const RELATIVE: f64 = 1e-9;
const ABSOLUTE_K: f64 = 1e-9;

fn reference_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("reference")
}

fn number(value: &Value, key: &str) -> f64 {
    value[key]
        .as_f64()
        .unwrap_or_else(|| panic!("{key} missing in {value}"))
}

fn relative_error(actual: f64, expected: f64) -> f64 {
    (actual - expected).abs() / expected.abs().max(f64::MIN_POSITIVE)
}

fn read_pairs(path: &Path) -> Vec<(f64, f64)> {
    let mut reader = csv::Reader::from_path(path).unwrap_or_else(|e| panic!("{path:?}: {e}"));
    assert_eq!(
        reader.headers().unwrap(),
        vec!["level", "residual"],
        "{path:?}"
    );
    reader
        .records()
        .map(|record| {
            let record = record.unwrap();
            (record[0].parse().unwrap(), record[1].parse().unwrap())
        })
        .collect()
}

#[test]
fn spread_profile_agrees_with_statsmodels_and_numpy() {
    let text = std::fs::read_to_string(reference_dir().join("spread_expected.json")).unwrap();
    let expected: Value = serde_json::from_str(&text).unwrap();
    let binning = &expected["binning"];
    assert_eq!(binning["bins"].as_u64(), Some(16));
    assert_eq!(binning["variance"].as_str(), Some("S/(n-1)"));
    assert_eq!(binning["weight"].as_str(), Some("n-1"));
    let config = SpreadConfig {
        level_low: number(binning, "level_low"),
        level_high: number(binning, "level_high"),
        forgetting: number(binning, "forgetting"),
    };
    let feeds = expected["feeds"].as_array().unwrap();
    assert_eq!(feeds.len(), 3);
    for feed in feeds {
        let file = feed["file"].as_str().unwrap();
        let pairs = read_pairs(&reference_dir().join(file));
        assert_eq!(pairs.len() as u64, feed["rows"].as_u64().unwrap(), "{file}");
        let mut profile: SpreadProfile<f64, 16> = SpreadProfile::new(config);
        for &(level, residual) in &pairs {
            assert!(
                profile.push(level, residual),
                "{file}: refused {level}, {residual}"
            );
        }

        // Koenker: statsmodels 0.14.1 het_breuschpagan(robust=True) LM statistic.
        let reference = &feed["koenker"];
        let koenker = profile.koenker().expect("Koenker statistic");
        let error = relative_error(koenker.statistic, number(reference, "statistic"));
        println!(
            "{file}: Koenker {} vs statsmodels {} (relative error {error:.1e})",
            koenker.statistic,
            number(reference, "statistic")
        );
        assert!(
            error <= RELATIVE,
            "{file}: Koenker relative error {error:e}"
        );
        assert_eq!(koenker.samples, number(reference, "samples"), "{file}");

        // Exponent: statsmodels 0.14.1 WLS / numpy 1.26.4 lstsq.
        let reference = &feed["exponent"];
        let exponent = profile.exponent().expect("exponent");
        let k_error = (exponent.k - number(reference, "k")).abs();
        let se_error = relative_error(exponent.standard_error, number(reference, "standard_error"));
        println!(
            "{file}: k {} vs statsmodels {} (absolute error {k_error:.1e}); SE {} vs {} \
             (relative error {se_error:.1e})",
            exponent.k,
            number(reference, "k"),
            exponent.standard_error,
            number(reference, "standard_error"),
        );
        assert!(k_error <= ABSOLUTE_K, "{file}: k error {k_error:e}");
        assert!(
            se_error <= RELATIVE,
            "{file}: SE relative error {se_error:e}"
        );
        assert_eq!(
            u64::from(exponent.bins_used),
            reference["bins_used"].as_u64().unwrap(),
            "{file}"
        );

        // Per bin: numpy 1.26.4 mean and std(ddof = 1).
        for bin in feed["bins"].as_array().unwrap() {
            let index = bin["index"].as_u64().unwrap() as usize;
            let summary = profile.bin(index).unwrap();
            assert_eq!(summary.count, number(bin, "count"), "{file} bin {index}");
            if summary.count >= 2.0 {
                let scale = number(bin, "sd");
                assert!(
                    (summary.mean - number(bin, "mean")).abs() <= 1e-12 * scale,
                    "{file} bin {index} mean"
                );
                assert!(
                    (summary.level.ln() - number(bin, "mean_ln_level")).abs() <= 1e-12,
                    "{file} bin {index} level"
                );
                assert!(
                    relative_error(summary.sd, number(bin, "sd")) <= 1e-12,
                    "{file} bin {index} sd"
                );
            }
        }
    }
}

#[test]
fn f32_profile_stays_close_to_the_reference() {
    // Same feeds in f32: the streaming co-moments must keep the statistics usable. Bounds are
    // engineering tolerances (common practice, no source): 1e-3 relative on Koenker, 1e-3 on k.
    let text = std::fs::read_to_string(reference_dir().join("spread_expected.json")).unwrap();
    let expected: Value = serde_json::from_str(&text).unwrap();
    let config = SpreadConfig {
        level_low: 1.0f32,
        level_high: 1000.0,
        forgetting: 1.0,
    };
    for feed in expected["feeds"].as_array().unwrap() {
        let file = feed["file"].as_str().unwrap();
        let mut profile: SpreadProfile<f32, 16> = SpreadProfile::new(config);
        for (level, residual) in read_pairs(&reference_dir().join(file)) {
            profile.push(level as f32, residual as f32);
        }
        let koenker = f64::from(profile.koenker().unwrap().statistic);
        let reference = number(&feed["koenker"], "statistic");
        let k = f64::from(profile.exponent().unwrap().k);
        let k_reference = number(&feed["exponent"], "k");
        println!("{file}: f32 Koenker {koenker} vs {reference}; k {k} vs {k_reference}");
        assert!(relative_error(koenker, reference) <= 1e-3, "{file}");
        assert!((k - k_reference).abs() <= 1e-3, "{file}");
    }
}
