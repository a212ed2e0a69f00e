//! Many sensors in one file: a wide file (one sensor column per channel) and a long file (a
//! channel column), each channel's results equal to its data alone in a canonical feed
//! (same events, readings, checks and summary numbers); a channel that cannot be read
//! stops alone and the run exits 2 after the others; rows with no sensor value; `fleet`'s
//! exit when one feed cannot be read.
//!
//! The scenario (invented, a demo): three load cells under one platform, weighed against
//! one reference load: cell A is the shipped demo feed `load-cell.csv`, cell B reads 1.1 ×
//! the load + 3 (another gain and offset), cell C is cell A with every seventh reading lost
//! by its logger (`NA`).

mod common;

use std::path::{Path, PathBuf};

use common::{feeds, steadycal};
use serde_json::Value;

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("steadycal-many-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn json(path: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

fn config() -> PathBuf {
    feeds().join("load-cell.monitor.toml")
}

/// The demo feed as rows of (t, raw, ref, temp) cell texts.
fn load_cell_rows() -> Vec<[String; 4]> {
    let text = std::fs::read_to_string(feeds().join("load-cell.csv")).unwrap();
    text.lines()
        .skip(1)
        .map(|line| {
            let c: Vec<&str> = line.split(',').collect();
            [c[0].into(), c[1].into(), c[2].into(), c[3].into()]
        })
        .collect()
}

/// The three cells' readings of row `i` (`None`: the logger lost it).
fn cells(i: usize, raw: &str) -> [Option<String>; 3] {
    let b = raw.parse::<f64>().unwrap() * 1.1 + 3.0;
    [
        Some(raw.to_string()),
        Some(format!("{b}")),
        (i % 7 != 3).then(|| raw.to_string()),
    ]
}

fn summary_numbers(summary: &Value) -> Vec<(String, Value)> {
    [
        "samples",
        "checks",
        "readings",
        "rejected",
        "rung",
        "params",
        "events",
        "spread_exponent",
        "spread_exponent_se",
        "drift",
        "detectors",
        "first_t",
        "last_t",
        "time_order",
    ]
    .iter()
    .map(|k| (k.to_string(), summary[k].clone()))
    .collect()
}

/// The outputs of one run: summary, events, readings, checks.
struct Outputs {
    summary: Value,
    events: String,
    readings: String,
    checks: String,
}

fn output_args(dir: &Path, name: &str) -> Vec<PathBuf> {
    ["summary.json", "events.jsonl", "readings.csv", "checks.csv"]
        .iter()
        .map(|f| dir.join(format!("{name}.{f}")))
        .collect()
}

fn replay(dir: &Path, name: &str, feed: &Path, extra: &[&str]) -> assert_cmd::assert::Assert {
    let paths = output_args(dir, name);
    steadycal()
        .arg("replay")
        .arg(feed)
        .arg("--config")
        .arg(config())
        .args(extra)
        .arg("--summary")
        .arg(&paths[0])
        .arg("--events")
        .arg(&paths[1])
        .arg("--readings")
        .arg(&paths[2])
        .arg("--checks")
        .arg(&paths[3])
        .assert()
}

fn outputs(dir: &Path, name: &str) -> Outputs {
    let paths = output_args(dir, name);
    let text = |p: &Path| std::fs::read_to_string(p).unwrap();
    Outputs {
        summary: json(&paths[0]),
        events: text(&paths[1]),
        readings: text(&paths[2]),
        checks: text(&paths[3]),
    }
}

/// One channel's share of the shared outputs, the channel taken off: event lines without
/// `"channel":NAME,`, CSV rows without the first cell (the header as the canonical one).
fn channel_share(all: &Outputs, channel: &str) -> (String, String, String) {
    let prefix = format!("{{\"channel\":\"{channel}\",");
    let events: String = all
        .events
        .lines()
        .filter_map(|l| l.strip_prefix(&prefix))
        .map(|l| format!("{{{l}\n"))
        .collect();
    let csv = |text: &str| -> String {
        let mut lines = text.lines();
        let header = lines.next().unwrap().strip_prefix("channel,").unwrap();
        let mut out = format!("{header}\n");
        for line in lines.filter_map(|l| l.strip_prefix(&format!("{channel},"))) {
            out.push_str(line);
            out.push('\n');
        }
        out
    };
    (events, csv(&all.readings), csv(&all.checks))
}

/// Asserts that `channel`'s results in the run `all` equal the canonical run `alone`.
fn assert_same(all: &Outputs, channel: &str, alone: &Outputs) {
    let (events, readings, checks) = channel_share(all, channel);
    assert!(!alone.events.is_empty());
    assert_eq!(events, alone.events, "events of {channel}");
    assert_eq!(readings, alone.readings, "readings of {channel}");
    assert_eq!(checks, alone.checks, "checks of {channel}");
    let list = all.summary.as_array().unwrap();
    let row = list.iter().find(|r| r["channel"] == channel).unwrap();
    assert_eq!(row["status"], "ok");
    assert_eq!(
        summary_numbers(&row["summary"]),
        summary_numbers(&alone.summary),
        "summary of {channel}"
    );
    // The row is fleet's row of that summary.
    assert_eq!(row["samples"], alone.summary["samples"]);
    assert_eq!(row["gain"], alone.summary["params"]["gain"]);
}

/// One sensor's row: t, raw (`None`: lost), ref, temp.
type Row = (String, Option<String>, String, String);

/// Writes a canonical feed (t, raw, ref, temp); a lost reading is an empty raw cell (the
/// row keeps its data-row index, the `seq` of the samples after it).
fn write_canonical(path: &Path, rows: &[Row]) {
    let mut text = String::from("t,raw,ref,temp\n");
    for (t, raw, reference, temp) in rows {
        let raw = raw.as_deref().unwrap_or("");
        text.push_str(&format!("{t},{raw},{reference},{temp}\n"));
    }
    std::fs::write(path, text).unwrap();
}

#[test]
fn a_wide_file_of_three_cells_gives_each_cell_its_own_results() {
    let dir = scratch("wide");
    let rows = load_cell_rows();
    let mut wide = String::from("t,cell_a,cell_b,cell_c,load,temp\n");
    let mut alone: [Vec<Row>; 3] = Default::default();
    for (i, [t, raw, reference, temp]) in rows.iter().enumerate() {
        let c = cells(i, raw);
        let text = |v: &Option<String>| v.clone().unwrap_or_else(|| "NA".into());
        wide.push_str(&format!(
            "{t},{},{},{},{reference},{temp}\n",
            text(&c[0]),
            text(&c[1]),
            text(&c[2])
        ));
        for (k, value) in c.into_iter().enumerate() {
            alone[k].push((t.clone(), value, reference.clone(), temp.clone()));
        }
    }
    let feed = dir.join("platform.csv");
    std::fs::write(&feed, wide).unwrap();
    replay(
        &dir,
        "wide",
        &feed,
        &[
            "--raw-column",
            "cell_a,cell_b,cell_c",
            "--ref-column",
            "load",
        ],
    )
    .success();
    let all = outputs(&dir, "wide");
    let names = ["cell_a", "cell_b", "cell_c"];
    let order: Vec<&str> = all
        .summary
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["channel"].as_str().unwrap())
        .collect();
    assert_eq!(order, names);
    for (k, name) in names.iter().enumerate() {
        let feed = dir.join(format!("{name}.csv"));
        write_canonical(&feed, &alone[k]);
        replay(&dir, name, &feed, &[]).success();
        assert_same(&all, name, &outputs(&dir, name));
    }
    // Cell C's lost readings: every seventh row, counted as missing raw values.
    let lost = (0..rows.len()).filter(|i| i % 7 == 3).count() as u64;
    let c = &all.summary[2]["summary"];
    assert_eq!(c["missing_raw"], lost);
    assert_eq!(c["missing"]["cell_c"]["NA"], lost);
}

