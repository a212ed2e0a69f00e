//! Samples from field logs: one log ([`LogSamples`]) or a sensor log joined with a reference
//! log by time ([`JoinedSamples`]), with what was counted on the way ([`FieldTally`]).
//!
//! A row whose raw cell is missing is no sample: it is counted (`missing_raw`) and fed to
//! nothing. A missing reference makes a row a reading; a missing temperature is passed on as
//! absent (the basis decides). A sample's `seq` is its row's 0-based data-row index in the
//! (sensor) log, as the canonical CSV reader and the Arrow reader number them: a row
//! without a raw value keeps its index unused, so one feed gives the same `seq` whichever
//! reader reads it (an averaged check takes the index of the last sample averaged).
//!
//! Invariants: never panics; memory is flat in the length of the logs.

use steadycal_core::sample::Sample;

use crate::feed::{FeedError, FeedFloat};
use crate::field::join::{JoinTally, JoinedRow, Pairing, ReferenceRow, SensorRow, TimeJoin};
use crate::field::missing::MissingTally;
use crate::field::prefetch::Prefetch;
use crate::field::reader::{LogReader, LogRow};

/// A sample with its line and the bytes read so far (what the replay engine takes).
#[derive(Debug)]
pub struct FieldSample<R> {
    /// The sample, or why the row is bad.
    pub next: Result<Sample<R>, FeedError>,
    /// 1-based line of the row (in the sensor log).
    pub line: u64,
    /// Bytes read so far (of the sensor log).
    pub bytes: u64,
}

/// What was counted while reading field logs, for the summary.
#[derive(Clone, Debug)]
pub struct FieldTally {
    /// Rows whose raw cell was missing (no sample).
    pub missing_raw: u64,
    /// Cells removed as missing in the (sensor) log, by column and marker.
    pub missing: MissingTally,
    /// Cells removed as missing in the reference log, by column and marker.
    pub reference_missing: MissingTally,
    /// Blank rows skipped.
    pub blank_rows: u64,
    /// The join's counts, when a reference log was joined.
    pub join: Option<JoinTally>,
}

impl FieldTally {
    /// An empty tally.
    pub fn new() -> Self {
        FieldTally {
            missing_raw: 0,
            missing: MissingTally::default(),
            reference_missing: MissingTally::default(),
            blank_rows: 0,
            join: None,
        }
    }
}

impl Default for FieldTally {
    fn default() -> Self {
        FieldTally::new()
    }
}

/// The samples of one log.
pub struct LogSamples<R> {
    reader: LogReader,
    row: LogRow<R>,
    /// What was counted.
    pub tally: FieldTally,
}

impl<R: FeedFloat> LogSamples<R> {
    /// Samples of `reader` (its first sensor column is the raw output).
    pub fn new(reader: LogReader, tally: FieldTally) -> Self {
        LogSamples {
            reader,
            row: LogRow::default(),
            tally,
        }
    }

    /// The reader (file name, header).
    pub fn reader(&self) -> &LogReader {
        &self.reader
    }

    fn finish_counts(&mut self) {
        self.tally.missing = self.reader.tally.clone();
        self.tally.blank_rows = self.reader.blank_rows;
    }
}

impl<R: FeedFloat> Iterator for LogSamples<R> {
    type Item = FieldSample<R>;

    fn next(&mut self) -> Option<FieldSample<R>> {
        loop {
            let Some(result) = self.reader.next_row(&mut self.row) else {
                self.finish_counts();
                return None;
            };
            let line = self.row.line;
            let bytes = self.reader.bytes_read();
            if let Err(error) = result {
                let line = error.line().unwrap_or(line);
                return Some(FieldSample {
                    next: Err(error),
                    line,
                    bytes,
                });
            }
            let Some(raw) = self.row.raw.first().copied().flatten() else {
                self.tally.missing_raw += 1;
                continue;
            };
            let sample = Sample {
                seq: self.row.index,
                t: self.row.t,
                raw,
                reference: self.row.reference,
                temperature: self.row.temperature,
                averaged: 1,
            };
            return Some(FieldSample {
                next: Ok(sample),
                line,
                bytes,
            });
        }
    }
}

/// Sensor rows of a sensor log (missing raw cells counted and skipped), each with the bytes
/// read after it.
struct SensorLog<R> {
    reader: LogReader,
    row: LogRow<R>,
    missing_raw: u64,
}

impl<R: FeedFloat> Iterator for SensorLog<R> {
    type Item = (Result<SensorRow<R>, FeedError>, u64);

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if let Err(error) = self.reader.next_row(&mut self.row)? {
                return Some((Err(error), self.reader.bytes_read()));
            }
            let Some(raw) = self.row.raw.first().copied().flatten() else {
                self.missing_raw += 1;
                continue;
            };
            let row = SensorRow {
                t: self.row.t,
                raw,
                temperature: self.row.temperature,
                line: self.row.line,
                index: self.row.index,
            };
            return Some((Ok(row), self.reader.bytes_read()));
        }
    }
}

/// The sensor rows of a sensor log, read and parsed ahead on their own thread (the sensor
/// log is the long one; the join and the reference log stay on the consumer's thread).
pub struct SensorRows<R: FeedFloat> {
    rows: Prefetch<SensorLog<R>>,
    /// Bytes of the sensor log read after the last row taken.
    bytes: u64,
}

impl<R: FeedFloat> Iterator for SensorRows<R> {
    type Item = Result<SensorRow<R>, FeedError>;

    fn next(&mut self) -> Option<Self::Item> {
        let (row, bytes) = self.rows.next()?;
        self.bytes = bytes;
        Some(row)
    }
}

