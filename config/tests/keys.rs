//! Every key of the file: accepted with its effect on the monitor configuration, refused out
//! of range with the key, line and column named; forms that exclude each other; the README's
//! key table against `keys::KEYS`; the written file read back.

use steadycal_config::{keys, ConfigError, ConfigFile, CusumSizing};
use steadycal_core::detect::DetectConfig;
use steadycal_core::event::Severity;
use steadycal_core::monitor::MonitorConfig;

fn channel(text: &str) -> Result<steadycal_config::ChannelConfig, ConfigError> {
    ConfigFile::parse("m.toml", text)?.channel("m.toml")
}

fn config(text: &str) -> MonitorConfig<f64> {
    channel(text)
        .unwrap_or_else(|e| panic!("{text}: {e}"))
        .monitor
}

fn error(text: &str) -> String {
    match channel(text) {
        Ok(_) => panic!("accepted: {text}"),
        Err(e) => e.to_string(),
    }
}

type Check = fn(&DetectConfig<f64>) -> bool;

/// `(table, key, accepted value, its effect, a refused value)` for every `[detect]` key.
const DETECT_KEYS: &[(&str, &str, &str, Check, &str)] = &[
    (
        "detect.screen",
        "raw_low",
        "-5.0",
        |d| d.screen.raw_low == -5.0,
        "nan",
    ),
    (
        "detect.screen",
        "raw_high",
        "5000",
        |d| d.screen.raw_high == 5000.0,
        "inf",
    ),
    (
        "detect.screen",
        "stuck_run",
        "7",
        |d| d.screen.stuck_run == 7,
        "1",
    ),
    (
        "detect.screen",
        "stuck_window",
        "0",
        |d| d.screen.stuck_window == 0,
        "-1",
    ),
    (
        "detect.screen",
        "stuck_response",
        "0.2",
        |d| d.screen.stuck_response == 0.2,
        "1.0",
    ),
    (
        "detect.screen",
        "spike_bound",
        "inf",
        |d| d.screen.spike_bound == f64::INFINITY,
        "0",
    ),
    (
        "detect.screen",
        "spike_run_limit",
        "5",
        |d| d.screen.spike_run_limit == 5,
        "0",
    ),
    (
        "detect.screen",
        "reference_gap_seconds",
        "3600",
        |d| d.screen.reference_gap_seconds == 3600.0,
        "-1",
    ),
    (
        "detect.cusum",
        "reference_value",
        "0.25",
        |d| d.cusum.reference_value == 0.25,
        "-0.5",
    ),
    (
        "detect.cusum",
        "decision_interval",
        "4",
        |d| d.cusum.decision_interval == 4.0,
        "0",
    ),
    (
        "detect.cusum",
        "in_control_run_length",
        "168",
        |d| (d.cusum.decision_interval - 4.0).abs() < 0.01,
        "1",
    ),
    (
        "detect.spread_jump",
        "reference_value",
        "0.5",
        |d| d.spread_jump.reference_value == 0.5,
        "-1",
    ),
    (
        "detect.spread_jump",
        "decision_interval",
        "12",
        |d| d.spread_jump.decision_interval == 12.0,
        "0",
    ),
    (
        "detect.drift",
        "gain_tolerance_percent",
        "6",
        |d| d.drift.gain_tolerance_percent == 6.0,
        "-1",
    ),
    (
        "detect.drift",
        "offset_tolerance",
        "0.5",
        |d| d.drift.offset_tolerance == 0.5,
        "nan",
    ),
    (
        "detect.drift",
        "alpha",
        "0.01",
        |d| (d.drift.wald_quantiles[0] - 6.635).abs() < 1e-3,
        "0",
    ),
    (
        "detect.drift",
        "wald_quantiles",
        "[1, 2, 3, 4]",
        |d| d.drift.wald_quantiles == [1.0, 2.0, 3.0, 4.0],
        "[1, 2, 3]",
    ),
    (
        "detect.drift",
        "freeze_after",
        "50",
        |d| d.drift.freeze_after == 50,
        "-1",
    ),
    ("detect.drift", "every", "4", |d| d.drift.every == 4, "0"),
    (
        "detect.alarms.bias_shift",
        "severity",
        "\"alarm\"",
        |d| d.alarms.bias_shift.severity == Severity::Alarm,
        "\"loud\"",
    ),
    (
        "detect.alarms.gain_drift",
        "raise_after",
        "2",
        |d| d.alarms.gain_drift.raise_after == 2,
        "0",
    ),
    (
        "detect.alarms.offset_drift",
        "clear_after",
        "3",
        |d| d.alarms.offset_drift.clear_after == 3,
        "0",
    ),
    (
        "detect.alarms.spread_jump",
        "raise_after",
        "9",
        |d| d.alarms.spread_jump.raise_after == 9,
        "0",
    ),
    (
        "detect.alarms.signal_stuck",
        "severity",
        "\"warn\"",
        |d| d.alarms.signal_stuck.severity == Severity::Warn,
        "1",
    ),
    (
        "detect.alarms.signal_out_of_range",
        "clear_after",
        "1",
        |d| d.alarms.signal_out_of_range.clear_after == 1,
        "0",
    ),
    (
        "detect.alarms.reference_gap",
        "raise_after",
        "4",
        |d| d.alarms.reference_gap.raise_after == 4,
        "-4",
    ),
];