#[test]
fn a_long_file_gives_each_channel_its_own_results() {
    let dir = scratch("long");
    let rows = load_cell_rows();
    let mut long = String::from("t,cell,raw,load,temp\n");
    let mut alone: [Vec<Row>; 2] = Default::default();
    for (i, [t, raw, reference, temp]) in rows.iter().enumerate() {
        let c = cells(i, raw);
        // Cell B reports first, cell A after it, on every row.
        for (k, name) in [(1, "B"), (0, "A")] {
            let value = c[k].clone().unwrap();
            long.push_str(&format!("{t},{name},{value},{reference},{temp}\n"));
            alone[k].push((t.clone(), Some(value), reference.clone(), temp.clone()));
        }
    }
    let feed = dir.join("platform-long.csv");
    std::fs::write(&feed, long).unwrap();
    replay(
        &dir,
        "long",
        &feed,
        &["--channel-column", "cell", "--ref-column", "load"],
    )
    .success();
    let all = outputs(&dir, "long");
    let order: Vec<&str> = all
        .summary
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["channel"].as_str().unwrap())
        .collect();
    assert_eq!(order, ["B", "A"], "order of first appearance");
    for (k, name) in [(0, "A"), (1, "B")] {
        let feed = dir.join(format!("{name}.csv"));
        write_canonical(&feed, &alone[k]);
        replay(&dir, name, &feed, &[]).success();
        assert_same(&all, name, &outputs(&dir, name));
    }
}

