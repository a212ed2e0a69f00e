//! The batch assessment against general-purpose reference libraries on stored runs.
//!
//! Expected values: tests/reference/assess_expected.json, written by the committed script
//! tests/reference/assess_reference.py from statsmodels 0.14.1, scipy 1.11.4, numpy 1.26.4,
//! pandas 2.2.3, patsy 0.5.6 (pinned in tests/reference/requirements.txt; the JSON records the
//! versions that made it). The runs are tests/reference/runs/*.csv, made by the same script's
//! `--make-runs` mode (numpy seeded Generator). Agreement required: 1e-8 relative on
//! coefficients, standard errors and statistics; 1e-4 absolute on λ and its interval.

use std::path::PathBuf;

use nalgebra::DMatrix;
use serde_json::Value;
use steadycal_cli::assess::{
    assess, boxcox, distributions, AssessOptions, Assessment, Basis, CalibrationData,
};

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
        temperature: None,
        ..Default::default()
    }
}

struct Comparison {
    worst_relative: f64,
    worst_lambda: f64,
}

impl Comparison {
    fn relative(&mut self, what: &str, ours: f64, expected: &Value) {
        let expected = expected
            .as_f64()
            .unwrap_or_else(|| panic!("{what}: not a number"));
        let error = (ours - expected).abs() / expected.abs();
        println!("{what}: ours {ours:e}, reference {expected:e}, relative error {error:.1e}");
        assert!(
            error <= 1e-8,
            "{what}: {ours} vs {expected} (relative {error:e})"
        );
        self.worst_relative = self.worst_relative.max(error);
    }

    fn slice(&mut self, what: &str, ours: &[f64], expected: &Value) {
        let expected = expected.as_array().unwrap();
        assert_eq!(ours.len(), expected.len(), "{what}: length");
        for (i, (o, e)) in ours.iter().zip(expected).enumerate() {
            self.relative(&format!("{what}[{i}]"), *o, e);
        }
    }

    fn lambda(&mut self, what: &str, ours: Option<f64>, expected: &Value) {
        let ours = ours.unwrap_or_else(|| panic!("{what}: missing"));
        let expected = expected.as_f64().unwrap();
        let error = (ours - expected).abs();
        println!("{what}: ours {ours}, reference {expected}, absolute error {error:.1e}");
        assert!(error <= 1e-4, "{what}: {ours} vs {expected}");
        self.worst_lambda = self.worst_lambda.max(error);
    }
}

