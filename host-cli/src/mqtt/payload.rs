//! Sample payloads: one JSON object per message, or one CSV line under a declared header.
//!
//! JSON: `t` (a number, or a string in a time form the CSV reader accepts: seconds or RFC
//! 3339), `raw` (a number, required), `ref` and `temp` (numbers; absent or `null` = none),
//! `channel` (a string, used when the topic filter has no `+` level). The field names are
//! the feed's column names (`--time-column` ...). Numbers are read from their JSON text by
//! the float type's own parser, so `1.1` becomes the same `f32` as the CSV cell `1.1` (no
//! rounding through `f64`).
//!
//! CSV: the payload is one data line of a feed whose header is declared once
//! (`--columns t,raw,ref`); it is parsed by the feed reader ([`crate::feed::CsvFeed`]), so
//! cells mean exactly what they mean in `replay` (`nan` and `inf` are data).
//!
//! Invariant: [`parse`] never panics; anything it cannot read is a [`Malformed`] reason,
//! never a sample. A missing `raw` is never a sample.

use std::collections::BTreeMap;
use std::fmt;

use serde_json::value::RawValue;
use steadycal_core::sample::Sample;

use crate::feed::cell::shorten;
use crate::feed::{parse_number, parse_rfc3339, ColumnNames, CsvFeed, FeedFloat};

/// How payloads are written.
#[derive(Clone, Debug)]
pub enum PayloadFormat {
    /// One JSON object per message.
    Json,
    /// One CSV line per message under this header line (no line end).
    Csv {
        /// The declared header.
        header: String,
        /// Index of the `channel` column in the header, if any.
        channel: Option<usize>,
    },
}

impl PayloadFormat {
    /// The CSV format for a declared list of column names (`t,raw,ref`).
    pub fn csv(columns: &str) -> Self {
        let channel = columns.split(',').position(|c| c.trim() == "channel");
        PayloadFormat::Csv {
            header: columns.to_string(),
            channel,
        }
    }
}

/// Why a payload is not a sample.
#[derive(Clone, Debug, PartialEq)]
pub enum Malformed {
    /// Longer than the configured limit.
    TooLarge {
        /// Payload length.
        bytes: usize,
        /// The limit.
        limit: usize,
    },
    /// Not UTF-8 text.
    NotText,
    /// Not a JSON object (serde_json's message with line and column).
    NotJson(String),
    /// A required field is missing (or `null`).
    Missing(String),
    /// A field holds something else than a number.
    NotNumber {
        /// The field.
        field: String,
        /// What it holds (cut to 40 characters).
        found: String,
    },
    /// The time field is neither seconds nor an RFC 3339 timestamp.
    BadTime(String),
    /// The `channel` field is not a string.
    BadChannelField(String),
    /// A CSV payload the feed reader refused (its message).
    Csv(String),
    /// No channel: the topic filter has no `+` level and the payload names none.
    NoChannel,
    /// The channel name cannot be used in a topic level and a file name.
    BadChannelName(String),
}

impl fmt::Display for Malformed {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Malformed::TooLarge { bytes, limit } => write!(
                f,
                "payload of {bytes} bytes, over the limit of {limit} bytes (--max-payload)"
            ),
            Malformed::NotText => write!(f, "payload is not UTF-8 text"),
            Malformed::NotJson(message) => {
                write!(f, "expected one JSON object per message: {message}")
            }
            Malformed::Missing(field) => write!(f, "no `{field}` field, expected a number"),
            Malformed::NotNumber { field, found } => {
                write!(f, "field `{field}`: expected a number, found {found}")
            }
            Malformed::BadTime(found) => write!(
                f,
                "time field: expected seconds or an RFC 3339 timestamp (2026-03-01T12:00:00Z), found {found}"
            ),
            Malformed::BadChannelField(found) => {
                write!(f, "field `channel`: expected a string, found {found}")
            }
            Malformed::Csv(message) => write!(f, "{message}"),
            Malformed::NoChannel => write!(
                f,
                "no channel: the topic filter has no `+` level and the payload has no `channel` field"
            ),
            Malformed::BadChannelName(name) => write!(
                f,
                "channel {name:?}: expected 1 to 64 letters, digits, '.', '_' or '-', not starting with '.'"
            ),
        }
    }
}

/// A payload read: the sample (its `seq` left 0 for the caller to number) and the channel
/// the payload names, if any.
#[derive(Debug)]
pub struct Parsed<R> {
    /// The sample; `t` is `None` when the payload has no time (the caller uses `seq`).
    pub sample: Sample<R>,
    /// True when the payload had a time.
    pub timed: bool,
    /// The payload's `channel` field or column.
    pub channel: Option<String>,
}