/// A small wide file of three cells (rows of `t, a, b, c, ref`).
fn small_wide(dir: &Path, body: &str) -> PathBuf {
    let feed = dir.join("small.csv");
    std::fs::write(&feed, format!("t,a,b,c,ref\n{body}")).unwrap();
    feed
}

fn small_body(rows: usize, mut cell: impl FnMut(usize, usize) -> String) -> String {
    let mut body = String::new();
    for i in 0..rows {
        let load = 50.0 + (i % 20) as f64 * 10.0;
        let reference = if i % 5 == 0 {
            format!("{load}")
        } else {
            String::new()
        };
        body.push_str(&format!(
            "{i},{},{},{},{reference}\n",
            cell(0, i),
            cell(1, i),
            cell(2, i)
        ));
    }
    body
}

fn reading(k: usize, i: usize) -> String {
    let load = 50.0 + (i % 20) as f64 * 10.0;
    format!(
        "{}",
        load * (1.0 + 0.05 * k as f64) + ((i * 7919) % 13) as f64 * 0.1
    )
}

#[test]
fn a_channel_that_cannot_be_read_stops_alone_and_the_run_exits_2() {
    let dir = scratch("bad-channel");
    // Cell b has a cell that is no number on line 42 (data row 40); cell d is not in the
    // file at all.
    let body = small_body(300, |k, i| {
        if k == 1 && i == 40 {
            "about 12".into()
        } else {
            reading(k, i)
        }
    });
    let feed = small_wide(&dir, &body);
    let output = replay(&dir, "bad", &feed, &["--raw-column", "a,b,c,d", "--quiet"])
        .code(2)
        .get_output()
        .clone();
    let stderr = String::from_utf8(output.stderr).unwrap();
    let file = feed.display();
    assert_eq!(
        stderr,
        format!(
            "steadycal: channel b: {file}:42:3: column `b`: expected a number or a missing marker (\"\", \"NA\"), found \"about 12\"\n\
             steadycal: channel d: {file}:1: no `d` column in the header, expected one (found: t, a, b, c, ref)\n"
        )
    );
    let all = outputs(&dir, "bad");
    let list = all.summary.as_array().unwrap();
    let status: Vec<(&str, &str, u64)> = list
        .iter()
        .map(|r| {
            (
                r["channel"].as_str().unwrap(),
                r["status"].as_str().unwrap(),
                r["samples"].as_u64().unwrap(),
            )
        })
        .collect();
    assert_eq!(status[0], ("a", "ok", 300));
    assert_eq!((status[1].0, status[1].2), ("b", 40));
    assert!(status[1].1.contains(":42:3: column `b`"));
    assert_eq!(status[2], ("c", "ok", 300));
    assert_eq!(status[3].0, "d");
    // Cell b's rows before the bad cell were written; a and c ran to the end.
    let (_, readings, _) = channel_share(&all, "b");
    assert_eq!(
        readings.lines().count() - 1,
        32,
        "readings of rows 0..40 without a check"
    );
    let (_, readings, _) = channel_share(&all, "c");
    assert_eq!(readings.lines().count() - 1, 240);
}

