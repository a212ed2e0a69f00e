//! Weighted least squares against a printed weighted-calibration worked example.
//!
//! Source: Berthouex, P. M. & Brown, L. C., *Statistics for Environmental Engineers*, 2nd ed.,
//! Lewis Publishers / CRC Press, Boca Raton, 2002, chapter 37 "Weighted Least Squares":
//! Table 37.1, p. 328 (ion-chromatograph peaks of nitrate standards, 13 levels × 3
//! replicates; data credited there to G. Zelinka, Madison Metropolitan Sewerage District);
//! Table 37.2, p. 332 (the weights `1/s²` and `1/x²` and their relative values); Table 37.3,
//! p. 332 (the cubic calibration curve fitted with weights `1/sᵢ²`: estimates and their
//! standard deviations) and the refit without a constant printed below it on the same page.
//!
//! The printed standard deviations are the usual weighted-regression ones (covariance scaled
//! by the residual variance), which is what [`least_squares`] reports; the book fits a cubic,
//! a basis `assess` does not offer, so the cubic is checked on the least-squares engine that
//! every weighted fit of `assess` goes through, and the `ref^-2` weight rule of `assess` is
//! checked against the book's `1/x²` column.

use nalgebra::DMatrix;
use steadycal_cli::assess::regression::least_squares;
use steadycal_cli::assess::{assess, AssessOptions, CalibrationData};

/// Nitrate (mg/L) and the three peaks of each standard, Table 37.1, p. 328.
const NITRATE: [(f64, [f64; 3]); 13] = [
    (0.05, [390.0, 354.0, 371.0]),
    (0.15, [1030.0, 1028.0, 1051.0]),
    (0.275, [1912.0, 1909.0, 1914.0]),
    (0.4, [2784.0, 2779.0, 2678.0]),
    (0.8, [5616.0, 5637.0, 5612.0]),
    (1.4, [9733.0, 9821.0, 9786.0]),
    (2.0, [14213.0, 14238.0, 14236.0]),
    (4.0, [29138.0, 29504.0, 29473.0]),
    (7.0, [53065.0, 53701.0, 53326.0]),
    (10.0, [75967.0, 78499.0, 78422.0]),
    (20.0, [166985.0, 169620.0, 169379.0]),
    (30.0, [257119.0, 262286.0, 262765.0]),
    (40.0, [351149.0, 353419.0, 355161.0]),
];

/// (x, y, 1/s² of the standard) for every peak.
fn rows() -> Vec<(f64, f64, f64)> {
    let mut rows = Vec::new();
    for (x, peaks) in NITRATE {
        let mean = peaks.iter().sum::<f64>() / 3.0;
        let variance = peaks.iter().map(|p| (p - mean).powi(2)).sum::<f64>() / 2.0;
        rows.extend(peaks.iter().map(|&y| (x, y, 1.0 / variance)));
    }
    rows
}

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

/// Table 37.2, p. 332: the weights `1/s²` as printed (7 decimals).
#[test]
fn replicate_weights_match_table_37_2() {
    let printed = [
        0.0030832, 0.0061602, 0.1578947, 0.0002796, 0.0055453, 0.0005094, 0.0051813, 0.0000243,
        0.0000098, 0.0000005, 0.0000005, 0.0000001, 0.0000002,
    ];
    let rows = rows();
    for (level, w) in printed.iter().enumerate() {
        assert_printed("1/s²", rows[3 * level].2, *w, 7);
    }
}

/// Table 37.3, p. 332: the cubic with weights `1/sᵢ²`. Printed: constant 4.402 (SD 3.718),
/// x 6908.57 (11.98), x² 105.501 (4.686), x³ −1.4428 (0.1184). Without the constant (same
/// page): ŷ = 6920.8x + 101.68x² − 1.35x³.
#[test]
fn cubic_weighted_by_replicate_variance_matches_table_37_3() {
    let rows = rows();
    let n = rows.len();
    let y: Vec<f64> = rows.iter().map(|r| r.1).collect();
    let w: Vec<f64> = rows.iter().map(|r| r.2).collect();
    let design = DMatrix::from_fn(n, 4, |i, j| rows[i].0.powi(j as i32));
    let fit = least_squares(&design, &y, Some(&w)).unwrap();
    println!("cubic: {:?} ± {:?}", fit.params, fit.param_se);
    assert_eq!(fit.df_resid, 35);
    assert_printed("constant", fit.params[0], 4.402, 3);
    assert_printed("SD(constant)", fit.param_se[0], 3.718, 3);
    assert_printed("x", fit.params[1], 6908.57, 2);
    assert_printed("SD(x)", fit.param_se[1], 11.98, 2);
    assert_printed("x²", fit.params[2], 105.501, 3);
    assert_printed("SD(x²)", fit.param_se[2], 4.686, 3);
    assert_printed("x³", fit.params[3], -1.4428, 4);
    assert_printed("SD(x³)", fit.param_se[3], 0.1184, 4);

    let design = DMatrix::from_fn(n, 3, |i, j| rows[i].0.powi(j as i32 + 1));
    let fit = least_squares(&design, &y, Some(&w)).unwrap();
    println!("no constant: {:?}", fit.params);
    // 6920.746 here (numpy's lstsq gives the same); the printed 6920.8 is one unit of its last
    // digit away, as if rounded from 6920.75, so this one coefficient is checked to ±0.1.
    assert!(
        (fit.params[0] - 6920.8).abs() <= 0.1,
        "x (no constant) {}",
        fit.params[0]
    );
    assert_printed("x² (no constant)", fit.params[1], 101.68, 2);
    assert_printed("x³ (no constant)", fit.params[2], -1.35, 2);
}

/// Table 37.2, p. 332: the relative weights `1/x²`, scaled so that the 40 mg/L standard has
/// weight 1 and printed as integers. `assess --weights ref^-2` weights the same rows so.
#[test]
fn ref_power_weights_are_the_books_one_over_x_squared() {
    let printed = [
        640000.0, 71111.0, 21157.0, 10000.0, 2500.0, 816.0, 400.0, 100.0, 33.0, 16.0, 4.0, 2.0, 1.0,
    ];
    let rows = rows();
    let data = CalibrationData {
        raw: rows.iter().map(|r| r.1).collect(),
        reference: rows.iter().map(|r| r.0).collect(),
        ..Default::default()
    };
    let options = AssessOptions {
        weights: "ref^-2".parse().unwrap(),
        ..AssessOptions::default()
    };
    let a = assess(&data, &options).unwrap();
    let wls = a.wls.as_ref().expect("weighted fit");
    assert_eq!(wls.weights, "ref^-2");
    let weights = &wls.report.fit.weights;
    let last = weights[weights.len() - 1];
    for (level, relative) in printed.iter().enumerate() {
        for replicate in 0..3 {
            let w = weights[3 * level + replicate] / last;
            assert_eq!(w.round(), *relative, "level {level}: {w}");
        }
    }
}
