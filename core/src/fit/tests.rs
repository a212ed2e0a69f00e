//! Unit tests of `core/src/fit.rs` (a child module: private items are in reach).

use super::*;

fn config<R: Real>(forgetting: f64, initial: f64) -> FitConfig<R> {
    FitConfig {
        forgetting: R::from_f64(forgetting),
        initial_variance: R::from_f64(initial),
    }
}

proptest::proptest! {
    /// The written-out updates (two and three parameters) leave the same bits as the
    /// general loop, so a board that leaves one out computes what the host computes.
    #[test]
    fn written_out_updates_match_the_loop_bit_for_bit(
        dim in 2usize..=3,
        rows in proptest::collection::vec(
            (-1e3f64..1e3, -1e3f64..1e3, -1e4f64..1e4, 1e-3f64..1e3), 1..40),
    ) {
        let mut written: RecursiveFit<f64, 3> = RecursiveFit::new(dim, config(0.99, 1e6));
        let mut looped = written.clone();
        let forgetting = Forgetting::of(&written.config);
        for (x1, x2, y, relative_variance) in rows {
            let x = [1.0, x1, if dim == 3 { x2 } else { 0.0 }];
            let residual = y - written.predict(&x);
            let a = written.update_relative_variance(&x, residual, relative_variance, forgetting);
            let alpha0 = forgetting.beta * relative_variance;
            let b = looped.update_dim(dim, &x, alpha0, residual, forgetting);
            proptest::prop_assert_eq!(a, b);
            proptest::prop_assert_eq!(written.theta.map(f64::to_bits), looped.theta.map(f64::to_bits));
            proptest::prop_assert_eq!(written.d.map(f64::to_bits), looped.d.map(f64::to_bits));
            proptest::prop_assert_eq!(
                written.u.map(|row| row.map(f64::to_bits)),
                looped.u.map(|row| row.map(f64::to_bits))
            );
            proptest::prop_assert_eq!(written.weighted_sse.to_bits(), looped.weighted_sse.to_bits());
            proptest::prop_assert_eq!(written.effective.to_bits(), looped.effective.to_bits());
        }
    }
}

proptest::proptest! {
    /// The written-out covariance of a capacity-two fit has the bits of the loop.
    #[test]
    fn written_out_covariance_matches_the_loop_bit_for_bit(
        dim in 1usize..=2,
        rows in proptest::collection::vec(
            (-1e3f64..1e3, -1e4f64..1e4, 1e-3f64..1e3), 0..40),
    ) {
        let mut fit: RecursiveFit<f64, 2> = RecursiveFit::new(dim, config(0.99, 1e6));
        let mut narrow: RecursiveFit<f32, 2> = RecursiveFit::new(dim, FitConfig {
            forgetting: 0.99,
            initial_variance: 1e6,
        });
        for (x1, y, relative_variance) in rows {
            let x = [1.0, if dim == 2 { x1 } else { 0.0 }];
            let _ = fit.update(&x, y, relative_variance);
            let _ = narrow.update(&x.map(|v| v as f32), y as f32, relative_variance as f32);
            proptest::prop_assert_eq!(
                fit.covariance_two().map(|row| row.map(f64::to_bits)),
                fit.covariance_by_loop().map(|row| row.map(f64::to_bits))
            );
            proptest::prop_assert_eq!(
                narrow.covariance_two().map(|row| row.map(f32::to_bits)),
                narrow.covariance_by_loop().map(|row| row.map(f32::to_bits))
            );
        }
    }
}

#[test]
fn exact_line_and_residual_variance() {
    let mut fit: RecursiveFit<f64, 3> = RecursiveFit::new(2, config(1.0, 1e14));
    let data = [(0.0, 1.1), (1.0, 2.9), (2.0, 5.2), (3.0, 6.8), (4.0, 9.1)];
    for &(x, y) in &data {
        fit.update(&[1.0, x, 0.0], y, 1.0).unwrap();
    }
    // Batch OLS by hand (closed form): slope = Sxy/Sxx = 19.9/10, intercept = ȳ − b·x̄.
    let slope = 1.99;
    let intercept = 5.02 - slope * 2.0;
    let theta = fit.parameters();
    assert!((theta[1] - slope).abs() < 1e-9);
    assert!((theta[0] - intercept).abs() < 1e-9);
    let sse: f64 = data
        .iter()
        .map(|&(x, y)| (y - intercept - slope * x).powi(2))
        .sum();
    assert!((fit.residual_variance() - sse / 3.0).abs() < 1e-9);
}

