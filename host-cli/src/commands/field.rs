//! Options for field logs (time forms, zones, missing markers, separators, a reference log
//! joined by time) and how a replay runs on them.
//!
//! A replay takes the field path when any of these options is given (or the configuration
//! declares `columns.missing`): the log is then read by [`crate::field::reader`] instead of
//! the canonical feed reader, and the summary gains `first_t`, `last_t`, `timezone`,
//! `missing_raw`, `missing` (cells removed, by column and marker), `blank_rows`,
//! `suspected_missing_markers`, `range_source`, `checks_outside_range` and, with a
//! reference log, `join`.

use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use clap::Args;
use serde_json::{json, Map, Value};

use crate::field::duration::{parse_duration, parse_positive_duration};
use crate::field::join::Pairing;
use crate::field::missing::{parse_marker, MissingMarkers};
use crate::field::reader::{LogLayout, LogReader};
use crate::field::rows::FieldTally;
use crate::field::time::{EpochUnit, TimeReader};

/// How a log writes its cells.
#[derive(Args, Debug, Clone, Default)]
pub struct FieldArgs {
    /// Format of time cells, strftime style (`%d/%m/%Y %H:%M:%S`; the `%` codes of C,
    /// Python and chrono) [default: seconds, RFC 3339, or ISO 8601 without a zone].
    #[arg(long, value_name = "FORMAT")]
    pub time_format: Option<String>,
    /// Time cells are epoch numbers in this unit.
    #[arg(long, value_enum, value_name = "UNIT", conflicts_with = "time_format")]
    pub time_unit: Option<EpochUnit>,
    /// Zone of times written without one: an IANA name (Europe/Rome) or a fixed offset
    /// (+01:00) [default: UTC].
    #[arg(long, value_name = "ZONE")]
    pub timezone: Option<String>,
    /// A cell text that means "no value" (repeatable; empty cells and NA always do), e.g.
    /// --missing=-200.
    #[arg(long, value_name = "TEXT", value_parser = marker_arg, allow_hyphen_values = true)]
    pub missing: Vec<String>,
    /// Field separator: one character, or `tab` [default: ,].
    #[arg(long, value_name = "CHAR", value_parser = separator_arg)]
    pub separator: Option<u8>,
    /// Numbers are written with a decimal comma (`0,75`; use with --separator ';').
    #[arg(long)]
    pub decimal_comma: bool,
    /// Exit with code 2 (after writing every output) when a value looks like an undeclared
    /// missing marker.
    #[arg(long)]
    pub strict: bool,
    /// Column naming the channel of each row in a long file of many sensors: one monitor
    /// runs per channel (for a wide file, give several names to --raw-column instead).
    #[arg(long, value_name = "NAME")]
    pub channel_column: Option<String>,
    /// Write the monitor configuration used (the working range included, wherever it came
    /// from) as a complete commented file, for the board.
    #[arg(long, value_name = "FILE")]
    pub save_config: Option<PathBuf>,
}

/// A reference log joined to the sensor log by time.
#[derive(Args, Debug, Clone, Default)]
pub struct ReferenceArgs {
    /// Reference log: its time column and its reference column (`--ref-column`) are
    /// joined to the sensor log by time.
    #[arg(long, value_name = "FILE")]
    pub reference: Option<PathBuf>,
    /// Time column(s) of the reference log [default: the sensor log's].
    #[arg(long, value_name = "NAME[,NAME]", requires = "reference")]
    pub reference_time_column: Option<String>,
    /// Time format of the reference log [default: the sensor log's].
    #[arg(long, value_name = "FORMAT", requires = "reference")]
    pub reference_time_format: Option<String>,
    /// Pair each reference row with the nearest sensor sample within this duration
    /// (30s, 5m, 1h).
    #[arg(
        long,
        value_name = "DURATION",
        requires = "reference",
        conflicts_with = "average_over"
    )]
    pub match_within: Option<String>,
    /// Pair each reference row with the mean of the sensor samples in the window of this
    /// duration ending at its time stamp.
    #[arg(long, value_name = "DURATION", requires = "reference")]
    pub average_over: Option<String>,
    /// Add this duration to the reference log's times (a known clock difference; may be
    /// negative, e.g. --reference-offset=-30s).
    #[arg(
        long,
        value_name = "DURATION",
        requires = "reference",
        allow_hyphen_values = true
    )]
    pub reference_offset: Option<String>,
}

fn marker_arg(text: &str) -> std::result::Result<String, String> {
    parse_marker(text)
}

fn separator_arg(text: &str) -> std::result::Result<u8, String> {
    match text {
        "tab" | "\\t" | "\t" => Ok(b'\t'),
        _ if text.len() == 1 && text.is_ascii() => Ok(text.as_bytes()[0]),
        _ => Err(format!(
            "expected one ASCII character (such as ; or |) or `tab`, found {text:?}"
        )),
    }
}

