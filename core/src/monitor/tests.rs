//! Tests of the monitor (a child of `monitor` for its private fields).

use super::*;

#[test]
fn default_monitor_fits_in_two_kilobytes() {
    // Target from the design: Monitor<f32> with defaults (P = 3, 16 bins, 5 rungs,
    // queue of 8) at most 2048 bytes. The README states the measured figure.
    let size = core::mem::size_of::<Monitor<f32>>();
    std::eprintln!("size_of::<Monitor<f32>>() = {size}");
    assert!(size <= 2048, "{size}");
}

#[test]
fn bad_config_names_parameter() {
    let mut config = MonitorConfig::<f32>::default_for_range(1.0, 100.0);
    config.forgetting = 1.5;
    let error = Monitor::<f32>::new(config).unwrap_err();
    assert_eq!(error.parameter(), "forgetting");
    let mut config = MonitorConfig::<f32>::default_for_range(100.0, 1.0);
    config.level_low = 100.0;
    assert_eq!(
        Monitor::<f32>::new(config).unwrap_err(),
        ConfigError::LevelRange
    );
}

#[test]
fn non_finite_samples_are_rejected_without_touching_state() {
    let config = MonitorConfig::<f32>::default_for_range(1.0, 100.0);
    let mut monitor: Monitor<f32> = Monitor::new(config).unwrap();
    for value in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
        let outcome = monitor.push(&Sample::check(0, 0.0, value, 1.0));
        assert!(outcome.flags.contains(Flags::REJECTED));
        let outcome = monitor.push(&Sample::check(0, 0.0, 1.0, value));
        assert!(outcome.flags.contains(Flags::REJECTED));
        let outcome = monitor.push(&Sample::reading(0, 0.0, value));
        assert!(outcome.flags.contains(Flags::REJECTED));
    }
    assert_eq!(monitor.counters().checks, 0);
    assert_eq!(monitor.counters().rejected, 9);
    // Runs by reason: raw, reference, raw ×2, reference, raw ×2, reference, and an open
    // run of one raw: 6 events, each with its count.
    let mut counts = std::vec::Vec::new();
    while let Some(event) = monitor.pop_event() {
        if let EventKind::SampleRejected { count, .. } = event.kind {
            counts.push(count);
        }
    }
    assert_eq!(counts, [1, 1, 2, 1, 2, 1]);
    assert_eq!(monitor.events_dropped(), 0);
}

fn line_monitor() -> Monitor<f64> {
    let config = MonitorConfig::<f64>::default_for_range(1.0, 100.0);
    let mut monitor: Monitor<f64> = Monitor::new(config).unwrap();
    // A deterministic, slightly noisy line through 400 checks (invented, for the test).
    for i in 0..400u64 {
        let reference = 1.0 + (i % 50) as f64 * 2.0;
        let noise = 0.01 * (((i * 7919) % 13) as f64 - 6.0);
        monitor.push(&Sample::check(
            i,
            i as f64,
            0.5 + 2.0 * reference + noise,
            reference,
        ));
    }
    while monitor.pop_event().is_some() {}
    monitor
}

#[test]
fn a_fitted_check_carries_what_its_rung_predicted() {
    let mut monitor = line_monitor();
    // Noise of the line monitor's kind (invented, for the test), past the warm-up.
    for i in 400..460u64 {
        let reference = 1.0 + (i % 50) as f64 * 2.0;
        let raw = 0.5 + 2.0 * reference + 0.01 * (((i * 7919) % 13) as f64 - 6.0);
        let sample = Sample::check(i, i as f64, raw, reference);
        let x: [f64; 3] = monitor.config.basis.regressors(reference, None);
        let expected = monitor.ladder.assess(&monitor.ladder_config, &x, raw, 1.0);
        let rung = monitor.rung();
        let outcome = monitor.push(&sample);
        let check = outcome.check().expect("a fitted check has its detail");
        assert_eq!(check.prediction, expected.prediction);
        assert_eq!(check.residual, expected.residual);
        assert_eq!(check.standardized, expected.standardized);
        assert!(check.standardized.is_some());
        assert_eq!(check.rung, rung);
        assert_eq!(outcome.reading(), None);
    }
    // A reading carries no check; a rejected check carries nothing.
    let outcome = monitor.push(&Sample::reading(460, 460.0, 40.5));
    assert!(outcome.reading().is_some() && outcome.check().is_none());
    let outcome = monitor.push(&Sample::check(461, 461.0, 150.0, 10.0));
    assert!(outcome.flags.contains(Flags::REJECTED));
    assert_eq!(outcome.detail, Detail::Nothing);
}

#[test]
fn out_of_range_is_rejected_and_raises() {
    let mut monitor = line_monitor();
    // Default physical range for [1, 100]: [-100, 200].
    let mut raised = false;
    for i in 0..3u64 {
        let outcome = monitor.push(&Sample::reading(400 + i, 400.0, 250.0));
        assert!(outcome.flags.contains(Flags::REJECTED));
        while let Some(event) = monitor.pop_event() {
            raised |= matches!(event.kind, EventKind::SignalOutOfRange { raw, .. } if raw == 250.0);
        }
    }
    assert!(raised);
    assert_eq!(
        monitor.raised_alarms()[AlarmKind::SignalOutOfRange.index()],
        Some(Severity::Alarm)
    );
    assert_eq!(monitor.detector_counts().out_of_range, 3);
}

#[test]
fn isolated_spike_is_excluded_from_the_fits() {
    let mut monitor = line_monitor();
    let before = monitor.ladder().active_fit().parameters();
    let outcome = monitor.push(&Sample::check(400, 400.0, 150.0, 10.0));
    assert!(outcome.flags.contains(Flags::REJECTED));
    assert_eq!(monitor.ladder().active_fit().parameters(), before);
    assert_eq!(monitor.detector_counts().spikes, 1);
    // The run of one rejection is raised when the next sample is accepted, by the
    // rejected sample.
    assert_eq!(monitor.pop_event(), None);
    monitor.push(&Sample::check(401, 401.0, 20.5, 10.0));
    assert_eq!(
        monitor.pop_event(),
        Some(Event {
            seq: 400,
            kind: EventKind::SampleRejected {
                reason: RejectReason::Spike,
                count: 1
            }
        })
    );
}

#[test]
fn baseline_is_checked_and_used() {
    let mut monitor = line_monitor();
    let mut covariance = [[0.0; 4]; 4];
    covariance[0][0] = f64::NAN;
    assert_eq!(
        monitor.set_baseline([0.5, 2.0, 0.0, 0.0], Some(covariance)),
        Err(BaselineError::NonFinite)
    );
    // A baseline 5 % below the true gain: the drift test reports and raises gain_drift.
    monitor.set_baseline([0.5, 1.9, 0.0, 0.0], None).unwrap();
    let mut raised = None;
    for i in 400..600u64 {
        let reference = 1.0 + (i % 50) as f64 * 2.0;
        let noise = 0.01 * (((i * 7919) % 13) as f64 - 6.0);
        monitor.push(&Sample::check(
            i,
            i as f64,
            0.5 + 2.0 * reference + noise,
            reference,
        ));
        while let Some(event) = monitor.pop_event() {
            if let EventKind::GainDrift { change, .. } = event.kind {
                raised = Some(change);
            }
        }
    }
    let change = raised.expect("gain_drift");
    assert!((change - (2.0 / 1.9 - 1.0)).abs() < 1e-3, "{change}");
    assert!(monitor.drift_status().unwrap().gain_signal());
}
