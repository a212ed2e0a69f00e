//! `replay` parses the CSV on a second thread; `fleet` parses it on the channel's own
//! thread (channels run in parallel instead). Both must write the same files, byte for
//! byte, on every shipped scenario and on a feed with bad rows skipped.

mod common;

use std::path::Path;

use common::{feeds, scenarios};
use steadycal_cli::replay::{replay, ReplayOptions};
use steadycal_core::monitor::MonitorConfig;

/// Replays `feed` into `dir` (events, summary, readings) and returns the three files.
fn outputs(feed: &Path, dir: &Path, pipelined: bool, skip_bad_rows: bool) -> [Vec<u8>; 3] {
    let mut options = ReplayOptions::new(
        feed.to_path_buf(),
        MonitorConfig::default_for_range(1.0, 1000.0),
    );
    options.events = Some(dir.join("events.jsonl"));
    options.summary = Some(dir.join("summary.json"));
    options.readings = Some(dir.join("readings.csv"));
    options.warnings = false;
    options.skip_bad_rows = skip_bad_rows;
    options.pipelined = pipelined;
    replay(&options).expect("replay");
    ["events.jsonl", "summary.json", "readings.csv"]
        .map(|name| std::fs::read(dir.join(name)).unwrap())
}

#[test]
fn inline_and_pipelined_parsing_write_the_same_files() {
    let dir = tempfile::tempdir().unwrap();
    let mut feeds_checked: Vec<std::path::PathBuf> = scenarios()
        .iter()
        .map(|s| s.with_extension("csv"))
        .collect();
    feeds_checked.push(feeds().join("gas-cell.csv"));
    // A feed with malformed rows, skipped and listed in the summary.
    let bad = dir.path().join("bad.csv");
    let text = std::fs::read_to_string(feeds().join("gas-cell.csv")).unwrap();
    let mut lines: Vec<&str> = text.lines().take(3000).collect();
    lines[1200] = "1199,not-a-number,5.0";
    lines[2400] = "2399,1.0";
    std::fs::write(&bad, lines.join("\n") + "\n").unwrap();
    for feed in &feeds_checked {
        let (a, b) = (dir.path().join("a"), dir.path().join("b"));
        std::fs::create_dir_all(&a).unwrap();
        std::fs::create_dir_all(&b).unwrap();
        assert!(
            outputs(feed, &a, true, false) == outputs(feed, &b, false, false),
            "{}",
            feed.display()
        );
    }
    let (a, b) = (dir.path().join("a"), dir.path().join("b"));
    let pipelined = outputs(&bad, &a, true, true);
    let summary: serde_json::Value = serde_json::from_slice(&pipelined[1]).unwrap();
    assert_eq!(summary["rows_skipped"], 2, "{summary}");
    assert!(pipelined == outputs(&bad, &b, false, true));
}