#[test]
fn refuses_bad_input_without_change() {
    let mut fit: RecursiveFit<f32, 2> = RecursiveFit::new(2, config(0.999, 1e6));
    fit.update(&[1.0, 2.0], 3.0, 1.0).unwrap();
    let before = fit.clone();
    assert_eq!(
        fit.update(&[1.0, f32::NAN], 3.0, 1.0),
        Err(FitError::NonFinite)
    );
    assert_eq!(
        fit.update(&[1.0, 2.0], f32::INFINITY, 1.0),
        Err(FitError::NonFinite)
    );
    assert_eq!(
        fit.update(&[1.0, 2.0], 3.0, 0.0),
        Err(FitError::NonPositiveWeight)
    );
    assert_eq!(
        fit.update(&[1.0, 2.0], 3.0, f32::NAN),
        Err(FitError::NonFinite)
    );
    assert_eq!(
        fit.update(&[1.0, 1e30], 1e38, 1e30),
        Err(FitError::NonFinite)
    );
    assert_eq!(fit.parameters(), before.parameters());
    assert_eq!(fit.diagonal(), before.diagonal());
    assert_eq!(fit.updates(), 1);
}

/// The internal update takes no finiteness check beforehand: a non-finite regressor,
/// residual or relative variance must still be refused with the state untouched, on
/// every written-out dimension and the general loop.
#[test]
fn unchecked_update_refuses_non_finite_inputs() {
    fn check<const P: usize>(dim: usize) {
        let mut fit: RecursiveFit<f32, P> = RecursiveFit::new(dim, config(0.999, 1e6));
        let mut x = [1.0f32; P];
        for i in 0..5 {
            x[dim - 1] = i as f32;
            fit.update(&x, 2.0 + i as f32, 1.0).unwrap();
        }
        let (theta, diagonal, updates) = (fit.parameters(), fit.diagonal(), fit.updates());
        let forgetting = Forgetting::of(&config::<f32>(0.999, 1e6));
        for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
            for position in 0..dim {
                let mut x_bad = x;
                x_bad[position] = bad;
                let result = fit.update_relative_variance(&x_bad, 0.5, 1.0, forgetting);
                assert_eq!(
                    result,
                    Err(FitError::NonFinite),
                    "dim {dim} x[{position}] = {bad}"
                );
            }
            assert!(fit
                .update_relative_variance(&x, bad, 1.0, forgetting)
                .is_err());
            assert!(fit
                .update_relative_variance(&x, 0.5, bad, forgetting)
                .is_err());
            assert_eq!(fit.parameters(), theta);
            assert_eq!(fit.diagonal(), diagonal);
            assert_eq!(fit.updates(), updates);
        }
    }
    check::<2>(2);
    check::<3>(3);
    check::<4>(4);
}

#[test]
fn no_wind_up_without_excitation() {
    let mut fit: RecursiveFit<f32, 2> = RecursiveFit::new(2, config(0.999, 1e6));
    let mut noise = 0.0f32;
    for i in 0..100_000u32 {
        noise = (noise * 1.618 + 0.37) % 1.0;
        let x = if i < 1000 {
            (i % 10) as f32 / 10.0
        } else {
            0.5
        };
        fit.update(&[1.0, x], 1.0 + 2.0 * x + 0.01 * (noise - 0.5), 1.0)
            .unwrap();
    }
    for value in fit.diagonal() {
        assert!(value.is_finite() && value > 0.0 && value <= 1e6);
    }
    // Positive definite by construction: det P = Π D > 0, and xᵀPx > 0 for any x ≠ 0
    // (computed in factored form; the explicit product of an f32 matrix this
    // ill-conditioned would cancel).
    let p = fit.covariance();
    assert_eq!(p[0][1], p[1][0]);
    assert!(fit.diagonal().iter().product::<f32>() > 0.0);
    for x in [[1.0, 0.0], [0.0, 1.0], [1.0, -2.0], [-0.5, 1.0]] {
        assert!(fit.leverage(&x) > 0.0);
    }
    assert!((fit.predict(&[1.0, 0.5]) - 2.0).abs() < 0.01);
}

#[test]
fn weights_match_weighted_least_squares() {
    // WLS through two points with weights: the fit must pass through them exactly.
    let mut fit: RecursiveFit<f64, 2> = RecursiveFit::new(2, config(1.0, 1e14));
    fit.update(&[1.0, 1.0], 3.0, 4.0).unwrap();
    fit.update(&[1.0, 2.0], 5.0, 0.25).unwrap();
    let theta = fit.parameters();
    assert!((theta[0] - 1.0).abs() < 1e-9 && (theta[1] - 2.0).abs() < 1e-9);
    // P = (XᵀWX)⁻¹ with X = [[1,1],[1,2]], W = diag(4, 0.25): XᵀWX = [[4.25, 4.5],[4.5, 5]].
    let det = 4.25 * 5.0 - 4.5 * 4.5;
    let p = fit.covariance();
    assert!((p[0][0] - 5.0 / det).abs() < 1e-6);
    assert!((p[0][1] + 4.5 / det).abs() < 1e-6);
    assert!((fit.leverage(&[1.0, 1.5]) - (5.0 - 2.0 * 4.5 * 1.5 + 4.25 * 2.25) / det).abs() < 1e-6);
}
