//! `replay` on a file of many sensors: a wide file (`--raw-column s1,s2,s3`, one sensor
//! column per channel) or a long file (`--channel-column id`, each row naming its channel).
//!
//! One monitor runs per channel, each exactly as the field run of that channel's data alone
//! ([`super::field_run`]): the file is read once to learn its channels (and the rows that
//! give no channel anything), then once per channel, in channel order (sensor-column order,
//! or order of first appearance). The channels share the event, readings and checks outputs
//! (each row starting with its channel, see [`crate::replay::sink::ChannelPrefix`]), so
//! they come grouped by channel. `--summary` is the list of `fleet`'s rows
//! ([`FleetRow`]), each with `channel` and the channel's whole summary under `summary`; the
//! screen shows `fleet`'s table. A channel that cannot be read (a missing column, a bad
//! cell of its own) stops alone; a bad shared cell (time, reference) stops every channel at
//! that row. The run ends as `fleet` does ([`exit_status`]).
//!
//! Invariants: memory is flat in the file's length (one channel's run at a time, the
//! channel names and at most [`LIST_LIMIT`] listed lines); at most [`MAX_CHANNELS`]
//! channels.

use std::io::Write;
use std::process::ExitCode;

use anyhow::{bail, Result};
use serde_json::{json, Value};

use super::{field_run, ReplayArgs};
use crate::commands::exit_bad_input;
use crate::commands::field::{ChannelSource, FieldPlan};
use crate::commands::fleet::{exit_status, table, FleetRow};
use crate::field::reader::LogReader;
use crate::io::create_output;
use crate::replay::sink::channel_headers;
use crate::replay::time_order::LIST_LIMIT;
use crate::replay::ReplayOptions;

/// The most channels of a long file (a channel column that names thousands is more likely
/// the wrong column; raise the limit when a real file needs it).
pub const MAX_CHANNELS: usize = 1024;

/// Rows counted with their first lines listed.
#[derive(Clone, Debug, Default, serde::Serialize)]
struct Rows {
    rows: u64,
    lines: Vec<u64>,
}

impl Rows {
    fn add(&mut self, line: u64) {
        self.rows += 1;
        if self.lines.len() < LIST_LIMIT {
            self.lines.push(line);
        }
    }

    fn lines_text(&self) -> String {
        let mut text: Vec<String> = self.lines.iter().map(u64::to_string).collect();
        if self.rows > self.lines.len() as u64 {
            text.push("...".into());
        }
        text.join(", ")
    }
}

/// What the first reading of the file found.
#[derive(Debug, Default)]
struct Shape {
    channels: Vec<String>,
    /// Rows of a wide file whose every sensor cell is missing (and how many of them held a
    /// reference value).
    no_sensor_value: Rows,
    with_reference: u64,
    /// Rows of a long file whose channel cell is empty or a missing marker.
    no_channel: Rows,
    /// Rows of channels beyond [`MAX_CHANNELS`].
    beyond_limit: Rows,
}

/// Reads the file once: its channels, and the rows that give no channel anything. Rows the
/// CSV reader refuses are left to the channels' runs, which report them.
fn shape(options: &ReplayOptions, plan: &FieldPlan) -> Result<Shape> {
    let mut layout = plan.sensor.clone();
    layout.time = None;
    layout.temperature = None;
    let mut shape = Shape::default();
    match &plan.channels {
        Some(ChannelSource::Columns(names)) => {
            shape.channels = names.clone();
            // Only the sensor columns the header has: a missing one is that channel's error.
            let header = LogReader::open(
                &options.feed,
                &crate::field::reader::LogLayout {
                    raw: Vec::new(),
                    ..layout.clone()
                },
            )?
            .header()
            .to_vec();
            layout.raw.retain(|name| header.contains(name));
        }
        Some(ChannelSource::Column(_)) => layout.raw.clear(),
        None => bail!("replay: not a file of many sensors"),
    }
    let mut reader = LogReader::open(&options.feed, &layout)?;
    let long = matches!(plan.channels, Some(ChannelSource::Column(_)));
    let mut known = std::collections::HashSet::new();
    while let Some(row) = reader.next_shape() {
        let Ok(row) = row else { continue };
        if long {
            if row.channel.is_empty() || plan.sensor.missing.is_missing(&row.channel) {
                shape.no_channel.add(row.line);
            } else if !known.contains(&row.channel) {
                if known.len() == MAX_CHANNELS {
                    shape.beyond_limit.add(row.line);
                } else {
                    known.insert(row.channel.clone());
                    shape.channels.push(row.channel);
                }
            }
        } else if row.no_sensor_value {
            shape.no_sensor_value.add(row.line);
            shape.with_reference += u64::from(row.has_reference);
        }
    }
    Ok(shape)
}

