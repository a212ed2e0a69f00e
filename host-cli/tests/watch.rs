//! `watch` on a live pipe: events come out while the stream is still open, and end of
//! input stops the watch cleanly with its summary.

mod common;

use std::io::{BufRead, BufReader, Write};
use std::process::{Command, Stdio};
use std::sync::mpsc;
use std::time::Duration;

/// Generous deadline for a line to come through the pipe (not a speed target: the test
/// only needs the event to arrive before end of input).
const DEADLINE: Duration = Duration::from_secs(60);

#[test]
fn events_arrive_before_end_of_input() {
    let dir = tempfile::tempdir().unwrap();
    let summary = dir.path().join("summary.json");
    let mut child = Command::new(common::binary())
        .args(["watch", "-", "--summary"])
        .arg(&summary)
        .stdin(Stdio::piped())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let mut stdin = child.stdin.take().unwrap();
    let stdout = child.stdout.take().unwrap();
    let (lines, received) = mpsc::channel::<String>();
    std::thread::spawn(move || {
        for line in BufReader::new(stdout).lines() {
            if lines.send(line.unwrap()).is_err() {
                return;
            }
        }
    });
    // Written slowly, line by line: a header, good rows, then a NaN row and a good row,
    // which ends the run of one rejection and raises `sample_rejected` at once.
    writeln!(stdin, "t,raw,ref").unwrap();
    for i in 0..5 {
        writeln!(stdin, "{i},{},{}", 1.0 + i as f64, 1.0 + i as f64).unwrap();
        stdin.flush().unwrap();
        std::thread::sleep(Duration::from_millis(20));
    }
    writeln!(stdin, "5,nan,3").unwrap();
    writeln!(stdin, "6,7,7").unwrap();
    stdin.flush().unwrap();
    let line = received
        .recv_timeout(DEADLINE)
        .expect("event before end of input");
    let event: serde_json::Value = serde_json::from_str(&line).unwrap();
    assert_eq!(event["kind"], "sample_rejected");
    assert_eq!(event["reason"], "non_finite_raw");
    assert_eq!(event["seq"], 5);
    assert_eq!(event["count"], 1);
    // The stream is still open: the process is still running.
    assert!(child.try_wait().unwrap().is_none());
    // A second run of rejections, ended by a good row, then end of input.
    writeln!(stdin, "7,inf,").unwrap();
    writeln!(stdin, "8,9,9").unwrap();
    stdin.flush().unwrap();
    let line = received.recv_timeout(DEADLINE).expect("second event");
    assert!(line.contains("non_finite_raw"), "{line}");
    drop(stdin);
    let status = child.wait().unwrap();
    assert_eq!(status.code(), Some(0));
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&summary).unwrap()).unwrap();
    assert_eq!(summary["samples"], 9);
    assert_eq!(summary["rejected"], 2);
    assert_eq!(summary["interrupted"], false);
}

#[test]
fn watch_a_file_gives_the_replay_events() {
    let feed = common::feeds().join("gas-cell.csv");
    let watched = common::steadycal()
        .arg("watch")
        .arg(&feed)
        .output()
        .unwrap();
    assert!(watched.status.success());
    let replayed = common::steadycal()
        .arg("replay")
        .arg(&feed)
        .args(["--events", "-"])
        .output()
        .unwrap();
    assert_eq!(watched.stdout, replayed.stdout);
    assert!(!watched.stdout.is_empty());
}

#[test]
fn bad_row_on_the_stream_is_exit_two() {
    common::steadycal()
        .args(["watch", "-"])
        .write_stdin("t,raw\n0,1\n1,x\n")
        .assert()
        .code(2)
        .stderr(predicates::str::contains("-:3:2: column `raw`"));
}
