//! Build script of the example firmware:
//! - picks the board's memory file by target (`mps2-an386.x` for thumbv7em, the generic
//!   Cortex-M0 part `cortex-m0-generic.x` for thumbv6m) and hands it to cortex-m-rt's
//!   `link.x` as `memory.x` in OUT_DIR;
//! - turns a feed CSV (default `../simulated-feeds/gas-cell.csv`, or `STEADYCAL_FEED`) into
//!   the binary feed image embedded in flash, read exactly as `steadycal replay` reads a
//!   CSV: columns found by name (`t`, `raw`, `ref`, `temp`), cells trimmed, numbers parsed
//!   with the standard library's correctly rounded `str::parse` straight into the float
//!   type (f32 for raw/ref/temp, f64 for t), an empty `ref`/`temp` cell meaning "absent".
//!   `STEADYCAL_FEED_ROWS` limits the number of rows.
//!
//! Feed image layout (little endian): magic `SCFD`, u32 row count, then per row one flag
//! byte (bit 0: reference present, bit 1: temperature present, bit 2: `t` column present),
//! t as f64 bits, raw as f32 bits, then the reference and temperature f32 bits if present.

use std::env;
use std::fs;
use std::path::PathBuf;

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
    let image = match feed_image(&feed, limit) {
        Ok(image) => image,
        Err(message) => panic!("{}: {message}", feed.display()),
    };
    fs::write(out.join("feed.bin"), image).expect("write feed.bin");
}

fn feed_image(path: &PathBuf, limit: Option<usize>) -> Result<Vec<u8>, String> {
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

    let mut rows = Vec::new();
    let mut count: u32 = 0;
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
        let flags = u8::from(reference.is_some())
            | (u8::from(temperature.is_some()) << 1)
            | (u8::from(time.is_some()) << 2);
        rows.push(flags);
        rows.extend_from_slice(&t.to_bits().to_le_bytes());
        rows.extend_from_slice(&raw.to_bits().to_le_bytes());
        if let Some(value) = reference {
            rows.extend_from_slice(&value.to_bits().to_le_bytes());
        }
        if let Some(value) = temperature {
            rows.extend_from_slice(&value.to_bits().to_le_bytes());
        }
        count += 1;
    }
    let mut image = Vec::with_capacity(rows.len() + 8);
    image.extend_from_slice(b"SCFD");
    image.extend_from_slice(&count.to_le_bytes());
    image.extend_from_slice(&rows);
    Ok(image)
}
