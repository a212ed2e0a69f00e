//! The configuration's detector settings, false-alarm budget and commissioned baseline seen
//! from the command line (issue 19): their effect on a replay and what the summary says.
//!
//! The feed is simulated (invented, for the tests only): a straight-line sensor (offset 0,
//! gain 1), scatter 1 % of the level, one check per row over 5..500, and a gain ramp of +4 %
//! over 10,000 rows from row 5,000.

mod common;

use std::path::{Path, PathBuf};

use common::steadycal;
use serde_json::Value;

const SCENARIO: &str = r#"
description = "Straight-line sensor whose gain rises 4 % over 10,000 checks (test feed)."
seed = 1904
rows = 17000
interval = 60.0

[sensor]
offset = 0.0
gain = 1.0

[noise]
sd = 1.0
exponent = 1.0
at_level = 100.0

[reference]
low = 5.0
high = 500.0
every = 1

[[drift]]
start = 5000
rows = 10000
gain = 0.04
"#;

fn feed(dir: &Path) -> PathBuf {
    let scenario = dir.join("ramp.toml");
    std::fs::write(&scenario, SCENARIO).unwrap();
    let feed = dir.join("ramp.csv");
    steadycal()
        .arg("simulate")
        .arg(&scenario)
        .arg("--out")
        .arg(&feed)
        .assert()
        .success();
    feed
}

fn replay(dir: &Path, feed: &Path, name: &str, config: &str) -> Value {
    let path = dir.join(format!("{name}.toml"));
    std::fs::write(&path, config).unwrap();
    let summary = dir.join(format!("{name}.summary.json"));
    steadycal()
        .arg("replay")
        .arg(feed)
        .arg("--config")
        .arg(&path)
        .arg("--summary")
        .arg(&summary)
        .arg("--quiet")
        .assert()
        .success();
    serde_json::from_str(&std::fs::read_to_string(summary).unwrap()).unwrap()
}

#[test]
fn the_gain_tolerance_decides_whether_a_4_percent_ramp_raises_gain_drift() {
    let dir = tempfile::tempdir().unwrap();
    let feed = feed(dir.path());
    let range = "[range]\nlow = 2.0\nhigh = 1000.0\n";
    let tight = replay(
        dir.path(),
        &feed,
        "tight",
        &format!("{range}[detect.drift]\ngain_tolerance_percent = 1.0\n"),
    );
    let loose = replay(
        dir.path(),
        &feed,
        "loose",
        &format!("{range}[detect.drift]\ngain_tolerance_percent = 6.0\n"),
    );
    assert!(
        tight["events"]["gain_drift"].as_u64().unwrap() >= 1,
        "{}",
        tight["events"]
    );
    assert_eq!(loose["events"]["gain_drift"], 0, "{}", loose["events"]);
    // Both saw the same drift: significant and beyond 1 %, inside 6 %.
    let change = loose["drift"]["gain_change"].as_f64().unwrap();
    assert!(change > 0.02 && change < 0.06, "{change}");
    assert_eq!(loose["drift"]["gain_beyond_tolerance"], false);
    // No baseline given: the monitor froze its own, and says after which sample.
    let baseline = &tight["drift"]["baseline"];
    assert_eq!(baseline["source"], "frozen", "{baseline}");
    // Warm-up 200 checks + freeze_after 1000: frozen at the 1,200th check (seq 1199).
    assert_eq!(baseline["frozen_at_seq"], 1199, "{baseline}");
    // The CUSUM in force, and its in-control run length (Lucas & Crosier's 465 at h = 5).
    assert_eq!(tight["detectors"]["cusum_h"], 5.0);
    assert_eq!(tight["detectors"]["cusum_k"], 0.5);
    assert_eq!(tight["detectors"]["cusum_in_control_run_length"], 465.0);
}

