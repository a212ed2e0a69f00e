//! Field data as it comes: a logger's own format, a sensor log and a reference log joined
//! by time, a public real co-location data set replayed with options only, the bad inputs
//! of issue 16 with their messages, and a closed output pipe.
//!
//! The logger-format and two-file fixtures are written by the tests from the shipped demo
//! feed `load-cell.csv` (an invented scenario); their results must equal the canonical
//! feed's (same events, same summary numbers). The real data set is two weeks of the UCI
//! "Air Quality" data set (De Vito et al., CC BY 4.0; `tests/data/air-quality/SOURCE.md`).

mod common;

use std::path::{Path, PathBuf};

use common::{feeds, root, steadycal};
use serde_json::Value;

fn scratch(name: &str) -> PathBuf {
    let dir = std::env::temp_dir().join(format!("steadycal-field-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}

fn json(path: &Path) -> Value {
    serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap()
}

/// The canonical demo feed as rows of (t, raw, ref, temp) cell texts.
fn load_cell_rows() -> Vec<[String; 4]> {
    let text = std::fs::read_to_string(feeds().join("load-cell.csv")).unwrap();
    text.lines()
        .skip(1)
        .map(|line| {
            let cells: Vec<&str> = line.split(',').collect();
            [
                cells[0].to_string(),
                cells[1].to_string(),
                cells[2].to_string(),
                cells[3].to_string(),
            ]
        })
        .collect()
}

/// 2026-03-01T00:00:00+01:00 (Europe/Rome in winter) = 1,772,319,600 s after the epoch
/// (1,772,323,200 for 00:00Z, computed with Python 3 datetime, minus one hour).
const START: i64 = 1_772_319_600;

/// Local date and time in Europe/Rome (CET, +01:00: the demo week is before the March
/// change) of `START + seconds`, as `DD/MM/YYYY` and `HH.MM.SS`.
fn rome_local(seconds: i64) -> (String, String) {
    let local = START + seconds + 3600;
    let days = local.div_euclid(86_400);
    let rest = local.rem_euclid(86_400);
    // Civil date from days since 1970-01-01 (H. Hinnant's days_from_civil inverse, from
    // memory).
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z - era * 146_097;
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let day = doy - (153 * mp + 2) / 5 + 1;
    let month = if mp < 10 { mp + 3 } else { mp - 9 };
    let year = yoe + era * 400 + i64::from(month <= 2);
    (
        format!("{day:02}/{month:02}/{year}"),
        format!("{:02}.{:02}.{:02}", rest / 3600, rest / 60 % 60, rest % 60),
    )
}

/// The canonical feed with its times moved to START (what the logger's rows mean).
fn write_canonical(dir: &Path, rows: &[[String; 4]]) -> PathBuf {
    let mut text = String::from("t,raw,ref,temp\n");
    for [t, raw, reference, temp] in rows {
        let t: i64 = t.parse().unwrap();
        text.push_str(&format!("{},{raw},{reference},{temp}\n", START + t));
    }
    let path = dir.join("canonical.csv");
    std::fs::write(&path, text).unwrap();
    path
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
        "drift",
        "first_t",
        "last_t",
        "time_order",
    ]
    .iter()
    .map(|k| (k.to_string(), summary[k].clone()))
    .collect()
}

fn run_canonical(dir: &Path, feed: &Path) -> (Value, Vec<u8>) {
    let (summary, events) = (
        dir.join("canonical.summary.json"),
        dir.join("canonical.events.jsonl"),
    );
    steadycal()
        .arg("replay")
        .arg(feed)
        .arg("--config")
        .arg(feeds().join("load-cell.monitor.toml"))
        .arg("--summary")
        .arg(&summary)
        .arg("--events")
        .arg(&events)
        .assert()
        .success();
    (json(&summary), std::fs::read(&events).unwrap())
}

#[test]
fn a_logger_file_gives_the_results_of_the_canonical_feed() {
    let dir = scratch("logger");
    let rows = load_cell_rows();
    let canonical = write_canonical(&dir, &rows);
    // The logger writes `;`, decimal commas, the local date and time in two columns,
    // -9999 where the reference has no value, and a trailing empty column.
    let mut text = String::from("Datum;Zeit;Kraft;Last;Temperatur;\r\n");
    for [t, raw, reference, temp] in &rows {
        let (date, time) = rome_local(t.parse().unwrap());
        let reference = if reference.is_empty() {
            "-9999".to_string()
        } else {
            reference.clone()
        };
        let comma = |s: &str| s.replace('.', ",");
        text.push_str(&format!(
            "{date};{time};{};{};{};\r\n",
            comma(raw),
            comma(&reference),
            comma(temp)
        ));
    }
    let logger = dir.join("logger.csv");
    std::fs::write(&logger, text).unwrap();
    let (summary, events) = (
        dir.join("logger.summary.json"),
        dir.join("logger.events.jsonl"),
    );
    steadycal()
        .arg("replay")
        .arg(&logger)
        .arg("--config")
        .arg(feeds().join("load-cell.monitor.toml"))
        .args(["--separator", ";", "--decimal-comma", "--missing=-9999"])
        .args([
            "--time-column",
            "Datum,Zeit",
            "--time-format",
            "%d/%m/%Y %H.%M.%S",
        ])
        .args(["--timezone", "Europe/Rome"])
        .args([
            "--raw-column",
            "Kraft",
            "--ref-column",
            "Last",
            "--temp-column",
            "Temperatur",
        ])
        .arg("--summary")
        .arg(&summary)
        .arg("--events")
        .arg(&events)
        .assert()
        .success();
    let logger_summary = json(&summary);
    let (canonical_summary, canonical_events) = run_canonical(&dir, &canonical);
    assert_eq!(std::fs::read(&events).unwrap(), canonical_events);
    assert_eq!(
        summary_numbers(&logger_summary),
        summary_numbers(&canonical_summary)
    );
    assert_eq!(logger_summary["timezone"], "Europe/Rome");
    assert_eq!(logger_summary["first_t"], START as f64);
    let missing_refs = rows.iter().filter(|r| r[2].is_empty()).count() as u64;
    assert_eq!(logger_summary["missing"]["Last"]["-9999"], missing_refs);
    assert_eq!(logger_summary["range_source"], "config");
}

#[test]
fn a_sensor_log_and_a_reference_log_join_to_the_canonical_results() {
    let dir = scratch("colocation");
    let rows = load_cell_rows();
    let canonical = write_canonical(&dir, &rows);
    // Sensor log: ISO 8601 without a zone (UTC), every sample. Reference log: its own clock
    // 7 s ahead and up to ±4 s of jitter (a pseudo-random pattern), fractional seconds.
    let mut sensor = String::from("when,raw,temp\n");
    let mut reference = String::from("stamp,ref\n");
    let iso = |seconds: f64| {
        let whole = seconds.floor() as i64;
        let (date, time) = rome_local(whole - 3600);
        let d: Vec<&str> = date.split('/').collect();
        let frac = seconds - whole as f64;
        format!(
            "{}-{}-{} {}{}",
            d[2],
            d[1],
            d[0],
            time.replace('.', ":"),
            if frac > 0.0 {
                format!("{:.3}", frac)[1..].to_string()
            } else {
                String::new()
            }
        )
    };
    for (i, [t, raw, refv, temp]) in rows.iter().enumerate() {
        let t: f64 = t.parse().unwrap();
        sensor.push_str(&format!("{},{raw},{temp}\n", iso(t)));
        if !refv.is_empty() {
            let jitter = ((i * 7919) % 81) as f64 / 10.0 - 4.0;
            reference.push_str(&format!("{},{refv}\n", iso(t + 7.0 + jitter)));
        }
    }
    let (sensor_path, reference_path) = (dir.join("sensor.csv"), dir.join("reference.csv"));
    std::fs::write(&sensor_path, sensor).unwrap();
    std::fs::write(&reference_path, reference).unwrap();
    let (summary, events) = (
        dir.join("joined.summary.json"),
        dir.join("joined.events.jsonl"),
    );
    steadycal()
        .arg("replay")
        .arg(&sensor_path)
        .arg("--config")
        .arg(feeds().join("load-cell.monitor.toml"))
        .args(["--time-column", "when"])
        .arg("--reference")
        .arg(&reference_path)
        .args(["--reference-time-column", "stamp"])
        .args(["--reference-time-format", "%Y-%m-%d %H:%M:%S%.f"])
        .args(["--match-within", "5s", "--reference-offset=-7s"])
        .arg("--summary")
        .arg(&summary)
        .arg("--events")
        .arg(&events)
        .assert()
        .success();
    let joined = json(&summary);
    let (canonical_summary, canonical_events) = run_canonical(&dir, &canonical);
    assert_eq!(std::fs::read(&events).unwrap(), canonical_events);
    assert_eq!(
        summary_numbers(&joined),
        summary_numbers(&canonical_summary)
    );
    let checks = rows.iter().filter(|r| !r[2].is_empty()).count() as u64;
    assert_eq!(joined["join"]["paired"], checks);
    assert_eq!(joined["join"]["unpaired"], 0);
    assert_eq!(joined["join"]["pairing"], "nearest");
}

fn air_quality() -> PathBuf {
    root().join("tests/data/air-quality/AirQualityUCI-2004-03-10-to-24.csv")
}

fn air_quality_command() -> assert_cmd::Command {
    let mut command = steadycal();
    command
        .arg("replay")
        .arg(air_quality())
        .args(["--separator", ";", "--decimal-comma"])
        .args([
            "--time-column",
            "Date,Time",
            "--time-format",
            "%d/%m/%Y %H:%M:%S",
        ])
        .args(["--timezone", "Europe/Rome"])
        .args([
            "--raw-column",
            "PT08.S1(CO)",
            "--ref-column",
            "CO(GT)",
            "--temp-column",
            "T",
        ]);
    command
}

#[test]
fn the_uci_air_quality_data_set_replays_with_options_only() {
    let dir = scratch("uci");
    let summary = dir.join("summary.json");
    air_quality_command()
        .arg("--missing=-200")
        .arg("--summary")
        .arg(&summary)
        .assert()
        .success();
    let s = json(&summary);
    // Counted on the shipped file with Python 3's csv module (SOURCE.md): 336 hourly rows,
    // CO(GT) = -200 on 16 of them, so 320 checks and 16 readings; no raw cell is missing.
    assert_eq!(s["samples"], 336);
    assert_eq!(s["checks_outside_range"]["checks"], 320);
    assert_eq!(s["readings"], 16);
    assert_eq!(s["missing"]["CO(GT)"]["-200"], 16);
    assert_eq!(s["missing_raw"], 0);
    // 10/03/2004 18:00 and 24/03/2004 17:00 in Europe/Rome (CET, +01:00) are
    // 2004-03-10T17:00:00Z = 1,078,938,000 s and 2004-03-24T16:00:00Z = 1,080,144,000 s
    // (Python 3 datetime).
    assert_eq!(s["first_t"], 1_078_938_000.0);
    assert_eq!(s["last_t"], 1_080_144_000.0);
    assert_eq!(s["timezone"], "Europe/Rome");
    assert_eq!(s["suspected_missing_markers"], serde_json::json!([]));
    assert_eq!(s["range_source"], "data");
}

#[test]
fn an_undeclared_marker_is_noticed_and_strict_makes_it_an_error() {
    let dir = scratch("uci-strict");
    let summary = dir.join("summary.json");
    let output = air_quality_command()
        .arg("--summary")
        .arg(&summary)
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(0));
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        stderr.contains("column `CO(GT)`: the value -200 makes up 4.8 % of the cells (16 cells) and lies far below the rest of the column; if it means \"no value\", declare it with --missing=-200 (it was treated as a measurement)"),
        "{stderr}"
    );
    let s = json(&summary);
    assert_eq!(s["suspected_missing_markers"][0]["value"], -200.0);
    assert_eq!(s["suspected_missing_markers"][0]["cells"], 16);
    std::fs::remove_file(&summary).unwrap();
    let output = air_quality_command()
        .arg("--strict")
        .arg("--summary")
        .arg(&summary)
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&output.stderr)
        .contains("--strict: values that look like undeclared missing markers were found"));
    // Everything was written before the exit.
    assert_eq!(json(&summary)["samples"], 336);
    // The canonical reader notices it too.
    let canonical = dir.join("canonical.csv");
    std::fs::write(
        &canonical,
        "t,raw,ref\n".to_string()
            + &(0..400)
                .map(|i| {
                    format!(
                        "{i},{},{}\n",
                        1000 + i % 97,
                        if i % 20 == 0 {
                            -200.0
                        } else {
                            1.0 + (i % 37) as f64 / 10.0
                        }
                    )
                })
                .collect::<String>(),
    )
    .unwrap();
    let output = steadycal().arg("replay").arg(&canonical).output().unwrap();
    assert!(String::from_utf8_lossy(&output.stderr)
        .contains("column `ref`: the value -200 makes up 5.0 % of the cells"));
}