fn compare_run(name: &str, expected: &Value, comparison: &mut Comparison) {
    let basis = match expected["basis"].as_str().unwrap() {
        "linear" => Basis::Linear,
        _ => Basis::Quadratic,
    };
    let data = read_run(name);
    let options = AssessOptions {
        basis,
        ..AssessOptions::default()
    };
    let a: Assessment = assess(&data, &options).expect("assessment");
    let c = comparison;
    // statsmodels 0.14.1 OLS
    let ols = &expected["ols"];
    c.slice(
        &format!("{name} ols.params"),
        &a.ols.fit.params,
        &ols["params"],
    );
    c.slice(
        &format!("{name} ols.param_se"),
        &a.ols.fit.param_se,
        &ols["param_se"],
    );
    c.relative(
        &format!("{name} ols.residual_sd"),
        a.ols.fit.residual_sd,
        &ols["residual_sd"],
    );
    c.relative(
        &format!("{name} ols.r_squared"),
        a.ols.fit.r_squared,
        &ols["r_squared"],
    );
    // statsmodels 0.14.1 anova_lm(calibration model, one mean per level)
    let lof = a.ols.lack_of_fit.as_ref().expect("lack of fit");
    c.relative(
        &format!("{name} lack_of_fit.F"),
        lof.statistic,
        &ols["lack_of_fit"]["statistic"],
    );
    c.relative(
        &format!("{name} lack_of_fit.p"),
        lof.p_value,
        &ols["lack_of_fit"]["p_value"],
    );
    // statsmodels 0.14.1 WLS of ln SD on ln level, weights n − 1
    let spread = a.spread.as_ref().expect("spread model");
    c.relative(
        &format!("{name} spread.k"),
        spread.k,
        &expected["spread"]["k"],
    );
    c.relative(
        &format!("{name} spread.k_se"),
        spread.k_se,
        &expected["spread"]["k_se"],
    );
    c.slice(
        &format!("{name} spread.k_ci"),
        &spread.k_ci,
        &expected["spread"]["k_ci"],
    );
    // statsmodels 0.14.1 WLS, weights level^(−2k)
    let wls = &a.wls.as_ref().expect("wls").report.fit;
    c.slice(
        &format!("{name} wls.params"),
        &wls.params,
        &expected["wls"]["params"],
    );
    c.slice(
        &format!("{name} wls.param_se"),
        &wls.param_se,
        &expected["wls"]["param_se"],
    );
    c.relative(
        &format!("{name} wls.residual_sd"),
        wls.residual_sd,
        &expected["wls"]["residual_sd"],
    );
    // statsmodels 0.14.1 het_breuschpagan (robust True / False)
    for (label, ours) in [("koenker", &a.koenker), ("breusch_pagan", &a.breusch_pagan)] {
        let e = &expected[label];
        c.relative(
            &format!("{name} {label}.statistic"),
            ours.statistic,
            &e["statistic"],
        );
        c.relative(
            &format!("{name} {label}.p_value"),
            ours.p_value,
            &e["p_value"],
        );
        c.relative(
            &format!("{name} {label}.f_statistic"),
            ours.f_statistic,
            &e["f_statistic"],
        );
        c.relative(
            &format!("{name} {label}.f_p_value"),
            ours.f_p_value,
            &e["f_p_value"],
        );
    }
    // statsmodels 0.14.1 het_goldfeldquandt (stable sort by ref, split 0.4, drop 0.2)
    let gq = a.goldfeld_quandt.as_ref().expect("Goldfeld-Quandt");
    assert_eq!(
        gq.df_low, gq.df_high,
        "equal halves: statsmodels' df order does not matter"
    );
    c.relative(
        &format!("{name} gq.statistic"),
        gq.statistic,
        &expected["goldfeld_quandt"]["statistic"],
    );
    c.relative(
        &format!("{name} gq.p_value"),
        gq.p_value,
        &expected["goldfeld_quandt"]["p_value"],
    );
    // scipy 1.11.4 stats.f (ends-of-range test)
    let ends = a.ends_of_range.as_ref().expect("ends of range");
    let e = &expected["ends_of_range"];
    c.relative(
        &format!("{name} ends.statistic"),
        ends.statistic,
        &e["statistic"],
    );
    c.relative(
        &format!("{name} ends.critical_lower"),
        ends.critical_lower,
        &e["critical_lower"],
    );
    c.relative(
        &format!("{name} ends.critical_upper"),
        ends.critical_upper,
        &e["critical_upper"],
    );
    c.relative(&format!("{name} ends.p_value"), ends.p_value, &e["p_value"]);
    // scipy 1.11.4 optimize (least_squares, minimize_scalar, brentq): transform both sides
    let bc = a.boxcox.as_ref().expect("Box-Cox");
    let e = &expected["boxcox"];
    c.lambda(
        &format!("{name} boxcox.lambda"),
        Some(bc.lambda),
        &e["lambda"],
    );
    c.lambda(&format!("{name} boxcox.ci[0]"), bc.ci[0], &e["ci"][0]);
    c.lambda(&format!("{name} boxcox.ci[1]"), bc.ci[1], &e["ci"][1]);
    c.relative(
        &format!("{name} boxcox.log_likelihood"),
        bc.log_likelihood,
        &e["log_likelihood"],
    );
    for rung in &bc.rungs {
        c.relative(
            &format!("{name} boxcox.rung {}", rung.name),
            rung.log_likelihood,
            &e["rungs"][rung.name],
        );
    }
    assert_eq!(
        a.recommended,
        e["recommended"].as_str().unwrap(),
        "{name} recommended"
    );
    // scipy 1.11.4 stats.boxcox_llf and stats.boxcox on the raw vector alone (a constant mean)
    let column = DMatrix::from_element(data.raw.len(), 1, 1.0);
    let mean = data.raw.iter().sum::<f64>() / data.raw.len() as f64;
    let profiler = boxcox::Profiler::new(&column, &data.raw, 0.0, &[mean]).unwrap();
    for (key, value) in expected["plain_boxcox"]["llf"].as_object().unwrap() {
        let lambda: f64 = key.parse().unwrap();
        let ours = profiler.profile(lambda).unwrap().log_likelihood;
        c.relative(&format!("{name} boxcox_llf({key})"), ours, value);
    }
    let groups =
        steadycal_cli::assess::replicates::ReplicateGroups::from_reference(&data.reference);
    let plain = boxcox::analyse(&column, &data.raw, 0.0, &[mean], &groups, 0.05).unwrap();
    c.lambda(
        &format!("{name} boxcox(raw) lambda"),
        Some(plain.lambda),
        &expected["plain_boxcox"]["lambda"],
    );
}

#[test]
fn assessment_matches_statsmodels_and_scipy() {
    let text = std::fs::read_to_string(reference_dir().join("assess_expected.json")).unwrap();
    let expected: Value = serde_json::from_str(&text).unwrap();
    println!("reference versions: {}", expected["versions"]);
    let mut comparison = Comparison {
        worst_relative: 0.0,
        worst_lambda: 0.0,
    };
    for (name, run) in expected["runs"].as_object().unwrap() {
        compare_run(name, run, &mut comparison);
    }
    // scipy 1.11.4 stats.f.ppf / chi2.ppf / t.ppf
    for case in expected["quantiles"].as_array().unwrap() {
        let p = case["p"].as_f64().unwrap();
        let df: Vec<f64> = case["df"]
            .as_array()
            .unwrap()
            .iter()
            .map(|d| d.as_f64().unwrap())
            .collect();
        let ours = match case["distribution"].as_str().unwrap() {
            "f" => distributions::f_quantile(p, df[0], df[1]),
            "chi2" => distributions::chi_squared_quantile(p, df[0]),
            _ => distributions::t_quantile(p, df[0]),
        }
        .unwrap();
        // For t: scipy 1.11.4's root of t.cdf(x) = p (its t.ppf is good to ~1e-9 only).
        let reference = case.get("quantile_cdf_root").unwrap_or(&case["quantile"]);
        comparison.relative(&format!("quantile {case}"), ours, reference);
    }
    println!(
        "worst relative error {:.1e}; worst lambda error {:.1e}",
        comparison.worst_relative, comparison.worst_lambda
    );
}