#[test]
fn a_commissioned_baseline_is_used_and_named_and_a_budget_sets_h() {
    let dir = tempfile::tempdir().unwrap();
    let feed = feed(dir.path());
    let summary = replay(
        dir.path(),
        &feed,
        "commissioned",
        "[range]\nlow = 2.0\nhigh = 1000.0\n\
         [detect.cusum]\nin_control_time = \"30d\"\nchecks_per_hour = 60\n\
         [baseline]\noffset = 0.0\ngain = 1.0\ncovariance = [[0.0001, 0.0], [0.0, 1e-8]]\n\
         residual_sd = 0.45\nsource = \"bench run of the test sensor\"\n",
    );
    let baseline = &summary["drift"]["baseline"];
    assert_eq!(baseline["source"], "commissioning", "{baseline}");
    assert_eq!(
        baseline["commissioned_from"],
        "bench run of the test sensor"
    );
    assert_eq!(baseline["gain"], 1.0);
    assert_eq!(baseline["residual_sd"], 0.45);
    assert!(summary["events"]["gain_drift"].as_u64().unwrap() >= 1);
    // 30 days at 60 checks an hour: 43,200 checks.
    let run_length = summary["detectors"]["cusum_in_control_run_length"]
        .as_f64()
        .unwrap();
    assert!((run_length / 43_200.0 - 1.0).abs() < 1e-3, "{run_length}");
    assert!(summary["detectors"]["cusum_h"].as_f64().unwrap() > 5.0);
}

#[test]
fn a_bad_detector_setting_stops_with_exit_2_naming_file_key_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let config = dir.path().join("bad.toml");
    std::fs::write(
        &config,
        "[range]\nlow = 2.0\n\n[detect.cusum]\ndecision_interval = 4.0\nin_control_run_length = 1000\n",
    )
    .unwrap();
    let output = steadycal()
        .arg("replay")
        .arg(common::feeds().join("gas-cell.csv"))
        .arg("--config")
        .arg(&config)
        .assert()
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        stderr.contains("bad.toml:6:1: `detect.cusum.in_control_run_length`: give either"),
        "{stderr}"
    );
}

/// `steadycal replay FEED --config CONFIG --summary` → (summary, event lines).
fn replay_with(dir: &Path, feed: &Path, config: &Path) -> (Value, Vec<Value>) {
    let summary = dir.join("field.summary.json");
    let events = dir.join("field.events.jsonl");
    steadycal()
        .arg("replay")
        .arg(feed)
        .arg("--config")
        .arg(config)
        .arg("--summary")
        .arg(&summary)
        .arg("--events")
        .arg(&events)
        .arg("--quiet")
        .assert()
        .success();
    let summary = serde_json::from_str(&std::fs::read_to_string(summary).unwrap()).unwrap();
    let events = std::fs::read_to_string(events)
        .unwrap()
        .lines()
        .map(|line| serde_json::from_str(line).unwrap())
        .collect();
    (summary, events)
}