fn failure(args: &[&str]) -> String {
    let output = steadycal().args(args).output().unwrap();
    assert_eq!(output.status.code(), Some(2), "{output:?}");
    String::from_utf8_lossy(&output.stderr).into_owned()
}

#[test]
fn bad_inputs_are_named() {
    let dir = scratch("bad");
    let logger = dir.join("logger.csv");
    std::fs::write(
        &logger,
        "Date;Time;raw;ref\n01/03/2026;10:00:00;1;2\n2026-03-01;11:00;1;2\n",
    )
    .unwrap();
    let file = logger.display().to_string();
    // A time cell that does not match the format: file, line, column and the format.
    let stderr = failure(&[
        "replay",
        &file,
        "--separator",
        ";",
        "--time-column",
        "Date,Time",
        "--time-format",
        "%d/%m/%Y %H:%M:%S",
    ]);
    assert!(
        stderr.contains(&format!("{file}:3:1: column `Date,Time`: expected a time in the format %d/%m/%Y %H:%M:%S (zone UTC), found \"2026-03-01 11:00\"")),
        "{stderr}"
    );
    // A time column that is not there.
    let stderr = failure(&[
        "replay",
        &file,
        "--separator",
        ";",
        "--time-column",
        "Date,Hour",
        "--time-format",
        "%d/%m/%Y %H:%M:%S",
    ]);
    assert!(
        stderr.contains(&format!(
            "{file}:1: no `Hour` column in the header, expected one (found: Date, Time, raw, ref)"
        )),
        "{stderr}"
    );
    // A zone that does not exist.
    let stderr = failure(&[
        "replay",
        &file,
        "--separator",
        ";",
        "--timezone",
        "Europe/Atlantis",
    ]);
    assert!(
        stderr.contains("--timezone: unknown time zone \"Europe/Atlantis\""),
        "{stderr}"
    );
    // A tolerance without a unit.
    let reference = dir.join("reference.csv");
    std::fs::write(&reference, "t,ref\n0,1\n").unwrap();
    let stderr = failure(&[
        "replay",
        &file,
        "--reference",
        &reference.display().to_string(),
        "--match-within",
        "30",
    ]);
    assert!(stderr.contains("--match-within: \"30\" has no unit, expected a duration with a unit, such as 30s, 5m, 1h or 1h 30m (h, m, s, ms)"), "{stderr}");
}

