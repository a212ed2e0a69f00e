//! NIST StRD linear least squares (Norris, Pontius, Longley) through the assessment's QR
//! regression path. Certified values: NIST/ITL Statistical Reference Datasets, Linear Least
//! Squares Regression, the certificates in the headers of tests/data/nist/*.dat (copied in
//! tests/data/nist/SOURCES.md). Score: log relative error, LRE = −log10(|est − cert| / |cert|)
//! (McCullough 1998, "Assessing the reliability of statistical software", Am. Stat. 52).

use nalgebra::DMatrix;
use steadycal_cli::assess::regression::least_squares;

/// Reads the data block of a StRD file: the rows after the SECOND line that begins with
/// `Data:` (the first, in the header, names the response variable). CRLF tolerated.
fn assess_strd_rows(name: &str) -> Vec<Vec<f64>> {
    let path = format!("{}/data/nist/{name}.dat", env!("CARGO_MANIFEST_DIR"));
    let text = std::fs::read_to_string(&path).expect("StRD file readable");
    let mut data_lines_seen = 0;
    let mut rows = Vec::new();
    for line in text.lines() {
        let line = line.trim_end_matches('\r');
        if data_lines_seen >= 2 {
            let values: Vec<f64> = line
                .split_whitespace()
                .map(|v| v.parse().expect("number in the data block"))
                .collect();
            if !values.is_empty() {
                rows.push(values);
            }
        } else if line.starts_with("Data:") {
            data_lines_seen += 1;
        }
    }
    rows
}

fn assess_lre(estimate: f64, certified: f64) -> f64 {
    let error = (estimate - certified).abs();
    if error == 0.0 {
        return 16.0; // exact to double precision: capped, as is usual for LRE tables
    }
    (-(error / certified.abs()).log10()).min(16.0)
}

struct Certificate<'a> {
    name: &'a str,
    params: &'a [f64],
    sds: &'a [f64],
    residual_sd: f64,
    minimum_lre: f64,
}

fn check(certificate: &Certificate<'_>, design: DMatrix<f64>, response: Vec<f64>) {
    let fit = least_squares(&design, &response, None).expect("StRD fit");
    let mut lowest = f64::INFINITY;
    for (i, (&cert, &cert_sd)) in certificate.params.iter().zip(certificate.sds).enumerate() {
        let lre_param = assess_lre(fit.params[i], cert);
        let lre_sd = assess_lre(fit.param_se[i], cert_sd);
        println!(
            "{} B{i}: estimate {:.15e} LRE {lre_param:.2}; SD {:.15e} LRE {lre_sd:.2}",
            certificate.name, fit.params[i], fit.param_se[i]
        );
        lowest = lowest.min(lre_param).min(lre_sd);
    }
    let lre_residual = assess_lre(fit.residual_sd, certificate.residual_sd);
    println!(
        "{} residual SD {:.15e} LRE {lre_residual:.2}",
        certificate.name, fit.residual_sd
    );
    lowest = lowest.min(lre_residual);
    println!("{} lowest LRE {lowest:.2}", certificate.name);
    assert!(
        lowest >= certificate.minimum_lre,
        "{}: lowest LRE {lowest:.2} < {}",
        certificate.name,
        certificate.minimum_lre
    );
}

fn polynomial_design(rows: &[Vec<f64>], degree: usize) -> (DMatrix<f64>, Vec<f64>) {
    let design = DMatrix::from_fn(rows.len(), degree + 1, |i, j| rows[i][1].powi(j as i32));
    (design, rows.iter().map(|r| r[0]).collect())
}

#[test]
fn norris_certified_values() {
    let rows = assess_strd_rows("Norris");
    assert_eq!(rows.len(), 36); // NIST StRD Norris header: 36 observations
    let (design, response) = polynomial_design(&rows, 1);
    check(
        &Certificate {
            name: "Norris",
            // NIST StRD Norris certificate.
            params: &[-0.262323073774029, 1.00211681802045],
            sds: &[0.232818234301152, 0.429796848199937E-03],
            residual_sd: 0.884796396144373,
            minimum_lre: 12.0,
        },
        design,
        response,
    );
}

#[test]
fn pontius_certified_values() {
    let rows = assess_strd_rows("Pontius");
    assert_eq!(rows.len(), 40); // NIST StRD Pontius header: 40 observations
    let (design, response) = polynomial_design(&rows, 2);
    check(
        &Certificate {
            name: "Pontius",
            // NIST StRD Pontius certificate.
            params: &[
                0.673565789473684E-03,
                0.732059160401003E-06,
                -0.316081871345029E-14,
            ],
            sds: &[
                0.107938612033077E-03,
                0.157817399981659E-09,
                0.486652849992036E-16,
            ],
            residual_sd: 0.205177424076185E-03,
            minimum_lre: 12.0,
        },
        design,
        response,
    );
}

#[test]
fn longley_certified_values() {
    let rows = assess_strd_rows("Longley");
    assert_eq!(rows.len(), 16); // NIST StRD Longley header: 16 observations
    let design = DMatrix::from_fn(rows.len(), 7, |i, j| if j == 0 { 1.0 } else { rows[i][j] });
    let response = rows.iter().map(|r| r[0]).collect();
    check(
        &Certificate {
            name: "Longley",
            // NIST StRD Longley certificate.
            params: &[
                -3482258.63459582,
                15.0618722713733,
                -0.358191792925910E-01,
                -2.02022980381683,
                -1.03322686717359,
                -0.511041056535807E-01,
                1829.15146461355,
            ],
            sds: &[
                890420.383607373,
                84.9149257747669,
                0.334910077722432E-01,
                0.488399681651699,
                0.214274163161675,
                0.226073200069370,
                455.478499142212,
            ],
            residual_sd: 304.854073561965,
            minimum_lre: 10.0,
        },
        design,
        response,
    );
}
