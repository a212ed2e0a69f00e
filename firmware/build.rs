//! Build script of the example firmware:
//! - picks the board's memory file by target (`mps2-an386.x` for thumbv7em, the generic
//!   Cortex-M0 part `cortex-m0-generic.x` for thumbv6m) and hands it to cortex-m-rt's
//!   `link.x` as `memory.x` in OUT_DIR;
//! - turns a feed CSV (default `../simulated-feeds/gas-cell.csv`, or `STEADYCAL_FEED`) into
//!   the device log embedded in flash (`feed.log` in OUT_DIR), the same bytes
//!   `steadycal replay FEED --device-log-out FILE` writes for that CSV (f32, the default
//!   configuration for the range 1..1000): a lone `0x00`, the start record, then for every
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
use std::path::PathBuf;

use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::record::{encode_frame, LogStart, Record, MAX_FRAME_LEN};
use steadycal_core::sample::Sample;

/// The working range, the same file the firmware compiles.
#[path = "src/range.rs"]
mod range;
use range::{LEVEL_HIGH, LEVEL_LOW};

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

    println!("cargo:rerun-if-changed=src/range.rs");
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
    let log = device_log(&samples).unwrap_or_else(|message| panic!("device log: {message}"));
    fs::write(out.join("feed.log"), log).expect("write feed.log");
}

/// The device log of a replay of `samples`, as `steadycal replay --device-log-out` writes
/// it (see the module docs).
fn device_log(samples: &[Sample<f32>]) -> Result<Vec<u8>, String> {
    let config: MonitorConfig<f32> =
        MonitorConfig::<f64>::default_for_range(LEVEL_LOW, LEVEL_HIGH).convert();
    let mut monitor: Monitor<f32> =
        Monitor::new(config).map_err(|e| format!("configuration: {}", e.parameter()))?;
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
        });
    }
    Ok(samples)
}
