//! Cells read by the general path: numbers parsed by `str::parse` (`nan` and `inf`
//! accepted as data), RFC 3339 timestamps, and cell text for messages. The fast path's
//! numbers are parsed by [`super::decimal`], bit-identically.

use std::str::FromStr;

/// The cell text cut to 40 characters, for messages.
pub fn shorten(bytes: &[u8]) -> String {
    let text = String::from_utf8_lossy(bytes);
    let mut out: String = text.chars().take(40).collect();
    if text.chars().count() > 40 {
        out.push('…');
    }
    out
}

/// Parses a numeric cell (the general path); `nan`, `inf`, `-inf` (any case) are accepted as data.
pub fn parse_number<T: FromStr>(cell: &[u8]) -> Option<T> {
    let text = trim(std::str::from_utf8(cell).ok()?);
    text.parse().ok()
}

/// `str::trim`, skipped when the text starts and ends with a visible ASCII character (the
/// usual numeric cell), which `trim` would leave as it is.
pub fn trim(text: &str) -> &str {
    match (text.as_bytes().first(), text.as_bytes().last()) {
        (Some(first), Some(last)) if first.is_ascii_graphic() && last.is_ascii_graphic() => text,
        _ => text.trim(),
    }
}

/// Parses an RFC 3339 timestamp into seconds since 1970-01-01T00:00:00Z.
pub fn parse_rfc3339(cell: &[u8]) -> Option<f64> {
    let text = std::str::from_utf8(cell).ok()?.trim();
    let time =
        time::OffsetDateTime::parse(text, &time::format_description::well_known::Rfc3339).ok()?;
    Some(time.unix_timestamp_nanos() as f64 * 1e-9)
}
