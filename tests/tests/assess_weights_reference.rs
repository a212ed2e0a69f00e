//! `assess` with chosen weights (`ref^P`, `level^P`) and with known uncertainties of the
//! responses, against statsmodels on the stored runs.
//!
//! Expected values: tests/reference/weights_expected.json, written by the committed script
//! tests/reference/weights_reference.py from statsmodels 0.14.1 (WLS; `cov_type="fixed
//! scale"` for known uncertainties), scipy 1.11.4 (chi2.sf), numpy 1.26.4, pandas 2.2.3
//! (pinned in tests/reference/requirements.txt; CI re-runs it with `--check`). Agreement
//! required: 1e-10 relative on coefficients, standard errors, residual SD, χ² and its p-value,
//! and on the Goldfeld–Quandt statistic and p-value with unequal groups (scipy's F with
//! (df_high, df_low); statsmodels' own p-value uses (df_low, df_high) and is shown to differ).

use std::path::PathBuf;

use serde_json::Value;
use steadycal_cli::assess::{assess, AssessOptions, Basis, CalibrationData, WeightRule};

fn reference_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("reference")
}

fn read_run(name: &str) -> CalibrationData {
    let text = std::fs::read_to_string(reference_dir().join("runs").join(format!("{name}.csv")))
        .expect("stored run readable");
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("t,raw,ref"));
    let (mut raw, mut reference) = (Vec::new(), Vec::new());
    for line in lines {
        let fields: Vec<f64> = line.split(',').map(|v| v.parse().unwrap()).collect();
        raw.push(fields[1]);
        reference.push(fields[2]);
    }
    CalibrationData {
        raw,
        reference,
        ..Default::default()
    }
}

fn close(what: &str, ours: f64, expected: &Value, worst: &mut f64) {
    let expected = expected
        .as_f64()
        .unwrap_or_else(|| panic!("{what}: no number"));
    let error = (ours - expected).abs() / expected.abs();
    assert!(
        error <= 1e-10,
        "{what}: ours {ours:e}, statsmodels {expected:e}, relative {error:e}"
    );
    *worst = worst.max(error);
}

fn slice(what: &str, ours: &[f64], expected: &Value, worst: &mut f64) {
    let expected = expected.as_array().unwrap();
    assert_eq!(ours.len(), expected.len(), "{what}");
    for (i, (o, e)) in ours.iter().zip(expected).enumerate() {
        close(&format!("{what}[{i}]"), *o, e, worst);
    }
}

#[test]
fn chosen_and_known_weights_match_statsmodels() {
    let expected: Value = serde_json::from_str(
        &std::fs::read_to_string(reference_dir().join("weights_expected.json")).unwrap(),
    )
    .unwrap();
    let mut worst = 0.0_f64;
    let mut compared = 0;
    for (name, run) in expected["runs"].as_object().unwrap() {
        let data = read_run(name);
        let basis = match run["basis"].as_str().unwrap() {
            "quadratic" => Basis::Quadratic,
            _ => Basis::Linear,
        };
        for (kind, make) in [
            ("reference", WeightRule::Reference as fn(f64) -> WeightRule),
            ("level", WeightRule::Level),
        ] {
            for (power, values) in run[kind].as_object().unwrap() {
                let rule = make(power.parse().unwrap());
                let options = AssessOptions {
                    basis,
                    weights: rule,
                    ..AssessOptions::default()
                };
                let a = assess(&data, &options).unwrap();
                let wls = a.wls.as_ref().expect("weighted fit");
                assert_eq!(wls.weights, rule.to_string());
                assert_eq!(
                    a.headline_fit, "wls",
                    "{name} {rule}: chosen weights are the headline"
                );
                let what = format!("{name} {rule}");
                slice(
                    &format!("{what} params"),
                    &wls.report.fit.params,
                    &values["params"],
                    &mut worst,
                );
                slice(
                    &format!("{what} se"),
                    &wls.report.fit.param_se,
                    &values["bse"],
                    &mut worst,
                );
                close(
                    &format!("{what} s"),
                    wls.report.fit.residual_sd,
                    &values["residual_sd"],
                    &mut worst,
                );
                compared += 1;
            }
        }
        let mut known = data.clone();
        known.raw_uncertainty = Some(data.reference.iter().map(|r| 0.02 * r + 0.5).collect());
        let a = assess(
            &known,
            &AssessOptions {
                basis,
                ..AssessOptions::default()
            },
        )
        .unwrap();
        let wls = a.wls.as_ref().unwrap();
        let values = &run["known"];
        slice(
            &format!("{name} known params"),
            &wls.report.fit.params,
            &values["params"],
            &mut worst,
        );
        slice(
            &format!("{name} known se"),
            &wls.report.fit.param_se,
            &values["bse"],
            &mut worst,
        );
        close(
            &format!("{name} chi2"),
            wls.chi_squared.unwrap(),
            &values["chi_squared"],
            &mut worst,
        );
        close(
            &format!("{name} chi2 p"),
            wls.chi_squared_p.unwrap(),
            &values["chi_squared_p"],
            &mut worst,
        );
        assert_eq!(
            wls.chi_squared_df.unwrap() as u64,
            values["chi_squared_df"].as_u64().unwrap()
        );
        compared += 1;
    }
    println!("{compared} weighted fits compared; worst relative error {worst:.1e}");
    assert_eq!(compared, 15);
}

