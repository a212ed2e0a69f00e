//! Snapshot files on the host: reading one with errors that name the file and the byte
//! offset, writing one, and describing one (for `steadycal snapshot inspect`).
//!
//! The host's monitor is `Monitor<R>` with the default capacities (3 parameters, 16 spread
//! bins, a queue of 8 events), in `f32` or `f64`; a snapshot of other capacities is
//! refused with the layout it holds.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::{bail, Context, Result};
use serde_json::{json, Value};
use steadycal_core::monitor::{Monitor, MonitorConfig};
use steadycal_core::real::Real;
use steadycal_core::snapshot::{Snapshot, SnapshotError, CRC_LEN, HEADER_LEN, MAGIC};

use crate::io::create_output;
use crate::number::number;
use crate::precision::Precision;
use crate::replay::sink::summary::alarms_json;

/// A monitor restored from a snapshot file, in the float width the snapshot holds.
pub enum Restored {
    /// An `f32` monitor.
    F32(Box<Monitor<f32>>),
    /// An `f64` monitor.
    F64(Box<Monitor<f64>>),
}

impl Restored {
    /// The float width.
    pub fn precision(&self) -> Precision {
        match self {
            Restored::F32(_) => Precision::F32,
            Restored::F64(_) => Precision::F64,
        }
    }
}

/// The byte offset a snapshot error points at, for messages.
pub fn error_offset(error: &SnapshotError, len: usize) -> usize {
    match error {
        SnapshotError::Truncated { found } => *found,
        SnapshotError::BadMagic { .. } => 0,
        SnapshotError::UnknownVersion { .. } => 4,
        SnapshotError::LayoutMismatch { .. } => 6,
        SnapshotError::ShortPayload { .. } => len,
        SnapshotError::LongPayload { expected, .. } => *expected,
        SnapshotError::BadCrc { .. } => len.saturating_sub(CRC_LEN),
        SnapshotError::MalformedPayload
        | SnapshotError::PayloadLeftover { .. }
        | SnapshotError::InvalidConfig(_)
        | SnapshotError::InconsistentState => HEADER_LEN,
        SnapshotError::BufferTooSmall { .. } => 0,
    }
}

/// A message for a snapshot error: `FILE: byte N: what is wrong (details)`.
pub fn describe_error(file: &str, error: &SnapshotError, len: usize) -> String {
    let offset = error_offset(error, len);
    let detail = match error {
        SnapshotError::Truncated { found } => {
            format!("{found} bytes, expected at least {HEADER_LEN} for a header")
        }
        SnapshotError::BadMagic { found } => format!(
            "found {:02x?}, expected {:02x?} ({:?})",
            found,
            MAGIC,
            String::from_utf8_lossy(&MAGIC)
        ),
        SnapshotError::UnknownVersion { found } => format!(
            "found version {found}, this build reads version {}",
            steadycal_core::snapshot::FORMAT_VERSION
        ),
        SnapshotError::ShortPayload { expected, found } => {
            format!("file is {found} bytes, its header announces {expected}")
        }
        SnapshotError::LongPayload { expected, found } => {
            format!("file is {found} bytes, its header announces {expected}")
        }
        SnapshotError::BadCrc { stored, computed } => {
            format!("stored CRC-32 {stored:#010x}, bytes give {computed:#010x}")
        }
        SnapshotError::LayoutMismatch { expected, found } => format!(
            "holds f{} with {} parameters, {} bins, queue {}; this host reads {} parameters, {} bins, queue {}",
            found.real_bits, found.params, found.bins, found.queue,
            expected.params, expected.bins, expected.queue
        ),
        SnapshotError::PayloadLeftover { unused } => format!("{unused} payload bytes unused"),
        SnapshotError::InvalidConfig(error) => format!("parameter `{}`", error.parameter()),
        _ => String::new(),
    };
    if detail.is_empty() {
        format!("{file}: byte {offset}: {}", error.reason())
    } else {
        format!("{file}: byte {offset}: {} ({detail})", error.reason())
    }
}

/// Reads a snapshot file (`-` = standard input).
pub fn read_bytes(path: &Path) -> Result<Vec<u8>> {
    if path.as_os_str() == "-" {
        let mut bytes = Vec::new();
        std::io::Read::read_to_end(&mut std::io::stdin(), &mut bytes)
            .context("-: cannot read standard input")?;
        Ok(bytes)
    } else {
        std::fs::read(path).with_context(|| format!("{}: cannot read", path.display()))
    }
}

/// Checks and restores a snapshot's bytes, in the width its header names.
pub fn restore_bytes(file: &str, bytes: &[u8]) -> Result<Restored> {
    let fail = |error: SnapshotError| anyhow::anyhow!(describe_error(file, &error, bytes.len()));
    let snapshot = Snapshot::parse(bytes).map_err(fail)?;
    match snapshot.header().layout.real_bits {
        64 => Ok(Restored::F64(Box::new(snapshot.monitor().map_err(fail)?))),
        _ => Ok(Restored::F32(Box::new(snapshot.monitor().map_err(fail)?))),
    }
}

/// Reads and restores a snapshot file.
pub fn read(path: &Path) -> Result<Restored> {
    let bytes = read_bytes(path)?;
    restore_bytes(&path.display().to_string(), &bytes)
}

/// A restored monitor of the replay's float width, refusing another width.
pub fn restore_as<R: Real>(path: &Path) -> Result<Monitor<R>> {
    let bytes = read_bytes(path)?;
    let file = path.display().to_string();
    let fail = |error: SnapshotError| anyhow::anyhow!(describe_error(&file, &error, bytes.len()));
    let snapshot = Snapshot::parse(&bytes).map_err(fail)?;
    let bits = snapshot.header().layout.real_bits;
    if u32::from(bits) != R::BITS {
        bail!(
            "{file}: byte 6: the snapshot holds an f{bits} monitor; run with --precision f{bits}"
        );
    }
    snapshot.monitor().map_err(fail)
}

