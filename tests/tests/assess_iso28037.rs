//! `assess` with known uncertainties against the worked examples of ISO/TS 28037:2010,
//! "Determination and use of straight-line calibration functions".
//!
//! Source of the printed values: ISO/TS 28037:2010, p. 13 (equal known u(y)), p. 14
//! (unequal known u(y)) and p. 21 (uncertainties in both variables), as reproduced by the
//! test suite of GTC (GUM Tree Calculator, Measurement Standards Laboratory of New Zealand,
//! `test/test_fitting.py`, tests `test_iso28037_wls1`, `test_iso28037_wls2`,
//! `test_iso_ts28037_2010_fn`). Each value is compared to the printed digits (a value printed
//! as 1.757 must round to 1.757).
//!
//! The same values, as "published values", are in GTC's documentation
//! (`docs/API/straight_line_functions.rst`), which cites BS DD ISO/TS 28037:2010 (the British
//! Standards Institution's edition): section 6.3, p. 13 (equal u(y): a = 1.867, u(a) = 0.465,
//! b = 1.757, u(b) = 0.120, cov(a, b) = −0.05, χ² = 1.665 with 4 degrees of freedom);
//! section 6.3, p. 15 (unequal u(y); GTC's test suite says p. 14 for the ISO edition); and
//! section 7.4, p. 21 (uncertainties in both variables).

use steadycal_cli::assess::{assess, AssessOptions, CalibrationData};

fn round_to(value: f64, decimals: i32) -> f64 {
    let scale = 10f64.powi(decimals);
    (value * scale).round() / scale
}

fn assert_printed(what: &str, value: f64, printed: f64, decimals: i32) {
    assert_eq!(
        round_to(value, decimals),
        printed,
        "{what}: computed {value}, printed {printed}"
    );
}

fn run(x: &[f64], y: &[f64], u_y: &[f64], u_x: Option<&[f64]>) -> CalibrationData {
    CalibrationData {
        raw: y.to_vec(),
        reference: x.to_vec(),
        temperature: None,
        raw_uncertainty: Some(u_y.to_vec()),
        reference_uncertainty: u_x.map(<[f64]>::to_vec),
    }
}

fn inverse_with(a: &steadycal_cli::assess::Assessment, y0: f64, u_y0: f64) -> (f64, f64) {
    // x0 = (y0 - a)/b with u(y0) given and the parameters' covariance (the standard's
    // inverse evaluation, clause 6.3/9): u²(x0) = [u²(y0) + u²(a) + x0² u²(b) + 2 x0 cov] / b².
    let fit = &a.wls.as_ref().unwrap().report.fit;
    let (p, c) = (&fit.params, &fit.covariance);
    let x0 = (y0 - p[0]) / p[1];
    let var = (u_y0 * u_y0 + c[0][0] + x0 * x0 * c[1][1] + 2.0 * x0 * c[0][1]) / (p[1] * p[1]);
    (x0, var.sqrt())
}

/// ISO/TS 28037:2010, p. 13: x = 1…6, y = 3.3, 5.6, 7.1, 9.3, 10.7, 12.1, u(y) = 0.5.
/// Printed: a = 1.867, b = 1.757, u(a) = 0.465, u(b) = 0.120, cov(a, b) = −0.050, χ² = 1.665;
/// the inverse of y0 = 10.5 with u(y0) = 0.5: x0 = 4.913, u(x0) = 0.322.
#[test]
fn equal_known_uncertainties_page_13() {
    let x = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
    let y = [3.3, 5.6, 7.1, 9.3, 10.7, 12.1];
    let a = assess(&run(&x, &y, &[0.5; 6], None), &AssessOptions::default()).unwrap();
    let wls = a.wls.as_ref().expect("known-uncertainty fit");
    assert_eq!(wls.weights, "known u(raw)");
    assert!(!wls.covariance_rescaled);
    assert_eq!(a.headline_fit, "wls");
    let fit = &wls.report.fit;
    assert_printed("a", fit.params[0], 1.867, 3);
    assert_printed("b", fit.params[1], 1.757, 3);
    assert_printed("u(a)", fit.param_se[0], 0.465, 3);
    assert_printed("u(b)", fit.param_se[1], 0.120, 3);
    assert_printed("cov(a, b)", fit.covariance[0][1], -0.050, 3);
    assert_printed("chi-squared", wls.chi_squared.unwrap(), 1.665, 3);
    assert_eq!(wls.chi_squared_df, Some(4));
    let (x0, u) = inverse_with(&a, 10.5, 0.5);
    assert_printed("x0", x0, 4.913, 3);
    assert_printed("u(x0)", u, 0.322, 3);
    // The inverse table's rows use the same propagation with u(raw) of the standards (0.5).
    let row = steadycal_cli::assess::inverse::inverse_row(
        &steadycal_cli::assess::inverse::InverseModel {
            model: &steadycal_cli::assess::CalibrationModel {
                basis: steadycal_cli::assess::Basis::Linear,
                reference_temperature: None,
            },
            params: &fit.params,
            covariance: &fit.covariance,
            reading_sd: &|_| 0.5,
            range: [1.0, 6.0],
        },
        10.5,
        1,
        2.0,
    );
    assert_printed("table x0", row.value.unwrap(), 4.913, 3);
    assert_printed("table u(x0)", row.standard_uncertainty.unwrap(), 0.322, 3);
    // Known uncertainties: normal coverage (ν = ∞), k = 1.960 for 95 %.
    assert_printed("k", a.inverse_prediction.coverage_factor, 1.96, 2);
}

