//! Calibrated readings as CSV: one row per sample without a reference (`seq, t, raw,
//! value, standard_uncertainty, expanded_uncertainty, rung, flags`); a sample the monitor
//! gave no reading for keeps its row with the value columns empty.

use std::fmt::Display;
use std::io::Write;
use std::path::Path;

use anyhow::Result;
use steadycal_core::real::Real;
use steadycal_core::sample::{Outcome, Sample};
use steadycal_core::transform::Rung;

use super::ChannelPrefix;

/// The header line.
pub const HEADER: &str = "seq,t,raw,value,standard_uncertainty,expanded_uncertainty,rung,flags";

/// The readings output of a run.
pub struct ReadingsSink {
    out: Box<dyn Write>,
    prefix: ChannelPrefix,
}

impl ReadingsSink {
    /// Creates the output (`-` is standard output) and writes the header; or appends to it
    /// for one channel of a file of many (each row then starts with the channel).
    pub fn create(path: &Path, prefix: &ChannelPrefix) -> Result<Self> {
        Ok(ReadingsSink {
            out: super::open(path, prefix, Some(HEADER))?,
            prefix: prefix.clone(),
        })
    }

    /// Writes the row of a sample without a reference (samples with one are checks, not
    /// readings); `rung` is the monitor's active rung after the sample.
    #[inline]
    pub fn write<R: Real + Display>(
        &mut self,
        sample: &Sample<R>,
        outcome: &Outcome<R>,
        rung: Rung,
    ) -> std::io::Result<()> {
        if sample.reference.is_some() {
            return Ok(());
        }
        if !self.prefix.is_empty() {
            self.out.write_all(&self.prefix.row)?;
        }
        write_reading(self.out.as_mut(), sample, outcome, rung)
    }

    /// Flushes the output.
    pub fn finish(mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}

fn write_reading<R: Real + Display>(
    out: &mut dyn Write,
    sample: &Sample<R>,
    outcome: &Outcome<R>,
    rung: Rung,
) -> std::io::Result<()> {
    let flags: Vec<&str> = outcome.flags.names().collect();
    match outcome.reading() {
        Some(reading) => writeln!(
            out,
            "{},{},{},{},{},{},{},{}",
            sample.seq,
            sample.t,
            sample.raw,
            reading.value,
            reading.standard_uncertainty,
            reading.expanded_uncertainty,
            reading.rung.name(),
            flags.join("|")
        ),
        None => writeln!(
            out,
            "{},{},{},,,,{},{}",
            sample.seq,
            sample.t,
            sample.raw,
            rung.name(),
            flags.join("|")
        ),
    }
}