/// Writes a monitor's snapshot to a file (`-` = standard output). The monitor is taken by
/// `&mut` for `Monitor::snapshot`, which changes nothing.
pub fn write<R: Real>(path: &Path, monitor: &mut Monitor<R>) -> Result<usize> {
    let bytes = encode(path, monitor)?;
    let mut out = create_output(path)?;
    out.write_all(&bytes)
        .and_then(|_| out.flush())
        .with_context(|| format!("{}: cannot write", path.display()))?;
    Ok(bytes.len())
}

/// A monitor's snapshot bytes (`path` names the file in messages).
pub fn encode<R: Real>(path: &Path, monitor: &mut Monitor<R>) -> Result<Vec<u8>> {
    let mut buffer = vec![0u8; steadycal_core::snapshot::max_snapshot_len::<R, 3, 16, 8>()];
    let len = monitor.snapshot(&mut buffer).map_err(|e| {
        anyhow::anyhow!(
            "{}: cannot encode the snapshot: {}",
            path.display(),
            e.reason()
        )
    })?;
    buffer.truncate(len);
    Ok(buffer)
}

/// The top-level keys in which two configurations differ (bit for bit), for messages.
pub fn config_differences<R: Real>(a: &MonitorConfig<R>, b: &MonitorConfig<R>) -> Vec<String> {
    let (Ok(Value::Object(a)), Ok(Value::Object(b))) =
        (serde_json::to_value(a), serde_json::to_value(b))
    else {
        return vec!["(unreadable)".into()];
    };
    a.iter()
        .filter(|(key, value)| b.get(*key) != Some(value))
        .map(|(key, _)| key.clone())
        .collect()
}

/// A description of a snapshot: format, size, CRC, counts, rung, parameters, alarms.
pub fn describe(bytes: &[u8], restored: &Restored) -> Value {
    let snapshot = Snapshot::parse(bytes).expect("restored snapshots parse");
    let header = snapshot.header();
    let mut out = match restored {
        Restored::F32(monitor) => describe_monitor(monitor.as_ref()),
        Restored::F64(monitor) => describe_monitor(monitor.as_ref()),
    };
    if let Value::Object(map) = &mut out {
        map.insert("format_version".into(), json!(header.version));
        map.insert("precision".into(), json!(restored.precision()));
        map.insert("bytes".into(), json!(bytes.len()));
        map.insert("payload_bytes".into(), json!(header.payload_len));
        map.insert("crc32".into(), json!(format!("{:#010x}", snapshot.crc())));
        map.insert(
            "capacities".into(),
            json!({"params": header.layout.params, "bins": header.layout.bins, "queue": header.layout.queue}),
        );
    }
    out
}

fn describe_monitor<R: Real + Display>(monitor: &Monitor<R>) -> Value {
    let counters = monitor.counters();
    let params = monitor.parameters();
    let config = monitor.config();
    json!({
        "samples": counters.samples,
        "checks": counters.checks,
        "readings": counters.readings,
        // Samples without a reference that got no reading (before the fit is determined).
        "without_reading": counters
            .samples
            .saturating_sub(counters.checks + counters.readings + counters.rejected),
        "rejected": counters.rejected,
        "rung": monitor.rung().name(),
        "params": {
            "offset": number(params[0]),
            "gain": number(params[1]),
            "quadratic": number(params[2]),
            "temperature": number(params[3]),
        },
        "baseline": monitor.baseline().map(|b| json!({"offset": number(b.parameters[0]), "gain": number(b.parameters[1])})).unwrap_or(Value::Null),
        "alarms": alarms_json(monitor),
        "events_dropped": monitor.events_dropped(),
        "config": {
            "level_low": number(config.level_low),
            "level_high": number(config.level_high),
            "forgetting": number(config.forgetting),
        },
    })
}

/// The human summary of [`describe`].
pub fn human(file: &str, description: &Value) -> String {
    let get = |key: &str| description.get(key).cloned().unwrap_or(Value::Null);
    let params = get("params");
    let alarms: Vec<String> = get("alarms")
        .as_array()
        .map(|list| {
            list.iter()
                .map(|a| {
                    format!(
                        "{} ({})",
                        a["kind"].as_str().unwrap_or("?"),
                        a["severity"].as_str().unwrap_or("?")
                    )
                })
                .collect()
        })
        .unwrap_or_default();
    let capacities = get("capacities");
    format!(
        "{file}: steadycal snapshot, format version {}, {} bytes ({} payload), CRC-32 {}\n  \
         monitor: {}, {} parameters, {} spread bins, queue of {}\n  \
         counted: {} samples, {} checks, {} readings, {} without a reading, {} rejected\n  \
         calibration: rung {}, offset {}, gain {}, quadratic {}, temperature {}\n  \
         alarms raised: {}",
        get("format_version"),
        get("bytes"),
        get("payload_bytes"),
        get("crc32").as_str().unwrap_or("?"),
        get("precision").as_str().unwrap_or("?"),
        capacities["params"],
        capacities["bins"],
        capacities["queue"],
        get("samples"),
        get("checks"),
        get("readings"),
        get("without_reading"),
        get("rejected"),
        get("rung").as_str().unwrap_or("?"),
        params["offset"],
        params["gain"],
        params["quadratic"],
        params["temperature"],
        if alarms.is_empty() {
            "none".to_string()
        } else {
            alarms.join(", ")
        },
    )
}