/// Reads one payload.
pub fn parse<R: FeedFloat>(
    payload: &[u8],
    format: &PayloadFormat,
    names: &ColumnNames,
    limit: usize,
) -> Result<Parsed<R>, Malformed> {
    if payload.len() > limit {
        return Err(Malformed::TooLarge {
            bytes: payload.len(),
            limit,
        });
    }
    match format {
        PayloadFormat::Json => parse_json(payload, names),
        PayloadFormat::Csv { header, channel } => parse_csv(payload, header, *channel, names),
    }
}

fn parse_json<R: FeedFloat>(payload: &[u8], names: &ColumnNames) -> Result<Parsed<R>, Malformed> {
    let text = std::str::from_utf8(payload).map_err(|_| Malformed::NotText)?;
    let fields: BTreeMap<String, &RawValue> =
        serde_json::from_str(text).map_err(|e| Malformed::NotJson(e.to_string()))?;
    let raw = match number::<R>(&fields, &names.raw)? {
        Some(raw) => raw,
        None => return Err(Malformed::Missing(names.raw.clone())),
    };
    let reference = number::<R>(&fields, &names.reference)?;
    let temperature = number::<R>(&fields, &names.temperature)?;
    let t = match fields.get(names.time.as_str()).map(|v| v.get()) {
        None | Some("null") => None,
        Some(text) if text.starts_with('"') => {
            let cell: String =
                serde_json::from_str(text).map_err(|_| Malformed::BadTime(cut(text)))?;
            let seconds = parse_number::<f64>(cell.as_bytes())
                .or_else(|| parse_rfc3339(cell.as_bytes()))
                .ok_or_else(|| Malformed::BadTime(cut(text)))?;
            Some(seconds)
        }
        Some(text) => Some(
            text.parse::<f64>()
                .map_err(|_| Malformed::BadTime(cut(text)))?,
        ),
    };
    let channel = match fields.get("channel").map(|v| v.get()) {
        None | Some("null") => None,
        Some(text) => Some(
            serde_json::from_str::<String>(text)
                .map_err(|_| Malformed::BadChannelField(cut(text)))?,
        ),
    };
    Ok(Parsed {
        sample: Sample {
            seq: 0,
            t: t.unwrap_or(0.0),
            raw,
            reference,
            temperature,
            averaged: 1,
        },
        timed: t.is_some(),
        channel,
    })
}

/// A numeric field: its JSON number text parsed by the float type (`None` when absent or
/// `null`).
fn number<R: FeedFloat>(
    fields: &BTreeMap<String, &RawValue>,
    name: &str,
) -> Result<Option<R>, Malformed> {
    match fields.get(name).map(|v| v.get()) {
        None | Some("null") => Ok(None),
        Some(text) => {
            let numeric = text.starts_with(|c: char| c == '-' || c.is_ascii_digit());
            match text.parse::<R>() {
                Ok(value) if numeric => Ok(Some(value)),
                _ => Err(Malformed::NotNumber {
                    field: name.to_string(),
                    found: cut(text),
                }),
            }
        }
    }
}

/// JSON text cut to 40 characters, for messages.
fn cut(text: &str) -> String {
    shorten(text.as_bytes())
}

