//! Time order of a feed's rows: rows whose time repeats or goes back are counted and their
//! lines listed (the first [`LIST_LIMIT`] of each), never reordered or dropped.

use serde::Serialize;

/// Most lines listed per kind of time-order problem and of skipped row (the counts are
/// always complete).
pub const LIST_LIMIT: usize = 10_000;

/// Timestamps that go backwards or repeat.
#[derive(Clone, Debug, Default, Serialize)]
pub struct TimeOrder {
    /// Rows whose time is before the previous row's.
    pub backwards: u64,
    /// Rows whose time equals the previous row's.
    pub repeated: u64,
    /// Lines of the rows going backwards (first [`LIST_LIMIT`]).
    pub backwards_lines: Vec<u64>,
    /// Lines of the repeated rows (first [`LIST_LIMIT`]).
    pub repeated_lines: Vec<u64>,
    #[serde(skip)]
    last: Option<f64>,
}

/// What a time-order check found about one row.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TimeStep {
    /// Later than the previous row (or the first row, or no time).
    Forward,
    /// Equal to the previous row's time.
    Repeated,
    /// Before the previous row's time.
    Backwards,
}

impl TimeOrder {
    /// Checks one row's time against the previous row's.
    pub fn check(&mut self, t: f64, line: u64) -> TimeStep {
        let step = match self.last {
            Some(last) if t == last => {
                self.repeated += 1;
                if self.repeated_lines.len() < LIST_LIMIT {
                    self.repeated_lines.push(line);
                }
                TimeStep::Repeated
            }
            Some(last) if t < last => {
                self.backwards += 1;
                if self.backwards_lines.len() < LIST_LIMIT {
                    self.backwards_lines.push(line);
                }
                TimeStep::Backwards
            }
            _ => TimeStep::Forward,
        };
        if t.is_finite() {
            self.last = Some(t);
        }
        step
    }
}
