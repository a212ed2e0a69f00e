//! The bad-input table: every malformed feed or config gives exit code 2 and a message
//! naming the file, line, column or key; none panics. Inputs are written by the tests
//! (invented).

mod common;

use std::path::Path;

use common::steadycal;

/// Replays `bytes` as `feed.csv` and returns (exit code, stderr).
fn replay_bytes(bytes: &[u8], extra: &[&str]) -> (i32, String) {
    let dir = tempfile::tempdir().unwrap();
    let feed = dir.path().join("feed.csv");
    std::fs::write(&feed, bytes).unwrap();
    let output = steadycal()
        .current_dir(dir.path())
        .args(["replay", "feed.csv"])
        .args(extra)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
    assert!(!stderr.contains("panicked"), "{stderr}");
    (output.status.code().unwrap_or(-1), stderr)
}

fn assert_bad(bytes: &[u8], message: &str) -> String {
    let (code, stderr) = replay_bytes(bytes, &[]);
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains(message),
        "expected {message:?} in {stderr:?}"
    );
    stderr
}

#[test]
fn empty_file() {
    assert_bad(b"", "feed.csv:1: empty file, expected a header line");
}

#[test]
fn header_only() {
    assert_bad(b"t,raw,ref\n", "feed.csv:2: no data rows after the header");
}

#[test]
fn missing_raw_column() {
    assert_bad(
        b"t,value,ref\n0,1,1\n",
        "feed.csv:1: no `raw` column in the header, expected one (found: t, value, ref)",
    );
}

#[test]
fn non_numeric_cell() {
    assert_bad(
        b"t,raw,ref\n0,1,1\n1,abc,2\n",
        "feed.csv:3:2: column `raw`: expected a number (nan and inf are accepted as data), found \"abc\"",
    );
}

#[test]
fn wrong_column_count() {
    assert_bad(
        b"t,raw,ref\n0,1,1\n1,2,3,4\n",
        "feed.csv:3: 4 fields, expected 3",
    );
}

#[test]
fn ten_megabyte_single_line() {
    let mut bytes = b"t,raw\n0,1\n1,".to_vec();
    bytes.extend(std::iter::repeat_n(b'7', 10 << 20));
    bytes.extend(b"x\n");
    let stderr = assert_bad(&bytes, "feed.csv:3:2: column `raw`: expected a number");
    assert!(
        stderr.len() < 1000,
        "message is cut: {} bytes",
        stderr.len()
    );
    // The same line as one 10 MB field without separators: a field-count error.
    let mut bytes = b"t,raw\n0,1\n".to_vec();
    bytes.extend(std::iter::repeat_n(b'z', 10 << 20));
    bytes.push(b'\n');
    assert_bad(&bytes, "feed.csv:3: 1 fields, expected 2");
}

#[test]
fn binary_garbage() {
    // Deterministic pseudo-random bytes (a 64-bit LCG, Knuth's MMIX constants, from memory).
    let mut state: u64 = 42;
    let bytes: Vec<u8> = (0..65_536)
        .map(|_| {
            state = state
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (state >> 56) as u8
        })
        .collect();
    let stderr = assert_bad(&bytes, "feed.csv:");
    assert!(
        stderr.contains("no `raw` column") || stderr.contains("fields"),
        "{stderr}"
    );
    // Garbage after a good header.
    let mut with_header = b"t,raw,ref\n".to_vec();
    with_header.extend(&bytes);
    let stderr = assert_bad(&with_header, "feed.csv:2");
    assert!(stderr.len() < 1000, "{stderr}");
}

#[test]
fn truncated_final_line() {
    assert_bad(b"t,raw,ref\n0,1,1\n1,2", "feed.csv:3: 2 fields, expected 3");
    assert_bad(
        b"t,raw\n0,1\n1,2.5e",
        "feed.csv:3:2: column `raw`: expected a number",
    );
}

#[test]
fn invalid_utf8() {
    assert_bad(
        b"t,raw\n0,1\n1,\xff\xfe\n",
        "feed.csv:3:2: column `raw`: expected a number in UTF-8 text (found invalid UTF-8)",
    );
}

#[test]
fn rfc3339_and_bad_time() {
    assert_bad(
        b"t,raw\n2026-03-01T00:00:00Z,1\n2026-13-01T00:00:00Z,2\n",
        "feed.csv:3:1: column `t`: expected seconds or an RFC 3339 timestamp",
    );
}

#[test]
fn outputs_before_a_bad_row_are_kept() {
    let dir = tempfile::tempdir().unwrap();
    let feed = dir.path().join("feed.csv");
    std::fs::write(&feed, b"t,raw,ref\n0,nan,1\n1,2,\n2,oops,\n").unwrap();
    let events = dir.path().join("events.jsonl");
    steadycal()
        .arg("replay")
        .arg(&feed)
        .arg("--events")
        .arg(&events)
        .assert()
        .code(2);
    let text = std::fs::read_to_string(&events).unwrap();
    assert!(text.contains("\"non_finite_raw\""), "{text}");
}

