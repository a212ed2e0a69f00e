//! Long run of RecursiveFit<f32, 2> with forgetting 0.999 (project issue, "what must be
//! shown" 3): 10^8 updates in a release build (10^6 in a debug build, so that a plain
//! `cargo test` stays quick), with a 10^6-sample stretch of constant reference (10^5 in
//! debug). Asserts: no NaN, the covariance stays symmetric positive definite and below its
//! wind-up ceiling, the fit recovers after the constant stretch, and a 2 % gain step is
//! tracked to within 0.1 % in 20,000 checks (thresholds from the project issue).
//!
//! The data are simulated (invented for this test): raw = 30 + 2·ref + N(0, 1) counts, ref
//! uniform on [10, 500], seeded PCG64-MCG generator.

use rand::{Rng, SeedableRng};
use rand_distr::StandardNormal;
use rand_pcg::Pcg64Mcg;
use steadycal_core::basis::Basis;
use steadycal_core::fit::{FitConfig, RecursiveFit};

const OFFSET: f64 = 30.0;
const GAIN: f64 = 2.0;
const NOISE_SD: f64 = 1.0;
const CEILING: f32 = 1e4;
/// Checks allowed to reach the 0.1 % band (project issue).
const SETTLE_CHECKS: u64 = 20_000;
const GAIN_TOLERANCE: f64 = 1e-3;

struct Run {
    fit: RecursiveFit<f32, 2>,
    basis: Basis<f32>,
    rng: Pcg64Mcg,
    updates: u64,
}

impl Run {
    fn step(&mut self, reference: f64, gain: f64) {
        let noise: f64 = self.rng.sample(StandardNormal);
        let raw = OFFSET + gain * reference + NOISE_SD * noise;
        let x: [f32; 2] = self.basis.regressors(reference as f32, None);
        self.fit
            .update(&x, raw as f32, 1.0)
            .expect("finite data must be accepted");
        self.updates += 1;
        self.check_factors();
        if self.updates.is_multiple_of(64) {
            self.check_covariance();
        }
    }

    fn random_reference(&mut self) -> f64 {
        self.rng.gen_range(10.0..500.0)
    }

    fn check_factors(&self) {
        let d = self.fit.diagonal();
        let theta = self.fit.parameters();
        assert!(
            d.iter().all(|v| v.is_finite() && *v > 0.0 && *v <= CEILING),
            "D out of bounds after {} updates: {d:?}",
            self.updates
        );
        assert!(
            theta.iter().all(|v| v.is_finite()),
            "θ not finite: {theta:?}"
        );
    }

    fn check_covariance(&self) {
        let p = self.fit.covariance();
        assert_eq!(
            p[0][1], p[1][0],
            "covariance not symmetric after {} updates",
            self.updates
        );
        let det = p[0][0] as f64 * p[1][1] as f64 - p[0][1] as f64 * p[1][0] as f64;
        assert!(
            p[0][0] > 0.0 && p[1][1] > 0.0 && det > 0.0,
            "not positive definite: {p:?}"
        );
    }

    fn gain_error(&self, gain: f64) -> f64 {
        let physical = self.basis.physical(&self.fit.parameters());
        (physical[1] as f64 - gain).abs() / gain
    }

    /// `checks` updates on random references at `gain`; returns the first check index from
    /// which the gain error stayed within tolerance to the end (None if it never settled).
    fn excited(&mut self, checks: u64, gain: f64) -> Option<u64> {
        let mut settled_since = None;
        for k in 0..checks {
            let reference = self.random_reference();
            self.step(reference, gain);
            if self.gain_error(gain) <= GAIN_TOLERANCE {
                settled_since.get_or_insert(k + 1);
            } else {
                settled_since = None;
            }
        }
        settled_since
    }
}

#[test]
fn hundred_million_updates_in_f32() {
    let release = !cfg!(debug_assertions);
    let (total, constant): (u64, u64) = if release {
        (100_000_000, 1_000_000)
    } else {
        (1_000_000, 100_000)
    };
    let after_step: u64 = 100_000;
    let after_constant: u64 = 100_000;
    let started = std::time::Instant::now();

    let mut run = Run {
        fit: RecursiveFit::new(
            2,
            FitConfig {
                forgetting: 0.999,
                initial_variance: CEILING,
            },
        ),
        basis: Basis::linear(500.0),
        rng: Pcg64Mcg::seed_from_u64(0x5eed_ca1b),
        updates: 0,
    };
    run.basis.validate(2).unwrap();

    // 1. Excited data up to the middle.
    let first = total / 2 - constant;
    run.excited(first, GAIN);
    assert!(
        run.gain_error(GAIN) <= GAIN_TOLERANCE,
        "gain not tracked before the stretch"
    );

    // 2. Constant reference: no excitation of the gain direction.
    for _ in 0..constant {
        run.step(250.0, GAIN);
    }
    run.check_covariance();
    let d = run.fit.diagonal();
    eprintln!("after {constant} constant-reference updates: D = {d:?} (ceiling {CEILING})");

    // 3. Excitation returns: the gain must be back within 0.1 % in 20,000 checks.
    let recovered = run
        .excited(after_constant, GAIN)
        .expect("gain never recovered after the stretch");
    eprintln!("recovered within 0.1 % after {recovered} checks following the constant stretch");
    assert!(recovered <= SETTLE_CHECKS);

    // 4. Excited data until the gain step near the end.
    let middle = total - run.updates - after_step;
    run.excited(middle, GAIN);
    assert!(run.gain_error(GAIN) <= GAIN_TOLERANCE);

    // 5. A 2 % gain step.
    let stepped = GAIN * 1.02;
    let settled = run
        .excited(after_step, stepped)
        .expect("gain step never tracked");
    eprintln!("2 % gain step tracked within 0.1 % after {settled} checks");
    assert!(settled <= SETTLE_CHECKS, "gain step took {settled} checks");
    assert_eq!(run.updates, total);
    run.check_covariance();

    let variance = run.fit.residual_variance() as f64;
    assert!(
        (0.85..1.15).contains(&variance),
        "residual variance {variance} (true 1)"
    );
    eprintln!(
        "{} updates ({} build) in {:.2} s; final gain {:.6} (true {stepped}), σ² {variance:.4}",
        run.updates,
        if release { "release" } else { "debug" },
        started.elapsed().as_secs_f64(),
        run.basis.physical(&run.fit.parameters())[1],
    );
}
