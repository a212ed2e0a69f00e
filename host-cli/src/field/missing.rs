//! Missing markers: cells that mean "no value".
//!
//! Empty cells and `NA` are missing by default; `--missing TEXT` (repeatable) and the
//! configuration's `columns.missing` add markers such as `-200`, `-9999` or `null`. A cell is
//! missing when its trimmed text equals a marker (text markers compare without regard to
//! ASCII case, so `NA` also matches `na`), or when it is a number equal to a numeric marker
//! (`-200` also matches `-200.0` and `-2e2`). `nan` and `inf` are never markers: they stay data
//! that the core rejects.
//!
//! Invariants: the default markers are always in the set; matching never allocates.

use std::collections::BTreeMap;

/// The markers every feed has.
pub const DEFAULT_MARKERS: [&str; 2] = ["", "NA"];

/// A set of missing markers.
#[derive(Clone, Debug, PartialEq)]
pub struct MissingMarkers {
    texts: Vec<String>,
    values: Vec<f64>,
}

impl Default for MissingMarkers {
    fn default() -> Self {
        MissingMarkers {
            texts: DEFAULT_MARKERS.iter().map(|s| s.to_string()).collect(),
            values: Vec::new(),
        }
    }
}

/// Checks one `--missing` value (for clap's `value_parser`): any text but `nan`/`inf`, which
/// are data.
pub fn parse_marker(text: &str) -> Result<String, String> {
    let trimmed = text.trim();
    if let Ok(value) = trimmed.parse::<f64>() {
        if !value.is_finite() {
            return Err(format!(
                "{trimmed:?} is data (the monitor rejects non-finite values and says so), not a missing marker; expected a text such as NA or null, or a finite number such as -200"
            ));
        }
    }
    Ok(trimmed.to_string())
}

impl MissingMarkers {
    /// The default markers plus `extra` (each checked by [`parse_marker`]).
    pub fn new<S: AsRef<str>>(extra: &[S]) -> Result<Self, String> {
        let mut markers = MissingMarkers::default();
        for marker in extra {
            let marker = parse_marker(marker.as_ref())?;
            markers.add(marker);
        }
        Ok(markers)
    }

    fn add(&mut self, marker: String) {
        if let Ok(value) = marker.parse::<f64>() {
            if !self.values.contains(&value) {
                self.values.push(value);
            }
        }
        if !self.texts.iter().any(|t| t.eq_ignore_ascii_case(&marker)) {
            self.texts.push(marker);
        }
    }

    /// The markers as given (defaults first), for the summary.
    pub fn texts(&self) -> &[String] {
        &self.texts
    }

    /// The numeric markers.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The marker a cell's text matches, if any.
    pub fn marker_of(&self, cell: &str) -> Option<&str> {
        self.index_of(cell).map(|i| self.texts[i].as_str())
    }

    /// The position in [`MissingMarkers::texts`] of the marker a cell's text matches.
    pub fn index_of(&self, cell: &str) -> Option<usize> {
        let text = cell.trim();
        if let Some(index) = self.texts.iter().position(|m| m.eq_ignore_ascii_case(text)) {
            return Some(index);
        }
        if self.values.is_empty() {
            return None;
        }
        let value = text.parse::<f64>().ok()?;
        self.index_of_value(value)
    }

    /// The position in [`MissingMarkers::texts`] of the marker a cell's text matches when
    /// numbers are written with a decimal comma: its text, or its number (`-9999,90` is
    /// the marker `-9999.9`) read in f64 from the text, never from a value already narrowed
    /// to a run's float type. Allocates only for a cell of more than 64 bytes.
    pub fn index_of_comma(&self, cell: &str) -> Option<usize> {
        let text = cell.trim();
        if let Some(index) = self.texts.iter().position(|m| m.eq_ignore_ascii_case(text)) {
            return Some(index);
        }
        if self.values.is_empty() {
            return None;
        }
        let mut buffer = [0u8; 64];
        let value = match buffer.get_mut(..text.len()) {
            Some(out) => {
                for (o, b) in out.iter_mut().zip(text.bytes()) {
                    *o = if b == b',' { b'.' } else { b };
                }
                std::str::from_utf8(out).ok()?.parse::<f64>().ok()?
            }
            None => text.replace(',', ".").parse::<f64>().ok()?,
        };
        self.index_of_value(value)
    }

    /// The numeric marker a parsed value equals, if any.
    pub fn marker_of_value(&self, value: f64) -> Option<&str> {
        self.index_of_value(value).map(|i| self.texts[i].as_str())
    }