fn parse_csv<R: FeedFloat>(
    payload: &[u8],
    header: &str,
    channel: Option<usize>,
    names: &ColumnNames,
) -> Result<Parsed<R>, Malformed> {
    let line = payload
        .strip_suffix(b"\n")
        .map(|l| l.strip_suffix(b"\r").unwrap_or(l))
        .unwrap_or(payload);
    if line.contains(&b'\n') {
        return Err(Malformed::Csv(
            "payload: more than one line, expected one CSV line per message".into(),
        ));
    }
    let mut text = Vec::with_capacity(header.len() + 1 + line.len());
    text.extend_from_slice(header.as_bytes());
    text.push(b'\n');
    text.extend_from_slice(line);
    let csv_error = |e: crate::feed::FeedError| Malformed::Csv(e.to_string());
    let mut feed = CsvFeed::new("payload".into(), text.as_slice(), names).map_err(csv_error)?;
    let timed = feed.has_time();
    let sample = match feed.next_sample::<R>() {
        Some(Ok(sample)) => sample,
        Some(Err(error)) => return Err(csv_error(error)),
        None if feed.missing_raw() > 0 => return Err(Malformed::Missing(names.raw.clone())),
        None => {
            return Err(Malformed::Csv(
                "payload: empty, expected one CSV line".into(),
            ))
        }
    };
    let channel = channel.and_then(|index| {
        line.split(|&b| b == b',')
            .nth(index)
            .map(|cell| String::from_utf8_lossy(cell).trim().to_string())
            .filter(|cell| !cell.is_empty())
    });
    Ok(Parsed {
        sample,
        timed,
        channel,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn json(text: &str) -> Result<Parsed<f32>, Malformed> {
        parse(
            text.as_bytes(),
            &PayloadFormat::Json,
            &ColumnNames::default(),
            1 << 16,
        )
    }

    #[test]
    fn json_numbers_parse_as_the_csv_cells_do() {
        let parsed = json(r#"{"t":12.5,"raw":1.1,"ref":2}"#).unwrap();
        // "1.1" read as f32 directly, the feed reader's rule (no rounding through f64).
        assert_eq!(
            parsed.sample.raw.to_bits(),
            "1.1".parse::<f32>().unwrap().to_bits()
        );
        assert_eq!(parsed.sample.reference, Some(2.0));
        assert_eq!(parsed.sample.t, 12.5);
        assert!(parsed.timed);
        assert_eq!(parsed.sample.temperature, None);
    }

    #[test]
    fn json_time_forms_and_channel() {
        let parsed = json(r#"{"t":"2026-03-01T00:00:01Z","raw":3,"channel":"cell-7"}"#).unwrap();
        // 2026-03-01T00:00:00Z is 1_772_323_200 s after the epoch (20513 days · 86400 s,
        // computed with Python 3 datetime).
        assert_eq!(parsed.sample.t, 1_772_323_201.0);
        assert_eq!(parsed.channel.as_deref(), Some("cell-7"));
        assert!(!json(r#"{"raw":3}"#).unwrap().timed);
    }

    #[test]
    fn json_bad_payloads_say_why() {
        assert!(matches!(json("not json"), Err(Malformed::NotJson(_))));
        assert!(matches!(json("[1,2]"), Err(Malformed::NotJson(_))));
        assert_eq!(
            json(r#"{"t":1,"ref":2}"#).unwrap_err(),
            Malformed::Missing("raw".into())
        );
        assert_eq!(
            json(r#"{"t":1,"raw":null}"#).unwrap_err(),
            Malformed::Missing("raw".into())
        );
        assert_eq!(
            json(r#"{"t":1,"raw":"12"}"#).unwrap_err().to_string(),
            "field `raw`: expected a number, found \"12\""
        );
        assert!(matches!(
            json(r#"{"t":1,"raw":true}"#),
            Err(Malformed::NotNumber { .. })
        ));
        assert!(matches!(
            json(r#"{"t":"yesterday","raw":1}"#),
            Err(Malformed::BadTime(_))
        ));
        assert!(matches!(
            parse::<f32>(
                &[0xff, 0xfe],
                &PayloadFormat::Json,
                &ColumnNames::default(),
                10
            ),
            Err(Malformed::NotText)
        ));
        let big = vec![b' '; 1 << 20];
        assert_eq!(
            parse::<f32>(&big, &PayloadFormat::Json, &ColumnNames::default(), 1 << 16).unwrap_err(),
            Malformed::TooLarge {
                bytes: 1 << 20,
                limit: 1 << 16
            }
        );
    }

    #[test]
    fn csv_lines_under_a_declared_header() {
        let format = PayloadFormat::csv("t,channel,raw,ref");
        let names = ColumnNames::default();
        let parsed: Parsed<f64> = parse(b"5,cell-2,1.5,\n", &format, &names, 1 << 16).unwrap();
        assert_eq!((parsed.sample.t, parsed.sample.raw), (5.0, 1.5));
        assert_eq!(parsed.sample.reference, None);
        assert_eq!(parsed.channel.as_deref(), Some("cell-2"));
        let nan: Parsed<f64> = parse(b"6,c,nan,1", &format, &names, 1 << 16).unwrap();
        assert!(nan.sample.raw.is_nan());
        let error = parse::<f64>(b"6,c,abc,1", &format, &names, 1 << 16).unwrap_err();
        assert!(error.to_string().contains("column `raw`"), "{error}");
        assert!(parse::<f64>(b"1,c,2,3\n4,c,5,6", &format, &names, 1 << 16).is_err());
        // A missing raw cell (empty or NA) is no sample, as in a feed.
        for line in [&b"7,c,,1"[..], b"7,c,NA,1"] {
            assert_eq!(
                parse::<f64>(line, &format, &names, 1 << 16).unwrap_err(),
                Malformed::Missing("raw".into())
            );
        }
        let na_ref: Parsed<f64> = parse(b"8,c,2,NA", &format, &names, 1 << 16).unwrap();
        assert_eq!(na_ref.sample.reference, None);
    }
}
