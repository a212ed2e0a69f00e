//! One CSV row per fitted check, for `steadycal report`; the row format is
//! [`crate::report::checks`]'s, which also reads it back.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use steadycal_core::monitor::Monitor;
use steadycal_core::real::Real;
use steadycal_core::sample::{Flags, Outcome, Sample};

use crate::io::create_output;
use crate::report::checks::{before, write_row, Before, HEADER};

/// The checks output of a run.
pub struct ChecksSink {
    out: Box<dyn Write>,
}

impl ChecksSink {
    /// Creates the output (`-` is standard output) and writes the header.
    pub fn create(path: &Path) -> Result<Self> {
        let mut out = create_output(path)?;
        writeln!(out, "{HEADER}")?;
        Ok(ChecksSink { out })
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
        write_row(self.out.as_mut(), monitor, sample, before)
    }

    /// Flushes the output.
    pub fn finish(mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}
