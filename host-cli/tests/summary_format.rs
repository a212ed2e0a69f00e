//! Pins every byte the host writes for shipped scenarios: the summary JSON, the event
//! lines, the human summary, the `--help` texts, and (by line count and checksum) the
//! readings, checks, device-log and snapshot files, so that a change of the host's code
//! structure is proven to leave every output unchanged.
//!
//! The fixtures in `tests/fixtures/summary_format/` are outputs of the project itself, not
//! outside check values: they guard against unintended change. After an intended change of
//! an output, regenerate them with
//! `STEADYCAL_BLESS=1 cargo test --release -p steadycal-cli --test summary_format`
//! and review the diff.

mod common;

use std::path::{Path, PathBuf};

use common::{feeds, steadycal};

fn fixtures() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/summary_format")
}

fn blessing() -> bool {
    std::env::var_os("STEADYCAL_BLESS").is_some()
}

/// 64-bit FNV-1a (common practice, no source), to pin large outputs in a few bytes.
fn fnv1a(bytes: &[u8]) -> u64 {
    let mut hash: u64 = 0xcbf2_9ce4_8422_2325;
    for &byte in bytes {
        hash ^= u64::from(byte);
        hash = hash.wrapping_mul(0x0100_0000_01b3);
    }
    hash
}

/// A large output pinned by its length, line count, first lines and checksum.
fn digest(bytes: &[u8]) -> String {
    let text = String::from_utf8_lossy(bytes);
    let head: Vec<&str> = text.lines().take(5).collect();
    format!(
        "bytes {}\nlines {}\nfnv1a64 {:016x}\n{}\n",
        bytes.len(),
        bytes.iter().filter(|&&b| b == b'\n').count(),
        fnv1a(bytes),
        head.join("\n")
    )
}

/// Compares `actual` with the fixture `name` (or writes it when blessing).
fn pin(name: &str, actual: &[u8]) {
    let path = fixtures().join(name);
    if blessing() {
        std::fs::create_dir_all(fixtures()).unwrap();
        std::fs::write(&path, actual).unwrap();
        return;
    }
    let expected = std::fs::read(&path).unwrap_or_else(|e| {
        panic!(
            "{}: {e}; run with STEADYCAL_BLESS=1 to write it",
            path.display()
        )
    });
    if expected != actual {
        panic!(
            "{name} differs from its fixture\n--- expected\n{}\n--- actual\n{}",
            String::from_utf8_lossy(&expected),
            String::from_utf8_lossy(actual)
        );
    }
}

fn pin_digest(name: &str, path: &Path) {
    pin(name, digest(&std::fs::read(path).unwrap()).as_bytes());
}

fn pin_file(name: &str, path: &Path) {
    pin(name, &std::fs::read(path).unwrap());
}

/// A work directory holding copies of the named shipped feeds and configurations, so the
/// outputs name files by relative paths.
fn workdir(files: &[&str]) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    for file in files {
        std::fs::copy(feeds().join(file), dir.path().join(file)).unwrap();
    }
    dir
}

