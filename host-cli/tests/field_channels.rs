//! A wide file of many sensors joined to one reference log (`replay WIDE --raw-column
//! s1,s2,s3 --reference REF.csv`): each channel gets the checks, events, readings and
//! summary numbers of its sensor column alone joined to the same reference log.
//!
//! The scenario (invented, a demo): the three load cells of `many_sensors.rs` (cell A the
//! shipped demo feed `load-cell.csv`, cell B 1.1 × its raw value + 3, cell C with every
//! seventh reading lost, `NA`), logged without the reference; the reference load in a
//! log of its own, its clock 5 s behind.

mod common;

use std::path::{Path, PathBuf};

use common::{feeds, steadycal};
use serde_json::Value;

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("steadycal-chan-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn run(dir: &Path, name: &str, feed: &Path, extra: &[&str]) -> [String; 4] {
    let paths = ["summary.json", "events.jsonl", "readings.csv", "checks.csv"]
        .map(|f| dir.join(format!("{name}.{f}")));
    steadycal()
        .arg("replay")
        .arg(feed)
        .arg("--config")
        .arg(feeds().join("load-cell.monitor.toml"))
        .args(extra)
        .arg("--summary")
        .arg(&paths[0])
        .arg("--events")
        .arg(&paths[1])
        .arg("--readings")
        .arg(&paths[2])
        .arg("--checks")
        .arg(&paths[3])
        .arg("--quiet")
        .assert()
        .success();
    paths.map(|p| std::fs::read_to_string(p).unwrap())
}

/// `channel`'s lines of a shared output, the channel taken off.
fn share(text: &str, channel: &str, json_lines: bool) -> String {
    let mut out = String::new();
    let mut lines = text.lines();
    if !json_lines {
        out.push_str(lines.next().unwrap().strip_prefix("channel,").unwrap());
        out.push('\n');
    }
    for line in lines {
        let kept = if json_lines {
            line.strip_prefix(&format!("{{\"channel\":\"{channel}\","))
                .map(|l| format!("{{{l}"))
        } else {
            line.strip_prefix(&format!("{channel},"))
                .map(str::to_string)
        };
        if let Some(kept) = kept {
            out.push_str(&kept);
            out.push('\n');
        }
    }
    out
}

#[test]
fn a_wide_file_joined_to_one_reference_log_gives_each_channel_its_column_alone() {
    let dir = scratch("wide-ref");
    let text = std::fs::read_to_string(feeds().join("load-cell.csv")).unwrap();
    let mut wide = String::from("t,cell_a,cell_b,cell_c,temp\n");
    let mut alone = [0, 1, 2].map(|_| String::from("t,raw,temp\n"));
    let mut reference = String::from("t,load\n");
    for (i, line) in text.lines().skip(1).enumerate() {
        let c: Vec<&str> = line.split(',').collect();
        let (t, raw, load, temp) = (c[0], c[1], c[2], c[3]);
        let b = format!("{}", raw.parse::<f64>().unwrap() * 1.1 + 3.0);
        let cells = [
            raw.to_string(),
            b,
            if i % 7 == 3 {
                "NA".into()
            } else {
                raw.to_string()
            },
        ];
        wide.push_str(&format!(
            "{t},{},{},{},{temp}\n",
            cells[0], cells[1], cells[2]
        ));
        for (k, cell) in cells.iter().enumerate() {
            alone[k].push_str(&format!("{t},{cell},{temp}\n"));
        }
        if !load.is_empty() {
            let behind: f64 = t.parse::<f64>().unwrap() - 5.0;
            reference.push_str(&format!("{behind},{load}\n"));
        }
    }
    let (wide_path, reference_path) = (dir.join("platform.csv"), dir.join("reference.csv"));
    std::fs::write(&wide_path, wide).unwrap();
    std::fs::write(&reference_path, reference).unwrap();
    let join = [
        "--ref-column",
        "load",
        "--reference",
        reference_path.to_str().unwrap(),
        "--match-within",
        "10s",
        "--reference-offset",
        "5s",
    ];
    let mut args = vec!["--raw-column", "cell_a,cell_b,cell_c"];
    args.extend(join);
    let all = run(&dir, "wide", &wide_path, &args);
    let rows: Value = serde_json::from_str(&all[0]).unwrap();
    let mut checked = 0;
    for (k, name) in ["cell_a", "cell_b", "cell_c"].iter().enumerate() {
        let feed = dir.join(format!("{name}.csv"));
        std::fs::write(&feed, &alone[k]).unwrap();
        let one = run(&dir, name, &feed, &join);
        assert_eq!(share(&all[3], name, false), one[3], "checks of {name}");
        assert_eq!(share(&all[1], name, true), one[1], "events of {name}");
        assert_eq!(share(&all[2], name, false), one[2], "readings of {name}");
        let summary: Value = serde_json::from_str(&one[0]).unwrap();
        let row = rows
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r["channel"] == *name)
            .unwrap();
        assert_eq!(row["status"], "ok");
        for key in [
            "samples",
            "checks",
            "readings",
            "rung",
            "params",
            "events",
            "drift",
            "join",
            "missing_raw",
        ] {
            assert_eq!(row["summary"][key], summary[key], "{key} of {name}");
        }
        checked += summary["checks"].as_u64().unwrap();
        assert!(summary["join"]["paired"].as_u64().unwrap() > 0);
    }
    assert!(checked > 0);
}