#[test]
fn every_detect_key_is_accepted_with_its_effect_and_refused_out_of_range() {
    let defaults = config("").detect;
    for (table, key, good, effect, bad) in DETECT_KEYS {
        let text = format!("# detector settings\n[{table}]\n{key} = {good}\n");
        let detect = config(&text).detect;
        assert!(effect(&detect), "{table}.{key} = {good} has no effect");
        assert!(
            !effect(&defaults),
            "{table}.{key}: the default already passes the check"
        );
        let text = format!("# detector settings\n[{table}]\n{key} = {bad}\n");
        let message = error(&text);
        assert!(message.contains(key), "{table}.{key} = {bad}: {message}");
        assert!(
            message.contains("line 3, column"),
            "{table}.{key} = {bad}: {message}"
        );
    }
}

#[test]
fn every_schema_key_is_documented_and_the_readme_table_is_the_documentation() {
    // Every key of a complete file has a line in KEYS.
    let text = "[baseline]\noffset = 1\ngain = 2\ncovariance = [[1, 0], [0, 1]]\nresidual_sd = 0.1\nsource = \"lab\"\n\
                [acceptance]\nsource = \"x\"\nslope_range = [0, 2]\nintercept_range = [-1, 1]\nr_squared_min = 0.9\n\
                residual_sd_max = 1\nrmse_max = 1\nnrmse_max_percent = 30\nlod_max = 1\nloq_max = 3\n\
                [detect.cusum]\nin_control_time = \"30d\"\nchecks_per_hour = 4\n[detect.drift]\nalpha = 0.001\n\
                [ladder]\nswitch_alpha = 0.001\n[spread]\nalpha = 0.001\ninterval_level = 0.95\n[mean_check]\nalpha = 0.001\n";
    let complete = ConfigFile::parse("m.toml", text)
        .unwrap()
        .complete()
        .unwrap();
    let mut written: Vec<String> = Vec::new();
    collect(&toml::Value::try_from(&complete).unwrap(), "", &mut written);
    let mut complete = ConfigFile::parse("m.toml", "").unwrap().complete().unwrap();
    complete.detect.cusum.in_control_run_length = Some(steadycal_config::values::RunLength(465.0));
    complete.detect.cusum.decision_interval = None;
    collect(&toml::Value::try_from(&complete).unwrap(), "", &mut written);
    for key in &written {
        assert!(
            keys::find(key).is_some(),
            "`{key}` has no line in keys::KEYS"
        );
    }
    let readme =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/../README.md")).unwrap();
    let table = keys::markdown_table();
    assert!(
        readme.contains(&table),
        "README.md's key table differs from keys::KEYS; it should read:\n{table}"
    );
}

fn collect(value: &toml::Value, path: &str, out: &mut Vec<String>) {
    match value {
        toml::Value::Table(table) => {
            for (name, inner) in table {
                let dotted = if path.is_empty() {
                    name.clone()
                } else {
                    format!("{path}.{name}")
                };
                collect(inner, &dotted, out);
            }
        }
        _ => out.push(path.to_string()),
    }
}

#[test]
fn empty_file_gives_core_defaults() {
    assert_eq!(
        config(""),
        MonitorConfig::<f64>::default_for_range(1.0, 1000.0)
    );
    let channel = channel("").unwrap();
    assert_eq!(channel.baseline, None);
    assert_eq!(channel.cusum_sizing, CusumSizing::DecisionInterval);
}

#[test]
fn detector_defaults_follow_the_range_and_the_origin() {
    let c = config("[range]\nlow = 2\nhigh = 100\norigin = 50\n");
    assert_eq!(c.detect.screen.raw_low, -50.0);
    assert_eq!(c.detect.screen.raw_high, 250.0);
    assert_eq!(c.detect.drift.offset_tolerance, 2.0);
}

