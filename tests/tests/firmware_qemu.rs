//! The board and the desktop agree bit for bit (issue 8, item 1).
//!
//! Builds the example firmware (`firmware/`, thumbv7em-none-eabihf), runs it under QEMU's
//! `mps2-an386` (Cortex-M4 with FPU) on the feed image it embeds
//! (`simulated-feeds/gas-cell.csv`), and compares every event it prints with the events of
//! `steadycal replay --precision f32` on the same CSV, converted into the same canonical
//! line format (`firmware/src/lines.rs` defines it): every float compared as its bit
//! pattern. The final summary line (counters, rung, parameters) is compared too, and the
//! readings digest.
//!
//! Persistence (issue 8): the device log the firmware embeds (build.rs) must be the bytes
//! `steadycal replay --device-log-out` writes for the CSV (length and CRC-32, and every
//! logged event matched on the board); the final snapshot the board saved through its
//! two-slot store and loaded back must hold, byte for byte, the payload of the snapshot
//! `steadycal replay --precision f32 --save-snapshot` writes (its header differs only in
//! the fit capacity: 2 parameters on the board, 3 on the host); the board's own event log
//! must be the start and event frames of the host's device log; and the board's restore
//! check must pass.
//!
//! Commissioning (issue 19): a second run builds the firmware with the configuration
//! `steadycal assess simulated-feeds/lab/co_gas_cell.csv --commission` writes
//! (`STEADYCAL_CONFIG`: log rung, commissioned drift baseline) and the drifting field feed of
//! the same sensor (`STEADYCAL_FEED`), and compares it with `steadycal replay --config` in the
//! same way, `gain_drift` included.
//!
//! The expected values are the host's own replay of the same feed (no published reference:
//! the claim under test is that the two builds of the core agree exactly).
//!
//! When `qemu-system-arm` is not installed the test says so and passes, unless
//! `STEADYCAL_REQUIRE_QEMU=1` is set (as `.ci/run` does, after `firmware/install-qemu.sh`).

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::Command;

use serde_json::Value;
use steadycal_cli::feed::ColumnNames;
use steadycal_cli::replay::sink::events::write_event;
use steadycal_cli::replay::{replay, PersistOptions, Precision, ReplayOptions};
use steadycal_core::event::{Event, EventKind, FieldSource, KindId, Named, Shape};
use steadycal_core::monitor::MonitorConfig;
use steadycal_core::record::{decode_frame, encode_frame, Frames, Record, MAX_FRAME_LEN};
use steadycal_core::snapshot::{Layout, Snapshot, CRC32};

/// Samples between two periodic saves on the board (`firmware/src/storage.rs`,
/// `SNAPSHOT_EVERY`).
const SNAPSHOT_EVERY: u64 = 1000;

/// How a field of an event is written in the canonical line.
#[derive(Clone, Copy)]
enum FieldType {
    /// A float of the core's type (f32): 8 hex digits of its bits.
    Core,
    /// An f64: 16 hex digits of its bits.
    Wide,
    /// A name, an integer or a boolean: as JSON prints it, strings unquoted.
    Plain,
}

use FieldType::{Core, Plain, Wide};

impl From<Shape> for FieldType {
    fn from(shape: Shape) -> Self {
        match shape {
            Shape::Real => Core,
            Shape::Wide => Wide,
            Shape::Integer | Shape::Flag | Shape::Name => Plain,
        }
    }
}

/// One JSON value in the canonical format. Numbers are parsed from their decimal text
/// straight into the float type (the host prints the shortest decimal that round-trips in
/// that type); `null` (a non-finite value) stays `null`.
fn canonical_value(value: &Value, field: FieldType) -> Result<String, String> {
    match (value, field) {
        (Value::Null, Core | Wide) => Ok("null".into()),
        (Value::Number(number), Core) => {
            let text = number.to_string();
            text.parse::<f32>()
                .map(|v| format!("{:08x}", v.to_bits()))
                .map_err(|e| format!("`{text}`: {e}"))
        }
        (Value::Number(number), Wide) => {
            let text = number.to_string();
            text.parse::<f64>()
                .map(|v| format!("{:016x}", v.to_bits()))
                .map_err(|e| format!("`{text}`: {e}"))
        }
        (Value::String(text), Plain) => Ok(text.clone()),
        (Value::Number(number), Plain) => Ok(number.to_string()),
        (Value::Bool(flag), Plain) => Ok(flag.to_string()),
        (other, _) => Err(format!("unexpected value {other}")),
    }
}

