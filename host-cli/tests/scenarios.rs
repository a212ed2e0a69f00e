//! End to end over every shipped scenario: the committed feed is what `simulate` writes,
//! and `replay` reaches the rung and raises (and does not raise) the events the scenario's
//! ground truth expects. The expectations come from the scenario files themselves
//! (invented demo scenarios; the rung is the one that makes the true scatter constant,
//! λ = 1 − k, DESIGN.md "Variance-stabilizing transforms").

mod common;

use common::{feeds, scenarios, steadycal};
use serde_json::Value;

fn json(bytes: &[u8]) -> Value {
    serde_json::from_slice(bytes).expect("valid JSON")
}

#[test]
fn at_least_six_scenarios_besides_the_demo() {
    assert!(scenarios().len() >= 7, "{:?}", scenarios());
}

#[test]
fn committed_feeds_are_what_simulate_writes() {
    for scenario in scenarios() {
        let csv = scenario.with_extension("csv");
        let expected = std::fs::read(&csv).expect("feed committed beside its scenario");
        assert!(expected.len() <= 1 << 20, "{} is over 1 MiB", csv.display());
        let output = steadycal()
            .args(["simulate", scenario.to_str().unwrap(), "--out", "-"])
            .output()
            .unwrap();
        assert!(output.status.success(), "{}", scenario.display());
        assert!(
            output.stdout == expected,
            "{} differs from `steadycal simulate {}` (run simulated-feeds/regenerate.sh)",
            csv.display(),
            scenario.display()
        );
        let truth = std::fs::read(scenario.with_extension("truth.json")).unwrap();
        let output = steadycal()
            .args(["simulate", scenario.to_str().unwrap(), "--out"])
            .arg(std::env::temp_dir().join("steadycal-scenario-test.csv"))
            .args(["--truth", "-"])
            .output()
            .unwrap();
        assert_eq!(json(&output.stdout), json(&truth), "{}", scenario.display());
    }
}

#[test]
fn replay_matches_the_ground_truth_of_every_scenario() {
    for scenario in scenarios() {
        let name = scenario.file_stem().unwrap().to_string_lossy().into_owned();
        let truth = json(&std::fs::read(scenario.with_extension("truth.json")).unwrap());
        let mut command = steadycal();
        command
            .arg("replay")
            .arg(scenario.with_extension("csv"))
            .args(["--summary", "-"]);
        let config = feeds().join(format!("{name}.monitor.toml"));
        if config.is_file() {
            command.arg("--config").arg(&config);
        }
        let output = command.output().unwrap();
        assert_eq!(output.status.code(), Some(0), "{name}: {output:?}");
        assert!(
            output.stderr.is_empty(),
            "{name}: quiet in a pipe: {output:?}"
        );
        let summary = json(&output.stdout);
        let expected = &truth["expected"];
        assert_eq!(summary["rung"], expected["rung"], "{name}: rung");
        for kind in expected["events"].as_array().unwrap() {
            let kind = kind.as_str().unwrap();
            assert!(
                summary["events"][kind].as_u64().unwrap() >= 1,
                "{name}: expected at least one {kind}: {}",
                summary["events"]
            );
        }
        for kind in expected["absent"].as_array().unwrap() {
            let kind = kind.as_str().unwrap();
            assert_eq!(
                summary["events"][kind].as_u64().unwrap(),
                0,
                "{name}: expected no {kind}"
            );
        }
        // The true exponent lies within 0.1 of the estimate on the clean feeds (issue 2
        // target ±0.1); the fault scenarios are allowed to miss it.
        let k = summary["spread_exponent"].as_f64();
        let clean = scenario
            .to_string_lossy()
            .contains("cell")
            .then_some(())
            .or(name.contains("counter").then_some(()))
            .or(name.contains("absorbance").then_some(()));
        if let (Some(k), Some(())) = (k, clean) {
            let true_k = truth["exponent"].as_f64().unwrap();
            assert!((k - true_k).abs() <= 0.1, "{name}: k {k} vs {true_k}");
        }
    }
}