#[test]
fn skip_bad_rows_lists_every_skipped_line() {
    let (code, stderr) = replay_bytes(
        b"t,raw,ref\n0,1,1\n1,x,2\n2,3\n3,4,4\n",
        &["--skip-bad-rows", "--summary", "summary.json"],
    );
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stderr.contains("warning: skipping bad row: feed.csv:3:2"),
        "{stderr}"
    );
}

#[test]
fn skip_bad_rows_summary() {
    let dir = tempfile::tempdir().unwrap();
    let feed = dir.path().join("feed.csv");
    std::fs::write(&feed, b"t,raw,ref\n0,1,1\n1,x,2\n2,3\n3,4,4\n").unwrap();
    let output = steadycal()
        .arg("replay")
        .arg(&feed)
        .args(["--skip-bad-rows", "--summary", "-", "--quiet"])
        .output()
        .unwrap();
    assert!(output.status.success());
    let summary: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert_eq!(summary["rows_skipped"], 2);
    assert_eq!(summary["skipped_rows"][0]["line"], 3);
    assert_eq!(summary["skipped_rows"][1]["line"], 4);
    assert_eq!(summary["samples"], 2);
}

#[test]
fn out_of_order_and_repeated_times_are_reported() {
    let dir = tempfile::tempdir().unwrap();
    let feed = dir.path().join("feed.csv");
    std::fs::write(&feed, b"t,raw,ref\n0,1,1\n1,2,2\n1,2,2\n0.5,3,3\n2,4,4\n").unwrap();
    let output = steadycal()
        .arg("replay")
        .arg(&feed)
        .args(["--summary", "-"])
        .output()
        .unwrap();
    assert!(output.status.success());
    let stderr = String::from_utf8_lossy(&output.stderr);
    assert!(
        stderr.contains(":4: time 1 repeats the previous row's time"),
        "{stderr}"
    );
    assert!(
        stderr.contains(":5: time 0.5 is before the previous row's time"),
        "{stderr}"
    );
    let summary: serde_json::Value = serde_json::from_slice(&output.stdout).unwrap();
    assert_eq!(summary["time_order"]["repeated"], 1);
    assert_eq!(summary["time_order"]["backwards"], 1);
    assert_eq!(summary["time_order"]["repeated_lines"][0], 4);
    assert_eq!(summary["time_order"]["backwards_lines"][0], 5);
}

fn config_error(text: &str) -> String {
    let dir = tempfile::tempdir().unwrap();
    let config = dir.path().join("monitor.toml");
    std::fs::write(&config, text).unwrap();
    let feed = common::feeds().join("gas-cell.csv");
    let output = steadycal()
        .arg("replay")
        .arg(&feed)
        .arg("--config")
        .arg(&config)
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(2));
    let stderr = String::from_utf8_lossy(&output.stderr).into_owned();
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(stderr.contains("monitor.toml"), "{stderr}");
    stderr
}

#[test]
fn config_unknown_key() {
    let stderr = config_error("[fit]\nforgeting = 0.99\n");
    assert!(stderr.contains("line 2, column 1"), "{stderr}");
    assert!(stderr.contains("unknown field `forgeting`"), "{stderr}");
    let stderr = config_error("[fitting]\nforgetting = 0.99\n");
    assert!(stderr.contains("unknown field `fitting`"), "{stderr}");
}

#[test]
fn config_wrong_type() {
    let stderr = config_error("[range]\nlow = \"one\"\n");
    assert!(stderr.contains("line 2, column 7"), "{stderr}");
    assert!(stderr.contains("invalid type: string \"one\""), "{stderr}");
    assert!(stderr.contains("low = \"one\""), "{stderr}");
}

#[test]
fn config_out_of_range() {
    let stderr = config_error("[fit]\nforgetting = 1.5\n");
    assert!(stderr.contains("line 2, column 14"), "{stderr}");
    assert!(
        stderr.contains("out of range: 1.5, expected a forgetting factor in (0, 1]"),
        "{stderr}"
    );
    assert!(stderr.contains("forgetting = 1.5"), "{stderr}");
    let stderr = config_error("[range]\nlow = 100\nhigh = 10\n");
    assert!(
        stderr.contains("`range.low`: must be below `range.high`"),
        "{stderr}"
    );
    let stderr = config_error("[spread]\nalpha = 0\n");
    assert!(
        stderr.contains("out of range: 0, expected a probability"),
        "{stderr}"
    );
}

#[test]
fn missing_feed_file_names_it() {
    let (code, stderr) = replay_bytes(b"t,raw\n0,1\n", &[]);
    assert_eq!(code, 0, "{stderr}");
    let output = steadycal()
        .args(["replay", "no-such-feed.csv"])
        .output()
        .unwrap();
    assert_eq!(output.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&output.stderr).contains("no-such-feed.csv: cannot read"));
    let _ = Path::new("unused");
}