#[test]
fn alphas_become_the_core_default_thresholds() {
    // Core defaults: 5.414, 10.828, 3.090, 1.960, which are χ²₁(0.999)/2, χ²₁(0.999),
    // Φ⁻¹(0.999), Φ⁻¹(0.975), and χ²_p(0.999) = 10.828, 13.816, 16.266, 18.467 (standard χ²
    // and normal tables, from memory; the same from a reference library: scipy 1.11.4
    // `chi2.ppf(0.999, p)` = 10.8276, 13.8155, 16.2662, 18.4668 for p = 1…4 and
    // `norm.ppf(0.999)` = 3.09023, `norm.ppf(0.975)` = 1.95996); statrs 0.18 must reproduce
    // them to the printed digits.
    let c = config(
        "[ladder]\nswitch_alpha = 0.001\n[spread]\nalpha = 0.001\ninterval_level = 0.95\n[mean_check]\nalpha = 0.001\n[detect.drift]\nalpha = 0.001\n",
    );
    assert!((c.switch_margin - 5.414).abs() < 5e-4);
    assert!((c.spread_threshold - 10.828).abs() < 5e-4);
    assert!((c.mean_check_z - 3.090).abs() < 5e-4);
    assert!((c.interval_z - 1.960).abs() < 5e-4);
    for (q, table) in c
        .detect
        .drift
        .wald_quantiles
        .iter()
        .zip([10.828, 13.816, 16.266, 18.467])
    {
        assert!((q - table).abs() < 5e-4, "{q} {table}");
    }
}

#[test]
fn unknown_key_wrong_type_and_range_name_the_key_with_line_and_column() {
    let e = error("[fit]\nforgeting = 0.99\n");
    assert!(
        e.contains("unknown field `forgeting`") && e.contains("line 2, column 1"),
        "{e}"
    );
    let e = error("[fit]\nforgetting = \"high\"\n");
    assert!(
        e.contains("invalid type") && e.contains("forgetting"),
        "{e}"
    );
    let e = error("[ladder]\nswitch_alpha = 1.5\n");
    assert!(
        e.contains("out of range: 1.5") && e.contains("line 2"),
        "{e}"
    );
    let e = error("[detect.cusum]\nh = 5\n");
    assert!(
        e.contains("unknown field `h`") && e.contains("line 2, column 1"),
        "{e}"
    );
    let e = error("[detect.alarms.no_such_alarm]\nraise_after = 2\n");
    assert!(e.contains("no_such_alarm"), "{e}");
    // Found after parsing: located by the key.
    let e = error("[range]\nlow = 10\nhigh = 5\n");
    assert!(e.contains("m.toml:2:1: `range.low`"), "{e}");
    let e = error("[spread]\nalpha = 0.01\nthreshold = 6\n");
    assert!(
        e.contains("m.toml:3:1: `spread.threshold`") && e.contains("not both"),
        "{e}"
    );
    let e = error("[detect.screen]\nraw_low = 10\nraw_high = 5\n");
    assert!(e.contains("m.toml:2:1: `detect.screen.raw_low`"), "{e}");
    let e = error("[detect.drift]\nalpha = 0.01\nwald_quantiles = [1, 2, 3, 4]\n");
    assert!(
        e.contains("`detect.drift.wald_quantiles`") && e.contains("not both"),
        "{e}"
    );
}

#[test]
fn the_false_alarm_budget_sets_h_and_excludes_the_other_forms() {
    let c = channel("[detect.cusum]\nin_control_run_length = 465\n").unwrap();
    assert!((c.monitor.detect.cusum.decision_interval - 5.0).abs() < 0.05);
    assert_eq!(c.cusum_sizing, CusumSizing::RunLength { checks: 465.0 });
    // 30 days at 4 checks an hour: 2,880 checks.
    let c = channel("[detect.cusum]\nin_control_time = \"30d\"\nchecks_per_hour = 4\n").unwrap();
    assert_eq!(c.cusum_sizing, CusumSizing::RunLength { checks: 2880.0 });
    let e = error("[detect.cusum]\ndecision_interval = 5\nin_control_run_length = 465\n");
    assert!(
        e.contains("m.toml:3:1: `detect.cusum.in_control_run_length`") && e.contains("not both"),
        "{e}"
    );
    let e = error("[detect.cusum]\nin_control_run_length = 465\nin_control_time = \"30d\"\nchecks_per_hour = 1\n");
    assert!(
        e.contains("`detect.cusum.in_control_time`") && e.contains("not both"),
        "{e}"
    );
    let e = error("[detect.cusum]\nin_control_time = \"30d\"\n");
    assert!(
        e.contains("m.toml:2:1: `detect.cusum.in_control_time`") && e.contains("checks_per_hour"),
        "{e}"
    );
    let e = error("[detect.cusum]\nchecks_per_hour = 4\n");
    assert!(e.contains("`detect.cusum.checks_per_hour`"), "{e}");
    let e = error("[detect.cusum]\nin_control_time = \"soon\"\nchecks_per_hour = 4\n");
    assert!(e.contains("not a duration") && e.contains("line 2"), "{e}");
    let e = error("[detect.cusum]\nin_control_run_length = 1.1\n");
    assert!(
        e.contains("`detect.cusum.in_control_run_length`") && e.contains("below"),
        "{e}"
    );
}

