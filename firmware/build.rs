//! Build script of the example firmware:
//! - picks the board's memory file by target (`mps2-an386.x` for thumbv7em, the generic
//!   Cortex-M0 part `cortex-m0-generic.x` for thumbv6m) and hands it to cortex-m-rt's
//!   `link.x` as `memory.x` in OUT_DIR;
//! - reads the channel's configuration, the TOML file named by `STEADYCAL_CONFIG` (default
//!   `monitor.toml` beside this file), validates it with `steadycal-config` (the code the
//!   host commands use; a refused key fails the build with the file, key, line and column)
//!   and compiles it in: `board_config.rs` in OUT_DIR holds the monitor configuration in
//!   f32 (converted as `steadycal replay --precision f32` converts it), written as a Rust
//!   constant with every float as its exact bits, the fit capacity the basis needs and the
//!   commissioned baseline, if the file has one;
//! - turns a feed CSV (default `../simulated-feeds/gas-cell.csv`, or `STEADYCAL_FEED`) into
//!   the device log embedded in flash (`feed.log` in OUT_DIR), the same bytes
//!   `steadycal replay FEED --config CONFIG --device-log-out FILE` writes for that CSV (f32,
//!   that configuration): a lone `0x00`, the start record, then for every
//!   row its sample record followed by the records of the events the monitor raised on it,
//!   each framed by the core's `record::encode_frame` (COBS, CRC-16, `0x00`). The events
//!   come from running the core's `Monitor<f32>` here on the build host, exactly as the
//!   host replay does; the firmware checks its own events against them.
//!
//! The CSV is read exactly as `steadycal replay` reads one: columns found by name (`t`,
//! `raw`, `ref`, `temp`), cells trimmed, numbers parsed with the standard library's
//! correctly rounded `str::parse` straight into the float type (f32 for raw/ref/temp, f64
//! for t), an empty `ref`/`temp` cell meaning "absent", `seq` the 0-based row index.
//! `STEADYCAL_FEED_ROWS` limits the number of rows.

use std::env;
use std::fs;
use std::path::{Path, PathBuf};

use steadycal_config::rust_literal::to_rust;
use steadycal_config::ConfigFile;
use steadycal_core::detect::drift::Baseline;
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::record::{encode_frame, LogStart, Record, MAX_FRAME_LEN};
use steadycal_core::sample::Sample;

/// The channel's configuration as the board runs it.
struct Board {
    config: MonitorConfig<f32>,
    baseline: Option<Baseline<f32>>,
}

fn main() {
    let out = PathBuf::from(env::var("OUT_DIR").expect("OUT_DIR"));
    let manifest = PathBuf::from(env::var("CARGO_MANIFEST_DIR").expect("CARGO_MANIFEST_DIR"));
    let target = env::var("TARGET").unwrap_or_default();

    let memory_file = if target.starts_with("thumbv6m") {
        "cortex-m0-generic.x"
    } else {
        "mps2-an386.x"
    };
    let memory = fs::read(manifest.join(memory_file)).expect("memory file");
    fs::write(out.join("memory.x"), memory).expect("write memory.x");
    println!("cargo:rustc-link-search={}", out.display());
    println!("cargo:rerun-if-changed={memory_file}");
    if target.starts_with("thumb") {
        println!("cargo:rustc-link-arg=-Tlink.x");
        println!(
            "cargo:rustc-link-arg=-Map={}",
            out.join("firmware.map").display()
        );
    }

    println!("cargo:rerun-if-env-changed=STEADYCAL_CONFIG");
    let config_path = env::var_os("STEADYCAL_CONFIG")
        .map(PathBuf::from)
        .unwrap_or_else(|| manifest.join("monitor.toml"));
    println!("cargo:rerun-if-changed={}", config_path.display());
    let board = board_config(&config_path).unwrap_or_else(|message| panic!("{message}"));
    let source = board_source(&board, &config_path)
        .unwrap_or_else(|message| panic!("board configuration: {message}"));
    fs::write(out.join("board_config.rs"), source).expect("write board_config.rs");

    println!("cargo:rerun-if-env-changed=STEADYCAL_FEED");
    println!("cargo:rerun-if-env-changed=STEADYCAL_FEED_ROWS");
    let feed = env::var_os("STEADYCAL_FEED")
        .map(PathBuf::from)
        .unwrap_or_else(|| manifest.join("../simulated-feeds/gas-cell.csv"));
    println!("cargo:rerun-if-changed={}", feed.display());
    let limit = env::var("STEADYCAL_FEED_ROWS").ok().map(|v| {
        v.parse::<usize>()
            .expect("STEADYCAL_FEED_ROWS: a row count")
    });
    let samples = match read_feed(&feed, limit) {
        Ok(samples) => samples,
        Err(message) => panic!("{}: {message}", feed.display()),
    };
    let log =
        device_log(&board, &samples).unwrap_or_else(|message| panic!("device log: {message}"));
    fs::write(out.join("feed.log"), log).expect("write feed.log");
}