/// Runs `replay` on a file of many sensors.
pub fn run(args: &ReplayArgs, options: ReplayOptions, plan: &FieldPlan) -> Result<ExitCode> {
    let refused = [
        ("--report", args.report.is_some()),
        ("--resume", args.resume.is_some()),
        ("--save-snapshot", args.save_snapshot.is_some()),
        ("--device-log-out", args.device_log_out.is_some()),
        ("--save-config", args.field.save_config.is_some()),
    ];
    if let Some((name, _)) = refused.iter().find(|(_, given)| *given) {
        bail!(
            "{name} is about one channel; a file of many sensors runs one monitor per channel (replay one channel's column alone to use {name})"
        );
    }
    let file = options.feed.display().to_string();
    if file == "-" {
        bail!(
            "-: a file of many sensors is read once per channel: give a file, not standard input"
        );
    }
    let shape = shape(&options, plan)?;
    if shape.channels.is_empty() {
        bail!("{file}: no row names a channel");
    }
    channel_headers(&options)?;
    let mut rows = Vec::with_capacity(shape.channels.len());
    let mut strict_failed = false;
    for (index, name) in shape.channels.iter().enumerate() {
        let mut channel = options.clone();
        channel.summary = None;
        channel.channel = Some(name.clone());
        channel.progress = options.progress && index == 0;
        let result = field_run::run(args, &mut channel, &plan.for_channel(name));
        let mut row = match result {
            Ok(mut result) => {
                strict_failed |= plan.strict && !result.suspects.is_empty();
                if let Value::Object(map) = &mut result.summary {
                    map.insert("file".into(), json!(file));
                    map.insert("channel".into(), json!(name));
                    if !shape.no_sensor_value.lines.is_empty() {
                        map.insert(
                            "rows_without_sensor_value".into(),
                            json!({"rows": shape.no_sensor_value.rows, "with_reference": shape.with_reference, "lines": shape.no_sensor_value.lines}),
                        );
                    }
                    if shape.no_channel.rows > 0 {
                        map.insert("rows_without_channel".into(), json!(shape.no_channel));
                    }
                }
                let mut row = FleetRow::from_summary(file.clone(), &result.summary);
                row.summary = Some(result.summary);
                row
            }
            Err(error) => FleetRow::failed(file.clone(), format!("{error:#}")),
        };
        row.channel = Some(name.clone());
        rows.push(row);
    }
    if let Some(path) = &options.summary {
        let mut out = create_output(path)?;
        serde_json::to_writer_pretty(&mut out, &rows)?;
        out.write_all(b"\n")?;
        out.flush()?;
    }
    if args.chatter.human() {
        eprint!("{}", table(&rows));
    }
    if options.warnings && shape.no_sensor_value.rows > 0 {
        let columns = match &plan.channels {
            Some(ChannelSource::Columns(names)) => names.join(", "),
            _ => String::new(),
        };
        eprintln!(
            "steadycal: warning: {file}: {} rows have no value in any sensor column ({columns}): lines {}; no channel took a sample from them, {} of them with a reference value (counted in each channel's `missing_raw` and in `rows_without_sensor_value`)",
            shape.no_sensor_value.rows,
            shape.no_sensor_value.lines_text(),
            shape.with_reference,
        );
    }
    let mut problems = Vec::new();
    if shape.no_channel.rows > 0 && !options.skip_bad_rows {
        problems.push(format!(
            "{file}: {} rows name no channel (an empty cell or a missing marker in the channel column): lines {}; no channel read them (--skip-bad-rows lets the run pass over them)",
            shape.no_channel.rows,
            shape.no_channel.lines_text()
        ));
    }
    if shape.beyond_limit.rows > 0 {
        problems.push(format!(
            "{file}: {} rows belong to channels beyond the first {MAX_CHANNELS}: lines {}; they were not read (is the channel column the right one?)",
            shape.beyond_limit.rows,
            shape.beyond_limit.lines_text()
        ));
    }
    for problem in &problems {
        eprintln!("steadycal: {problem}");
    }
    let channels_failed = rows.iter().any(|row| row.status != "ok");
    if channels_failed || (problems.is_empty() && !strict_failed) {
        return Ok(exit_status(&rows, args.fail_on));
    }
    if strict_failed {
        eprintln!("steadycal: --strict: values that look like undeclared missing markers were found (listed in the channels' `suspected_missing_markers`); declare them with --missing");
    }
    Ok(exit_bad_input())
}
