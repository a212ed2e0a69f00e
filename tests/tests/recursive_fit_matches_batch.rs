//! Property: with forgetting 1 and a vague prior, RecursiveFit reproduces batch weighted
//! least squares. The reference is an independent method: a Householder QR solve of
//! `√W·X θ = √W·y` with nalgebra (0.34), in f64 on the very same (rounded) data.
//! Tolerances from the project issue: relative error ≤ 1e-9 in f64, ≤ 1e-4 in f32.

use nalgebra::{DMatrix, DVector};
use proptest::prelude::*;
use steadycal_core::fit::{FitConfig, RecursiveFit};
use steadycal_core::real::Real;

/// Random regressions: parameter count, true θ, then per row (u, noise, weight).
fn cases() -> impl Strategy<Value = (usize, Vec<f64>, Vec<(f64, f64, f64)>)> {
    (2usize..=3).prop_flat_map(|p| {
        (
            Just(p),
            proptest::collection::vec(-100.0f64..100.0, p),
            proptest::collection::vec((-1.0f64..1.0, -1.0f64..1.0, 0.25f64..4.0), 4 * p..80),
        )
    })
}

/// Regressor row `[1, u, u²]` truncated to `p`.
fn row(p: usize, u: f64) -> Vec<f64> {
    [1.0, u, u * u][..p].to_vec()
}

/// Batch weighted least squares by QR, plus its residual variance SSE/(n − p).
fn batch(p: usize, rows: &[(Vec<f64>, f64, f64)]) -> Option<(Vec<f64>, f64)> {
    let n = rows.len();
    let a = DMatrix::from_fn(n, p, |i, j| rows[i].2.sqrt() * rows[i].0[j]);
    let b = DVector::from_fn(n, |i, _| rows[i].2.sqrt() * rows[i].1);
    // Well-conditioned only: condition number of √W·X at most 50.
    let singular = a.clone().svd(false, false).singular_values;
    let condition = singular.max() / singular.min();
    #[allow(clippy::neg_cmp_op_on_partial_ord)]
    if !(condition <= 50.0) {
        return None;
    }
    let qr = a.clone().qr();
    let qtb = qr.q().transpose() * &b;
    let theta = qr.r().solve_upper_triangular(&qtb)?;
    let residual = &b - &a * &theta;
    Some((
        theta.iter().copied().collect(),
        residual.norm_squared() / (n - p) as f64,
    ))
}

/// Runs RecursiveFit in type `R` and returns θ and σ² as f64.
fn recursive<R: Real>(
    p: usize,
    rows: &[(Vec<f64>, f64, f64)],
    initial_variance: f64,
) -> (Vec<f64>, f64) {
    let mut fit = RecursiveFit::<R, 3>::new(
        p,
        FitConfig {
            forgetting: R::ONE,
            initial_variance: R::from_f64(initial_variance),
        },
    );
    for (x, y, w) in rows {
        let mut regressors = [R::ZERO; 3];
        for (slot, v) in regressors.iter_mut().zip(x) {
            *slot = R::from_f64(*v);
        }
        fit.update(&regressors, R::from_f64(*y), R::from_f64(*w))
            .unwrap();
    }
    let theta = fit.parameters()[..p].iter().map(|v| v.to_f64()).collect();
    (theta, fit.residual_variance().to_f64())
}

fn relative_error(estimate: &[f64], reference: &[f64]) -> f64 {
    let diff: f64 = estimate
        .iter()
        .zip(reference)
        .map(|(a, b)| (a - b).powi(2))
        .sum();
    let norm: f64 = reference.iter().map(|b| b * b).sum();
    (diff / norm).sqrt()
}

/// The data rounded through type `R`, so that both methods see identical numbers.
fn rows_in<R: Real>(
    p: usize,
    theta: &[f64],
    data: &[(f64, f64, f64)],
) -> Vec<(Vec<f64>, f64, f64)> {
    let round = |v: f64| R::from_f64(v).to_f64();
    data.iter()
        .map(|&(u, noise, w)| {
            let x: Vec<f64> = row(p, round(u)).into_iter().map(round).collect();
            let y = round(x.iter().zip(theta).map(|(a, b)| a * b).sum::<f64>() + noise);
            (x, y, round(w))
        })
        .collect()
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(512))]

    #[test]
    fn f64_equals_batch_qr((p, theta, data) in cases()) {
        let rows = rows_in::<f64>(p, &theta, &data);
        let Some((reference, variance)) = batch(p, &rows) else { return Ok(()) };
        let (estimate, recursive_variance) = recursive::<f64>(p, &rows, 1e30);
        let error = relative_error(&estimate, &reference);
        prop_assert!(error <= 1e-9, "θ relative error {error:e}: {estimate:?} vs {reference:?}");
        let variance_error = (recursive_variance - variance).abs() / variance;
        prop_assert!(variance_error <= 1e-9, "σ² relative error {variance_error:e}");
    }

    #[test]
    fn f32_equals_batch_qr((p, theta, data) in cases()) {
        let rows = rows_in::<f32>(p, &theta, &data);
        let Some((reference, variance)) = batch(p, &rows) else { return Ok(()) };
        let (estimate, recursive_variance) = recursive::<f32>(p, &rows, 1e12);
        let error = relative_error(&estimate, &reference);
        prop_assert!(error <= 1e-4, "θ relative error {error:e}: {estimate:?} vs {reference:?}");
        let variance_error = (recursive_variance - variance).abs() / variance;
        prop_assert!(variance_error <= 1e-2, "σ² relative error {variance_error:e}");
    }
}
