//! One CSV row per fitted check, for `steadycal report`; the row format is
//! [`crate::report::checks`]'s, which also reads it back.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;
use steadycal_core::sample::{Flags, Outcome, Sample};

use super::ChannelPrefix;
use crate::report::checks::{before, write_row, Before, HEADER};

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

    /// What the row of `sample` needs from the monitor before it is pushed (`None`: the
    /// sample is no check).
    #[inline]
    pub fn before<R: Real>(monitor: &Monitor<R>, sample: &Sample<R>) -> Option<Before<R>> {
        before(monitor, sample)
    }

    /// Writes the row of a check the monitor accepted.
    #[inline]
    pub fn write<R: Real + Display>(
        &mut self,
        monitor: &Monitor<R>,
        sample: &Sample<R>,
        before: &Before<R>,
        outcome: &Outcome<R>,
    ) -> std::io::Result<()> {
        if outcome.flags.contains(Flags::REJECTED) {
            return Ok(());
        }
        if !self.prefix.is_empty() {
            self.out.write_all(&self.prefix.row)?;
        }
        write_row(self.out.as_mut(), monitor, sample, before)
    }

    /// Flushes the output.
    pub fn finish(mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}