/// Reference rows of a reference log (missing values skipped, the clock offset applied).
pub struct ReferenceRows<R> {
    reader: LogReader,
    row: LogRow<R>,
    offset: f64,
}

impl<R: FeedFloat> Iterator for ReferenceRows<R> {
    type Item = Result<ReferenceRow<R>, FeedError>;

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if let Err(error) = self.reader.next_row(&mut self.row)? {
                return Some(Err(error));
            }
            let Some(value) = self.row.reference else {
                continue;
            };
            return Some(Ok(ReferenceRow {
                t: self.row.t + self.offset,
                value,
                line: self.row.line,
            }));
        }
    }
}

/// The samples of a sensor log joined with a reference log.
pub struct JoinedSamples<R: FeedFloat> {
    join: TimeJoin<R, SensorRows<R>, ReferenceRows<R>>,
    /// What was counted (complete once the iterator is exhausted).
    pub tally: FieldTally,
}

impl<R: FeedFloat> JoinedSamples<R> {
    /// Joins `sensor` (first sensor column = raw) and `reference` (its reference column),
    /// the reference's times moved by `offset` seconds.
    pub fn new(
        sensor: LogReader,
        reference: LogReader,
        offset: f64,
        pairing: Pairing,
        tally: FieldTally,
    ) -> Self {
        let sensor = SensorRows {
            rows: Prefetch::new(SensorLog {
                reader: sensor,
                row: LogRow::default(),
                missing_raw: 0,
            }),
            bytes: 0,
        };
        let reference = ReferenceRows {
            reader: reference,
            row: LogRow::default(),
            offset,
        };
        JoinedSamples {
            join: TimeJoin::new(sensor, reference, pairing),
            tally,
        }
    }

    fn finish_counts(&mut self) {
        let (sensor, reference) = self.join.parts();
        // The join has taken every sensor row when it ends, so the sensor log is back.
        let mut blank_rows = reference.reader.blank_rows;
        if let Some(sensor) = sensor.rows.finished() {
            self.tally.missing_raw = sensor.missing_raw;
            self.tally.missing = sensor.reader.tally.clone();
            blank_rows += sensor.reader.blank_rows;
        }
        self.tally.reference_missing = reference.reader.tally.clone();
        self.tally.blank_rows = blank_rows;
        self.tally.join = Some(self.join.tally().clone());
    }
}

impl<R: FeedFloat> Iterator for JoinedSamples<R> {
    type Item = FieldSample<R>;

    fn next(&mut self) -> Option<FieldSample<R>> {
        let Some(item) = self.join.next() else {
            self.finish_counts();
            return None;
        };
        let bytes = self.join.parts().0.bytes;
        match item {
            Err(error) => Some(FieldSample {
                line: error.line().unwrap_or(0),
                next: Err(error),
                bytes,
            }),
            Ok(JoinedRow {
                t,
                raw,
                reference,
                temperature,
                line,
                index,
                samples,
                ..
            }) => {
                // An averaged check keeps its count: the monitor weighs it as the mean of
                // that many sensor samples.
                let sample = Sample {
                    seq: index,
                    t,
                    raw,
                    reference,
                    temperature,
                    averaged: samples,
                };
                Some(FieldSample {
                    next: Ok(sample),
                    line,
                    bytes,
                })
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::field::missing::MissingMarkers;
    use crate::field::reader::LogLayout;

    fn reader(text: &str, layout: &LogLayout) -> LogReader {
        LogReader::new(
            "log.csv".into(),
            Box::new(std::io::Cursor::new(text.as_bytes().to_vec())),
            layout,
        )
        .unwrap()
    }

    #[test]
    fn missing_raw_rows_are_counted_and_skipped() {
        let layout = LogLayout {
            missing: MissingMarkers::new(&["-9999"]).unwrap(),
            ..LogLayout::default()
        };
        let text = "t,raw,ref\n0,1,2\n1,-9999,3\n2,NA,\n3,4,-9999\n";
        let mut samples = LogSamples::<f64>::new(reader(text, &layout), FieldTally::new());
        let got: Vec<(u64, f64, f64, Option<f64>, u64)> = samples
            .by_ref()
            .map(|s| {
                let x = s.next.unwrap();
                (x.seq, x.t, x.raw, x.reference, s.line)
            })
            .collect();
        // `seq` is the data-row index: the two rows without a raw value keep theirs.
        assert_eq!(got, [(0, 0.0, 1.0, Some(2.0), 2), (3, 3.0, 4.0, None, 5)]);
        assert_eq!(samples.tally.missing_raw, 2);
        assert_eq!(samples.tally.missing.by_column["raw"]["-9999"], 1);
        assert_eq!(samples.tally.missing.by_column["ref"]["-9999"], 1);
    }

    #[test]
    fn a_sensor_log_and_a_reference_log_join_into_samples() {
        let sensor = reader("t,raw\n0,1\n10,2\n20,3\n", &LogLayout::default());
        let reference_layout = LogLayout {
            raw: Vec::new(),
            reference_required: true,
            ..LogLayout::default()
        };
        let reference = reader("t,ref\n12,20\n19,NA\n", &reference_layout);
        let mut samples = JoinedSamples::<f64>::new(
            sensor,
            reference,
            -3.0,
            Pairing::Nearest(1.5),
            FieldTally::new(),
        );
        let got: Vec<Option<f64>> = samples
            .by_ref()
            .map(|s| s.next.unwrap().reference)
            .collect();
        assert_eq!(got, [None, Some(20.0), None]);
        let join = samples.tally.join.as_ref().unwrap();
        assert_eq!((join.paired, join.unpaired), (1, 0));
        assert_eq!(samples.tally.reference_missing.column_total("ref"), 1);
    }
}
