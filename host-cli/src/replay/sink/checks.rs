//! One CSV row per fitted check, for `steadycal report`; the row format is
//! [`crate::report::checks`]'s, which also reads it back.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;
use steadycal_core::sample::{Outcome, Sample};

use super::ChannelPrefix;
use crate::report::checks::{write_row, HEADER};

/// The checks output of a run.
pub struct ChecksSink {
    out: Box<dyn Write>,
    prefix: ChannelPrefix,
}

impl ChecksSink {
    /// Creates the output (`-` is standard output) and writes the header; or appends to it
    /// for one channel of a file of many (each row then starts with the channel).
    pub fn create(path: &Path, prefix: &ChannelPrefix) -> Result<Self> {
        Ok(ChecksSink {
            out: super::open(path, prefix, Some(HEADER))?,
            prefix: prefix.clone(),
        })
    }

    /// Writes the row of a check the monitor fitted (any other sample writes nothing).
    #[inline]
    pub fn write<R: Real + Display>(
        &mut self,
        monitor: &Monitor<R>,
        sample: &Sample<R>,
        outcome: &Outcome<R>,
    ) -> std::io::Result<()> {
        let Some(check) = outcome.check() else {
            return Ok(());
        };
        if !self.prefix.is_empty() {
            self.out.write_all(&self.prefix.row)?;
        }
        write_row(self.out.as_mut(), monitor, sample, &check)
    }

    /// Flushes the output.
    pub fn finish(mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}
