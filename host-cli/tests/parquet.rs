//! Parquet feeds end to end: every shipped scenario written as Parquet by this test (with
//! the `parquet` crate, to a temporary directory) replays to exactly the CSV run's
//! summary, event lines, readings and checks, in f32 and f64; `fleet` reads Parquet files;
//! nulls and declared markers are missing cells; a wrong column name and a column of text
//! are refused naming the file and the column.
//!
//! The check values are the CSV runs of the same rows (the project's own canonical path:
//! these tests show the two inputs agree, not that either is right; the scenario tests do
//! that against the ground truth).

mod common;

use std::path::{Path, PathBuf};
use std::sync::Arc;

use arrow::array::{ArrayRef, Float64Array, RecordBatch, StringArray, TimestampMillisecondArray};
use arrow::datatypes::{DataType, Field, Schema};
use common::{feeds, steadycal};
use parquet::arrow::ArrowWriter;
use parquet::basic::Compression;
use parquet::file::properties::WriterProperties;
use serde_json::Value;

/// The CSV feed's columns as Arrow arrays: numbers as `Float64` (empty cells as nulls);
/// an RFC 3339 time column as a millisecond timestamp.
fn csv_to_batch(path: &Path) -> RecordBatch {
    let mut reader = csv::Reader::from_path(path).unwrap();
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.unwrap()).collect();
    let mut columns: Vec<(String, ArrayRef)> = Vec::new();
    for (i, name) in header.iter().enumerate() {
        let cells: Vec<&str> = rows.iter().map(|r| r.get(i).unwrap().trim()).collect();
        let numbers: Option<Vec<Option<f64>>> = cells
            .iter()
            .map(|c| match *c {
                "" => Some(None),
                text => text.parse::<f64>().ok().map(Some),
            })
            .collect();
        let array: ArrayRef = match numbers {
            Some(numbers) => Arc::new(Float64Array::from(numbers)),
            None => {
                let millis: Vec<i64> = cells
                    .iter()
                    .map(|c| {
                        let seconds = steadycal_cli::feed::parse_rfc3339(c.as_bytes())
                            .unwrap_or_else(|| panic!("{}: {name}: {c:?}", path.display()));
                        (seconds * 1000.0).round() as i64
                    })
                    .collect();
                Arc::new(TimestampMillisecondArray::from(millis).with_timezone("UTC"))
            }
        };
        columns.push((name.clone(), array));
    }
    RecordBatch::try_from_iter(columns).unwrap()
}

/// Writes `batch` as Parquet in row groups of `group` rows.
fn write_parquet(batch: &RecordBatch, path: &Path, group: usize, compression: Compression) {
    let properties = WriterProperties::builder()
        .set_max_row_group_row_count(Some(group))
        .set_compression(compression)
        .build();
    let file = std::fs::File::create(path).unwrap();
    let mut writer = ArrowWriter::try_new(file, batch.schema(), Some(properties)).unwrap();
    writer.write(batch).unwrap();
    writer.close().unwrap();
}

/// The shipped CSV feeds.
fn csv_feeds() -> Vec<PathBuf> {
    let mut list: Vec<PathBuf> = std::fs::read_dir(feeds())
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "csv"))
        .collect();
    list.sort();
    list
}

/// Runs `replay` on `feed` with every output into `dir`; returns the outputs' texts.
fn outputs(feed: &Path, dir: &Path, precision: &str, config: Option<&Path>) -> [String; 4] {
    std::fs::create_dir_all(dir).unwrap();
    let mut command = steadycal();
    command
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
        .arg(dir.join("summary.json"));
    if let Some(config) = config {
        command.arg("--config").arg(config);
    }
    command.assert().success();
    ["events.jsonl", "readings.csv", "checks.csv", "summary.json"]
        .map(|name| std::fs::read_to_string(dir.join(name)).unwrap())
}

/// The summary without the entries that name the input (`feed`, `input_format`) and the
/// columnar source's own counts of missing cells (`missing_raw`, `missing`).
fn comparable(summary: &str) -> Value {
    let mut value: Value = serde_json::from_str(summary).unwrap();
    let map = value.as_object_mut().unwrap();
    for key in ["feed", "file", "input_format", "missing_raw", "missing"] {
        map.remove(key);
    }
    value
}