/// Splits a column option: `Date,Time` → `["Date", "Time"]`.
pub fn column_list(text: &str) -> Vec<String> {
    text.split(',').map(|s| s.trim().to_string()).collect()
}

/// Where the working range came from (summary `range_source`).
pub fn range_source(
    monitor: &super::MonitorArgs,
    config_has_range: bool,
    from_data: bool,
) -> &'static str {
    if monitor.level_low.is_some() || monitor.level_high.is_some() {
        "options"
    } else if config_has_range {
        "config"
    } else if from_data {
        "data"
    } else {
        "default"
    }
}

/// Where the channels of a file of many sensors are.
#[derive(Clone, Debug, PartialEq)]
pub enum ChannelSource {
    /// A wide file: one sensor column per channel (`--raw-column s1,s2,s3`).
    Columns(Vec<String>),
    /// A long file: the column naming each row's channel (`--channel-column id`).
    Column(String),
}

/// Everything a field replay needs to open its logs.
#[derive(Clone, Debug)]
pub struct FieldPlan {
    /// The channels of a file of many sensors (`None`: one sensor; `sensor.raw` then
    /// holds one column).
    pub channels: Option<ChannelSource>,
    /// The sensor log's layout.
    pub sensor: LogLayout,
    /// The reference log, its layout, clock offset and pairing.
    pub reference: Option<(PathBuf, LogLayout, f64, Pairing)>,
    /// The zone as given, for the summary.
    pub timezone: String,
    /// `--strict`.
    pub strict: bool,
}

impl FieldPlan {
    /// True when the field path is needed.
    pub fn wanted(
        field: &FieldArgs,
        reference: &ReferenceArgs,
        columns: &super::ColumnArgs,
        config_missing: &[String],
    ) -> bool {
        field.time_format.is_some()
            || field.time_unit.is_some()
            || field.timezone.is_some()
            || !field.missing.is_empty()
            || field.separator.is_some()
            || field.decimal_comma
            || field.strict
            || field.save_config.is_some()
            || reference.reference.is_some()
            || field.channel_column.is_some()
            || columns
                .raw_column
                .as_deref()
                .is_some_and(|c| c.contains(','))
            || !config_missing.is_empty()
            || columns
                .time_column
                .as_deref()
                .is_some_and(|c| c.contains(','))
    }

    /// The plan from the options; `names` are the resolved column names (time, raw,
    /// reference, temperature), `config_missing` the configuration's `columns.missing`.
    pub fn new(
        field: &FieldArgs,
        reference: &ReferenceArgs,
        names: &crate::feed::ColumnNames,
        time_given: bool,
        config_missing: &[String],
    ) -> Result<FieldPlan> {
        let time_reader = TimeReader::new(
            field.time_format.as_deref(),
            field.time_unit,
            field.timezone.as_deref(),
        )?;
        let mut markers: Vec<String> = Vec::new();
        for marker in config_missing {
            markers
                .push(parse_marker(marker).map_err(|e| anyhow::anyhow!("columns.missing: {e}"))?);
        }
        markers.extend(field.missing.iter().cloned());
        let missing =
            MissingMarkers::new(&markers).map_err(|e| anyhow::anyhow!("--missing: {e}"))?;
        let time = time_given.then(|| column_list(&names.time));
        let raw = column_list(&names.raw);
        let channels = match (&field.channel_column, raw.len()) {
            (Some(_), 2..) => anyhow::bail!(
                "--channel-column: give either several sensor columns (--raw-column s1,s2: a wide file) or a channel column (a long file), not both"
            ),
            (Some(column), _) => Some(ChannelSource::Column(column.clone())),
            (None, 2..) => {
                if let Some(name) = raw.iter().find(|n| n.is_empty()) {
                    anyhow::bail!("--raw-column: an empty column name in {:?}{name}", names.raw);
                }
                Some(ChannelSource::Columns(raw.clone()))
            }
            (None, _) => None,
        };
        let sensor = LogLayout {
            separator: field.separator.unwrap_or(b','),
            decimal_comma: field.decimal_comma,
            time: time.clone(),
            time_reader: time_reader.clone(),
            raw: if raw.len() > 1 {
                raw
            } else {
                vec![names.raw.clone()]
            },
            reference: (reference.reference.is_none()).then(|| names.reference.clone()),
            reference_required: false,
            temperature: Some(names.temperature.clone()),
            channel: field.channel_column.clone(),
            only_channel: None,
            missing: missing.clone(),
        };
        let reference = match &reference.reference {
            None => None,
            Some(path) => {
                let pairing = match (&reference.match_within, &reference.average_over) {
                    (Some(text), None) => {
                        Pairing::Nearest(parse_positive_duration("--match-within", text).map_err(anyhow::Error::msg)?)
                    }
                    (None, Some(text)) => {
                        Pairing::Average(parse_positive_duration("--average-over", text).map_err(anyhow::Error::msg)?)
                    }
                    _ => anyhow::bail!(
                        "--reference: say how reference rows find sensor samples: --match-within DURATION (the nearest sample) or --average-over DURATION (the mean over the window ending at the reference time)"
                    ),
                };
                let offset = match &reference.reference_offset {
                    Some(text) => {
                        parse_duration("--reference-offset", text).map_err(anyhow::Error::msg)?
                    }
                    None => 0.0,
                };
                let reference_time_reader = match &reference.reference_time_format {
                    Some(format) => TimeReader::new(Some(format), None, field.timezone.as_deref())?,
                    None => time_reader.clone(),
                };
                let layout = LogLayout {
                    time: reference
                        .reference_time_column
                        .as_deref()
                        .map(column_list)
                        .or(time),
                    time_reader: reference_time_reader,
                    raw: Vec::new(),
                    reference: Some(names.reference.clone()),
                    reference_required: true,
                    temperature: None,
                    channel: None,
                    ..sensor.clone()
                };
                Some((path.clone(), layout, offset, pairing))
            }
        };
        Ok(FieldPlan {
            channels,
            sensor,
            reference,
            timezone: time_reader.zone_name().to_string(),
            strict: field.strict,
        })
    }