/// A feed of 40 rows whose every tenth raw value and every fourth reference are the
/// logger's -200 ("no value").
fn marked_feed() -> String {
    let mut text = String::from("t,raw,ref\n");
    for i in 0..40 {
        let raw = if i % 10 == 7 {
            "-200".to_string()
        } else {
            format!("{}", 100 + i)
        };
        let reference = match i % 4 {
            0 => "-200".to_string(),
            2 => format!("{}", 100 + i),
            _ => String::new(),
        };
        text.push_str(&format!("{i},{raw},{reference}\n"));
    }
    text
}

#[test]
fn fleet_and_watch_take_missing_markers() {
    let dir = scratch("markers");
    let channels = dir.join("channels");
    std::fs::create_dir_all(&channels).unwrap();
    std::fs::write(channels.join("a.csv"), marked_feed()).unwrap();
    let json_path = dir.join("fleet.json");
    steadycal()
        .arg("fleet")
        .arg(&channels)
        .args([
            "--missing=-200",
            "--level-low",
            "1",
            "--level-high",
            "1000",
            "--quiet",
        ])
        .arg("--json")
        .arg(&json_path)
        .assert()
        .success();
    let rows: Value = serde_json::from_slice(&std::fs::read(&json_path).unwrap()).unwrap();
    // 40 rows, 4 raw values -200 (rows 7, 17, 27, 37): 36 samples; references on the 10
    // rows with i % 4 == 2 (all even, so none lost its raw value): 10 checks.
    assert_eq!(rows[0]["samples"], 36);
    assert_eq!(rows[0]["checks"], 10);
    let feed = dir.join("stream.csv");
    std::fs::write(&feed, marked_feed()).unwrap();
    let summary = dir.join("watch.summary.json");
    steadycal()
        .arg("watch")
        .arg(&feed)
        .args([
            "--missing=-200",
            "--level-low",
            "1",
            "--level-high",
            "1000",
            "--quiet",
            "--json",
        ])
        .arg("--summary")
        .arg(&summary)
        .assert()
        .success();
    let s: Value = serde_json::from_slice(&std::fs::read(&summary).unwrap()).unwrap();
    assert_eq!(s["samples"], 36);
    assert_eq!(s["missing_raw"], 4);
    assert_eq!(s["missing"]["ref"]["-200"], 10);
    let output = steadycal()
        .args([
            "watch",
            "--mqtt",
            "mqtt://localhost:1",
            "--topic",
            "a/+",
            "--missing=-200",
        ])
        .assert()
        .code(2)
        .get_output()
        .clone();
    assert!(String::from_utf8_lossy(&output.stderr)
        .contains("--missing applies to a CSV stream, not to --mqtt payloads"));
}
