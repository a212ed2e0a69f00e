//! Missing cells on every input path, end to end: the canonical CSV reader takes an empty
//! or `NA` raw cell as no sample (`missing_raw`) and an empty or `NA` reference as a
//! reading, with the same events, readings, checks and summary numbers as the same rows
//! given as Arrow nulls in a Parquet file; markers declared in a channel's configuration
//! (`columns.missing`) are never read as measurements by `fleet` or `watch`; a cell that
//! is not a number and not a declared marker stops the run naming it.
//!
//! The inputs are the shipped gas-cell demo feed with cells blanked by these tests
//! (invented data). The check values are the counts of the cells the tests blanked, and
//! the Parquet run of the same rows (the project's Arrow path: what is shown is that the
//! two inputs agree, not that either is right).

mod common;

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::{ArrayRef, Float64Array, RecordBatch};
use common::{feeds, steadycal};
use parquet::arrow::ArrowWriter;
use serde_json::Value;

fn json(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The gas-cell feed's rows as `(t, raw, ref)` texts.
fn gas_cell_rows() -> Vec<[String; 3]> {
    let text = std::fs::read_to_string(feeds().join("gas-cell.csv")).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("t,raw,ref"));
    lines
        .map(|line| {
            let cells: Vec<&str> = line.split(',').collect();
            [0, 1, 2].map(|i| cells[i].to_string())
        })
        .collect()
}

/// What the tests blank: every 97th raw cell empty, every 89th `NA` (when not already
/// blank), every 31st reference cell `NA`. Returns the counts of each.
fn blank(rows: &mut [[String; 3]]) -> (u64, u64, u64) {
    let (mut raw_empty, mut raw_na, mut ref_na) = (0, 0, 0);
    for (i, row) in rows.iter_mut().enumerate() {
        if i % 97 == 5 {
            row[1] = String::new();
            raw_empty += 1;
        } else if i % 89 == 7 {
            row[1] = "NA".into();
            raw_na += 1;
        }
        if i % 31 == 3 && !row[2].is_empty() {
            row[2] = "NA".into();
            ref_na += 1;
        }
    }
    (raw_empty, raw_na, ref_na)
}

fn write_csv(path: &Path, rows: &[[String; 3]]) {
    let mut text = String::from("t,raw,ref\n");
    for row in rows {
        text.push_str(&row.join(","));
        text.push('\n');
    }
    std::fs::write(path, text).unwrap();
}

/// The same rows as Parquet, every missing cell an Arrow null.
fn write_parquet(path: &Path, rows: &[[String; 3]]) {
    let column = |i: usize| -> ArrayRef {
        Arc::new(Float64Array::from(
            rows.iter()
                .map(|r| r[i].parse::<f64>().ok())
                .collect::<Vec<_>>(),
        ))
    };
    let batch =
        RecordBatch::try_from_iter([("t", column(0)), ("raw", column(1)), ("ref", column(2))])
            .unwrap();
    let mut writer =
        ArrowWriter::try_new(std::fs::File::create(path).unwrap(), batch.schema(), None).unwrap();
    writer.write(&batch).unwrap();
    writer.close().unwrap();
}

/// Replays `feed` with every output in `dir`; the outputs' texts.
fn outputs(feed: &Path, dir: &Path, precision: &str) -> [String; 4] {
    std::fs::create_dir_all(dir).unwrap();
    steadycal()
        .arg("replay")
        .arg(feed)
        .args(["--precision", precision, "--quiet"])
        .arg("--events")
        .arg(dir.join("events.jsonl"))
        .arg("--readings")
        .arg(dir.join("readings.csv"))
        .arg("--checks")
        .arg(dir.join("checks.csv"))
        .arg("--summary")
        .arg(dir.join("summary.json"))
        .assert()
        .success();
    ["events.jsonl", "readings.csv", "checks.csv", "summary.json"]
        .map(|name| std::fs::read_to_string(dir.join(name)).unwrap())
}

