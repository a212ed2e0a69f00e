//! End-to-end tests of snapshots and device logs: `snapshot inspect/verify`, resuming a
//! replay from a snapshot (two halves equal one run, bit for bit), and replaying a device
//! log, also one with a torn record in the middle.

mod common;

use std::path::Path;

use common::{feeds, steadycal};
use predicates::prelude::*;

fn split_feed(feed: &Path, dir: &Path, at: usize) -> (std::path::PathBuf, std::path::PathBuf) {
    let text = std::fs::read_to_string(feed).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    let rows: Vec<&str> = lines.collect();
    let first = dir.join("first.csv");
    let second = dir.join("second.csv");
    let write = |path: &Path, rows: &[&str]| {
        let mut out = String::from(header);
        out.push('\n');
        for row in rows {
            out.push_str(row);
            out.push('\n');
        }
        std::fs::write(path, out).unwrap();
    };
    write(&first, &rows[..at]);
    write(&second, &rows[at..]);
    (first, second)
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

#[test]
fn two_halves_with_a_snapshot_equal_one_run() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let feed = feeds().join("co-cell-ageing.csv");
    let config = feeds().join("co-cell-ageing.monitor.toml");
    steadycal()
        .arg("replay")
        .arg(&feed)
        .arg("--config")
        .arg(&config)
        .arg("--events")
        .arg(d.join("whole.jsonl"))
        .arg("--save-snapshot")
        .arg(d.join("whole.bin"))
        .arg("-q")
        .assert()
        .success();
    let rows = std::fs::read_to_string(&feed).unwrap().lines().count() - 1;
    for at in [rows / 3, rows / 2 + 17] {
        let (first, second) = split_feed(&feed, d, at);
        steadycal()
            .arg("replay")
            .arg(&first)
            .arg("--config")
            .arg(&config)
            .arg("--events")
            .arg(d.join("a.jsonl"))
            .arg("--save-snapshot")
            .arg(d.join("half.bin"))
            .arg("-q")
            .assert()
            .success();
        // The resumed run takes its configuration from the snapshot; the same explicit
        // config is accepted.
        steadycal()
            .arg("replay")
            .arg(&second)
            .arg("--config")
            .arg(&config)
            .arg("--resume")
            .arg(d.join("half.bin"))
            .arg("--events")
            .arg(d.join("b.jsonl"))
            .arg("--save-snapshot")
            .arg(d.join("end.bin"))
            .arg("--summary")
            .arg(d.join("b.json"))
            .arg("-q")
            .assert()
            .success();
        let whole = std::fs::read_to_string(d.join("whole.jsonl")).unwrap();
        let joined = std::fs::read_to_string(d.join("a.jsonl")).unwrap()
            + &std::fs::read_to_string(d.join("b.jsonl")).unwrap();
        assert!(!whole.is_empty());
        assert_eq!(whole, joined, "events differ (split at row {at})");
        assert_eq!(
            std::fs::read(d.join("whole.bin")).unwrap(),
            std::fs::read(d.join("end.bin")).unwrap(),
            "final state differs (split at row {at})"
        );
        let summary = json(&d.join("b.json"));
        assert_eq!(summary["samples"], rows as u64);
        assert!(summary["resumed_from"]
            .as_str()
            .unwrap()
            .ends_with("half.bin"));
    }
}

#[test]
fn resume_refuses_a_conflicting_config_and_precision() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let feed = feeds().join("gas-cell.csv");
    steadycal()
        .args(["replay", "-q", "--save-snapshot"])
        .arg(d.join("s.bin"))
        .arg(&feed)
        .assert()
        .success();
    steadycal()
        .args(["replay", "-q", "--level-high", "500", "--resume"])
        .arg(d.join("s.bin"))
        .arg(&feed)
        .assert()
        .code(2)
        .stderr(
            predicate::str::contains("s.bin").and(predicate::str::contains(
                "configuration differs from the one given on the command line",
            )),
        );
    steadycal()
        .args(["replay", "-q", "--precision", "f64", "--resume"])
        .arg(d.join("s.bin"))
        .arg(&feed)
        .assert()
        .code(2)
        .stderr(predicate::str::contains("holds an f32 monitor"));
}

