//! Time cells as loggers write them, read as seconds since 1970-01-01T00:00:00Z.
//!
//! Forms ([`TimeForm`]):
//! - automatic: seconds (any decimal), RFC 3339 with a zone or offset
//!   (`2026-03-01T12:00:00Z`), or ISO 8601 without a zone, date and time separated by a
//!   space or `T` (`2026-03-01 12:00:00`, what pandas and spreadsheets write);
//! - a strftime-style format (`%d/%m/%Y %H:%M:%S`, the `%` codes of C, Python and chrono,
//!   as jiff's `strtime` reads them);
//! - epoch seconds or milliseconds.
//!
//! A time without a zone or offset is read in the reader's zone (an IANA name from the
//! bundled zone database, or a fixed offset such as `+01:00`; default UTC). Daylight saving
//! transitions follow the zone database with the usual "compatible" rule: a local time that
//! occurs twice (the repeated hour when clocks go back) takes the earlier instant, so the
//! second pass through that hour repeats earlier times and is reported by the replay's
//! time-order check; a local time that does not exist (clocks go forward) is moved forward
//! by the length of the gap. Neither stops a run.
//!
//! Invariants: [`TimeReader::seconds`] never panics; whole seconds give exact integers in
//! `f64` (so a logger format and canonical seconds give the same bits).

use std::fmt;

use jiff::civil::DateTime;
use jiff::fmt::strtime;
use jiff::tz::{Offset, TimeZone};
use jiff::Timestamp;

/// How epoch numbers count.
#[derive(Clone, Copy, Debug, PartialEq, Eq, clap::ValueEnum)]
pub enum EpochUnit {
    /// Seconds since 1970-01-01T00:00:00Z.
    S,
    /// Milliseconds since 1970-01-01T00:00:00Z.
    Ms,
}

/// The form of a time cell.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum TimeForm {
    /// Seconds, RFC 3339, or ISO 8601 without a zone (space or `T`).
    Auto,
    /// A strftime-style format.
    Format(String),
    /// Epoch numbers in a unit.
    Epoch(EpochUnit),
}

/// A time setting that cannot be used.
#[derive(Clone, Debug, PartialEq, Eq, thiserror::Error)]
pub enum TimeSetupError {
    /// The zone is neither a known IANA name nor a fixed offset.
    #[error("--timezone: unknown time zone {0:?}, expected an IANA name such as Europe/Rome or America/New_York, or a fixed offset such as +01:00 or -0530 (or UTC)")]
    UnknownZone(String),
    /// Both a format and an epoch unit were given.
    #[error("--time-format and --time-unit exclude each other: a format reads dates, a unit reads epoch numbers")]
    FormatAndUnit,
    /// The format has no `%` code.
    #[error("--time-format: {0:?} has no % code, expected a strftime-style format such as '%d/%m/%Y %H:%M:%S'")]
    NoCode(String),
}

/// Reads time cells of one form in one zone.
#[derive(Clone, Debug)]
pub struct TimeReader {
    form: TimeForm,
    zone: TimeZone,
    zone_name: String,
}

impl Default for TimeReader {
    fn default() -> Self {
        TimeReader {
            form: TimeForm::Auto,
            zone: TimeZone::UTC,
            zone_name: "UTC".into(),
        }
    }
}

/// Parses a zone setting: `UTC`/`Z`, a fixed offset (`+01:00`, `-0530`, `+02`), or an IANA
/// name from the bundled database.
pub fn parse_zone(text: &str) -> Result<TimeZone, TimeSetupError> {
    let text = text.trim();
    if text.eq_ignore_ascii_case("utc") || text == "Z" {
        return Ok(TimeZone::UTC);
    }
    if let Some(seconds) = fixed_offset_seconds(text) {
        return Offset::from_seconds(seconds)
            .map(TimeZone::fixed)
            .map_err(|_| TimeSetupError::UnknownZone(text.into()));
    }
    TimeZone::get(text).map_err(|_| TimeSetupError::UnknownZone(text.into()))
}

/// `±HH`, `±HHMM` or `±HH:MM` as seconds east of UTC (hours up to 25).
fn fixed_offset_seconds(text: &str) -> Option<i32> {
    let (sign, rest) = match text.as_bytes().first()? {
        b'+' => (1, &text[1..]),
        b'-' => (-1, &text[1..]),
        _ => return None,
    };
    let digits: String = rest.chars().filter(|c| *c != ':').collect();
    if !digits.bytes().all(|b| b.is_ascii_digit()) || rest.matches(':').count() > 1 {
        return None;
    }
    let (hours, minutes) = match digits.len() {
        1 | 2 => (digits.parse::<i32>().ok()?, 0),
        4 => (digits[..2].parse().ok()?, digits[2..].parse::<i32>().ok()?),
        _ => return None,
    };
    if hours > 25 || minutes > 59 {
        return None;
    }
    Some(sign * (hours * 3600 + minutes * 60))
}

