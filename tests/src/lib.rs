//! Shared helpers of the conformance tests: reading the NIST StRD files and scoring results
//! with the log relative error.

use std::fmt;
use std::path::{Path, PathBuf};

/// Observations of a NIST StRD linear least-squares file.
#[derive(Clone, Debug, PartialEq)]
pub struct StrdData {
    /// The response column `y`, one entry per observation.
    pub response: Vec<f64>,
    /// The predictor columns, one inner vector (`x1, x2, …`) per observation.
    pub predictors: Vec<Vec<f64>>,
}

/// Why a StRD file could not be read.
#[derive(Debug)]
pub enum StrdError {
    /// The file could not be opened or read.
    Io(PathBuf, std::io::Error),
    /// No second line beginning with `Data:` (where the data block starts).
    NoDataBlock(PathBuf),
    /// A data line is malformed (1-based line number and the reason).
    BadLine(PathBuf, usize, String),
}

impl fmt::Display for StrdError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StrdError::Io(path, error) => write!(f, "{}: {error}", path.display()),
            StrdError::NoDataBlock(path) => {
                write!(
                    f,
                    "{}: no second line beginning with `Data:`",
                    path.display()
                )
            }
            StrdError::BadLine(path, line, why) => write!(f, "{}:{line}: {why}", path.display()),
        }
    }
}

impl std::error::Error for StrdError {}

/// Reads a NIST StRD linear least-squares `.dat` file: the data block starts after the
/// SECOND line beginning with `Data:` (the first one is in the header); CRLF or LF line ends;
/// blank lines (Norris ends with one of spaces only) are skipped. Column 1 is `y`, the rest
/// are the predictors.
pub fn read_strd(path: impl AsRef<Path>) -> Result<StrdData, StrdError> {
    let path = path.as_ref();
    let text = std::fs::read_to_string(path).map_err(|e| StrdError::Io(path.to_path_buf(), e))?;
    let lines: Vec<&str> = text.lines().map(|l| l.trim_end_matches('\r')).collect();
    let start = lines
        .iter()
        .enumerate()
        .filter(|(_, l)| l.starts_with("Data:"))
        .nth(1)
        .map(|(i, _)| i + 1)
        .ok_or_else(|| StrdError::NoDataBlock(path.to_path_buf()))?;
    let mut data = StrdData {
        response: Vec::new(),
        predictors: Vec::new(),
    };
    let mut width = None;
    for (index, line) in lines.iter().enumerate().skip(start) {
        if line.trim().is_empty() {
            continue;
        }
        let bad = |why: String| StrdError::BadLine(path.to_path_buf(), index + 1, why);
        let values = line
            .split_whitespace()
            .map(|field| {
                field
                    .parse::<f64>()
                    .map_err(|e| bad(format!("`{field}`: {e}")))
            })
            .collect::<Result<Vec<f64>, _>>()?;
        if values.len() < 2 {
            return Err(bad(format!(
                "expected y and at least one x, found {} values",
                values.len()
            )));
        }
        match width {
            None => width = Some(values.len()),
            Some(w) if w != values.len() => {
                return Err(bad(format!("expected {w} values, found {}", values.len())));
            }
            Some(_) => {}
        }
        data.response.push(values[0]);
        data.predictors.push(values[1..].to_vec());
    }
    Ok(data)
}

/// The most significant digits a log relative error can credit (double precision carries
/// about 15 to 16; McCullough 1998 caps at the digits of the certified value).
pub const LRE_CAP: f64 = 15.0;

/// Log relative error `−log10(|estimate − certified| / |certified|)` (McCullough, B. D.,
/// 1998, *Assessing the reliability of statistical software*, The American Statistician
/// 52(4)), the number of correct significant digits. Uses the absolute error when the
/// certified value is 0; capped at [`LRE_CAP`]; 0 for a non-finite estimate or an error
/// larger than the value.
pub fn log_relative_error(estimate: f64, certified: f64) -> f64 {
    if !estimate.is_finite() {
        return 0.0;
    }
    let error = (estimate - certified).abs();
    if error == 0.0 {
        return LRE_CAP;
    }
    let relative = if certified == 0.0 {
        error
    } else {
        error / certified.abs()
    };
    (-relative.log10()).clamp(0.0, LRE_CAP)
}

/// Path of a file under this crate's `data/` folder.
pub fn data_path(relative: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("data")
        .join(relative)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lre_counts_digits() {
        assert_eq!(log_relative_error(1.0, 1.0), LRE_CAP);
        assert!((log_relative_error(1.001, 1.0) - 3.0).abs() < 1e-9);
        assert!((log_relative_error(-2.0e-7, -2.0e-7 * (1.0 + 1e-9)) - 9.0).abs() < 1e-6);
        assert_eq!(log_relative_error(f64::NAN, 1.0), 0.0);
        assert_eq!(log_relative_error(5.0, 1.0), 0.0);
    }

    #[test]
    fn reads_norris_and_pontius() {
        // Row counts and first rows: NIST StRD Norris.dat and Pontius.dat (tests/data/nist).
        let norris = read_strd(data_path("nist/Norris.dat")).unwrap();
        assert_eq!(norris.response.len(), 36);
        assert_eq!((norris.response[0], norris.predictors[0][0]), (0.1, 0.2));
        let pontius = read_strd(data_path("nist/Pontius.dat")).unwrap();
        assert_eq!(pontius.response.len(), 40);
        let longley = read_strd(data_path("nist/Longley.dat")).unwrap();
        assert_eq!(longley.response.len(), 16);
        assert_eq!(longley.predictors[0].len(), 6);
    }
}