#[test]
fn commissioning_round_trip_from_the_lab_run_to_the_field_feeds() {
    // assess --commission on the shipped lab run writes the shipped commissioned file.
    let dir = tempfile::tempdir().unwrap();
    let written = dir.path().join("co-cell.monitor.toml");
    let lab = "simulated-feeds/lab/co_gas_cell.csv";
    steadycal()
        .current_dir(common::root())
        .args(["assess", lab, "--commission"])
        .arg(&written)
        .assert()
        .success();
    let shipped = common::feeds().join("commissioning/co-cell.monitor.toml");
    assert_eq!(
        std::fs::read_to_string(&written).unwrap(),
        std::fs::read_to_string(&shipped).unwrap(),
        "simulated-feeds/commissioning/co-cell.monitor.toml is not what `steadycal assess {lab} --commission` writes"
    );
    let text = std::fs::read_to_string(&written).unwrap();
    assert!(text.contains("initial_rung = \"log\""), "{text}");
    assert!(
        text.contains("[baseline]") && text.contains("covariance = [["),
        "{text}"
    );

    // The sensor holds its calibration: no drift alarm, the baseline is the commissioned one.
    let feeds = common::feeds().join("commissioning");
    let (summary, events) = replay_with(dir.path(), &feeds.join("co-cell-field.csv"), &written);
    assert_eq!(summary["drift"]["baseline"]["source"], "commissioning");
    assert_eq!(summary["rung"], "log");
    for kind in ["gain_drift", "offset_drift", "bias_shift"] {
        assert_eq!(summary["events"][kind], 0, "{kind}: {}", summary["events"]);
    }
    assert!(events.iter().all(|e| e["kind"] != "gain_drift"));

    // The gain rises 5 % over samples 4,000..12,000: gain_drift once the change is beyond the
    // 1 % tolerance against the commissioned gain and significant against the lab's own
    // uncertainty of it (standard uncertainty about 0.8 % from 28 points).
    let (summary, events) =
        replay_with(dir.path(), &feeds.join("co-cell-field-drift.csv"), &written);
    let baseline_gain = summary["drift"]["baseline"]["gain"].as_f64().unwrap();
    let raised = events
        .iter()
        .find(|e| e["kind"] == "gain_drift")
        .expect("gain_drift raised");
    let seq = raised["seq"].as_u64().unwrap();
    // The true gain 2.1·(1 + 0.05·(seq − 4000)/8000) passes 1.01 × the baseline gain here:
    let passes = 4000.0 + 8000.0 * (1.01 * baseline_gain / 2.1 - 1.0) / 0.05;
    eprintln!(
        "gain_drift raised at seq {seq}; the true gain passes the 1 % tolerance at seq {passes:.0}; change {} ± {}",
        raised["change"], raised["uncertainty"]
    );
    assert!(
        seq as f64 > passes,
        "raised at {seq} before the tolerance was passed ({passes})"
    );
    assert!(raised["change"].as_f64().unwrap() > 0.01);
    assert!(
        events
            .iter()
            .filter(|e| e["seq"].as_u64().unwrap() < seq)
            .all(|e| e["severity"] != "alarm"),
        "an alarm before gain_drift"
    );
}

#[test]
fn acceptance_criteria_pass_and_fail_on_the_shipped_lab_run() {
    let dir = tempfile::tempdir().unwrap();
    let lab = common::feeds().join("lab/co_gas_cell.csv");
    let criteria = common::feeds().join("acceptance");
    // The cell's own bench specification: every criterion met, exit 0.
    let output = steadycal()
        .arg("assess")
        .arg(&lab)
        .arg("--config")
        .arg(criteria.join("co-cell-bench.toml"))
        .assert()
        .code(0)
        .get_output()
        .clone();
    let text = String::from_utf8_lossy(&output.stdout);
    assert!(text.contains("all 5 criteria met"), "{text}");
    // The EPA's PM2.5 sensor targets (for sensors reporting in reference units) on a cell
    // that reports counts: slope, intercept and RMSE fail, exit 1; JSON and HTML say so.
    let json = dir.path().join("assess.json");
    let html = dir.path().join("assess.html");
    steadycal()
        .arg("assess")
        .arg(&lab)
        .arg("--config")
        .arg(criteria.join("epa-pm25-sensors.toml"))
        .arg("--json")
        .arg("--out")
        .arg(&json)
        .arg("--report")
        .arg(&html)
        .assert()
        .code(1);
    let document: Value = serde_json::from_str(&std::fs::read_to_string(&json).unwrap()).unwrap();
    let acceptance = &document["acceptance"];
    assert_eq!(acceptance["pass"], false);
    let results: Vec<(&str, bool)> = acceptance["criteria"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| {
            (
                c["criterion"].as_str().unwrap(),
                c["pass"].as_bool().unwrap(),
            )
        })
        .collect();
    assert_eq!(
        results,
        [
            ("slope_range", false),
            ("intercept_range", false),
            ("r_squared_min", true),
            ("rmse_max", false)
        ]
    );
    let page = std::fs::read_to_string(&html).unwrap();
    assert!(page.contains("<section id=\"acceptance\">") && page.contains("FAIL"));
    let options = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..Default::default()
    };
    roxmltree::Document::parse_with_options(&page, options)
        .expect("the page stays well-formed XML");
    // Every shipped criteria file reads as a configuration.
    for entry in std::fs::read_dir(&criteria).unwrap() {
        let path = entry.unwrap().path();
        let file = steadycal_cli::config::ConfigFile::read(&path).unwrap();
        file.channel(&path.display().to_string()).unwrap();
        assert!(
            file.acceptance.unwrap().source.is_some(),
            "{}",
            path.display()
        );
    }
}