fn run(dir: &Path, args: &[&str]) -> std::process::Output {
    steadycal()
        .current_dir(dir)
        .env("NO_COLOR", "1")
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn a_full_f32_run_is_unchanged() {
    let dir = workdir(&["co-cell-ageing.csv", "co-cell-ageing.monitor.toml"]);
    let d = dir.path();
    let out = run(
        d,
        &[
            "replay",
            "co-cell-ageing.csv",
            "--config",
            "co-cell-ageing.monitor.toml",
            "--events",
            "events.jsonl",
            "--summary",
            "summary.json",
            "--readings",
            "readings.csv",
            "--checks",
            "checks.csv",
            "--device-log-out",
            "run.log",
            "--save-snapshot",
            "state.bin",
            "--human-summary",
        ],
    );
    assert_eq!(out.status.code(), Some(0));
    pin(
        "f32.summary.json",
        &std::fs::read(d.join("summary.json")).unwrap(),
    );
    pin_file("f32.events.jsonl", &d.join("events.jsonl"));
    pin("f32.stderr.txt", &out.stderr);
    pin_digest("f32.readings.digest", &d.join("readings.csv"));
    pin_digest("f32.checks.digest", &d.join("checks.csv"));
    pin_digest("f32.device-log.digest", &d.join("run.log"));
    pin_digest("f32.snapshot.digest", &d.join("state.bin"));

    let inspect = run(d, &["snapshot", "inspect", "state.bin"]);
    assert_eq!(inspect.status.code(), Some(0));
    pin("f32.inspect.txt", &inspect.stdout);
    let inspect = run(d, &["snapshot", "inspect", "state.bin", "--json"]);
    assert_eq!(inspect.status.code(), Some(0));
    pin("f32.inspect.json", &inspect.stdout);

    // The device log written by the run, replayed.
    let log = run(
        d,
        &[
            "replay",
            "run.log",
            "--events",
            "log-events.jsonl",
            "--summary",
            "-",
            "--quiet",
        ],
    );
    assert_eq!(log.status.code(), Some(0));
    pin("device-log.summary.json", &log.stdout);
    pin_file("device-log.events.jsonl", &d.join("log-events.jsonl"));
}

#[test]
fn an_f64_run_with_many_events_is_unchanged() {
    let dir = workdir(&["flow-meter-dropout.csv", "flow-meter-dropout.monitor.toml"]);
    let d = dir.path();
    let out = run(
        d,
        &[
            "replay",
            "flow-meter-dropout.csv",
            "--config",
            "flow-meter-dropout.monitor.toml",
            "--precision",
            "f64",
            "--events",
            "-",
            "--summary",
            "summary.json",
            "--fail-on",
            "info",
            "--quiet",
        ],
    );
    assert_eq!(out.status.code(), Some(1));
    pin("f64.events.jsonl", &out.stdout);
    pin_file("f64.summary.json", &d.join("summary.json"));
}

#[test]
fn resumed_and_bad_row_runs_are_unchanged() {
    let dir = workdir(&[
        "particle-counter-gaps.csv",
        "particle-counter-gaps.monitor.toml",
    ]);
    let d = dir.path();
    let text = std::fs::read_to_string(d.join("particle-counter-gaps.csv")).unwrap();
    let mut lines: Vec<&str> = text.lines().collect();
    let header = lines.remove(0);
    let (first, second) = lines.split_at(9000);
    let write = |name: &str, rows: &[&str]| {
        let mut out = format!("{header}\n");
        for row in rows {
            out.push_str(row);
            out.push('\n');
        }
        std::fs::write(d.join(name), out).unwrap();
    };
    write("first.csv", first);
    write("second.csv", second);
    let mut damaged: Vec<&str> = first.to_vec();
    damaged[100] = "1000,abc,";
    damaged[2000] = "20000,12.5,x";
    damaged[2001] = damaged[2000];
    write("damaged.csv", &damaged);

    let config = "particle-counter-gaps.monitor.toml";
    let one = run(
        d,
        &[
            "replay",
            "first.csv",
            "--config",
            config,
            "--save-snapshot",
            "half.bin",
            "--summary",
            "-",
            "--quiet",
        ],
    );
    assert_eq!(one.status.code(), Some(0));
    pin("first-half.summary.json", &one.stdout);
    let two = run(
        d,
        &[
            "replay",
            "second.csv",
            "--resume",
            "half.bin",
            "--summary",
            "-",
            "--events",
            "second-events.jsonl",
            "--quiet",
        ],
    );
    assert_eq!(two.status.code(), Some(0));
    pin("second-half.summary.json", &two.stdout);
    pin_file("second-half.events.jsonl", &d.join("second-events.jsonl"));

    let skipped = run(
        d,
        &[
            "replay",
            "damaged.csv",
            "--config",
            config,
            "--skip-bad-rows",
            "--summary",
            "-",
        ],
    );
    assert_eq!(skipped.status.code(), Some(0));
    pin("skipped.summary.json", &skipped.stdout);
    pin("skipped.stderr.txt", &skipped.stderr);
    let stopped = run(
        d,
        &[
            "replay",
            "damaged.csv",
            "--config",
            config,
            "--summary",
            "-",
            "--events",
            "stopped-events.jsonl",
        ],
    );
    assert_eq!(stopped.status.code(), Some(2));
    pin("stopped.summary.json", &stopped.stdout);
    pin("stopped.stderr.txt", &stopped.stderr);
}

/// The closing part of a `--help` text: from its `Examples:` or `Exit codes:` line on (the
/// options above it change with every new option); empty when it has neither.
fn help_tail(help: &[u8]) -> Vec<u8> {
    let text = String::from_utf8_lossy(help);
    let Some(start) = text
        .lines()
        .position(|line| line == "Examples:" || line == "Exit codes:")
    else {
        return Vec::new();
    };
    let mut tail = text.lines().skip(start).collect::<Vec<_>>().join("\n");
    tail.push('\n');
    tail.into_bytes()
}

#[test]
fn help_texts_end_unchanged() {
    let dir = tempfile::tempdir().unwrap();
    let out = run(dir.path(), &["--help"]);
    pin("help.txt", &help_tail(&out.stdout));
    for command in [
        "replay", "watch", "fleet", "simulate", "assess", "report", "snapshot",
    ] {
        let out = run(dir.path(), &[command, "--help"]);
        assert_eq!(out.status.code(), Some(0), "{command} --help");
        pin(&format!("help-{command}.txt"), &help_tail(&out.stdout));
    }
}
