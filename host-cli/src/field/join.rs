//! Joining a sensor log and a reference log by time, both streamed.
//!
//! Two ways to pair ([`Pairing`]):
//! - **nearest within a tolerance**: each reference row goes to the sensor sample nearest in
//!   time, if one lies within the tolerance (ties go to the earlier sample). A sample takes
//!   at most one reference: when two reference rows want the same sample, the nearer keeps
//!   it (the earlier on a tie) and the other is counted as unpaired. The output has one row
//!   per sensor sample, in sensor order; paired ones carry the reference.
//! - **average over a window**: each reference row becomes one check whose raw value is the
//!   mean of the sensor samples in the window `(t − W, t]` ending at its time stamp (the
//!   usual co-location practice when the reference reports averages); the check carries the
//!   number of samples averaged. Samples averaged into a check are consumed; the others stay
//!   readings. The check comes after the readings before it, at the reference's time.
//!
//! Memory: the join holds the sensor samples within one tolerance (or one window) of the
//! reference row being paired, so it is flat in the length of both logs.
//!
//! A reference row whose time goes back (or repeats) is reported with its line and left out
//! of the join, so the rows after it are still paired right. Rows that fail to parse pass
//! through in order as errors.
//!
//! Invariants: never panics; with both logs in time order and sensor samples spaced more
//! than twice the tolerance apart, nearest pairing returns exactly the rows a single file
//! holding both would give (a property test checks this).

use std::collections::VecDeque;

use steadycal_core::real::Real;

use crate::feed::FeedError;

/// A sensor sample as read from the sensor log.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SensorRow<T> {
    /// Seconds since the epoch.
    pub t: f64,
    /// The raw output.
    pub raw: T,
    /// Temperature, when the log has it.
    pub temperature: Option<T>,
    /// 1-based line in the sensor log.
    pub line: u64,
    /// 0-based data-row index in the sensor log (the sample's `seq`).
    pub index: u64,
}

/// A reference row as read from the reference log (its clock offset already applied).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ReferenceRow<T> {
    /// Seconds since the epoch.
    pub t: f64,
    /// The reference value.
    pub value: T,
    /// 1-based line in the reference log.
    pub line: u64,
}

/// A joined row.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct JoinedRow<T> {
    /// Seconds since the epoch (the sample's, or the reference's for an averaged check).
    pub t: f64,
    /// Raw output (the mean of the window for an averaged check).
    pub raw: T,
    /// The paired reference, if any.
    pub reference: Option<T>,
    /// Temperature (the mean of the present ones for an averaged check).
    pub temperature: Option<T>,
    /// Line in the sensor log (of the last sample averaged for an averaged check).
    pub line: u64,
    /// Data-row index in the sensor log, as `line` (the sample's `seq`).
    pub index: u64,
    /// Line of the paired reference row.
    pub reference_line: Option<u64>,
    /// Sensor samples behind the raw value: 1, or the number averaged.
    pub samples: u32,
}

/// How reference rows find their sensor samples.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Pairing {
    /// The nearest sample within this many seconds.
    Nearest(f64),
    /// The mean of the samples in the window of this many seconds ending at the reference.
    Average(f64),
}

/// What the join counted.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize)]
pub struct JoinTally {
    /// Reference rows read (the backward ones included).
    pub reference_rows: u64,
    /// Reference rows paired.
    pub paired: u64,
    /// Reference rows with no sample in reach, or that lost their sample to a nearer row.
    pub unpaired: u64,
    /// Reference rows whose time goes back or repeats (left out of the join).
    pub backwards: u64,
    /// Their lines (the first 100).
    pub backwards_lines: Vec<u64>,
    /// Sensor samples averaged into checks.
    pub averaged_samples: u64,
}

const LINES_KEPT: usize = 100;

enum Slot<T> {
    Sample {
        row: SensorRow<T>,
        /// Distance and reference row of the claim on this sample.
        claim: Option<(f64, ReferenceRow<T>)>,
    },
    Error(FeedError),
}

/// The join as an iterator over joined rows (or errors), in output order.
pub struct TimeJoin<T, S, F>
where
    S: Iterator<Item = Result<SensorRow<T>, FeedError>>,
    F: Iterator<Item = Result<ReferenceRow<T>, FeedError>>,
{
    sensor: S,
    reference: F,
    pairing: Pairing,
    pending: VecDeque<Slot<T>>,
    sensor_done: bool,
    /// Time of the last sensor sample loaded.
    sensor_t: f64,
    next_reference: Option<ReferenceRow<T>>,
    reference_done: bool,
    last_reference_t: f64,
    out: VecDeque<Result<JoinedRow<T>, FeedError>>,
    tally: JoinTally,
}