#[test]
fn snapshot_inspect_and_verify() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let snapshot = d.join("s.bin");
    steadycal()
        .args(["replay", "-q", "--save-snapshot"])
        .arg(&snapshot)
        .arg(feeds().join("gas-cell.csv"))
        .assert()
        .success();
    steadycal()
        .args(["snapshot", "verify"])
        .arg(&snapshot)
        .assert()
        .success()
        .stdout(predicate::str::contains("good (format version 5, f32"));
    steadycal()
        .args(["snapshot", "inspect"])
        .arg(&snapshot)
        .assert()
        .success()
        .stdout(
            predicate::str::contains("format version 5")
                .and(predicate::str::contains("21600 samples, 10800 checks"))
                .and(predicate::str::contains("rung log")),
        );
    let output = steadycal()
        .args(["snapshot", "inspect", "--json"])
        .arg(&snapshot)
        .output()
        .unwrap();
    assert!(output.status.success());
    let description: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    let bytes = std::fs::read(&snapshot).unwrap();
    assert_eq!(description["bytes"], bytes.len() as u64);
    assert_eq!(
        description["format_version"],
        steadycal_core::snapshot::FORMAT_VERSION
    );
    assert_eq!(description["precision"], "f32");
    assert_eq!(description["samples"], 21600);
    assert!(description["crc32"].as_str().unwrap().starts_with("0x"));

    // Damaged copies: each refused with its reason and byte offset, exit 2.
    let len = bytes.len();
    let cases: Vec<(Vec<u8>, String)> = vec![
        (
            bytes[..10].to_vec(),
            "byte 10: shorter than a snapshot header".into(),
        ),
        (
            [b"XX".as_slice(), &bytes[2..]].concat(),
            "byte 0: not a steadycal snapshot".into(),
        ),
        (
            {
                let mut b = bytes.clone();
                b[4] = 7;
                b
            },
            "byte 4: unknown snapshot format version".into(),
        ),
        (
            bytes[..len - 1].to_vec(),
            format!("byte {}: payload shorter", len - 1),
        ),
        (
            [bytes.as_slice(), b"\n"].concat(),
            format!("byte {len}: bytes after the end"),
        ),
        (
            {
                let mut b = bytes.clone();
                b[100] ^= 0x01;
                b
            },
            format!("byte {}: CRC mismatch", len - 4),
        ),
    ];
    for (index, (damaged, reason)) in cases.iter().enumerate() {
        let path = d.join(format!("damaged-{index}.bin"));
        std::fs::write(&path, damaged).unwrap();
        steadycal()
            .args(["snapshot", "verify"])
            .arg(&path)
            .assert()
            .code(2)
            .stderr(predicate::str::contains(format!(
                "damaged-{index}.bin: {reason}"
            )));
    }
    steadycal()
        .args(["snapshot", "verify"])
        .arg(d.join("missing.bin"))
        .assert()
        .code(2)
        .stderr(predicate::str::contains("missing.bin: cannot read"));
}

#[test]
fn device_log_replays_like_its_csv_and_survives_a_torn_record() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let feed = feeds().join("turbidity-outliers.csv");
    let config = feeds().join("turbidity-outliers.monitor.toml");
    let log = d.join("board.log");
    steadycal()
        .arg("replay")
        .arg(&feed)
        .arg("--config")
        .arg(&config)
        .arg("--device-log-out")
        .arg(&log)
        .arg("--events")
        .arg(d.join("csv.jsonl"))
        .arg("--summary")
        .arg(d.join("csv.json"))
        .arg("-q")
        .assert()
        .success();
    steadycal()
        .arg("replay")
        .arg(&log)
        .arg("--config")
        .arg(&config)
        .arg("--events")
        .arg(d.join("log.jsonl"))
        .arg("--summary")
        .arg(d.join("log.json"))
        .arg("-q")
        .assert()
        .success();
    let csv = json(&d.join("csv.json"));
    let from_log = json(&d.join("log.json"));
    assert_eq!(from_log["input_format"], "device-log");
    assert_eq!(from_log["damaged_spans"], serde_json::json!([]));
    for key in [
        "samples", "checks", "rung", "params", "events", "alarms", "drift",
    ] {
        assert_eq!(csv[key], from_log[key], "{key}");
    }
    assert_eq!(
        std::fs::read_to_string(d.join("csv.jsonl")).unwrap(),
        std::fs::read_to_string(d.join("log.jsonl")).unwrap()
    );
    let events = std::fs::read_to_string(d.join("csv.jsonl"))
        .unwrap()
        .lines()
        .count();
    assert_eq!(from_log["logged_events"], events as u64);

    // Tear one record in the middle: drop the last 4 bytes of a frame's body.
    let bytes = std::fs::read(&log).unwrap();
    let end = bytes.len() / 2
        + bytes[bytes.len() / 2..]
            .iter()
            .position(|&b| b == 0)
            .unwrap();
    let start = bytes[..end].iter().rposition(|&b| b == 0).unwrap() + 1;
    let torn: Vec<u8> = [&bytes[..end - 4], &bytes[end..]].concat();
    let torn_path = d.join("torn.log");
    std::fs::write(&torn_path, &torn).unwrap();
    steadycal()
        .arg("replay")
        .arg(&torn_path)
        .arg("--config")
        .arg(&config)
        .arg("--summary")
        .arg(d.join("torn.json"))
        .arg("--human-summary")
        .assert()
        .success()
        .stderr(
            predicate::str::contains(format!(
                "torn.log: 1 damaged span(s) of {} bytes skipped (bytes {start}..{})",
                torn.len(),
                end - 4
            ))
            .and(predicate::str::contains(format!(
                "device log: 1 damaged span(s) skipped, bytes {start}..{}",
                end - 4
            ))),
        );
    let summary = json(&d.join("torn.json"));
    assert_eq!(
        summary["damaged_spans"],
        serde_json::json!([{"start": start, "end": end - 4}])
    );
    // One record lost: a sample or an event; every other record was replayed.
    let lost = from_log["records"].as_u64().unwrap() - summary["records"].as_u64().unwrap();
    assert_eq!(lost, 1);
    let samples_lost = from_log["samples"].as_u64().unwrap() - summary["samples"].as_u64().unwrap();
    let events_lost =
        from_log["logged_events"].as_u64().unwrap() - summary["logged_events"].as_u64().unwrap();
    assert_eq!(samples_lost + events_lost, 1);

    // Forcing CSV on a device log is refused as bad input, not a panic.
    steadycal()
        .arg("replay")
        .arg(&log)
        .args(["--input-format", "csv", "-q"])
        .assert()
        .code(2);
}
