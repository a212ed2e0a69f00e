//! Configuration checks against their plain reading: every float setting of the default
//! configuration set in turn to an awkward value (NaN, ±∞, ±0, subnormals, negative,
//! huge, just below and above 1) gives the error the rule as documented names, or none.

// NaN must fail every rule, so the rules are written as negated comparisons.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

use steadycal_core::basis::BasisError;
use steadycal_core::detect::{DetectConfig, DetectConfigError};
use steadycal_core::monitor::{ConfigError, MonitorConfig};
use steadycal_core::real::Real;

fn awkward<R: Real>() -> [R; 14] {
    let v = R::from_f64;
    [
        R::NAN,
        v(f64::INFINITY),
        v(f64::NEG_INFINITY),
        R::ZERO,
        v(-0.0),
        v(1e-310),
        v(-1e-310),
        v(-1.0),
        v(0.5),
        v(0.999_999),
        R::ONE,
        v(1.000_01),
        v(3e38),
        v(-3e38),
    ]
}

fn finite_positive<R: Real>(x: R) -> bool {
    x.is_finite() && x > R::ZERO
}

fn finite_non_negative<R: Real>(x: R) -> bool {
    x.is_finite() && x >= R::ZERO
}

/// The detector rules for one float setting of an otherwise default configuration.
fn expected_detect<R: Real>(c: &DetectConfig<R>) -> Result<(), DetectConfigError> {
    let s = &c.screen;
    if !(s.raw_low < s.raw_high) {
        return Err(DetectConfigError::RawRange);
    }
    if !(s.stuck_response >= R::ZERO && s.stuck_response < R::ONE) {
        return Err(DetectConfigError::StuckResponse);
    }
    if !(s.spike_bound > R::ZERO) {
        return Err(DetectConfigError::SpikeBound);
    }
    if !(finite_non_negative(c.cusum.reference_value) && finite_positive(c.cusum.decision_interval))
    {
        return Err(DetectConfigError::Cusum);
    }
    if !(finite_non_negative(c.spread_jump.reference_value)
        && finite_positive(c.spread_jump.decision_interval))
    {
        return Err(DetectConfigError::SpreadJump);
    }
    if !finite_non_negative(c.drift.gain_tolerance_percent) {
        return Err(DetectConfigError::GainTolerance);
    }
    if !finite_non_negative(c.drift.offset_tolerance) {
        return Err(DetectConfigError::OffsetTolerance);
    }
    if !c.drift.wald_quantiles.iter().all(|&q| finite_positive(q)) {
        return Err(DetectConfigError::WaldQuantiles);
    }
    Ok(())
}

/// The monitor rules for one float setting of an otherwise default configuration.
fn expected_monitor<R: Real>(c: &MonitorConfig<R>) -> Result<(), ConfigError> {
    if !(finite_positive(c.forgetting) && c.forgetting <= R::ONE) {
        return Err(ConfigError::Forgetting);
    }
    if !finite_positive(c.initial_variance) {
        return Err(ConfigError::InitialVariance);
    }
    if !c.level_origin.is_finite() {
        return Err(ConfigError::LevelOrigin);
    }
    if !(finite_positive(c.level_low)
        && finite_positive(c.level_high)
        && c.level_low < c.level_high)
    {
        return Err(ConfigError::LevelRange);
    }
    if !finite_non_negative(c.switch_margin) {
        return Err(ConfigError::SwitchMargin);
    }
    if !finite_positive(c.spread_threshold) {
        return Err(ConfigError::SpreadThreshold);
    }
    if !(finite_positive(c.coverage_factor)
        && finite_positive(c.interval_z)
        && finite_positive(c.mean_check_z))
    {
        return Err(ConfigError::Quantile);
    }
    expected_detect(&c.detect).map_err(ConfigError::Detect)?;
    let b = &c.basis;
    if !(finite_positive(b.reference_scale)
        && (!b.temperature
            || (finite_positive(b.temperature_scale) && b.temperature_reference.is_finite())))
    {
        return Err(ConfigError::Basis(BasisError::BadScale));
    }
    Ok(())
}

fn check<R: Real>() {
    let base = MonitorConfig::<R>::default_for_range(R::ONE, R::from_f64(100.0));
    type Field<R> = fn(&mut MonitorConfig<R>) -> &mut R;
    let fields: [Field<R>; 25] = [
        |c| &mut c.forgetting,
        |c| &mut c.initial_variance,
        |c| &mut c.level_origin,
        |c| &mut c.level_low,
        |c| &mut c.level_high,
        |c| &mut c.switch_margin,
        |c| &mut c.spread_threshold,
        |c| &mut c.mean_check_z,
        |c| &mut c.interval_z,
        |c| &mut c.coverage_factor,
        |c| &mut c.detect.screen.raw_low,
        |c| &mut c.detect.screen.raw_high,
        |c| &mut c.detect.screen.stuck_response,
        |c| &mut c.detect.screen.spike_bound,
        |c| &mut c.detect.cusum.reference_value,
        |c| &mut c.detect.cusum.decision_interval,
        |c| &mut c.detect.spread_jump.reference_value,
        |c| &mut c.detect.spread_jump.decision_interval,
        |c| &mut c.detect.drift.gain_tolerance_percent,
        |c| &mut c.detect.drift.offset_tolerance,
        |c| &mut c.detect.drift.wald_quantiles[0],
        |c| &mut c.detect.drift.wald_quantiles[3],
        |c| &mut c.basis.reference_scale,
        |c| &mut c.basis.temperature_scale,
        |c| &mut c.basis.temperature_reference,
    ];
    let mut with_temperature = base;
    with_temperature.basis.temperature = true;
    for (field, base) in fields
        .iter()
        .flat_map(|field| [(field, base), (field, with_temperature)])
    {
        for value in awkward::<R>() {
            let mut config = base;
            *field(&mut config) = value;
            assert_eq!(
                config.validate(3),
                expected_monitor(&config),
                "{value:?} in {config:?}"
            );
            assert_eq!(config.detect.validate(), expected_detect(&config.detect));
        }
    }
}

#[test]
fn float_settings_follow_their_rules_f32() {
    check::<f32>();
}

#[test]
fn float_settings_follow_their_rules_f64() {
    check::<f64>();
}

/// The reference gap (an `f64` whatever the core's type) follows its documented rule,
/// "positive; ∞ turns the check off", on the awkward values, a negative NaN, the largest
/// finite value and the smallest subnormal.
#[test]
fn reference_gap_follows_its_rule() {
    let base = DetectConfig::<f32>::default_for_range(0.0, 1.0, 100.0);
    let values = awkward::<f64>()
        .into_iter()
        .chain([-f64::NAN, f64::MAX, 4.9e-324]);
    for gap in values {
        let mut config = base;
        config.screen.reference_gap_seconds = gap;
        let expected = if gap > 0.0 {
            Ok(())
        } else {
            Err(DetectConfigError::ReferenceGap)
        };
        assert_eq!(config.validate(), expected, "{gap:?}");
    }
}