impl<T, S, F> TimeJoin<T, S, F>
where
    T: Real,
    S: Iterator<Item = Result<SensorRow<T>, FeedError>>,
    F: Iterator<Item = Result<ReferenceRow<T>, FeedError>>,
{
    /// A join of the two logs.
    pub fn new(sensor: S, reference: F, pairing: Pairing) -> Self {
        TimeJoin {
            sensor,
            reference,
            pairing,
            pending: VecDeque::new(),
            sensor_done: false,
            sensor_t: f64::NEG_INFINITY,
            next_reference: None,
            reference_done: false,
            last_reference_t: f64::NEG_INFINITY,
            out: VecDeque::new(),
            tally: JoinTally::default(),
        }
    }

    /// What was counted so far (complete once the iterator is exhausted).
    pub fn tally(&self) -> &JoinTally {
        &self.tally
    }

    /// The two inputs.
    pub fn parts(&self) -> (&S, &F) {
        (&self.sensor, &self.reference)
    }

    /// Moves to the next usable reference row; errors go to the output in order.
    fn advance_reference(&mut self) {
        self.next_reference = None;
        while !self.reference_done {
            match self.reference.next() {
                None => self.reference_done = true,
                Some(Err(error)) => {
                    // A bad reference row is reported where it is met; the sensor rows
                    // waiting to be paired stay where they are.
                    self.out.push_back(Err(error));
                    return;
                }
                Some(Ok(row)) => {
                    self.tally.reference_rows += 1;
                    if row.t <= self.last_reference_t || !row.t.is_finite() {
                        self.tally.backwards += 1;
                        if self.tally.backwards_lines.len() < LINES_KEPT {
                            self.tally.backwards_lines.push(row.line);
                        }
                        continue;
                    }
                    self.last_reference_t = row.t;
                    self.next_reference = Some(row);
                    return;
                }
            }
        }
    }

    /// Loads one sensor row into `pending`; false when the sensor log is done.
    fn load_sensor(&mut self) -> bool {
        if self.sensor_done {
            return false;
        }
        match self.sensor.next() {
            None => {
                self.sensor_done = true;
                false
            }
            Some(Ok(row)) => {
                self.sensor_t = row.t;
                self.pending.push_back(Slot::Sample { row, claim: None });
                true
            }
            Some(Err(error)) => {
                self.pending.push_back(Slot::Error(error));
                true
            }
        }
    }

    fn emit(&mut self, slot: Slot<T>) {
        let item = match slot {
            Slot::Error(error) => Err(error),
            Slot::Sample { row, claim } => Ok(JoinedRow {
                t: row.t,
                raw: row.raw,
                reference: claim.map(|(_, r)| r.value),
                temperature: row.temperature,
                line: row.line,
                index: row.index,
                reference_line: claim.map(|(_, r)| r.line),
                samples: 1,
            }),
        };
        self.out.push_back(item);
    }

    /// Emits the pending rows before `limit` (no later reference can reach them).
    fn flush_before(&mut self, limit: f64) {
        while let Some(front) = self.pending.front() {
            let settled = match front {
                Slot::Error(_) => true,
                Slot::Sample { row, .. } => row.t < limit,
            };
            if !settled {
                break;
            }
            let slot = self.pending.pop_front().expect("front exists");
            self.emit(slot);
        }
    }

    fn pair_nearest(&mut self, reference: ReferenceRow<T>, tolerance: f64) {
        let mut best: Option<(usize, f64)> = None;
        for (index, slot) in self.pending.iter().enumerate() {
            if let Slot::Sample { row, .. } = slot {
                let distance = (row.t - reference.t).abs();
                if distance <= tolerance && best.is_none_or(|(_, d)| distance < d) {
                    best = Some((index, distance));
                }
            }
        }
        let Some((index, distance)) = best else {
            self.tally.unpaired += 1;
            return;
        };
        if let Some(Slot::Sample { claim, .. }) = self.pending.get_mut(index) {
            match claim {
                Some((held, _)) if *held <= distance => self.tally.unpaired += 1,
                Some(_) => {
                    *claim = Some((distance, reference));
                    self.tally.unpaired += 1;
                }
                None => {
                    *claim = Some((distance, reference));
                    self.tally.paired += 1;
                }
            }
        }
    }

    fn pair_average(&mut self, reference: ReferenceRow<T>, window: f64) {
        let start = reference.t - window;
        // Samples at or before the window's start are readings.
        self.flush_before_or_at(start);
        let (mut sum, mut count, mut temp_sum, mut temps, mut line) = (0.0, 0u32, 0.0, 0u32, 0);
        let mut index = 0;
        let mut kept = VecDeque::new();
        while let Some(slot) = self.pending.pop_front() {
            match slot {
                Slot::Sample { row, .. } if row.t > start && row.t <= reference.t => {
                    sum += row.raw.to_f64();
                    count += 1;
                    if let Some(temperature) = row.temperature {
                        temp_sum += temperature.to_f64();
                        temps += 1;
                    }
                    line = row.line;
                    index = row.index;
                }
                Slot::Error(error) if kept.is_empty() => self.out.push_back(Err(error)),
                other => kept.push_back(other),
            }
        }
        self.pending = kept;
        if count == 0 {
            self.tally.unpaired += 1;
            return;
        }
        self.tally.paired += 1;
        self.tally.averaged_samples += u64::from(count);
        let temperature = (temps == count).then(|| T::from_f64(temp_sum / f64::from(temps)));
        self.out.push_back(Ok(JoinedRow {
            t: reference.t,
            raw: T::from_f64(sum / f64::from(count)),
            reference: Some(reference.value),
            temperature,
            line,
            index,
            reference_line: Some(reference.line),
            samples: count,
        }));
    }

    fn flush_before_or_at(&mut self, limit: f64) {
        while let Some(front) = self.pending.front() {
            let settled = match front {
                Slot::Error(_) => true,
                Slot::Sample { row, .. } => row.t <= limit,
            };
            if !settled {
                break;
            }
            let slot = self.pending.pop_front().expect("front exists");
            self.emit(slot);
        }
    }

    /// Works until at least one output row is ready or both logs are done.
    fn step(&mut self) -> bool {
        if self.next_reference.is_none() && !self.reference_done {
            self.advance_reference();
            if !self.out.is_empty() {
                return true;
            }
        }
        let Some(reference) = self.next_reference else {
            // No reference left: everything is a reading.
            if let Some(slot) = self.pending.pop_front() {
                self.emit(slot);
                return true;
            }
            if self.load_sensor() {
                return true;
            }
            return false;
        };
        match self.pairing {
            Pairing::Nearest(tolerance) => {
                self.flush_before(reference.t - tolerance);
                if !self.sensor_done && self.sensor_t <= reference.t + tolerance {
                    self.load_sensor();
                    return true;
                }
                self.pair_nearest(reference, tolerance);
            }
            Pairing::Average(window) => {
                if !self.sensor_done && self.sensor_t <= reference.t {
                    self.load_sensor();
                    return true;
                }
                self.pair_average(reference, window);
            }
        }
        self.advance_reference();
        true
    }
}