/// Goldfeld–Quandt with unequal groups (split 0.3, drop 0.1: 12 low rows, 24 high rows of 40)
/// against scipy 1.11.4's F tail with (df_high, df_low). statsmodels 0.14.1's
/// het_goldfeldquandt gives the same statistic but evaluates `f.sf(F, df_low, df_high)`: its
/// p-value differs here, which is why the assessment documents its own order.
#[test]
fn goldfeld_quandt_with_unequal_groups_matches_scipy() {
    let expected: Value = serde_json::from_str(
        &std::fs::read_to_string(reference_dir().join("weights_expected.json")).unwrap(),
    )
    .unwrap();
    let mut worst = 0.0_f64;
    for (name, run) in expected["runs"].as_object().unwrap() {
        let data = read_run(name);
        let basis = match run["basis"].as_str().unwrap() {
            "quadratic" => Basis::Quadratic,
            _ => Basis::Linear,
        };
        let options = AssessOptions {
            basis,
            goldfeld_quandt_split: 0.3,
            goldfeld_quandt_drop: 0.1,
            ..AssessOptions::default()
        };
        let a = assess(&data, &options).unwrap();
        let gq = a.goldfeld_quandt.as_ref().unwrap();
        let values = &run["goldfeld_quandt"];
        assert_eq!(gq.df_low as u64, values["df_low"].as_u64().unwrap());
        assert_eq!(gq.df_high as u64, values["df_high"].as_u64().unwrap());
        assert_ne!(gq.df_low, gq.df_high, "{name}: the groups must be unequal");
        close(
            &format!("{name} GQ F"),
            gq.statistic,
            &values["statistic"],
            &mut worst,
        );
        close(
            &format!("{name} GQ p"),
            gq.p_value,
            &values["p_value"],
            &mut worst,
        );
        close(
            &format!("{name} GQ F (statsmodels)"),
            gq.statistic,
            &values["statsmodels_statistic"],
            &mut worst,
        );
        let theirs = values["statsmodels_p_value"].as_f64().unwrap();
        assert!(
            (gq.p_value - theirs).abs() > 1e-3 * gq.p_value,
            "{name}: statsmodels' p {theirs} should differ from ours {}",
            gq.p_value
        );
        println!(
            "{name}: F = {:.6} on ({}, {}) df, p = {:.6e} (statsmodels' order: {theirs:.6e})",
            gq.statistic, gq.df_high, gq.df_low, gq.p_value
        );
    }
    println!("worst relative error {worst:.1e}");
}