/// Converts one line of `steadycal replay --events` JSON into the canonical event line.
fn canonical_event(json_line: &str) -> Result<String, String> {
    let object: Value = serde_json::from_str(json_line).map_err(|e| format!("not JSON: {e}"))?;
    let get = |key: &str| {
        object
            .get(key)
            .ok_or_else(|| format!("no `{key}` in {json_line}"))
    };
    let seq = get("seq")?.as_u64().ok_or("`seq` is not an integer")?;
    let kind = get("kind")?.as_str().ok_or("`kind` is not a string")?;
    let mut line = format!("event {seq} {kind} t={}", canonical_value(get("t")?, Wide)?);
    let id = KindId::from_name(kind).ok_or_else(|| format!("unknown event kind `{kind}`"))?;
    for field in id.fields() {
        let value = canonical_value(get(field.key)?, field.shape.into())?;
        line.push_str(&format!(" {}={value}", field.key));
    }
    Ok(line)
}

/// The canonical summary line from the replay's summary JSON (same fields as the
/// firmware's `summary` line).
fn canonical_summary(summary: &Value) -> Result<String, String> {
    let integer = |key: &str| {
        summary[key]
            .as_u64()
            .ok_or_else(|| format!("summary: no integer `{key}`"))
    };
    let events: u64 = summary["events"]
        .as_object()
        .ok_or("summary: no `events` object")?
        .values()
        .map(|count| count.as_u64().unwrap_or(0))
        .sum();
    let mut line = format!(
        "summary samples={} checks={} readings={} rejected={} below_origin={} provisional_readings={} rung={} events={} events_dropped={}",
        integer("samples")?,
        integer("checks")?,
        integer("readings")?,
        integer("rejected")?,
        integer("below_origin")?,
        integer("provisional_readings")?,
        summary["rung"].as_str().ok_or("summary: no `rung`")?,
        events,
        integer("events_dropped")?,
    );
    for key in ["offset", "gain", "quadratic", "temperature"] {
        line.push_str(&format!(
            " {key}={}",
            canonical_value(&summary["params"][key], Core)?
        ));
    }
    Ok(line)
}

