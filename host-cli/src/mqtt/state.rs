//! The state directory of an MQTT watch: one snapshot file per channel
//! (`CHANNEL.snapshot`, the format `replay --save-snapshot` writes and `snapshot inspect`
//! reads) and one `channels.json` holding each channel's [`ChannelRecord`].
//!
//! A save writes `channels.json` first, then the snapshots of the channels that changed,
//! each power-safe ([`write_durably`]), then syncs the directory. Each channel's entry
//! holds the new record and the one saved with the snapshot now on disk; on resume the
//! one whose `samples` equals the snapshot's sample count is used. A save cut short thus
//! leaves a record ahead of its snapshot and the previous one beside it; the channel
//! resumes with the previous one (its unacknowledged samples come back from the broker
//! and are processed again).

use std::collections::BTreeMap;
use std::fmt::Display;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use serde::{Deserialize, Serialize};
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;

use super::channel::{Channel, ChannelRecord};
use super::topics::valid_channel;
use crate::io::{sync_directory, write_durably};
use crate::snapshot_file;

const RECORDS: &str = "channels.json";
const EXTENSION: &str = "snapshot";

/// A channel's entry in `channels.json`.
#[derive(Serialize, Deserialize)]
struct Entry {
    /// The record written with this save.
    record: ChannelRecord,
    /// The record saved with the snapshot on disk before this save.
    before: Option<ChannelRecord>,
}

/// A channel found in the state directory.
pub struct Resumed<R: Real> {
    /// Its name.
    pub name: String,
    /// Its monitor.
    pub monitor: Monitor<R>,
    /// Its record, when it belongs to the snapshot.
    pub record: Option<ChannelRecord>,
}

/// The state directory.
pub struct StateDir {
    dir: PathBuf,
}

impl StateDir {
    /// Opens (creating it when needed) the directory.
    pub fn open(dir: &Path) -> Result<Self> {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("{}: cannot create the state directory", dir.display()))?;
        Ok(StateDir {
            dir: dir.to_path_buf(),
        })
    }

    /// The snapshot file of a channel.
    pub fn snapshot_path(&self, channel: &str) -> PathBuf {
        self.dir.join(format!("{channel}.{EXTENSION}"))
    }

    /// Every channel saved here, in name order; a snapshot that cannot be read is an error
    /// naming the file and the byte.
    pub fn load<R: Real>(&self) -> Result<Vec<Resumed<R>>> {
        let records_path = self.dir.join(RECORDS);
        let mut records: BTreeMap<String, Entry> = match std::fs::read(&records_path) {
            Ok(bytes) => serde_json::from_slice(&bytes).with_context(|| {
                format!("{}: not a channel record file", records_path.display())
            })?,
            Err(error) if error.kind() == std::io::ErrorKind::NotFound => BTreeMap::new(),
            Err(error) => {
                return Err(error)
                    .with_context(|| format!("{}: cannot read", records_path.display()))
            }
        };
        let mut names = Vec::new();
        let entries = std::fs::read_dir(&self.dir)
            .with_context(|| format!("{}: cannot list", self.dir.display()))?;
        for entry in entries {
            let path = entry?.path();
            if path.extension().and_then(|e| e.to_str()) != Some(EXTENSION) {
                continue;
            }
            if let Some(name) = path.file_stem().and_then(|s| s.to_str()) {
                if valid_channel(name) {
                    names.push(name.to_string());
                }
            }
        }
        names.sort();
        let mut resumed = Vec::new();
        for name in names {
            let monitor = snapshot_file::restore_as::<R>(&self.snapshot_path(&name))?;
            let samples = monitor.counters().samples;
            let record = records.remove(&name).and_then(|entry| {
                [Some(entry.record), entry.before]
                    .into_iter()
                    .flatten()
                    .find(|record| record.samples == samples)
            });
            resumed.push(Resumed {
                name,
                monitor,
                record,
            });
        }
        Ok(resumed)
    }

    /// Saves the records of every channel, then the snapshots of the changed ones, then
    /// syncs the directory; returns how many snapshots were written.
    pub fn save<R: Real + Display>(&self, channels: &mut [Channel<R>]) -> Result<usize> {
        if !channels.iter().any(|c| c.dirty) {
            return Ok(0);
        }
        let records: BTreeMap<&str, Entry> = channels
            .iter()
            .map(|c| {
                let entry = Entry {
                    record: c.record(),
                    before: c.saved.clone(),
                };
                (c.name.as_str(), entry)
            })
            .collect();
        let text = serde_json::to_vec(&records)?;
        write_durably(&self.dir.join(RECORDS), &text)?;
        let mut written = 0;
        for channel in channels.iter_mut().filter(|c| c.dirty) {
            let path = self.snapshot_path(&channel.name);
            let bytes = snapshot_file::encode(&path, &mut channel.engine.monitor)?;
            write_durably(&path, &bytes)?;
            channel.dirty = false;
            channel.saved = Some(channel.record());
            channel.checks_saved = channel.checks();
            written += 1;
        }
        sync_directory(&self.dir)?;
        Ok(written)
    }
}