#[test]
fn empty_and_na_cells_of_a_csv_feed_are_missing_as_arrow_nulls_are() {
    let temp = tempfile::tempdir().unwrap();
    let mut rows = gas_cell_rows();
    let (raw_empty, raw_na, ref_na) = blank(&mut rows);
    assert!(raw_empty > 10 && raw_na > 10 && ref_na > 10);
    let empty_ref = rows.iter().filter(|r| r[2].is_empty()).count() as u64;
    let csv = temp.path().join("blanked.csv");
    let parquet = temp.path().join("blanked.parquet");
    write_csv(&csv, &rows);
    write_parquet(&parquet, &rows);
    for precision in ["f32", "f64"] {
        let from_csv = outputs(
            &csv,
            &temp.path().join(format!("csv-{precision}")),
            precision,
        );
        let from_parquet = outputs(
            &parquet,
            &temp.path().join(format!("parquet-{precision}")),
            precision,
        );
        for (i, what) in ["events", "readings", "checks"].iter().enumerate() {
            assert!(
                from_csv[i] == from_parquet[i],
                "{precision}: the {what} differ"
            );
        }
        let mut summary: Value = serde_json::from_str(&from_csv[3]).unwrap();
        assert_eq!(summary["missing_raw"], raw_empty + raw_na);
        assert_eq!(summary["missing"]["raw"][""], raw_empty);
        assert_eq!(summary["missing"]["raw"]["NA"], raw_na);
        assert_eq!(summary["missing"]["ref"]["NA"], ref_na);
        // Rows whose raw cell is missing count under `raw` only when their reference is
        // also empty: every empty reference cell is counted.
        assert_eq!(summary["missing"]["ref"][""], empty_ref);
        assert_eq!(
            summary["samples"],
            rows.len() as u64 - raw_empty - raw_na,
            "a missing raw cell is no sample"
        );
        let mut arrow: Value = serde_json::from_str(&from_parquet[3]).unwrap();
        assert_eq!(arrow["missing_raw"], summary["missing_raw"]);
        for map in [&mut summary, &mut arrow] {
            for key in ["feed", "input_format", "missing"] {
                map.as_object_mut().unwrap().remove(key);
            }
        }
        assert_eq!(summary, arrow, "{precision}: the summaries differ");
    }
}

/// A directory with one channel whose configuration declares `-200` as missing.
fn marked_channel(dir: &Path) -> (PathBuf, u64, u64) {
    let mut rows = gas_cell_rows();
    rows.truncate(3000);
    let (mut raw_marked, mut ref_marked) = (0, 0);
    for (i, row) in rows.iter_mut().enumerate() {
        if i % 50 == 9 {
            row[1] = "-200".into();
            raw_marked += 1;
        } else if i % 40 == 2 && !row[2].is_empty() {
            row[2] = "-200.0".into();
            ref_marked += 1;
        }
    }
    std::fs::create_dir_all(dir).unwrap();
    let feed = dir.join("cell-1.csv");
    write_csv(&feed, &rows);
    std::fs::write(
        dir.join("cell-1.monitor.toml"),
        "[columns]\nmissing = [\"-200\"]\n",
    )
    .unwrap();
    (feed, raw_marked, ref_marked)
}

#[test]
fn fleet_and_watch_never_read_a_configured_marker_as_a_measurement() {
    let temp = tempfile::tempdir().unwrap();
    let (feed, raw_marked, ref_marked) = marked_channel(&temp.path().join("fleet"));
    assert!(raw_marked > 10 && ref_marked > 10);
    let rows = 3000;
    let output = steadycal()
        .arg("fleet")
        .arg(temp.path().join("fleet"))
        .args(["--json", "-"])
        .output()
        .unwrap();
    assert!(output.status.success(), "{output:?}");
    let table: Value = serde_json::from_slice(&output.stdout).unwrap();
    assert_eq!(table[0]["samples"], rows - raw_marked);
    assert_eq!(table[0]["status"], "ok");

    let summary = temp.path().join("watch.summary.json");
    steadycal()
        .arg("watch")
        .arg(&feed)
        .arg("--config")
        .arg(feed.with_extension("monitor.toml"))
        .arg("--summary")
        .arg(&summary)
        .args(["--json", "--quiet"])
        .assert()
        .success();
    let summary = json(&summary);
    assert_eq!(summary["samples"], rows - raw_marked);
    assert_eq!(summary["missing_raw"], raw_marked);
    assert_eq!(summary["missing"]["raw"]["-200"], raw_marked);
    assert_eq!(summary["missing"]["ref"]["-200"], ref_marked);
    // The replay of the same feed and configuration (its field path) agrees.
    let replayed = temp.path().join("replay.summary.json");
    steadycal()
        .arg("replay")
        .arg(&feed)
        .arg("--config")
        .arg(feed.with_extension("monitor.toml"))
        .arg("--summary")
        .arg(&replayed)
        .arg("--quiet")
        .assert()
        .success();
    let replayed = json(&replayed);
    for key in ["samples", "checks", "missing_raw"] {
        assert_eq!(summary[key], replayed[key], "{key}");
    }
    assert_eq!(replayed["missing"]["ref"]["-200"], ref_marked);
}

#[test]
fn an_undeclared_marker_stops_the_canonical_reader_naming_it() {
    let temp = tempfile::tempdir().unwrap();
    let feed = temp.path().join("feed.csv");
    std::fs::write(&feed, "t,raw,ref\n0,1,NA\n1,,2\n2,N/A,3\n").unwrap();
    let output = steadycal()
        .arg("replay")
        .arg(&feed)
        .arg("--summary")
        .arg(temp.path().join("s.json"))
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        stderr.contains(&format!(
            "{}:4:2: column `raw`: expected a number (nan and inf are accepted as data), found \"N/A\"",
            feed.display()
        )),
        "{stderr}"
    );
    // The rows before it were replayed: one sample (line 3 has no raw value).
    let summary = json(&temp.path().join("s.json"));
    assert_eq!(summary["samples"], 1);
    assert_eq!(summary["missing_raw"], 1);
}
