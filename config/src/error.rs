//! Errors of a configuration file, each naming the file and the key; with the line and column
//! of the key when the text is at hand.
//!
//! Errors found while parsing (syntax, unknown keys, wrong types, values out of range) come
//! from toml, which names the key, its line and column and shows the offending line. Errors
//! found after parsing (two forms of one setting, keys that do not fit together, a value the
//! core refuses) are [`Problem`]s, located by looking the key up in the text with toml_edit's
//! spans.

/// A key whose value does not fit, before the file and position are known.
#[derive(Clone, Debug, PartialEq)]
pub struct Problem {
    /// Dotted key.
    pub key: String,
    /// What is wrong.
    pub message: String,
}

impl Problem {
    /// A problem with `key`.
    pub fn new(key: impl Into<String>, message: impl Into<String>) -> Self {
        Problem {
            key: key.into(),
            message: message.into(),
        }
    }

    /// Refuses two forms of one setting given together (named by the second).
    pub fn exclusive(a: (&str, bool), b: (&str, bool)) -> Result<(), Problem> {
        if a.1 && b.1 {
            return Err(Problem::new(
                b.0,
                format!("give either `{}` or `{}`, not both", a.0, b.0),
            ));
        }
        Ok(())
    }

    /// The error in `file`, located in `text` when given.
    pub fn in_file(self, file: &str, text: Option<&str>) -> ConfigError {
        let at = text.and_then(|text| locate(text, &self.key));
        ConfigError::Key {
            file: file.into(),
            key: self.key,
            at,
            message: self.message,
        }
    }
}

/// A configuration that cannot be used.
#[derive(Debug, thiserror::Error)]
pub enum ConfigError {
    /// The file cannot be read.
    #[error("{file}: cannot read: {source}")]
    Io {
        /// File name.
        file: String,
        /// The cause.
        source: std::io::Error,
    },
    /// toml or serde refused the text (syntax, unknown key, wrong type, out-of-range value);
    /// the message carries line, column and the offending line.
    #[error("{file}: {message}")]
    Parse {
        /// File name.
        file: String,
        /// toml's message.
        message: String,
    },
    /// A key's value does not fit with the others, or the core refuses it.
    #[error("{file}{}: `{key}`: {message}", at.map(|(l, c)| format!(":{l}:{c}")).unwrap_or_default())]
    Key {
        /// File name.
        file: String,
        /// Dotted key.
        key: String,
        /// Line and column (1-based) of the key in the file, when it is written there.
        at: Option<(usize, usize)>,
        /// What is wrong.
        message: String,
    },
}

impl ConfigError {
    /// The dotted key at fault, when one is.
    pub fn key(&self) -> Option<&str> {
        match self {
            ConfigError::Key { key, .. } => Some(key),
            _ => None,
        }
    }
}

/// Line and column (1-based, column in characters) of the dotted `key` in `text`, or of its
/// nearest enclosing table that is written there.
pub fn locate(text: &str, key: &str) -> Option<(usize, usize)> {
    let document = toml_edit::ImDocument::parse(text).ok()?;
    let mut table = document.as_table() as &dyn toml_edit::TableLike;
    let mut found = None;
    for part in key.split('.') {
        let Some((name, item)) = table.get_key_value(part) else {
            break;
        };
        found = name.span().or_else(|| item.span()).or(found);
        match item.as_table_like() {
            Some(inner) => table = inner,
            None => break,
        }
    }
    let offset = found?.start;
    let before = text.get(..offset)?;
    let line = before.matches('\n').count() + 1;
    let column = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    Some((line, column))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keys_are_located_in_tables_dotted_keys_and_inline_tables() {
        let text = "[range]\nlow = 1\n\n[detect.cusum]\n  decision_interval = 4\n";
        assert_eq!(locate(text, "range.low"), Some((2, 1)));
        assert_eq!(locate(text, "detect.cusum.decision_interval"), Some((5, 3)));
        // A key not written: its nearest table.
        assert_eq!(locate(text, "detect.cusum.reference_value"), Some((4, 9)));
        let text = "detect.drift = { every = 3 }\n";
        assert_eq!(locate(text, "detect.drift.every"), Some((1, 18)));
        assert_eq!(locate("", "range.low"), None);
    }

    #[test]
    fn key_errors_print_file_line_column_and_key() {
        let error = Problem::new("range.low", "must be below `range.high`")
            .in_file("m.toml", Some("[range]\nlow = 9\nhigh = 2\n"));
        assert_eq!(
            error.to_string(),
            "m.toml:2:1: `range.low`: must be below `range.high`"
        );
        let error = Problem::new("range.low", "x").in_file("m.toml", None);
        assert_eq!(error.to_string(), "m.toml: `range.low`: x");
    }
}