#[test]
fn stdin_and_stdout_as_dash_give_the_same_summary_as_files() {
    let feed = feeds().join("gas-cell.csv");
    let from_file = steadycal()
        .arg("replay")
        .arg(&feed)
        .args(["--summary", "-"])
        .output()
        .unwrap();
    let from_stdin = steadycal()
        .args(["replay", "-", "--summary", "-"])
        .pipe_stdin(&feed)
        .unwrap()
        .output()
        .unwrap();
    assert!(from_file.status.success() && from_stdin.status.success());
    let mut a = json(&from_file.stdout);
    let mut b = json(&from_stdin.stdout);
    assert_eq!(b["feed"], "-");
    a["feed"] = Value::Null;
    b["feed"] = Value::Null;
    assert_eq!(a, b);
    // Events to stdout as JSON lines.
    let events = steadycal()
        .args(["replay", "-", "--events", "-"])
        .pipe_stdin(&feed)
        .unwrap()
        .output()
        .unwrap();
    let kinds: Vec<String> = String::from_utf8(events.stdout)
        .unwrap()
        .lines()
        .map(|line| json(line.as_bytes())["kind"].as_str().unwrap().to_string())
        .collect();
    assert!(
        kinds.contains(&"transform_changed".to_string()),
        "{kinds:?}"
    );
}

#[test]
fn fail_on_sets_exit_code_one() {
    let feed = feeds().join("gas-cell.csv");
    // transform_changed and spread_tracks_level are `info`: --fail-on info exits 1,
    // --fail-on warn and alarm exit 0 (no warn or alarm events on this feed).
    for (level, code) in [("info", 1), ("warn", 0), ("alarm", 0)] {
        steadycal()
            .arg("replay")
            .arg(&feed)
            .args(["--fail-on", level])
            .assert()
            .code(code);
    }
}

#[test]
fn readings_csv_has_the_documented_columns() {
    let dir = tempfile::tempdir().unwrap();
    let readings = dir.path().join("readings.csv");
    steadycal()
        .arg("replay")
        .arg(feeds().join("gas-cell.csv"))
        .arg("--readings")
        .arg(&readings)
        .assert()
        .success();
    let text = std::fs::read_to_string(&readings).unwrap();
    let mut lines = text.lines();
    assert_eq!(
        lines.next().unwrap(),
        "seq,t,raw,value,standard_uncertainty,expanded_uncertainty,rung,flags"
    );
    assert_eq!(lines.count(), 10_800);
}

#[test]
fn fleet_table_csv_and_json() {
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("fleet.csv");
    let output = steadycal()
        .arg("fleet")
        .arg(feeds())
        .arg("--csv")
        .arg(&csv)
        .args(["--json", "-", "--jobs", "2"])
        .output()
        .unwrap();
    assert!(output.status.success(), "{output:?}");
    let rows = json(&output.stdout);
    let rows = rows.as_array().unwrap();
    assert_eq!(rows.len(), common::scenarios().len());
    for row in rows {
        let file = row["file"].as_str().unwrap();
        let truth =
            json(&std::fs::read(feeds().join(file.replace(".csv", ".truth.json"))).unwrap());
        assert_eq!(row["rung"], truth["expected"]["rung"], "{file}");
        assert_eq!(row["status"], "ok");
    }
    let text = std::fs::read_to_string(&csv).unwrap();
    assert!(
        text.starts_with("file,samples,checks,rung,exponent"),
        "{text}"
    );
    // The screen table when stdout is not taken.
    steadycal()
        .arg("fleet")
        .arg(feeds())
        .assert()
        .success()
        .stdout(predicates::str::contains("gas-cell.csv"))
        .stdout(predicates::str::contains("rung"));
}

#[test]
fn help_documents_exit_codes_and_examples() {
    for command in [
        vec!["--help"],
        vec!["replay", "--help"],
        vec!["watch", "--help"],
        vec!["fleet", "--help"],
        vec!["assess", "--help"],
    ] {
        steadycal()
            .args(&command)
            .assert()
            .success()
            .stdout(predicates::str::contains("Exit codes:"))
            .stdout(predicates::str::contains("2  bad input or usage"));
    }
    steadycal()
        .args(["replay", "--help"])
        .assert()
        .stdout(predicates::str::contains("Examples:"));
    steadycal()
        .args(["replay", "--no-such-flag", "x.csv"])
        .assert()
        .code(2);
    steadycal().assert().code(2);
}

#[test]
fn human_summary_only_when_asked_in_a_pipe() {
    let feed = feeds().join("gas-cell.csv");
    steadycal()
        .arg("replay")
        .arg(&feed)
        .assert()
        .success()
        .stderr("");
    steadycal()
        .arg("replay")
        .arg(&feed)
        .arg("--human-summary")
        .env("NO_COLOR", "1")
        .assert()
        .success()
        .stderr(predicates::str::contains("calibration rung log"))
        .stderr(predicates::str::contains("\u{1b}[").not());
}

use predicates::prelude::PredicateBooleanExt;