impl TimeReader {
    /// A reader from the options: a format, an epoch unit (not both), a zone (default UTC).
    pub fn new(
        format: Option<&str>,
        unit: Option<EpochUnit>,
        zone: Option<&str>,
    ) -> Result<Self, TimeSetupError> {
        let form = match (format, unit) {
            (Some(_), Some(_)) => return Err(TimeSetupError::FormatAndUnit),
            (Some(format), None) if !format.contains('%') => {
                return Err(TimeSetupError::NoCode(format.into()))
            }
            (Some(format), None) => TimeForm::Format(format.into()),
            (None, Some(unit)) => TimeForm::Epoch(unit),
            (None, None) => TimeForm::Auto,
        };
        let (zone, zone_name) = match zone {
            Some(name) => (parse_zone(name)?, name.trim().to_string()),
            None => (TimeZone::UTC, "UTC".to_string()),
        };
        Ok(TimeReader {
            form,
            zone,
            zone_name,
        })
    }

    /// The form read.
    pub fn form(&self) -> &TimeForm {
        &self.form
    }

    /// The zone as given (`UTC` by default), for the summary.
    pub fn zone_name(&self) -> &str {
        &self.zone_name
    }

    /// What a cell must look like, for error messages.
    pub fn expected(&self) -> String {
        match &self.form {
            TimeForm::Auto => "seconds, an RFC 3339 time (2026-03-01T12:00:00Z) or a date and time without a zone (2026-03-01 12:00:00)".into(),
            TimeForm::Format(format) => format!("a time in the format {format}"),
            TimeForm::Epoch(EpochUnit::S) => "epoch seconds".into(),
            TimeForm::Epoch(EpochUnit::Ms) => "epoch milliseconds".into(),
        }
    }

    /// The cell's time in seconds since 1970-01-01T00:00:00Z, `None` when it does not
    /// match the form.
    pub fn seconds(&self, cell: &str) -> Option<f64> {
        let text = cell.trim();
        match &self.form {
            TimeForm::Auto => {
                if let Ok(seconds) = text.parse::<f64>() {
                    return seconds.is_finite().then_some(seconds);
                }
                if let Ok(instant) = text.parse::<Timestamp>() {
                    return Some(timestamp_seconds(instant));
                }
                let civil = text.parse::<DateTime>().ok()?;
                self.civil_seconds(civil)
            }
            TimeForm::Format(format) => {
                let broken = strtime::parse(format, text).ok()?;
                if let Some(instant) = broken.timestamp() {
                    return Some(timestamp_seconds(instant));
                }
                if broken.offset().is_some() {
                    return broken.to_timestamp().ok().map(timestamp_seconds);
                }
                self.civil_seconds(broken.to_datetime().ok()?)
            }
            TimeForm::Epoch(unit) => {
                let value = text.parse::<f64>().ok().filter(|v| v.is_finite())?;
                Some(match unit {
                    EpochUnit::S => value,
                    EpochUnit::Ms => value / 1000.0,
                })
            }
        }
    }

    fn civil_seconds(&self, civil: DateTime) -> Option<f64> {
        let instant = self.zone.to_ambiguous_timestamp(civil).compatible().ok()?;
        Some(timestamp_seconds(instant))
    }
}

impl fmt::Display for TimeReader {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} in {}", self.expected(), self.zone_name)
    }
}

/// Seconds of an instant: exact for whole seconds.
fn timestamp_seconds(instant: Timestamp) -> f64 {
    let whole = instant.as_second() as f64;
    match instant.subsec_nanosecond() {
        0 => whole,
        nanos => whole + f64::from(nanos) / 1e9,
    }
}