#[test]
fn converter_writes_bits_of_the_shortest_decimals() {
    // Invented event, for the converter only; 0.1f32 = 0x3dcccccd (IEEE 754 binary32, from
    // memory), 2.5f64 = 0x4004000000000000.
    let line = r#"{"seq":7,"t":2.5,"kind":"spread_tracks_level","k":0.1,"k_low":null,"k_high":1}"#;
    assert_eq!(
        canonical_event(line).unwrap(),
        "event 7 spread_tracks_level t=4004000000000000 k=3dcccccd k_low=null k_high=3f800000"
    );
    let line = r#"{"seq":3,"t":1,"kind":"transform_changed","from":"identity","to":"log","gain":-0.5,"held":200,"k":null,"k_low":null,"k_high":null}"#;
    assert_eq!(
        canonical_event(line).unwrap(),
        "event 3 transform_changed t=3ff0000000000000 from=identity to=log gain=bf000000 held=200 k=null k_low=null k_high=null"
    );
    assert!(canonical_event(r#"{"seq":1,"t":1,"kind":"no_such_event"}"#).is_err());
}

/// The board's event-line writer, compiled here too so every kind's line can be compared
/// with the host's without a board run.
#[path = "../../firmware/src/lines.rs"]
#[allow(dead_code)]
mod lines;

/// Field values for an event of any kind, asked in the order of the core's description:
/// floats from a list of awkward f32 values (tiny, subnormal, largest, negative zero, not
/// finite), integers at their type's ends, flags alternating, every name of a set in turn.
/// (IEEE 754 binary32 limits as Rust 1.95's core library gives them: the largest is
/// `f32::MAX`, and 1e-45 rounds to the smallest subnormal, `f32::from_bits(1)`.)
struct Probe(usize);

impl Probe {
    fn next(&mut self) -> usize {
        self.0 += 1;
        self.0
    }
}

impl FieldSource<f32> for Probe {
    type Error = std::convert::Infallible;
    fn real(&mut self, _: &'static str) -> Result<f32, Self::Error> {
        const REALS: [f32; 8] = [
            0.1,
            -2.5e-7,
            f32::MAX,
            1e-45,
            -0.0,
            f32::NAN,
            1.0e10,
            -f32::INFINITY,
        ];
        Ok(REALS[self.next() % REALS.len()])
    }
    fn wide(&mut self, _: &'static str) -> Result<f64, Self::Error> {
        const WIDES: [f64; 4] = [86_400.5, 1e-300, f64::MAX, f64::INFINITY];
        Ok(WIDES[self.next() % WIDES.len()])
    }
    fn integer(&mut self, _: &'static str, max: u32) -> Result<u32, Self::Error> {
        Ok([0, 1, max][self.next() % 3])
    }
    fn flag(&mut self, _: &'static str) -> Result<bool, Self::Error> {
        Ok(self.next().is_multiple_of(2))
    }
    fn name<T: Named>(&mut self, _: &'static str) -> Result<T, Self::Error> {
        Ok(T::ALL[self.next() % T::ALL.len()])
    }
}

/// The board's line of `event`.
fn board_event_line(event: &Event<f32>, t: f64) -> String {
    let mut line = String::new();
    lines::event_line(&mut line, event, t).unwrap();
    line
}

/// The host's JSON line of `event`.
fn host_event_json<R: steadycal_core::real::Real + std::fmt::Display>(
    event: &Event<R>,
    t: f64,
) -> String {
    let mut json = Vec::new();
    write_event(&mut json, event, t).unwrap();
    String::from_utf8(json).unwrap()
}

#[test]
fn every_event_kind_agrees_in_every_format() {
    // Generated from the core's one description of the events: a field added to a kind is
    // probed here in the wire codec, the host's JSON lines (f32 and, through the device
    // log's conversion, f64), the board's event lines and this comparison's converter.
    for id in KindId::ALL {
        for start in 0..8 {
            let kind = match EventKind::<f32>::from_fields(id, &mut Probe(start)) {
                Ok(kind) => kind,
                Err(never) => match never {},
            };
            let event = Event { seq: 7, kind };
            let t = 1.5e9 + start as f64;
            let board = board_event_line(&event, t);
            // The wire: a device-log frame and back.
            let mut frame = [0u8; MAX_FRAME_LEN];
            let len = encode_frame(&Record::Event(event), &mut frame).unwrap();
            let Ok(Record::Event(back)) = decode_frame::<f32>(&mut frame[..len]) else {
                panic!("{}: the frame does not decode", id.name());
            };
            assert_eq!(board_event_line(&back, t), board, "wire");
            // The host's JSON line, in f32, holds `seq`, `t`, `kind` and the kind's
            // fields in the description's order, and converts to the board's line.
            let json = host_event_json(&event, t);
            let object: serde_json::Map<String, Value> = serde_json::from_str(&json).unwrap();
            let mut keys = vec!["seq", "t", "kind"];
            keys.extend(id.fields().iter().map(|field| field.key));
            assert_eq!(object.len(), keys.len(), "{json}");
            let at: Vec<_> = keys
                .iter()
                .map(|key| json.find(&format!("\"{key}\":")).expect(key))
                .collect();
            assert!(at.is_sorted(), "keys in the description's order: {json}");
            assert_eq!(canonical_event(&json).unwrap(), board, "{json}");
            // A device log of f32 read in an f64 run: the same values.
            let wide = Event {
                seq: back.seq,
                kind: back.kind.map_real(f64::from),
            };
            let json = host_event_json(&wide, t);
            assert_eq!(canonical_event(&json).unwrap(), board, "{json}");
        }
    }
}

#[test]
fn host_f32_configuration_is_the_firmware_one() {
    // The firmware converts the f64 defaults as the host replay does; the f32 defaults
    // computed directly are the same values.
    let converted: MonitorConfig<f32> =
        MonitorConfig::<f64>::default_for_range(1.0, 1000.0).convert();
    assert_eq!(
        converted,
        MonitorConfig::<f32>::default_for_range(1.0, 1000.0)
    );
}

/// The firmware's `readings` line from the replay's readings CSV: FNV-1a (64-bit) over
/// every row, seq then the f32 bits of value, standard and expanded uncertainty (one 0xff
/// byte for a row without a reading), as `firmware/src/main.rs` computes it.
fn readings_digest(csv: &str) -> Result<String, String> {
    let mut state: u64 = 0xcbf2_9ce4_8422_2325;
    let mut hash = |bytes: &[u8]| {
        for byte in bytes {
            state = (state ^ u64::from(*byte)).wrapping_mul(0x0000_0100_0000_01b3);
        }
    };
    let mut count = 0;
    for (index, row) in csv.lines().skip(1).enumerate() {
        let cells: Vec<&str> = row.split(',').collect();
        let bad = |what: &str| format!("readings row {}: {what}", index + 2);
        let seq: u64 = cells
            .first()
            .and_then(|c| c.parse().ok())
            .ok_or_else(|| bad("seq"))?;
        hash(&seq.to_le_bytes());
        if cells.get(3).is_none_or(|c| c.is_empty()) {
            hash(&[0xff]);
        } else {
            for column in 3..6 {
                let value: f32 = cells
                    .get(column)
                    .and_then(|c| c.parse().ok())
                    .ok_or_else(|| bad("value"))?;
                hash(&value.to_bits().to_le_bytes());
            }
        }
        count += 1;
    }
    Ok(format!("readings count={count} digest={state:016x}"))
}

fn workspace_root() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .parent()
        .expect("workspace root")
        .to_path_buf()
}

fn qemu_present() -> bool {
    Command::new("qemu-system-arm")
        .arg("--version")
        .output()
        .map(|o| o.status.success())
        .unwrap_or(false)
}

/// One firmware build and QEMU run at a time: every build writes the same ELF.
static BOARD: std::sync::Mutex<()> = std::sync::Mutex::new(());

/// Builds the firmware with `config` (STEADYCAL_CONFIG; `None`: its shipped example) and
/// `feed` (STEADYCAL_FEED) compiled in, runs it under QEMU and returns what it printed.
fn board_run(config: Option<&Path>, feed: &Path, name: &str) -> String {
    let _one_at_a_time = BOARD.lock().unwrap_or_else(|e| e.into_inner());
    let root = workspace_root();
    let firmware = root.join("firmware");
    let scratch = Path::new(env!("CARGO_TARGET_TMPDIR")).join("firmware-qemu");
    std::fs::create_dir_all(&scratch).unwrap();
    // Build the firmware in its own workspace (its .cargo/config.toml and target dir).
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    let mut build = Command::new(&cargo);
    build
        .current_dir(&firmware)
        .args(["build", "--release", "--target", "thumbv7em-none-eabihf"])
        .env_remove("CARGO_TARGET_DIR")
        .env_remove("RUSTFLAGS")
        .env_remove("CARGO_ENCODED_RUSTFLAGS")
        .env_remove("STEADYCAL_FEED_ROWS")
        .env("STEADYCAL_FEED", feed);
    match config {
        Some(config) => build.env("STEADYCAL_CONFIG", config),
        None => build.env_remove("STEADYCAL_CONFIG"),
    };
    assert!(
        build.status().expect("cargo runs").success(),
        "firmware build failed"
    );
    let elf = firmware.join("target/thumbv7em-none-eabihf/release/steadycal-firmware");
    // Run it under QEMU, bounded, output to a file.
    let output = scratch.join(format!("{name}.qemu.out"));
    let status = Command::new("bash")
        .arg(firmware.join("run-qemu.sh"))
        .arg(&elf)
        .arg(&output)
        .arg("600")
        .status()
        .expect("run-qemu.sh runs");
    let printed = std::fs::read_to_string(&output).expect("QEMU output");
    assert!(
        status.success(),
        "firmware exit status {status}; output:\n{}",
        tail(&printed)
    );
    printed
}

fn qemu_required(test: &str) -> bool {
    if qemu_present() {
        return true;
    }
    assert!(
        std::env::var("STEADYCAL_REQUIRE_QEMU").as_deref() != Ok("1"),
        "qemu-system-arm is required (STEADYCAL_REQUIRE_QEMU=1): run firmware/install-qemu.sh"
    );
    eprintln!(
        "SKIPPED {test}: qemu-system-arm not installed (firmware/install-qemu.sh installs it)"
    );
    false
}

#[test]
fn firmware_under_qemu_matches_host_replay_bit_for_bit() {
    if !qemu_required("firmware_under_qemu_matches_host_replay_bit_for_bit") {
        return;
    }
    let feed = workspace_root().join("simulated-feeds/gas-cell.csv");
    let printed = board_run(None, &feed, "default");
    // The firmware's shipped example configuration is the replay's default.
    let example = workspace_root().join("firmware/monitor.toml");
    let channel = steadycal_config::ConfigFile::read(&example)
        .unwrap()
        .channel("monitor.toml")
        .unwrap();
    assert_eq!(
        channel.monitor,
        MonitorConfig::default_for_range(1.0, 1000.0)
    );
    compare_with_host(&printed, &feed, channel, "default");
}

#[test]
fn commissioned_configuration_under_qemu_matches_host_replay_bit_for_bit() {
    // The configuration `steadycal assess lab/co_gas_cell.csv --commission` writes (log
    // rung, commissioned baseline) and the field feed of the same sensor whose gain drifts.
    if !qemu_required("commissioned_configuration_under_qemu_matches_host_replay_bit_for_bit") {
        return;
    }
    let root = workspace_root();
    let config = root.join("simulated-feeds/commissioning/co-cell.monitor.toml");
    let feed = root.join("simulated-feeds/commissioning/co-cell-field-drift.csv");
    let printed = board_run(Some(&config), &feed, "commissioned");
    let channel = steadycal_config::ConfigFile::read(&config)
        .unwrap()
        .channel("co-cell.monitor.toml")
        .unwrap();
    assert!(channel.baseline.is_some());
    let events = compare_with_host(&printed, &feed, channel, "commissioned");
    assert!(
        events.iter().any(|line| line.contains(" gain_drift ")),
        "the drifting feed raises gain_drift on the board: {events:?}"
    );
}

/// Replays `feed` on the host with `channel` as `steadycal replay --precision f32 --config`
/// does and compares everything the board printed; returns the board's event lines.
fn compare_with_host(
    printed: &str,
    feed: &Path,
    channel: steadycal_config::ChannelConfig,
    name: &str,
) -> Vec<String> {
    let scratch = Path::new(env!("CARGO_TARGET_TMPDIR")).join("firmware-qemu");
    let events_path = scratch.join(format!("{name}.host-events.jsonl"));
    let summary_path = scratch.join(format!("{name}.host-summary.json"));
    let readings_path = scratch.join(format!("{name}.host-readings.csv"));
    let snapshot_path = scratch.join(format!("{name}.host-final.snapshot"));
    let log_path = scratch.join(format!("{name}.host-device.log"));
    let parameters = channel.monitor.basis.len() as u8;
    let options = ReplayOptions {
        feed: feed.to_path_buf(),
        events: Some(events_path.clone()),
        summary: Some(summary_path.clone()),
        readings: Some(readings_path.clone()),
        checks: None,
        precision: Precision::F32,
        columns: ColumnNames::default(),
        missing: Default::default(),
        config: channel.monitor,
        baseline: channel.baseline,
        skip_bad_rows: false,
        progress: false,
        warnings: false,
        range_source: "default",
        persist: PersistOptions {
            save_snapshot: Some(snapshot_path.clone()),
            device_log_out: Some(log_path.clone()),
            ..Default::default()
        },
        channel: None,
        pipelined: true,
    };
    let result = replay(&options).expect("host replay");
    assert!(
        result.error.is_none(),
        "host replay stopped: {:?}",
        result.error
    );

    let host_events: Vec<String> = std::fs::read_to_string(&events_path)
        .unwrap()
        .lines()
        .map(|line| canonical_event(line).unwrap_or_else(|e| panic!("host event line: {e}")))
        .collect();
    let board_events: Vec<&str> = printed
        .lines()
        .filter(|line| line.starts_with("event "))
        .collect();
    for (index, (board, host)) in board_events.iter().zip(&host_events).enumerate() {
        assert_eq!(
            board, host,
            "{name}: event {index} differs (board first, host second)"
        );
    }
    assert_eq!(
        board_events.len(),
        host_events.len(),
        "{name}: event counts differ (board, host)"
    );

    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(&summary_path).unwrap()).unwrap();
    let board_summary = board_line(printed, "summary ");
    assert_eq!(
        board_summary,
        canonical_summary(&summary).unwrap(),
        "{name}: summaries differ (board, host)"
    );

    let board_readings = board_line(printed, "readings ");
    let host_readings = readings_digest(&std::fs::read_to_string(&readings_path).unwrap()).unwrap();
    assert_eq!(
        board_readings, host_readings,
        "{name}: calibrated readings differ (board, host)"
    );

    check_persistence(
        printed,
        &std::fs::read(&snapshot_path).unwrap(),
        &std::fs::read(&log_path).unwrap(),
        host_events.len(),
        summary["samples"].as_u64().unwrap(),
        parameters,
    );

    let mut kinds: BTreeMap<&str, usize> = BTreeMap::new();
    for line in &board_events {
        *kinds
            .entry(line.split(' ').nth(2).unwrap_or("?"))
            .or_default() += 1;
    }
    eprintln!(
        "{name}: firmware and host agree on {} events {kinds:?}; {board_readings}; {board_summary}",
        board_events.len()
    );
    board_events.iter().map(|line| line.to_string()).collect()
}