#[test]
fn a_baseline_matches_the_basis_and_its_covariance_is_checked() {
    let c = channel("[baseline]\noffset = 0.5\ngain = 2\ncovariance = [[0.01, 0.001], [0.001, 0.0004]]\nresidual_sd = 0.2\n")
        .unwrap();
    let b = c.baseline.unwrap();
    assert_eq!(b.parameters, [0.5, 2.0, 0.0, 0.0]);
    assert_eq!(b.covariance.unwrap()[0][1], 0.001);
    assert_eq!(b.residual_sd, Some(0.2));
    let c = channel("[basis]\ntemperature = true\n[baseline]\noffset = 0.5\ngain = 2\ntemperature = 0.1\ncovariance = [[1, 0, 0], [0, 1, 0], [0, 0, 2]]\n")
        .unwrap();
    let b = c.baseline.unwrap();
    assert_eq!(b.parameters, [0.5, 2.0, 0.0, 0.1]);
    assert_eq!(b.covariance.unwrap()[3][3], 2.0);
    for (text, key) in [
        ("[baseline]\ngain = 2\n", "`baseline.offset`"),
        (
            "[baseline]\noffset = 0\ngain = 2\nquadratic = 1\n",
            "`baseline.quadratic`",
        ),
        (
            "[basis]\nquadratic = true\n[baseline]\noffset = 0\ngain = 2\n",
            "`baseline.quadratic`",
        ),
        (
            "[baseline]\noffset = 0\ngain = 2\ncovariance = [[1, 0], [0, 1], [0, 0]]\n",
            "`baseline.covariance`",
        ),
        (
            "[baseline]\noffset = 0\ngain = 2\ncovariance = [[1, 0.5], [0, 1]]\n",
            "`baseline.covariance`",
        ),
        (
            "[baseline]\noffset = 0\ngain = 2\ncovariance = [[1, 2], [2, 1]]\n",
            "`baseline.covariance`",
        ),
        (
            "[baseline]\noffset = 0\ngain = 2\nresidual_sd = -1\n",
            "residual_sd",
        ),
    ] {
        let e = error(text);
        assert!(e.contains(key), "{text}: {e}");
    }
}

#[test]
fn the_written_file_reads_back_to_the_same_channel() {
    for text in [
        "",
        "[range]\nlow = 2\nhigh = 500\norigin = 1.5\n[basis]\ntemperature = true\n[detect.cusum]\nin_control_time = \"30d\"\nchecks_per_hour = 4\n[detect.drift]\ngain_tolerance_percent = 2.5\n[baseline]\noffset = 0.25\ngain = 2.125\ntemperature = 0.01\ncovariance = [[1e-4, 0, 0], [0, 1e-6, 0], [0, 0, 1e-5]]\nresidual_sd = 0.125\nsource = \"lab run\"\n[acceptance]\nslope_range = [2, 2.3]\nsource = \"datasheet\"\n",
    ] {
        let file = ConfigFile::parse("m.toml", text).unwrap();
        let written = file.to_commented_toml("commissioned\nfor a test").unwrap();
        assert!(written.starts_with("# commissioned\n# for a test\n"), "{written}");
        assert!(written.contains("# lower end of the working range"), "{written}");
        let back = ConfigFile::parse("w.toml", &written).unwrap_or_else(|e| panic!("{e}\n{written}"));
        assert_eq!(back.channel("w.toml").unwrap(), file.channel("m.toml").unwrap(), "{written}");
        assert_eq!(format!("{:?}", back.acceptance), format!("{:?}", file.acceptance));
    }
}