impl<T, S, F> Iterator for TimeJoin<T, S, F>
where
    T: Real,
    S: Iterator<Item = Result<SensorRow<T>, FeedError>>,
    F: Iterator<Item = Result<ReferenceRow<T>, FeedError>>,
{
    type Item = Result<JoinedRow<T>, FeedError>;

    fn next(&mut self) -> Option<Self::Item> {
        loop {
            if let Some(item) = self.out.pop_front() {
                return Some(item);
            }
            if !self.step() && self.out.is_empty() {
                return None;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    type Sensor = Result<SensorRow<f64>, FeedError>;
    type Reference = Result<ReferenceRow<f64>, FeedError>;

    fn sensor(rows: &[(f64, f64)]) -> Vec<Sensor> {
        rows.iter()
            .enumerate()
            .map(|(i, &(t, raw))| {
                Ok(SensorRow {
                    t,
                    raw,
                    temperature: None,
                    line: i as u64 + 2,
                    index: i as u64,
                })
            })
            .collect()
    }

    fn reference(rows: &[(f64, f64)]) -> Vec<Reference> {
        rows.iter()
            .enumerate()
            .map(|(i, &(t, value))| {
                Ok(ReferenceRow {
                    t,
                    value,
                    line: i as u64 + 2,
                })
            })
            .collect()
    }

    fn join(
        s: Vec<Sensor>,
        r: Vec<Reference>,
        pairing: Pairing,
    ) -> (Vec<JoinedRow<f64>>, JoinTally) {
        let mut join = TimeJoin::new(s.into_iter(), r.into_iter(), pairing);
        let rows = join.by_ref().map(|r| r.unwrap()).collect();
        (rows, join.tally().clone())
    }

    #[test]
    fn nearest_within_tolerance() {
        let s = sensor(&[(0.0, 1.0), (10.0, 2.0), (20.0, 3.0), (30.0, 4.0)]);
        // 9 pairs with 10; 21 with 20; 45 is out of reach.
        let r = reference(&[(9.0, 20.0), (21.0, 30.0), (45.0, 50.0)]);
        let (rows, tally) = join(s, r, Pairing::Nearest(2.0));
        let refs: Vec<Option<f64>> = rows.iter().map(|r| r.reference).collect();
        assert_eq!(refs, [None, Some(20.0), Some(30.0), None]);
        assert_eq!(rows[1].reference_line, Some(2));
        assert_eq!((tally.paired, tally.unpaired), (2, 1));
    }

    #[test]
    fn two_references_for_one_sample_the_nearer_wins() {
        let s = sensor(&[(0.0, 1.0), (10.0, 2.0)]);
        let r = reference(&[(9.0, 20.0), (10.5, 21.0)]);
        let (rows, tally) = join(s, r, Pairing::Nearest(3.0));
        assert_eq!(rows[1].reference, Some(21.0));
        assert_eq!((tally.paired, tally.unpaired), (1, 1));
    }

    #[test]
    fn backward_reference_rows_are_reported_and_the_rest_joins() {
        let s = sensor(&[(0.0, 1.0), (10.0, 2.0), (20.0, 3.0), (30.0, 4.0)]);
        let r = reference(&[(10.0, 20.0), (5.0, 99.0), (10.0, 98.0), (30.0, 40.0)]);
        let (rows, tally) = join(s, r, Pairing::Nearest(1.0));
        let refs: Vec<Option<f64>> = rows.iter().map(|r| r.reference).collect();
        assert_eq!(refs, [None, Some(20.0), None, Some(40.0)]);
        assert_eq!(tally.backwards, 2);
        assert_eq!(tally.backwards_lines, [3, 4]);
        assert_eq!(tally.reference_rows, 4);
    }

    #[test]
    fn average_over_a_window() {
        let s = sensor(&[
            (0.0, 1.0),
            (1.0, 2.0),
            (2.0, 3.0),
            (3.0, 4.0),
            (4.0, 5.0),
            (5.0, 6.0),
        ]);
        // Window (0.5, 3]: samples at 1, 2, 3 → mean 3.
        let r = reference(&[(3.0, 30.0), (9.0, 90.0)]);
        let (rows, tally) = join(s, r, Pairing::Average(2.5));
        let shape: Vec<(f64, f64, Option<f64>, u32, u64)> = rows
            .iter()
            .map(|r| (r.t, r.raw, r.reference, r.samples, r.index))
            .collect();
        // The second window (6.5, 9] holds no sample: unpaired. The check takes the
        // data-row index of the last sample averaged.
        assert_eq!(
            shape,
            [
                (0.0, 1.0, None, 1, 0),
                (3.0, 3.0, Some(30.0), 3, 3),
                (4.0, 5.0, None, 1, 4),
                (5.0, 6.0, None, 1, 5)
            ]
        );
        assert_eq!(
            (tally.paired, tally.unpaired, tally.averaged_samples),
            (1, 1, 3)
        );
    }

    #[test]
    fn errors_pass_through_in_order() {
        let mut s = sensor(&[(0.0, 1.0), (10.0, 2.0)]);
        s.insert(
            1,
            Err(FeedError::Empty {
                file: "s.csv".into(),
            }),
        );
        let r = reference(&[(10.0, 20.0)]);
        let out: Vec<_> =
            TimeJoin::new(s.into_iter(), r.into_iter(), Pairing::Nearest(1.0)).collect();
        assert!(out[0].is_ok());
        assert!(out[1].is_err());
        assert_eq!(out[2].as_ref().unwrap().reference, Some(20.0));
    }

    proptest! {
        /// Splitting a feed into a sensor log and a reference log (random gaps in the
        /// sensor log, random clock jitter within the tolerance on the reference) and
        /// joining them back gives the feed's rows and checks, minus the dropped rows.
        #[test]
        fn split_and_join_gives_the_feed_back(
            rows in proptest::collection::vec(
                (0.1f64..100.0, proptest::option::of(0.1f64..100.0), any::<bool>(), -0.99f64..0.99),
                1..400,
            ),
            spacing in 3.0f64..60.0,
        ) {
            let tolerance = spacing / 3.0;
            let mut sensor_rows = Vec::new();
            let mut reference_rows = Vec::new();
            let mut expected = Vec::new();
            for (i, (raw, reference, dropped, jitter)) in rows.iter().enumerate() {
                let t = 1_772_323_200.0 + i as f64 * spacing;
                let line = i as u64 + 2;
                if let Some(value) = reference {
                    reference_rows.push(Ok(ReferenceRow { t: t + jitter * tolerance, value: *value, line }));
                }
                if *dropped {
                    continue;
                }
                sensor_rows.push(Ok(SensorRow { t, raw: *raw, temperature: None, line, index: i as u64 }));
                expected.push((t, *raw, *reference, line, i as u64));
            }
            let join = TimeJoin::new(sensor_rows.into_iter(), reference_rows.into_iter(), Pairing::Nearest(tolerance));
            let got: Vec<(f64, f64, Option<f64>, u64, u64)> = join
                .map(|r| r.unwrap())
                .map(|r| (r.t, r.raw, r.reference, r.line, r.index))
                .collect();
            prop_assert_eq!(got, expected);
        }
    }
}