    /// The position in [`MissingMarkers::texts`] of the numeric marker `value` equals.
    pub fn index_of_value(&self, value: f64) -> Option<usize> {
        if !self.values.contains(&value) {
            return None;
        }
        self.texts
            .iter()
            .position(|t| t.parse::<f64>().ok() == Some(value))
    }

    /// True when the cell is missing.
    pub fn is_missing(&self, cell: &str) -> bool {
        self.marker_of(cell).is_some()
    }

    /// Numeric markers inside `[low, high]`: valid readings of a working range that the
    /// markers will remove (allowed, and counted in the summary).
    pub fn inside(&self, low: f64, high: f64) -> Vec<f64> {
        self.values
            .iter()
            .copied()
            .filter(|v| (low..=high).contains(v))
            .collect()
    }
}

/// Cells removed as missing, by column and marker (for the summary).
#[derive(Clone, Debug, Default, PartialEq, Eq, serde::Serialize)]
pub struct MissingTally {
    /// Column → marker → cells.
    pub by_column: BTreeMap<String, BTreeMap<String, u64>>,
}

impl MissingTally {
    /// Counts one missing cell.
    pub fn count(&mut self, column: &str, marker: &str) {
        self.add(column, marker, 1);
    }

    /// Counts `n` missing cells.
    pub fn add(&mut self, column: &str, marker: &str, n: u64) {
        let markers = match self.by_column.get_mut(column) {
            Some(markers) => markers,
            None => self.by_column.entry(column.to_string()).or_default(),
        };
        match markers.get_mut(marker) {
            Some(count) => *count += n,
            None => {
                markers.insert(marker.to_string(), n);
            }
        }
    }

    /// Missing cells of a column.
    pub fn column_total(&self, column: &str) -> u64 {
        self.by_column
            .get(column)
            .map(|m| m.values().sum())
            .unwrap_or(0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_are_empty_and_na() {
        let m = MissingMarkers::default();
        assert!(m.is_missing(""));
        assert!(m.is_missing("  "));
        assert!(m.is_missing("NA"));
        assert!(m.is_missing("na"));
        assert!(!m.is_missing("0"));
        assert!(!m.is_missing("nan"));
    }

    #[test]
    fn numeric_markers_match_by_value() {
        let m = MissingMarkers::new(&["-200", "null"]).unwrap();
        assert_eq!(m.marker_of("-200"), Some("-200"));
        assert_eq!(m.marker_of(" -200.0 "), Some("-200"));
        assert_eq!(m.marker_of("-2e2"), Some("-200"));
        assert_eq!(m.marker_of("NULL"), Some("null"));
        assert_eq!(m.marker_of("-199.9"), None);
        assert_eq!(m.marker_of_value(-200.0), Some("-200"));
        let comma = MissingMarkers::new(&["-9999.9"]).unwrap();
        assert_eq!(comma.index_of_comma("-9999,90"), Some(2));
        assert_eq!(
            comma.index_of_comma(&format!("-9999,9{}", "0".repeat(70))),
            Some(2)
        );
        assert_eq!(comma.index_of_comma("-9999,8"), None);
        assert_eq!(comma.index_of_comma("na"), Some(1));
        assert_eq!(m.texts(), ["", "NA", "-200", "null"]);
    }

    #[test]
    fn non_finite_markers_are_refused() {
        assert_eq!(
            MissingMarkers::new(&["nan"]).unwrap_err(),
            "\"nan\" is data (the monitor rejects non-finite values and says so), not a missing marker; expected a text such as NA or null, or a finite number such as -200"
        );
        assert!(parse_marker("-inf").is_err());
        assert_eq!(parse_marker(" -9999 ").unwrap(), "-9999");
    }

    #[test]
    fn markers_inside_a_range_are_listed() {
        let m = MissingMarkers::new(&["0", "-9999"]).unwrap();
        assert_eq!(m.inside(0.0, 1000.0), vec![0.0]);
    }

    #[test]
    fn tally_counts_by_column_and_marker() {
        let mut tally = MissingTally::default();
        tally.count("ref", "-200");
        tally.count("ref", "-200");
        tally.count("ref", "");
        tally.count("raw", "NA");
        assert_eq!(tally.column_total("ref"), 3);
        assert_eq!(tally.by_column["ref"]["-200"], 2);
        assert_eq!(tally.column_total("temp"), 0);
    }
}