#[test]
fn every_scenario_as_parquet_replays_to_the_csv_results() {
    let temp = tempfile::tempdir().unwrap();
    let feeds = csv_feeds();
    assert!(feeds.len() >= 9, "the shipped scenarios");
    for (n, csv) in feeds.iter().enumerate() {
        let name = csv.file_stem().unwrap().to_string_lossy().into_owned();
        let parquet = temp.path().join(format!("{name}.parquet"));
        // Row groups of a few thousand rows, so a feed spans several; half the files
        // Snappy-compressed, as most writers do by default.
        let compression = if n % 2 == 0 {
            Compression::SNAPPY
        } else {
            Compression::UNCOMPRESSED
        };
        write_parquet(&csv_to_batch(csv), &parquet, 3000, compression);
        let config = csv.with_extension("monitor.toml");
        let config = config.is_file().then_some(config.as_path());
        for precision in ["f32", "f64"] {
            let from_csv = outputs(
                csv,
                &temp.path().join(format!("{name}-{precision}-csv")),
                precision,
                config,
            );
            let from_parquet = outputs(
                &parquet,
                &temp.path().join(format!("{name}-{precision}-parquet")),
                precision,
                config,
            );
            for (i, what) in ["events", "readings", "checks"].iter().enumerate() {
                assert!(
                    from_csv[i] == from_parquet[i],
                    "{name} ({precision}): the {what} differ"
                );
            }
            assert!(
                !from_csv[0].is_empty() || name == "gas-cell",
                "{name}: events"
            );
            assert_eq!(
                comparable(&from_csv[3]),
                comparable(&from_parquet[3]),
                "{name} ({precision}): the summaries differ"
            );
            let summary: Value = serde_json::from_str(&from_parquet[3]).unwrap();
            assert_eq!(summary["input_format"], "parquet");
            assert_eq!(summary["missing_raw"], 0);
        }
    }
}

#[test]
fn fleet_reads_parquet_files_as_it_reads_csv_files() {
    let temp = tempfile::tempdir().unwrap();
    let (csv_dir, parquet_dir) = (temp.path().join("csv"), temp.path().join("parquet"));
    std::fs::create_dir_all(&csv_dir).unwrap();
    std::fs::create_dir_all(&parquet_dir).unwrap();
    for name in ["load-cell", "pressure-stuck", "photon-counter"] {
        let csv = feeds().join(format!("{name}.csv"));
        std::fs::copy(&csv, csv_dir.join(format!("{name}.csv"))).unwrap();
        write_parquet(
            &csv_to_batch(&csv),
            &parquet_dir.join(format!("{name}.parquet")),
            5000,
            Compression::SNAPPY,
        );
        for dir in [&csv_dir, &parquet_dir] {
            std::fs::copy(
                feeds().join(format!("{name}.monitor.toml")),
                dir.join(format!("{name}.monitor.toml")),
            )
            .unwrap();
        }
    }
    let table = |dir: &Path| -> Vec<Value> {
        let out = steadycal()
            .arg("fleet")
            .arg(dir)
            .args(["--json", "-", "--jobs", "2"])
            .output()
            .unwrap();
        let rows: Value = serde_json::from_slice(&out.stdout).unwrap();
        rows.as_array()
            .unwrap()
            .iter()
            .map(|row| {
                let mut row = row.clone();
                row.as_object_mut().unwrap().remove("file");
                row
            })
            .collect()
    };
    let (from_csv, from_parquet) = (table(&csv_dir), table(&parquet_dir));
    assert_eq!(from_csv.len(), 3);
    assert_eq!(from_csv, from_parquet);
}