    /// The plan of one channel of a file of many sensors: its sensor column (a wide file)
    /// or its rows (a long file).
    pub fn for_channel(&self, name: &str) -> FieldPlan {
        let mut plan = self.clone();
        match &self.channels {
            Some(ChannelSource::Columns(_)) => plan.sensor.raw = vec![name.to_string()],
            Some(ChannelSource::Column(_)) => plan.sensor.only_channel = Some(name.to_string()),
            None => {}
        }
        plan.channels = None;
        plan
    }

    /// Opens the sensor log (and the reference log).
    pub fn open(&self, feed: &Path) -> Result<(LogReader, Option<LogReader>)> {
        let sensor = LogReader::open(feed, &self.sensor)?;
        let reference = match &self.reference {
            Some((path, layout, _, _)) => Some(LogReader::open(path, layout)?),
            None => None,
        };
        Ok((sensor, reference))
    }
}

/// The summary entries of a field run (the census entries every replay writes come from
/// the run itself).
pub fn summary_entries(map: &mut Map<String, Value>, tally: &FieldTally, plan: &FieldPlan) {
    map.insert("timezone".into(), json!(plan.timezone));
    map.insert("missing_raw".into(), json!(tally.missing_raw));
    map.insert("missing".into(), json!(tally.missing.by_column));
    map.insert("blank_rows".into(), json!(tally.blank_rows));
    if let Some(join) = &tally.join {
        let mut value = serde_json::to_value(join).unwrap_or(Value::Null);
        if let (Value::Object(object), Some((path, _, offset, pairing))) =
            (&mut value, &plan.reference)
        {
            object.insert("reference".into(), json!(path.display().to_string()));
            object.insert(
                "reference_missing".into(),
                json!(tally.reference_missing.by_column),
            );
            object.insert("offset_seconds".into(), json!(offset));
            let (mode, seconds) = match pairing {
                Pairing::Nearest(s) => ("nearest", s),
                Pairing::Average(s) => ("average", s),
            };
            object.insert("pairing".into(), json!(mode));
            object.insert("window_seconds".into(), json!(seconds));
        }
        map.insert("join".into(), value);
    }
}

/// Writes `path` with the complete configuration in force and the range used.
pub fn save_config(
    path: &Path,
    config_file: Option<&Path>,
    low: f64,
    high: f64,
    source: &str,
) -> Result<()> {
    let mut file = match config_file {
        Some(path) => crate::config::ConfigFile::read(path)?,
        None => crate::config::ConfigFile::default(),
    };
    file.range.low = Some(crate::config::Positive(low));
    file.range.high = Some(crate::config::Positive(high));
    let complete = file
        .complete()
        .map_err(|p| anyhow::anyhow!("--save-config: {}: {}", p.key, p.message))?;
    let header = format!(
        "Monitor configuration written by `steadycal replay --save-config`; the working range came from {source}."
    );
    let text = complete
        .to_commented_toml(&header)
        .map_err(|p| anyhow::anyhow!("--save-config: {}: {}", p.key, p.message))?;
    std::fs::write(path, text).with_context(|| format!("{}: cannot write", path.display()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn separators_and_column_lists() {
        assert_eq!(separator_arg(";"), Ok(b';'));
        assert_eq!(separator_arg("tab"), Ok(b'\t'));
        assert!(separator_arg(";;").is_err());
        assert_eq!(column_list("Date, Time"), ["Date", "Time"]);
    }
}
