//! The DIN 32645 / ISO 11843-2 calibration-curve limits against the standard's worked example
//! as published with two R packages:
//!
//! - chemCal (J. Ranke), `din32645` data set (10 standards, x = concentration, y = signal):
//!   the printed examples of its reference page (chemCal 0.2.3, `man/din32645.Rd` as rendered
//!   on the package site, `docs/reference/din32645.html`) and the saved R 3.1.0 output of its
//!   test `tests/din32645.Rout.save` (chemCal 0.1 branch);
//! - envalysis 0.7.0 (Z. Steinmetz), `din32645` data set (the same 10 standards plus 10
//!   blanks, DIN 32645:2008-11 cited as source): the printed `calibration()` summary in
//!   `tests/testthat/_snaps/calibration.md`.
//!
//! Printed values (α = 0.01): critical value 0.07 (DIN 32645) and 0.0698 (Dintest); detection
//! limit 0.14 (DIN 32645, α = β = 0.01); quantification limit 0.212 (chemCal and envalysis;
//! the Dintest value from Procontrol 3.1 is 0.2121); for the reading y = 3500,
//! x = 0.1054792 with standard error 0.02215619 and 99 % confidence half-width 0.07434261,
//! limits 0.03113656 and 0.17982178 (chemCal output; Procontrol 3.1: 0.07434); the line fitted
//! to the standards, intercept 2481 and slope 9662 (envalysis).
//!
//! The line fitted to the standards as printed by envalysis 0.7.0 on its reference page
//! (`reference/calibration.html`, examples `as.list(din)` and `summary(din)`): intercept
//! 2480.867 (standard error 131.4), slope 9661.939 (standard error 423.4), residual standard
//! error 192.3 on 8 degrees of freedom.
//!
//! Partial check, stated plainly: both packages ship the data set as binary R data, and no
//! text copy of the 10 signals could be found, so the data are not read here. The line's
//! summary is taken from chemCal's printed outputs: the slope b and intercept a from its two
//! printed LOD points (x, y) = (0.0698127, 3155.393) and (0.08655484, 3317.154) (chemCal
//! `tests/testthat/test_din32645.R`), confirmed by envalysis' printed coefficients; the
//! residual SD s from the printed critical value 0.0698127; the design, ten equidistant
//! standards x = 0.05 … 0.50 (the data set has 10 rows), is confirmed by reproducing the
//! printed standard error at y = 3500 to eight digits. The critical value is then a round
//! trip; the detection limit, the quantification limit and the confidence half-width are
//! independent checks of the formulas.
//!
//! The blank-value method (the standard's *Leerwertmethode*) is checked on the data set's ten
//! blank signals, which envalysis prints as text (`Blanks: 2003 1901 2212 1976 2279 1853 2165
//! 2108 2368 1943` in `tests/testthat/_snaps/calibration.md`), with its printed critical value
//! 0.053 (the "LOD" row of `calibration()`, α = 0.01, one reading; envalysis rounds to three
//! decimals), and on the blanks of its `neitzel2003` data set (V. Neitzel, CLB Chemie in Labor
//! und Biotechnik 54(7), 2003, pp. 242–246, as shipped by envalysis: blanks 0.027 … 0.023,
//! slope 2.48461 printed) with its printed critical value 0.009. envalysis puts the number of
//! standards where the standard puts the number of blank readings; both are 10 in both data
//! sets, so the two readings of the formula agree here.

use steadycal_cli::assess::distributions;
use steadycal_cli::assess::inverse::{inverse_row, InverseModel};
use steadycal_cli::assess::limits::{din32645, din32645_blank};
use steadycal_cli::assess::{Basis, CalibrationModel};

/// (a, b, s, x) as described in the module docs.
fn line() -> (f64, f64, f64, Vec<f64>) {
    let (x1, y1) = (0.0698127, 3155.393); // chemCal lod(m, alpha = 0.01, beta = 0.5)
    let (x2, y2) = (0.08655484, 3317.154); // chemCal lod(m) (alpha = beta = 0.05)
    let b = (y2 - y1) / (x2 - x1);
    let a = y1 - b * x1;
    let x: Vec<f64> = (1..=10).map(|i| 0.05 * i as f64).collect();
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let q: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
    let t = distributions::t_quantile(0.99, n - 2.0).unwrap();
    let s = x1 * b / (t * (1.0 + 1.0 / n + mean * mean / q).sqrt());
    (a, b, s, x)
}

