//! RecursiveFit (f64, no forgetting) against the certified values of the NIST StRD linear
//! least-squares datasets Norris (straight line) and Pontius (quadratic), scored with the log
//! relative error (LRE, McCullough 1998). Data and certificates: tests/data/nist (see
//! SOURCES.md there).

use steadycal_conformance::{data_path, log_relative_error, read_strd};
use steadycal_core::basis::Basis;
use steadycal_core::fit::{FitConfig, RecursiveFit};

/// Fits the dataset with `basis` and returns the physical parameters and the residual SD.
fn fit_dataset(file: &str, basis: Basis<f64>) -> ([f64; 4], f64) {
    let data = read_strd(data_path(file)).unwrap();
    basis.validate(3).unwrap();
    // No forgetting and a vague prior (10^30 in scaled units: the prior's pull on θ is far
    // below double-precision resolution).
    let mut fit = RecursiveFit::<f64, 3>::new(
        basis.len(),
        FitConfig {
            forgetting: 1.0,
            initial_variance: 1e30,
        },
    );
    for (y, x) in data.response.iter().zip(&data.predictors) {
        let regressors: [f64; 3] = basis.regressors(x[0], None);
        fit.update(&regressors, *y, 1.0).unwrap();
    }
    assert_eq!(fit.updates() as usize, data.response.len());
    (
        basis.physical(&fit.parameters()),
        fit.residual_variance().sqrt(),
    )
}

fn max_abs_predictor(file: &str) -> f64 {
    let data = read_strd(data_path(file)).unwrap();
    data.predictors
        .iter()
        .map(|x| x[0].abs())
        .fold(0.0, f64::max)
}

fn report(name: &str, label: &str, estimate: f64, certified: f64) -> f64 {
    let lre = log_relative_error(estimate, certified);
    eprintln!("{name} {label}: estimate {estimate:.15e} certified {certified:.15e} LRE {lre:.2}");
    lre
}

#[test]
fn norris_straight_line() {
    let basis = Basis::linear(max_abs_predictor("nist/Norris.dat"));
    let (physical, residual_sd) = fit_dataset("nist/Norris.dat", basis);
    // Certified values: NIST StRD, Norris.dat, certified regression statistics.
    let b0 = report("Norris", "B0", physical[0], -0.262323073774029); // NIST StRD Norris, certified B0
    let b1 = report("Norris", "B1", physical[1], 1.00211681802045); // NIST StRD Norris, certified B1
    let sd = report("Norris", "residual SD", residual_sd, 0.884796396144373); // NIST StRD Norris, certified residual SD
    assert!(
        b0 >= 9.0 && b1 >= 9.0,
        "Norris LREs B0 {b0:.2}, B1 {b1:.2}: need ≥ 9"
    );
    assert!(sd >= 9.0, "Norris residual SD LRE {sd:.2}");
    assert_eq!(physical[2], 0.0);
}

#[test]
fn pontius_quadratic() {
    let basis = Basis {
        quadratic: true,
        ..Basis::linear(max_abs_predictor("nist/Pontius.dat"))
    };
    let (physical, residual_sd) = fit_dataset("nist/Pontius.dat", basis);
    // Certified values: NIST StRD, Pontius.dat, certified regression statistics.
    let b0 = report("Pontius", "B0", physical[0], 0.673565789473684E-03); // NIST StRD Pontius, certified B0
    let b1 = report("Pontius", "B1", physical[1], 0.732059160401003E-06); // NIST StRD Pontius, certified B1
    let b2 = report("Pontius", "B2", physical[2], -0.316081871345029E-14); // NIST StRD Pontius, certified B2
    let sd = report("Pontius", "residual SD", residual_sd, 0.205177424076185E-03); // NIST StRD Pontius, certified residual SD
    assert!(
        b0 >= 7.0 && b1 >= 7.0 && b2 >= 7.0,
        "Pontius LREs {b0:.2} {b1:.2} {b2:.2}: need ≥ 7"
    );
    assert!(sd >= 7.0, "Pontius residual SD LRE {sd:.2}");
}