#[test]
fn a_reference_log_going_back_is_reported_and_the_rest_joins() {
    let dir = scratch("backwards");
    let sensor = dir.join("sensor.csv");
    let mut text = String::from("t,raw\n");
    for i in 0..40 {
        text.push_str(&format!("{},{}\n", i * 10, 10.0 + i as f64));
    }
    std::fs::write(&sensor, text).unwrap();
    let reference = dir.join("reference.csv");
    std::fs::write(&reference, "t,ref\n100,11\n200,21\n150,99\n300,31\n").unwrap();
    let summary = dir.join("summary.json");
    let output = steadycal()
        .arg("replay")
        .arg(&sensor)
        .arg("--reference")
        .arg(&reference)
        .args([
            "--match-within",
            "2s",
            "--level-low",
            "1",
            "--level-high",
            "100",
        ])
        .arg("--summary")
        .arg(&summary)
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(0), "{output:?}");
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        stderr.contains(&format!("{}: 1 reference rows go back in time or repeat one (lines 4); they were left out of the join, the other rows were paired as usual", reference.display())),
        "{stderr}"
    );
    let s = json(&summary);
    assert_eq!(s["join"]["paired"], 3);
    assert_eq!(s["join"]["backwards_lines"], serde_json::json!([4]));
    assert_eq!(s["checks_outside_range"]["checks"], 3);
}