#[test]
fn din32645_worked_example() {
    let (a, b, s, x) = line();
    let din = din32645(&x, s, b, 0.01, 0.01, 3.0, 1).unwrap();
    println!(
        "a = {a:.3}, b = {b:.3}, s = {s:.4}; critical value {:.7}, detection limit {:.5}, quantification limit {:.5}",
        din.critical_value, din.detection_limit, din.quantification_limit
    );
    assert_eq!(din.df, 8);
    // Round trip of the printed critical value (it fixed s).
    assert!((din.critical_value - 0.0698127).abs() < 1e-9);
    assert_eq!(format!("{:.2}", din.critical_value), "0.07"); // DIN 32645
    assert_eq!(format!("{:.4}", din.critical_value), "0.0698"); // Dintest
    assert_eq!(format!("{:.2}", din.detection_limit), "0.14"); // DIN 32645, alpha = beta = 0.01
    assert_eq!(format!("{:.3}", din.quantification_limit), "0.212"); // chemCal loq(m, alpha = 0.01)
    assert!((din.quantification_limit - 0.2121).abs() < 0.0002); // Procontrol 3.1: 0.2121
                                                                 // envalysis 0.7.0 prints the line fitted to the standards as 2481 + 9662·x.
    assert_eq!(format!("{a:.0}"), "2481");
    assert_eq!(format!("{b:.0}"), "9662");

    // The inverse prediction of y = 3500 (one reading): x, its standard error, and the 99 %
    // confidence half-width t(0.995; 8)·u.
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let q: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
    let variance = s * s;
    let covariance = vec![
        vec![variance * (1.0 / n + mean * mean / q), -variance * mean / q],
        vec![-variance * mean / q, variance / q],
    ];
    let model = CalibrationModel {
        basis: Basis::Linear,
        reference_temperature: None,
    };
    let row = inverse_row(
        &InverseModel {
            model: &model,
            params: &[a, b],
            covariance: &covariance,
            reading_sd: &|_| s,
            range: [0.05, 0.5],
        },
        3500.0,
        1,
        distributions::t_quantile(0.995, 8.0).unwrap(),
    );
    let value = row.value.unwrap();
    let u = row.standard_uncertainty.unwrap();
    let half_width = row.expanded_uncertainty.unwrap();
    println!("y = 3500: x = {value:.7}, u = {u:.8}, half-width {half_width:.8}");
    // chemCal 0.1054792; a and b come from rounded printed values, so 1e-7 (one unit of the
    // last printed digit).
    assert!((value - 0.1054792).abs() < 1e-7);
    assert!((u - 0.02215619).abs() < 5e-9); // chemCal 0.02215619
    assert_eq!(format!("{half_width:.5}"), "0.07434"); // Procontrol 3.1
                                                       // chemCal (tests/din32645.Rout.save): half-width 0.07434261, limits 0.03113656 and
                                                       // 0.17982178; a and b come from rounded printed values, so to 2e-8.
    assert!((half_width - 0.07434261).abs() < 2e-8, "{half_width}");
    assert!((value - half_width - 0.03113656).abs() < 2e-7);
    assert!((value + half_width - 0.17982178).abs() < 2e-7);
}

