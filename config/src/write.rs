//! The complete, commented file: every key with the value in force, each preceded by a
//! comment with its unit, valid range and meaning from [`crate::keys`]. Reading the written
//! text back gives the same channel configuration (`tests/keys.rs`).

use toml_edit::{DocumentMut, Item, Table};

use crate::error::Problem;
use crate::keys;
use crate::ConfigFile;

fn comment(dotted: &str) -> Option<String> {
    keys::find(dotted).map(|k| {
        let unit = match k.unit {
            "—" | "text" => String::new(),
            unit => format!(" [{unit}]"),
        };
        format!("# {}{unit}; valid: {}\n", k.meaning, k.range)
    })
}

fn decorate(table: &mut Table, path: &str) {
    let names: Vec<String> = table.iter().map(|(name, _)| name.to_string()).collect();
    for name in names {
        let dotted = if path.is_empty() {
            name.clone()
        } else {
            format!("{path}.{name}")
        };
        let Some(item) = table.get_mut(&name) else {
            continue;
        };
        match item {
            Item::Table(inner) => decorate(inner, &dotted),
            Item::Value(_) => {
                if let (Some(text), Some(mut key)) = (comment(&dotted), table.key_mut(&name)) {
                    key.leaf_decor_mut().set_prefix(text);
                }
            }
            _ => {}
        }
    }
}

impl ConfigFile {
    /// The complete file (see [`ConfigFile::complete`]) as commented TOML, `header` (each
    /// line a comment) first.
    pub fn to_commented_toml(&self, header: &str) -> Result<String, Problem> {
        let complete = self.complete()?;
        let plain = toml::to_string(&complete)
            .map_err(|error| Problem::new("(file)", format!("cannot be written: {error}")))?;
        let mut document: DocumentMut = plain
            .parse()
            .map_err(|error| Problem::new("(file)", format!("cannot be written: {error}")))?;
        decorate(document.as_table_mut(), "");
        let mut out = String::new();
        for line in header.lines() {
            out.push_str(&format!("# {line}\n").replace("# \n", "#\n"));
        }
        out.push('\n');
        out.push_str(&document.to_string());
        Ok(out)
    }
}