/// Reads and validates the configuration file with the host's code; the f32 configuration
/// and the checked baseline, as `steadycal replay --precision f32 --config FILE` builds them.
fn board_config(path: &Path) -> Result<Board, String> {
    let name = path.display().to_string();
    let channel = ConfigFile::read(path)
        .and_then(|file| file.channel(&name))
        .map_err(|error| error.to_string())?;
    let config: MonitorConfig<f32> = channel.monitor.convert();
    let baseline = match channel.baseline {
        Some(b) => Some(
            Baseline::new(
                b.parameters.map(|v| v as f32),
                b.covariance
                    .map(|rows| rows.map(|row| row.map(|v| v as f32))),
            )
            .map_err(|e| format!("{name}: `baseline`: refused by the monitor ({e:?})"))?,
        ),
        None => None,
    };
    Ok(Board { config, baseline })
}

/// `board_config.rs`: the configuration as Rust constants.
fn board_source(board: &Board, path: &Path) -> Result<String, String> {
    let config = to_rust(&board.config).map_err(|e| e.to_string())?;
    let baseline = to_rust(&board.baseline).map_err(|e| e.to_string())?;
    Ok(format!(
        "// Written by build.rs from {} (validated by steadycal-config); do not edit.\n\
         use steadycal_core::basis::Basis;\n\
         use steadycal_core::detect::alarm::{{AlarmRule, AlarmRules}};\n\
         use steadycal_core::detect::cusum::CusumConfig;\n\
         use steadycal_core::detect::drift::{{Baseline, DriftConfig}};\n\
         use steadycal_core::detect::screen::ScreenConfig;\n\
         use steadycal_core::detect::spread_jump::SpreadJumpConfig;\n\
         use steadycal_core::detect::DetectConfig;\n\
         use steadycal_core::event::Severity;\n\
         use steadycal_core::monitor::MonitorConfig;\n\
         use steadycal_core::transform::Rung;\n\n\
         /// Fit parameters the configured basis needs (offset, gain and the further terms).\n\
         pub const PARAMETERS: usize = {};\n\n\
         /// The monitor configuration, in f32.\n\
         pub const MONITOR_CONFIG: MonitorConfig<f32> = {config};\n\n\
         /// The commissioned baseline of the drift test (`None`: the monitor freezes one).\n\
         pub const BASELINE: Option<Baseline<f32>> = {baseline};\n",
        path.display(),
        board.config.basis.len(),
    ))
}

/// The device log of a replay of `samples`, as `steadycal replay --device-log-out` writes
/// it (see the module docs).
fn device_log(board: &Board, samples: &[Sample<f32>]) -> Result<Vec<u8>, String> {
    let mut monitor: Monitor<f32> =
        Monitor::new(board.config).map_err(|e| format!("configuration: {}", e.parameter()))?;
    if let Some(baseline) = board.baseline {
        monitor
            .set_baseline(baseline.parameters, Some(baseline.covariance))
            .map_err(|e| format!("baseline: {e:?}"))?;
    }
    let mut log = vec![0u8];
    let mut put = |record: &Record<f32>| -> Result<(), String> {
        let mut frame = [0u8; MAX_FRAME_LEN];
        let len = encode_frame(record, &mut frame).map_err(|e| e.reason().to_string())?;
        log.extend_from_slice(&frame[..len]);
        Ok(())
    };
    put(&Record::Start(LogStart::new::<f32>()))?;
    for sample in samples {
        put(&Record::Sample(*sample))?;
        if monitor.push(sample).new_events > 0 {
            while let Some(event) = monitor.pop_event() {
                put(&Record::Event(event))?;
            }
        }
    }
    Ok(log)
}

fn read_feed(path: &PathBuf, limit: Option<usize>) -> Result<Vec<Sample<f32>>, String> {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(false)
        .from_path(path)
        .map_err(|e| format!("cannot open: {e}"))?;
    let header = reader
        .headers()
        .map_err(|e| format!("header: {e}"))?
        .clone();
    let find = |name: &str| header.iter().position(|h| h.trim() == name);
    let time = find("t");
    let raw = find("raw").ok_or("no `raw` column in the header")?;
    let reference = find("ref");
    let temperature = find("temp");

    let mut samples = Vec::new();
    for (seq, record) in reader.records().enumerate() {
        if limit.is_some_and(|limit| seq >= limit) {
            break;
        }
        let line = seq + 2;
        let record = record.map_err(|e| format!("line {line}: {e}"))?;
        let cell = |index: usize| record.get(index).unwrap_or("").trim();
        let number = |index: usize, name: &str| -> Result<Option<&str>, String> {
            let text = cell(index);
            if text.is_empty() {
                Ok(None)
            } else if text.parse::<f64>().is_ok() {
                Ok(Some(text))
            } else {
                Err(format!(
                    "line {line}, column `{name}`: expected a number, found `{text}`"
                ))
            }
        };
        let t = match time {
            Some(index) => number(index, "t")?
                .ok_or(format!("line {line}: empty `t`"))?
                .parse::<f64>()
                .unwrap(),
            None => seq as f64,
        };
        let raw = number(raw, "raw")?
            .ok_or(format!("line {line}: empty `raw`"))?
            .parse::<f32>()
            .unwrap();
        let reference = match reference {
            Some(index) => number(index, "ref")?.map(|text| text.parse::<f32>().unwrap()),
            None => None,
        };
        let temperature = match temperature {
            Some(index) => number(index, "temp")?.map(|text| text.parse::<f32>().unwrap()),
            None => None,
        };
        samples.push(Sample {
            seq: seq as u64,
            t,
            raw,
            reference,
            temperature,
            averaged: 1,
        });
    }
    Ok(samples)
}