#[test]
fn din32645_blank_method() {
    // envalysis 0.7.0, tests/testthat/_snaps/calibration.md: the DIN 32645 data set's blanks.
    let blanks = [
        2003.0, 1901.0, 2212.0, 1976.0, 2279.0, 1853.0, 2165.0, 2108.0, 2368.0, 1943.0,
    ];
    let (_, b, _, _) = line();
    let blank = din32645_blank(&blanks, b, 0.01, 0.01, 1).unwrap();
    println!(
        "DIN 32645 blanks: mean {:.1}, s {:.4}, critical reading {:.2}, critical value {:.6}, detection limit {:.6}",
        blank.blank_mean,
        blank.blank_sd,
        blank.critical_signal,
        blank.critical_value,
        blank.detection_limit
    );
    assert_eq!(blank.df, 9);
    // envalysis 0.7.0, reference/calibration.html, `as.list(din)`: blank_mean 2080.8,
    // blank_sd 172.2581.
    assert_eq!(format!("{:.1}", blank.blank_mean), "2080.8");
    assert_eq!(format!("{:.4}", blank.blank_sd), "172.2581");
    assert_eq!(format!("{:.3}", blank.critical_value), "0.053"); // envalysis: LOD 0.053
                                                                 // The standard's approximation: detection limit twice the critical value for α = β.
    assert!((blank.detection_limit - 2.0 * blank.critical_value).abs() < 1e-15);
    // The prediction-interval root with the same t: y_c lies above the blank mean by b·x_c.
    assert!((blank.critical_signal - blank.blank_mean - b * blank.critical_value).abs() < 1e-9);

    // envalysis 0.7.0, same file: neitzel2003, blanks and slope as printed.
    let blanks = [
        0.027, 0.033, 0.041, 0.028, 0.018, 0.022, 0.029, 0.038, 0.024, 0.023,
    ];
    let blank = din32645_blank(&blanks, 2.48461, 0.01, 0.01, 1).unwrap();
    println!(
        "Neitzel 2003 blanks: critical value {:.6}",
        blank.critical_value
    );
    assert_eq!(format!("{:.3}", blank.critical_value), "0.009"); // envalysis: LOD 0.009

    // Fewer than two blank readings or a zero slope give no limits.
    assert!(din32645_blank(&[2003.0], b, 0.01, 0.01, 1).is_none());
    assert!(din32645_blank(&blanks, 0.0, 0.01, 0.01, 1).is_none());
}

/// The limits from the line as envalysis 0.7.0 prints it (intercept 2480.867, slope 9661.939,
/// residual standard error 192.3 on 8 degrees of freedom), independent of chemCal's printed
/// critical value: the critical value is no round trip here.
#[test]
fn din32645_from_the_printed_fit_summary() {
    let (a, b, s): (f64, f64, f64) = (2480.867, 9661.939, 192.3); // envalysis 0.7.0, reference/calibration.html
    let x: Vec<f64> = (1..=10).map(|i| 0.05 * i as f64).collect();
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let q: f64 = x.iter().map(|v| (v - mean).powi(2)).sum();
    // The design x = 0.05 … 0.50: the printed standard errors follow from s and the design.
    let se_a = s * (1.0 / n + mean * mean / q).sqrt();
    let se_b = s / q.sqrt();
    println!("SE(a) = {se_a:.4}, SE(b) = {se_b:.4}");
    assert_eq!(format!("{se_a:.1}"), "131.4"); // envalysis: 131.4
    assert_eq!(format!("{se_b:.1}"), "423.4"); // envalysis: 423.4
                                               // The same line as chemCal's printed LOD points (rounded to 7 digits there and here).
    assert!((a + b * 0.0698127 - 3155.393).abs() < 2e-3);
    assert!((a + b * 0.08655484 - 3317.154).abs() < 2e-3);

    let din = din32645(&x, s, b, 0.01, 0.01, 3.0, 1).unwrap();
    println!(
        "critical value {:.7}, detection limit {:.5}, quantification limit {:.5}",
        din.critical_value, din.detection_limit, din.quantification_limit
    );
    assert_eq!(format!("{:.2}", din.critical_value), "0.07"); // DIN 32645
    assert_eq!(format!("{:.4}", din.critical_value), "0.0698"); // Dintest
                                                                // chemCal 0.0698127; s is printed to 4 digits, so within 0.05/192.3 relative.
    assert!((din.critical_value - 0.0698127).abs() < 0.0698127 * 0.05 / 192.3);
    assert_eq!(format!("{:.2}", din.detection_limit), "0.14"); // DIN 32645, alpha = beta = 0.01
    assert_eq!(format!("{:.3}", din.quantification_limit), "0.212"); // chemCal, envalysis
}