#[test]
fn rows_without_any_sensor_value_are_counted_and_named() {
    let dir = scratch("no-sensor");
    // Rows 10 (with a reference) and 11 (without) have no value in any sensor column:
    // NA, an empty cell, the declared marker -9999.
    let body = small_body(200, |k, i| match (i, k) {
        (10 | 11, 0) => "NA".into(),
        (10 | 11, 1) => String::new(),
        (10 | 11, 2) => "-9999".into(),
        _ => reading(k, i),
    });
    let feed = small_wide(&dir, &body);
    let output = replay(
        &dir,
        "gap",
        &feed,
        &["--raw-column", "a,b,c", "--missing=-9999"],
    )
    .success()
    .get_output()
    .clone();
    let stderr = String::from_utf8(output.stderr).unwrap();
    assert!(
        stderr.contains(&format!(
            "steadycal: warning: {}: 2 rows have no value in any sensor column (a, b, c): lines 12, 13; no channel took a sample from them, 1 of them with a reference value",
            feed.display()
        )),
        "{stderr}"
    );
    let all = outputs(&dir, "gap");
    for row in all.summary.as_array().unwrap() {
        let s = &row["summary"];
        assert_eq!(row["status"], "ok");
        assert_eq!(s["samples"], 198);
        assert_eq!(s["missing_raw"], 2);
        assert_eq!(s["rows_without_sensor_value"]["rows"], 2);
        assert_eq!(s["rows_without_sensor_value"]["with_reference"], 1);
        assert_eq!(
            s["rows_without_sensor_value"]["lines"],
            serde_json::json!([12, 13])
        );
    }
    // Rows before and after the gap were written for every channel.
    for channel in ["a", "b", "c"] {
        let (_, readings, _) = channel_share(&all, channel);
        assert_eq!(readings.lines().count() - 1, 159, "readings of {channel}");
    }
}

#[test]
fn fleet_exits_2_when_one_feed_cannot_be_read_after_writing_the_others() {
    let dir = scratch("fleet");
    let channels = dir.join("channels");
    std::fs::create_dir_all(&channels).unwrap();
    let rows = load_cell_rows();
    let mut good = String::from("t,raw,ref,temp\n");
    for [t, raw, reference, temp] in &rows[..3000] {
        good.push_str(&format!("{t},{raw},{reference},{temp}\n"));
    }
    std::fs::write(channels.join("a-good.csv"), &good).unwrap();
    std::fs::write(channels.join("b-unreadable.csv"), "time,volts\n0,1.5\n").unwrap();
    std::fs::write(channels.join("c-good.csv"), &good).unwrap();
    let (csv, json_path) = (dir.join("fleet.csv"), dir.join("fleet.json"));
    let output = steadycal()
        .arg("fleet")
        .arg(&channels)
        .arg("--csv")
        .arg(&csv)
        .arg("--json")
        .arg(&json_path)
        .arg("--quiet")
        .assert()
        .code(2)
        .get_output()
        .clone();
    let unreadable = channels.join("b-unreadable.csv");
    assert_eq!(
        String::from_utf8(output.stderr).unwrap(),
        format!(
            "steadycal: b-unreadable.csv: {}:1: no `raw` column in the header, expected one (found: time, volts)\n",
            unreadable.display()
        )
    );
    let list = json(&json_path);
    let status: Vec<(&str, &str)> = list
        .as_array()
        .unwrap()
        .iter()
        .map(|r| (r["file"].as_str().unwrap(), r["status"].as_str().unwrap()))
        .collect();
    assert_eq!(status[0], ("a-good.csv", "ok"));
    assert_eq!(status[2], ("c-good.csv", "ok"));
    assert_eq!(list[0]["samples"], 3000);
    assert_eq!(list[2]["samples"], 3000);
    assert!(list[0].get("channel").is_none() && list[0].get("summary").is_none());
    let table = std::fs::read_to_string(&csv).unwrap();
    assert_eq!(table.lines().count(), 4);
    assert!(table.starts_with("file,samples,checks,"));
}

#[test]
fn options_about_one_channel_are_refused_by_name() {
    let dir = scratch("refused");
    let feed = small_wide(&dir, &small_body(30, reading));
    let failure = |args: &[&str]| -> String {
        let output = steadycal()
            .arg("replay")
            .args(args)
            .assert()
            .code(2)
            .get_output()
            .clone();
        String::from_utf8(output.stderr).unwrap()
    };
    let feed = feed.to_str().unwrap();
    assert_eq!(
        failure(&[feed, "--raw-column", "a,b", "--report", "r.html"]),
        "steadycal: --report is about one channel; a file of many sensors runs one monitor per channel (replay one channel's column alone to use --report)\n"
    );
    assert_eq!(
        failure(&["-", "--raw-column", "a,b"]),
        "steadycal: -: a file of many sensors is read once per channel: give a file, not standard input\n"
    );
    assert_eq!(
        failure(&[feed, "--raw-column", "a,b", "--channel-column", "id"]),
        "steadycal: --channel-column: give either several sensor columns (--raw-column s1,s2: a wide file) or a channel column (a long file), not both\n"
    );
}
