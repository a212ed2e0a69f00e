//! The outputs of a run, one module each: event lines, readings, checks, the summary.
//!
//! The channels of one file of many sensors share the event, readings and checks outputs:
//! [`channel_headers`] creates them, each channel's run then appends its rows, each starting
//! with the channel's name ([`ChannelPrefix`]): `"channel":NAME` first in an event object,
//! a `channel` column first in the CSV outputs.

use std::io::Write;
use std::path::Path;

use anyhow::Result;

use crate::io::{append_output, create_output};
use crate::replay::options::ReplayOptions;

pub mod checks;
pub mod events;
pub mod readings;
pub mod summary;

/// What starts each row of a channel's outputs: nothing for a run of one channel.
#[derive(Clone, Debug, Default)]
pub struct ChannelPrefix {
    /// `{"channel":NAME,` (the event object's opening brace included).
    pub event: Vec<u8>,
    /// `NAME,` (the name quoted as CSV when it must be).
    pub row: Vec<u8>,
}

impl ChannelPrefix {
    /// The prefix of `channel` (none for `None`).
    pub fn new(channel: Option<&str>) -> Self {
        let Some(name) = channel else {
            return ChannelPrefix::default();
        };
        let quoted = serde_json::to_string(name).unwrap_or_default();
        let row = if name.contains([',', '"', '\n', '\r']) {
            format!("\"{}\",", name.replace('"', "\"\""))
        } else {
            format!("{name},")
        };
        ChannelPrefix {
            event: format!("{{\"channel\":{quoted},").into_bytes(),
            row: row.into_bytes(),
        }
    }

    /// True for a run of one channel.
    pub fn is_empty(&self) -> bool {
        self.row.is_empty()
    }
}

/// Opens an output of a run: created (with `header`) for a run of one channel, appended to
/// (no header) for one channel of many.
pub(crate) fn open(
    path: &Path,
    prefix: &ChannelPrefix,
    header: Option<&str>,
) -> Result<Box<dyn Write>> {
    if !prefix.is_empty() {
        return append_output(path);
    }
    let mut out = create_output(path)?;
    if let Some(header) = header {
        writeln!(out, "{header}")?;
    }
    Ok(out)
}

/// Creates the event, readings and checks outputs the channels of one file share, the CSV
/// ones with their header after a `channel` column.
pub fn channel_headers(options: &ReplayOptions) -> Result<()> {
    let outputs = [
        (&options.events, None),
        (&options.readings, Some(readings::HEADER)),
        (&options.checks, Some(crate::report::checks::HEADER)),
    ];
    for (path, header) in outputs {
        let Some(path) = path else { continue };
        let mut out = create_output(path)?;
        if let Some(header) = header {
            writeln!(out, "channel,{header}")?;
        }
        out.flush()?;
    }
    Ok(())
}