/// Joins the cells of several time columns with one space (`Date,Time` → `10/03/2004
/// 18:00:00`) into `out`.
pub fn join_cells<'a>(cells: impl IntoIterator<Item = &'a str>, out: &mut String) {
    out.clear();
    for (index, cell) in cells.into_iter().enumerate() {
        if index > 0 {
            out.push(' ');
        }
        out.push_str(cell.trim());
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // 2026-03-01T00:00:00Z is 1_772_323_200 s after the epoch (20,513 days · 86,400 s,
    // computed with Python 3 datetime; the same check value as the feed reader's test).
    const MARCH_1_2026: f64 = 1_772_323_200.0;

    fn reader(format: Option<&str>, unit: Option<EpochUnit>, zone: Option<&str>) -> TimeReader {
        TimeReader::new(format, unit, zone).unwrap()
    }

    #[test]
    fn automatic_forms() {
        let r = TimeReader::default();
        assert_eq!(r.seconds("12.5"), Some(12.5));
        assert_eq!(r.seconds("2026-03-01T00:00:01Z"), Some(MARCH_1_2026 + 1.0));
        assert_eq!(
            r.seconds("2026-03-01T01:00:01+01:00"),
            Some(MARCH_1_2026 + 1.0)
        );
        assert_eq!(
            r.seconds("2026-03-01 12:00:00"),
            Some(MARCH_1_2026 + 43_200.0)
        );
        assert_eq!(
            r.seconds("2026-03-01T12:00:00"),
            Some(MARCH_1_2026 + 43_200.0)
        );
        assert_eq!(
            r.seconds(" 2026-03-01 12:00:00.25 "),
            Some(MARCH_1_2026 + 43_200.25)
        );
        assert_eq!(r.seconds("yesterday"), None);
        assert_eq!(r.seconds("nan"), None);
    }

    #[test]
    fn strftime_formats_and_joined_columns() {
        let r = reader(Some("%d/%m/%Y %H:%M:%S"), None, None);
        let mut joined = String::new();
        join_cells(["01/03/2026", "18:00:00"], &mut joined);
        assert_eq!(joined, "01/03/2026 18:00:00");
        assert_eq!(r.seconds(&joined), Some(MARCH_1_2026 + 64_800.0));
        // Hours without a leading zero, as some loggers write them.
        assert_eq!(
            r.seconds("01/03/2026 8:00:00"),
            Some(MARCH_1_2026 + 28_800.0)
        );
        assert_eq!(r.seconds("2026-03-01 18:00:00"), None);
        let dotted = reader(Some("%d/%m/%Y %H.%M.%S"), None, None);
        assert_eq!(
            dotted.seconds("01/03/2026 18.00.00"),
            Some(MARCH_1_2026 + 64_800.0)
        );
        // An offset in the format wins over the zone.
        let offset = reader(Some("%Y-%m-%d %H:%M %z"), None, Some("Asia/Tokyo"));
        assert_eq!(offset.seconds("2026-03-01 01:00 +0100"), Some(MARCH_1_2026));
        assert_eq!(r.expected(), "a time in the format %d/%m/%Y %H:%M:%S");
    }

    #[test]
    fn epoch_units() {
        let s = reader(None, Some(EpochUnit::S), None);
        assert_eq!(s.seconds("1772323200"), Some(MARCH_1_2026));
        let ms = reader(None, Some(EpochUnit::Ms), None);
        assert_eq!(ms.seconds("1772323200500"), Some(MARCH_1_2026 + 0.5));
        assert_eq!(ms.seconds("2026-03-01"), None);
    }

    #[test]
    fn zones_fixed_and_named() {
        let plus = reader(None, None, Some("+01:00"));
        assert_eq!(plus.seconds("2026-03-01 01:00:00"), Some(MARCH_1_2026));
        let minus = reader(None, None, Some("-0530"));
        assert_eq!(minus.seconds("2026-02-28 18:30:00"), Some(MARCH_1_2026));
        // Europe/Rome is UTC+1 in winter, UTC+2 in summer (IANA tz database 2025b through
        // CPython 3.11 zoneinfo: 2026-03-01 01:00 Rome is 00:00 UTC; offset +2:00 on 1 July).
        let rome = reader(None, None, Some("Europe/Rome"));
        assert_eq!(rome.seconds("2026-03-01 01:00:00"), Some(MARCH_1_2026));
        assert_eq!(rome.zone_name(), "Europe/Rome");
        assert_eq!(
            TimeReader::new(None, None, Some("Mars/Olympus")).unwrap_err().to_string(),
            "--timezone: unknown time zone \"Mars/Olympus\", expected an IANA name such as Europe/Rome or America/New_York, or a fixed offset such as +01:00 or -0530 (or UTC)"
        );
        assert!(TimeReader::new(None, None, Some("+31:00")).is_err());
    }

    #[test]
    fn repeated_hour_repeats_times_and_missing_hour_moves_forward() {
        // In 2026 the EU clocks go back on Sunday 25 October at 03:00 CEST (01:00 UTC) and
        // forward on Sunday 29 March at 02:00 CET (EU directive 2000/84/EC: last Sunday of
        // March and of October at 01:00 UTC).
        let rome = reader(None, None, Some("Europe/Rome"));
        let before = rome.seconds("2026-10-25 01:30:00").unwrap();
        let first = rome.seconds("2026-10-25 02:30:00").unwrap();
        let after = rome.seconds("2026-10-25 03:30:00").unwrap();
        // 02:30 is read as CEST (the earlier instant): one hour after 01:30 CEST, and 03:30
        // CET is two hours after it. A logger writing the hour twice thus repeats times.
        assert_eq!(first - before, 3600.0);
        assert_eq!(after - first, 7200.0);
        let gap = rome.seconds("2026-03-29 02:30:00").unwrap();
        let hour_before = rome.seconds("2026-03-29 01:30:00").unwrap();
        assert_eq!(gap - hour_before, 3600.0);
    }

    #[test]
    fn setup_errors() {
        assert_eq!(
            TimeReader::new(Some("%s"), Some(EpochUnit::S), None).unwrap_err(),
            TimeSetupError::FormatAndUnit
        );
        assert!(matches!(
            TimeReader::new(Some("dd/mm/yyyy"), None, None),
            Err(TimeSetupError::NoCode(_))
        ));
    }
}