/// ISO/TS 28037:2010, p. 14: y = 3.2, 4.3, 7.6, 8.6, 11.7, 12.8, u(y) = 0.5, 0.5, 0.5, 1, 1, 1.
/// Printed: a = 0.885, b = 2.057, u(a) = 0.530, u(b) = 0.178, cov(a, b) = −0.082, χ² = 4.131;
/// y0 = 10.5 with u(y0) = 1.0: x0 = 4.674, u(x0) = 0.533.
#[test]
fn unequal_known_uncertainties_page_14() {
    let x = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
    let y = [3.2, 4.3, 7.6, 8.6, 11.7, 12.8];
    let u = [0.5, 0.5, 0.5, 1.0, 1.0, 1.0];
    let a = assess(&run(&x, &y, &u, None), &AssessOptions::default()).unwrap();
    let wls = a.wls.as_ref().unwrap();
    let fit = &wls.report.fit;
    assert_printed("a", fit.params[0], 0.885, 3);
    assert_printed("b", fit.params[1], 2.057, 3);
    assert_printed("u(a)", fit.param_se[0], 0.530, 3);
    assert_printed("u(b)", fit.param_se[1], 0.178, 3);
    assert_printed("cov(a, b)", fit.covariance[0][1], -0.082, 3);
    assert_printed("chi-squared", wls.chi_squared.unwrap(), 4.131, 3);
    let (x0, u0) = inverse_with(&a, 10.5, 1.0);
    assert_printed("x0", x0, 4.674, 3);
    assert_printed("u(x0)", u0, 0.533, 3);
}

/// ISO/TS 28037:2010, p. 21: x = 1.2, 1.9, 2.9, 4.0, 4.7, 5.9 with u(x) = 0.2; y = 3.4, 4.4,
/// 7.2, 8.5, 10.8, 13.5 with u(y) = 0.2, 0.2, 0.2, 0.4, 0.4, 0.4 (generalized distance
/// regression). Printed: a = 0.5788, b = 2.1597, u(a) = 0.4764, u(b) = 0.1355,
/// cov(a, b) = −0.0577, χ² = 2.743.
#[test]
fn uncertainties_in_both_variables_page_21() {
    let x = [1.2, 1.9, 2.9, 4.0, 4.7, 5.9];
    let y = [3.4, 4.4, 7.2, 8.5, 10.8, 13.5];
    let u_y = [0.2, 0.2, 0.2, 0.4, 0.4, 0.4];
    let a = assess(
        &run(&x, &y, &u_y, Some(&[0.2; 6])),
        &AssessOptions::default(),
    )
    .unwrap();
    let wls = a.wls.as_ref().unwrap();
    assert_eq!(wls.weights, "known u(raw), u(ref)");
    let fit = &wls.report.fit;
    assert_printed("a", fit.params[0], 0.5788, 4);
    assert_printed("b", fit.params[1], 2.1597, 4);
    assert_printed("u(a)", fit.param_se[0], 0.4764, 4);
    assert_printed("u(b)", fit.param_se[1], 0.1355, 4);
    assert_printed("cov(a, b)", fit.covariance[0][1], -0.0577, 4);
    assert_printed("chi-squared", wls.chi_squared.unwrap(), 2.743, 3);
    assert_eq!(wls.chi_squared_df, Some(4));
    let p = wls.chi_squared_p.unwrap();
    assert!(p > 0.05 && p < 1.0, "p = {p}");
}

/// Chosen weights are refused together with known uncertainties, and a reference
/// uncertainty needs the response's.
#[test]
fn known_uncertainties_fix_the_weights() {
    let x = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
    let y = [3.3, 5.6, 7.1, 9.3, 10.7, 12.1];
    let options = AssessOptions {
        weights: "ref^-2".parse().unwrap(),
        ..AssessOptions::default()
    };
    assert!(assess(&run(&x, &y, &[0.5; 6], None), &options).is_err());
    let mut data = run(&x, &y, &[0.5; 6], Some(&[0.1; 6]));
    data.raw_uncertainty = None;
    assert!(assess(&data, &AssessOptions::default()).is_err());
}