/// The value of `key=` in a line, or a panic naming the line.
fn field<'a>(line: &'a str, key: &str) -> &'a str {
    line.split(' ')
        .find_map(|part| part.strip_prefix(key).and_then(|v| v.strip_prefix('=')))
        .unwrap_or_else(|| panic!("no `{key}=` in `{line}`"))
}

fn board_line<'a>(printed: &'a str, prefix: &str) -> &'a str {
    printed
        .lines()
        .find(|line| line.starts_with(prefix))
        .unwrap_or_else(|| {
            panic!(
                "no `{prefix}` line in the firmware output:\n{}",
                tail(printed)
            )
        })
}

/// The persistence comparisons (module docs).
fn check_persistence(
    printed: &str,
    host_snapshot: &[u8],
    host_log: &[u8],
    host_events: usize,
    samples: u64,
    board_parameters: u8,
) {
    // The embedded device log is the host's --device-log-out, and the board matched every
    // event logged in it with its own.
    let line = board_line(printed, "device_log_in ");
    assert_eq!(field(line, "bytes"), host_log.len().to_string(), "{line}");
    assert_eq!(
        field(line, "crc"),
        format!("{:08x}", CRC32.checksum(host_log)),
        "embedded device log differs from `steadycal replay --device-log-out`: {line}"
    );
    assert_eq!(
        field(line, "logged_events"),
        host_events.to_string(),
        "{line}"
    );
    assert_eq!(field(line, "matched"), host_events.to_string(), "{line}");
    assert_eq!(field(line, "unmatched"), "0", "{line}");
    assert_eq!(field(line, "damaged"), "0", "{line}");

    // The final snapshot, loaded back from the board's store: the payload (the whole
    // state) byte for byte; the header differs only in the fit capacity it records (the
    // board's monitor declares 2 parameters, the host's 3, and a fit writes only the
    // parameters it uses).
    let line = board_line(printed, "snapshot_loaded ");
    let board_hex: String = printed
        .lines()
        .filter_map(|line| line.strip_prefix("snapshot_hex "))
        .map(|rest| rest.split(' ').nth(1).expect("snapshot_hex OFFSET HEX"))
        .collect();
    let board_snapshot: Vec<u8> = (0..board_hex.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&board_hex[i..i + 2], 16).expect("snapshot_hex digits"))
        .collect();
    assert_eq!(
        field(line, "len"),
        board_snapshot.len().to_string(),
        "{line}"
    );
    let stored_crc = u32::from_le_bytes(
        board_snapshot[board_snapshot.len() - 4..]
            .try_into()
            .unwrap(),
    );
    assert_eq!(field(line, "crc"), format!("{stored_crc:08x}"), "{line}");
    let board = Snapshot::parse(&board_snapshot).expect("board snapshot parses");
    let host = Snapshot::parse(host_snapshot).expect("host snapshot parses");
    let (board_header, host_header) = (board.header(), host.header());
    assert_eq!(
        board_header.layout.params, board_parameters,
        "board fit capacity"
    );
    assert_eq!(host_header.layout.params, 3, "host fit capacity");
    let same_but_capacity = Layout {
        params: host_header.layout.params,
        ..board_header.layout
    };
    assert_eq!(same_but_capacity, host_header.layout, "snapshot layouts");
    assert_eq!(
        board_header.version, host_header.version,
        "snapshot versions"
    );
    assert_eq!(
        hex(board.payload()),
        hex(host.payload()),
        "final snapshot payload differs (board first, host second)"
    );
    // Periodic saves plus the final one.
    assert_eq!(
        field(line, "seq"),
        (samples / SNAPSHOT_EVERY + 1).to_string(),
        "{line}"
    );
    let store = board_line(printed, "store ");
    assert_eq!(field(store, "saves"), field(line, "seq"), "{store}");

    // The board's event log: a lone 0x00, then the start and event frames of the host's
    // device log (its sample frames left out).
    let mut expected = vec![0u8];
    for (start, end) in Frames::new(host_log) {
        let mut body = host_log[start..end].to_vec();
        match decode_frame::<f32>(&mut body) {
            Ok(Record::Start(_) | Record::Event(_)) => {
                expected.extend_from_slice(&host_log[start..=end])
            }
            Ok(Record::Sample(_)) => {}
            Err(error) => panic!("host device log, bytes {start}..{end}: {error:?}"),
        }
    }
    let line = board_line(printed, "device_log_out ");
    assert_eq!(
        field(line, "records"),
        (host_events + 1).to_string(),
        "{line}"
    );
    assert_eq!(field(line, "dropped"), "0", "{line}");
    assert_eq!(field(line, "bytes"), expected.len().to_string(), "{line}");
    assert_eq!(
        field(line, "crc"),
        format!("{:08x}", CRC32.checksum(&expected)),
        "board event log differs from the host's start and event frames: {line}"
    );
    assert_eq!(field(line, "read_back_events"), host_events.to_string());

    board_line(printed, "restore ok");
    let sqrt_line = board_line(printed, "sqrt_check");
    assert_eq!(
        field(sqrt_line, "mismatches"),
        "0",
        "the board's square root differs from libm: {sqrt_line}"
    );
    eprintln!(
        "final snapshot: payload of {} bytes equal on board and host; {line}",
        host.payload().len()
    );
}

fn tail(text: &str) -> String {
    let lines: Vec<&str> = text.lines().collect();
    lines[lines.len().saturating_sub(20)..].join("\n")
}

/// Lower-case hex digits of `bytes` (a readable diff when payloads differ).
fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}