#[test]
fn a_marker_that_is_also_a_reading_is_allowed_and_counted() {
    let dir = scratch("inside");
    let feed = dir.join("feed.csv");
    let mut text = String::from("t,raw,ref\n");
    for i in 0..50 {
        text.push_str(&format!(
            "{i},{},{}\n",
            10 + i % 5,
            if i % 10 == 0 { "0" } else { "5" }
        ));
    }
    std::fs::write(&feed, text).unwrap();
    let summary = dir.join("summary.json");
    let output = steadycal()
        .arg("replay")
        .arg(&feed)
        .args(["--missing", "10", "--level-low", "1", "--level-high", "100"])
        .arg("--summary")
        .arg(&summary)
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(0), "{output:?}");
    assert!(String::from_utf8_lossy(&output.stderr).contains("the missing marker 10 is also a valid reading of the working range; the cells it removed are counted in the summary's `missing`"));
    let s = json(&summary);
    assert_eq!(s["missing"]["raw"]["10"], 10);
    assert_eq!(s["missing_raw"], 10);
    assert_eq!(s["samples"], 40);
}

#[test]
fn a_closed_output_pipe_ends_the_run_quietly() {
    use std::io::Read;
    use std::process::{Command, Stdio};
    let mut child = Command::new(common::binary())
        .arg("replay")
        .arg(feeds().join("gas-cell.csv"))
        .args(["--readings", "-"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdout = child.stdout.take().unwrap();
    let mut first = [0u8; 64];
    stdout.read_exact(&mut first).unwrap();
    drop(stdout);
    let output = child.wait_with_output().unwrap();
    // 141 = 128 + SIGPIPE (13), what a shell reports for a writer ended by a closed pipe.
    assert_eq!(output.status.code(), Some(141));
    assert!(
        output.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&output.stderr)
    );
}

#[test]
fn a_field_run_writes_its_report() {
    let dir = scratch("report");
    let page = dir.join("run.html");
    steadycal()
        .arg("replay")
        .arg(feeds().join("load-cell.csv"))
        .args(["--missing=-9999", "--quiet", "--report"])
        .arg(&page)
        .assert()
        .success();
    let html = std::fs::read_to_string(&page).unwrap();
    assert!(html.starts_with("<!DOCTYPE html>") && html.contains("<svg"));
}

/// UTC date and time of `START + seconds` as `YYYY-MM-DD HH:MM:SS`.
fn utc_text(seconds: i64) -> String {
    let (date, time) = rome_local(seconds - 3600);
    let d: Vec<&str> = date.split('/').collect();
    format!("{}-{}-{} {}", d[2], d[1], d[0], time.replace('.', ":"))
}

/// Runs `replay` with `args` and returns its events, checks and readings files.
fn run_outputs(dir: &Path, name: &str, args: &[&str]) -> [Vec<u8>; 3] {
    let outputs =
        ["events.jsonl", "checks.csv", "readings.csv"].map(|o| dir.join(format!("{name}.{o}")));
    steadycal()
        .arg("replay")
        .args(args)
        .arg("--config")
        .arg(feeds().join("load-cell.monitor.toml"))
        .arg("--events")
        .arg(&outputs[0])
        .arg("--checks")
        .arg(&outputs[1])
        .arg("--readings")
        .arg(&outputs[2])
        .arg("--quiet")
        .assert()
        .success();
    outputs.map(|path| std::fs::read(path).unwrap())
}

#[test]
fn rows_without_a_raw_value_keep_their_seq_in_every_reader() {
    let dir = scratch("seq");
    let rows = load_cell_rows();
    // Every 97th row (from the 5th) has no raw value: an empty cell in the canonical feed,
    // -200 in the logger's file, -200 in the sensor log of two logs.
    let gap = |i: usize| i % 97 == 5;
    let mut canonical = String::from("t,raw,ref,temp\n");
    let mut logger = String::from("stamp,raw,ref,temp\n");
    let mut sensor = String::from("stamp,raw,temp\n");
    let mut reference = String::from("stamp,ref\n");
    for (i, [t, raw, refv, temp]) in rows.iter().enumerate() {
        let seconds: i64 = t.parse().unwrap();
        let stamp = utc_text(seconds);
        let (raw, marked) = if gap(i) {
            ("", "-200")
        } else {
            (raw.as_str(), raw.as_str())
        };
        canonical.push_str(&format!("{},{raw},{refv},{temp}\n", START + seconds));
        logger.push_str(&format!("{stamp},{marked},{refv},{temp}\n"));
        sensor.push_str(&format!("{stamp},{marked},{temp}\n"));
        if !refv.is_empty() {
            reference.push_str(&format!("{stamp},{refv}\n"));
        }
    }
    assert!(rows
        .iter()
        .enumerate()
        .any(|(i, r)| gap(i) && !r[2].is_empty()));
    let paths = ["canonical.csv", "logger.csv", "sensor.csv", "reference.csv"].map(|n| dir.join(n));
    for (path, text) in paths.iter().zip([canonical, logger, sensor, reference]) {
        std::fs::write(path, text).unwrap();
    }
    let [canonical, logger, sensor, reference] = paths.map(|p| p.display().to_string());
    let format = [
        "--time-column",
        "stamp",
        "--time-format",
        "%Y-%m-%d %H:%M:%S",
    ];
    let expected = run_outputs(&dir, "canonical", &[&canonical]);
    let mut args = vec![logger.as_str(), "--missing=-200"];
    args.extend(format);
    let field = run_outputs(&dir, "logger", &args);
    // The reference of a row without a raw value finds no sample within 10 s (samples are
    // 30 s apart): unpaired, as the canonical row is no sample.
    let mut args = vec![
        sensor.as_str(),
        "--missing=-200",
        "--reference",
        &reference,
        "--match-within",
        "10s",
    ];
    args.extend(format);
    let joined = run_outputs(&dir, "joined", &args);
    for (name, got) in [("one log", field), ("two logs", joined)] {
        for (k, output) in ["events", "checks", "readings"].iter().enumerate() {
            assert!(
                got[k] == expected[k],
                "{name}: {output} differ from the canonical feed's"
            );
        }
    }
    // The canonical reader numbers by data-row index: a check after the first gap (row 5)
    // carries its row's index.
    let checks = String::from_utf8(expected[1].clone()).unwrap();
    let first_after_gap = rows
        .iter()
        .enumerate()
        .find(|(i, r)| *i > 5 && !r[2].is_empty())
        .unwrap()
        .0;
    assert!(
        checks
            .lines()
            .any(|l| l.starts_with(&format!("{first_after_gap},"))),
        "{checks:.300}"
    );
}

#[test]
fn a_decimal_comma_marker_is_missing_in_an_f32_run() {
    let dir = scratch("f32-marker");
    let feed = dir.join("logger.csv");
    let mut text = String::from("t;raw;ref\n");
    for i in 0..60 {
        // Every tenth raw value lost (-9999,9), every third row a check.
        let raw = if i % 10 == 4 {
            "-9999,9".to_string()
        } else {
            format!("{},5", 100 + i)
        };
        let reference = if i % 3 == 0 {
            format!("{},0", 100 + i)
        } else {
            String::new()
        };
        text.push_str(&format!("{i};{raw};{reference}\n"));
    }
    std::fs::write(&feed, text).unwrap();
    let summary = dir.join("summary.json");
    steadycal()
        .arg("replay")
        .arg(&feed)
        .args(["--separator", ";", "--decimal-comma", "--missing=-9999.9"])
        .args([
            "--precision",
            "f32",
            "--level-low",
            "1",
            "--level-high",
            "1000",
        ])
        .arg("--summary")
        .arg(&summary)
        .assert()
        .success();
    let s = json(&summary);
    // -9999.9 has no exact f32; the marker is matched on the cell, so the six lost values
    // are missing, not measurements.
    assert_eq!(s["missing"]["raw"]["-9999.9"], 6);
    assert_eq!(s["missing_raw"], 6);
    assert_eq!(s["samples"], 54);
}

#[test]
fn a_log_without_any_sensor_value_says_so() {
    let dir = scratch("no-values");
    // Canonical reader: every raw cell empty or NA.
    let canonical = dir.join("canonical.csv");
    std::fs::write(&canonical, "t,raw,ref\n0,,1\n1,NA,2\n2,,\n").unwrap();
    let file = canonical.display().to_string();
    let stderr = failure(&["replay", &file]);
    assert!(
        stderr.contains(&format!("{file}: all 3 data rows have a missing sensor value (column `raw`, markers \"\", \"NA\"), expected at least one value")),
        "{stderr}"
    );
    // Field reader: a logger's -200 in every raw cell, a blank row.
    let logger = dir.join("logger.csv");
    std::fs::write(
        &logger,
        "when;S1;CO\n10/03/2004 18:00:00;-200;2,6\n10/03/2004 19:00:00;-200;-200\n;;\n",
    )
    .unwrap();
    let file = logger.display().to_string();
    let summary = dir.join("summary.json");
    let stderr = failure(&[
        "replay",
        &file,
        "--separator",
        ";",
        "--decimal-comma",
        "--time-column",
        "when",
        "--time-format",
        "%d/%m/%Y %H:%M:%S",
        "--raw-column",
        "S1",
        "--ref-column",
        "CO",
        "--missing=-200",
        "--summary",
        &summary.display().to_string(),
    ]);
    let message = format!("{file}: all 3 data rows have a missing sensor value (column `S1`, markers \"\", \"NA\", \"-200\"), expected at least one value");
    assert!(stderr.contains(&message), "{stderr}");
    assert!(!stderr.contains("no data rows"), "{stderr}");
    assert_eq!(json(&summary)["stopped_at"], message.as_str());
}