/// A small feed with a null and a declared marker in `raw` and in `ref`.
fn feed_with_gaps(dir: &Path) -> (PathBuf, PathBuf) {
    let csv = "t,raw,ref\n0,10,10\n1,,20\n2,-9999,30\n3,40,-9999\n4,50,\n5,60,60\n";
    let csv_path = dir.join("gaps.csv");
    std::fs::write(&csv_path, csv).unwrap();
    let batch = RecordBatch::try_from_iter(vec![
        (
            "t",
            Arc::new(Float64Array::from(vec![0.0, 1.0, 2.0, 3.0, 4.0, 5.0])) as ArrayRef,
        ),
        (
            "raw",
            Arc::new(Float64Array::from(vec![
                Some(10.0),
                None,
                Some(-9999.0),
                Some(40.0),
                Some(50.0),
                Some(60.0),
            ])),
        ),
        (
            "ref",
            Arc::new(Float64Array::from(vec![
                Some(10.0),
                Some(20.0),
                Some(30.0),
                Some(-9999.0),
                None,
                Some(60.0),
            ])),
        ),
    ])
    .unwrap();
    let parquet_path = dir.join("gaps.parquet");
    write_parquet(&batch, &parquet_path, 4, Compression::UNCOMPRESSED);
    (csv_path, parquet_path)
}

#[test]
fn nulls_and_declared_markers_are_missing_cells() {
    let temp = tempfile::tempdir().unwrap();
    let (_, parquet) = feed_with_gaps(temp.path());
    let out = steadycal()
        .arg("replay")
        .arg(&parquet)
        .args(["--missing=-9999", "--summary", "-", "--quiet"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let summary: Value = serde_json::from_slice(&out.stdout).unwrap();
    // Six rows: two without a raw value (no sample), four samples, two of them checks
    // (rows 0 and 5), rows 3 and 4 readings.
    assert_eq!(summary["missing_raw"], 2);
    assert_eq!(summary["samples"], 4);
    assert_eq!(summary["checks"], 2);
    assert_eq!(summary["missing"]["raw"]["null"], 1);
    assert_eq!(summary["missing"]["raw"]["-9999"], 1);
    assert_eq!(summary["missing"]["ref"]["null"], 1);
    assert_eq!(summary["missing"]["ref"]["-9999"], 1);
    // Undeclared, -9999 is a value: a raw sample and a reference.
    let out = steadycal()
        .arg("replay")
        .arg(&parquet)
        .args(["--summary", "-", "--quiet"])
        .output()
        .unwrap();
    let summary: Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(summary["missing_raw"], 1);
    assert_eq!(summary["samples"], 5);
}

#[test]
fn a_wrong_column_name_and_a_column_of_text_are_refused_by_name() {
    let temp = tempfile::tempdir().unwrap();
    let (_, parquet) = feed_with_gaps(temp.path());
    steadycal()
        .arg("replay")
        .arg(&parquet)
        .args(["--raw-column", "counts"])
        .assert()
        .code(2)
        .stderr(predicates::str::contains(format!(
            "{}: no column `counts`, expected one (found: t, raw, ref)",
            parquet.display()
        )));
    let text = temp.path().join("text.parquet");
    let schema = Arc::new(Schema::new(vec![
        Field::new("t", DataType::Float64, false),
        Field::new("raw", DataType::Float64, false),
        Field::new("ref", DataType::Utf8, true),
    ]));
    let batch = RecordBatch::try_new(
        schema,
        vec![
            Arc::new(Float64Array::from(vec![0.0, 1.0])),
            Arc::new(Float64Array::from(vec![1.0, 2.0])),
            Arc::new(StringArray::from(vec![Some("1.0"), Some("high")])),
        ],
    )
    .unwrap();
    write_parquet(&batch, &text, 10, Compression::SNAPPY);
    steadycal()
        .arg("replay")
        .arg(&text)
        .assert()
        .code(2)
        .stderr(predicates::str::contains(format!(
            "{}: column `ref` holds Utf8, expected numbers (an integer or floating-point type)",
            text.display()
        )));
}

#[test]
fn a_damaged_parquet_file_is_an_error_naming_it() {
    let temp = tempfile::tempdir().unwrap();
    let (_, parquet) = feed_with_gaps(temp.path());
    let bytes = std::fs::read(&parquet).unwrap();
    let cut = temp.path().join("cut.parquet");
    std::fs::write(&cut, &bytes[..bytes.len() / 2]).unwrap();
    steadycal()
        .arg("replay")
        .arg(&cut)
        .assert()
        .code(2)
        .stderr(predicates::str::contains(format!(
            "{}: not a readable Parquet file",
            cut.display()
        )));
}
