//! The census of a column: notices undeclared missing markers (sentinels) such as `-200`
//! or `-9999` written by a logger where it had no value.
//!
//! A value is a suspected marker when it makes up at least [`SHARE`] of the column's cells
//! (and at least [`MIN_CELLS`] cells), and either lies far outside the rest of the column
//! (below the rest by more than half the span of the rest's central 98 %, or above it by as
//! much; or negative in a column whose other values are all zero or more), or lies outside
//! the working range given for the column and outside the rest's central 98 %.
//!
//! Memory is flat in the column's length: exact counts are kept for the [`EDGE`] lowest and
//! the [`EDGE`] highest distinct values seen (a value that is among the lowest at the end
//! was among them from its first occurrence on, so its count is exact), and the rest's
//! quantiles come from a systematic sample of at most [`SAMPLE`] values (every value while
//! it fits, then every second one of those kept, and so on). A sentinel sits at an edge of
//! its column by nature, so watching the edges is enough.
//!
//! Invariants: never panics; non-finite values are not counted (they are data the core
//! rejects); the result does not depend on anything but the values and their order.

use std::collections::BTreeMap;

/// Share of a column's cells from which a value may be a marker (common practice, no
/// source: one cell in a hundred is far more than ties of a real signal at the edge).
pub const SHARE: f64 = 0.01;
/// Fewest cells of a suspected marker.
pub const MIN_CELLS: u64 = 3;
/// Fewest distinct values the rest of a column must have for "far outside the rest" to
/// mean anything: a reference that takes a few values (check standards, test weights) is
/// discrete, and its top standard is not a marker (common practice, no source).
pub const MIN_DISTINCT_REST: usize = 10;
/// Distinct values counted exactly at each edge.
pub const EDGE: usize = 32;
/// Largest systematic sample kept for the quantiles of the rest.
pub const SAMPLE: usize = 8192;

/// A value keyed so that it sorts as a number (finite values only).
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
struct Key(i64);

impl Key {
    fn of(value: f64) -> Key {
        // Order-preserving map of finite f64 to i64 (-0.0 and 0.0 are one value).
        let value = if value == 0.0 { 0.0 } else { value };
        let bits = value.to_bits() as i64;
        Key(if bits < 0 { bits ^ i64::MAX } else { bits })
    }

    fn value(self) -> f64 {
        let bits = if self.0 < 0 {
            self.0 ^ i64::MAX
        } else {
            self.0
        };
        f64::from_bits(bits as u64)
    }
}

/// A suspected missing marker.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Suspect {
    /// The column.
    pub column: String,
    /// The value.
    pub value: f64,
    /// Cells holding it.
    pub cells: u64,
    /// Its share of the column's cells.
    pub share: f64,
    /// Why it is suspected.
    pub why: &'static str,
}

impl Suspect {
    /// The warning printed on standard error.
    pub fn warning(&self) -> String {
        format!(
            "column `{}`: the value {} makes up {:.1} % of the cells ({} cells) and {}; if it means \"no value\", declare it with --missing={} (it was treated as a measurement)",
            self.column,
            self.value,
            self.share * 100.0,
            self.cells,
            self.why,
            self.value
        )
    }
}

/// The census of one column.
#[derive(Clone, Debug)]
pub struct Census {
    column: String,
    range: Option<(f64, f64)>,
    cells: u64,
    low: BTreeMap<Key, u64>,
    high: BTreeMap<Key, u64>,
    /// The largest value in `low` once it is full, +∞ before (a cheap test for most
    /// values: one comparison).
    low_bound: f64,
    /// The smallest value in `high` once it is full, −∞ before.
    high_bound: f64,
    sample: Vec<f64>,
    stride: u64,
    /// Values until the next one is sampled (a countdown instead of a remainder).
    until_sample: u64,
}

impl Census {
    /// An empty census of `column`, with the working range of its values if one applies.
    pub fn new(column: &str, range: Option<(f64, f64)>) -> Self {
        Census {
            column: column.to_string(),
            range,
            cells: 0,
            low: BTreeMap::new(),
            high: BTreeMap::new(),
            low_bound: f64::INFINITY,
            high_bound: f64::NEG_INFINITY,
            sample: Vec::with_capacity(SAMPLE),
            stride: 1,
            until_sample: 0,
        }
    }

    /// Counts a cell that holds no value (declared missing, or absent): it counts in the
    /// column's cells, not among the values.
    #[inline]
    pub fn push_missing(&mut self) {
        self.cells += 1;
    }

    /// Counts a value.
    #[inline]
    pub fn push(&mut self, value: f64) {
        self.cells += 1;
        self.push_value(value);
    }

    /// Counts a value without counting its cell (the caller counts the cells of the column
    /// and passes them to [`Census::suspects_among`]). The common case (a value inside both
    /// edges, not sampled) costs a few comparisons and a decrement.
    #[inline]
    pub fn push_value(&mut self, value: f64) {
        if !value.is_finite() {
            return;
        }
        if value <= self.low_bound {
            Self::count_edge(&mut self.low, &mut self.low_bound, Key::of(value), false);
        }
        if value >= self.high_bound {
            Self::count_edge(&mut self.high, &mut self.high_bound, Key::of(value), true);
        }
        if self.until_sample == 0 {
            self.take_sample(value);
        }
        self.until_sample -= 1;
    }

    #[cold]
    #[inline(never)]
    fn take_sample(&mut self, value: f64) {
        if self.sample.len() == SAMPLE {
            let mut keep = 0;
            for index in (0..SAMPLE).step_by(2) {
                self.sample[keep] = self.sample[index];
                keep += 1;
            }
            self.sample.truncate(keep);
            self.stride *= 2;
        }
        self.sample.push(value);
        self.until_sample = self.stride;
    }

    #[cold]
    #[inline(never)]
    fn count_edge(edge: &mut BTreeMap<Key, u64>, bound: &mut f64, key: Key, top: bool) {
        if let Some(count) = edge.get_mut(&key) {
            *count += 1;
            return;
        }
        edge.insert(key, 1);
        if edge.len() > EDGE {
            let evict = if top {
                edge.keys().next().copied()
            } else {
                edge.keys().next_back().copied()
            };
            if let Some(evict) = evict {
                edge.remove(&evict);
            }
        }
        if edge.len() == EDGE {
            let inner = if top {
                edge.keys().next()
            } else {
                edge.keys().next_back()
            };
            if let Some(inner) = inner {
                *bound = inner.value();
            }
        }
    }

    /// Cells counted (values and missing).
    pub fn cells(&self) -> u64 {
        self.cells
    }

    /// The suspected markers, lowest value first.
    pub fn suspects(&self) -> Vec<Suspect> {
        self.suspects_among(self.cells)
    }

    /// The suspected markers when the column has `total` cells.
    pub fn suspects_among(&self, total: u64) -> Vec<Suspect> {
        let mut out = Vec::new();
        if total == 0 {
            return out;
        }
        let needed = ((total as f64 * SHARE).ceil() as u64).max(MIN_CELLS);
        let mut candidates: BTreeMap<Key, u64> = BTreeMap::new();
        for (key, count) in self.low.iter().chain(self.high.iter()) {
            if *count >= needed {
                candidates.insert(*key, *count);
            }
        }
        for (key, cells) in candidates {
            let value = key.value();
            let rest: Vec<f64> = self
                .sample
                .iter()
                .copied()
                .filter(|&v| v != value)
                .collect();
            if rest.is_empty() {
                continue;
            }
            let (q01, q99) = (quantile(&rest, 0.01), quantile(&rest, 0.99));
            let span = q99 - q01;
            let rest_min = rest.iter().copied().fold(f64::INFINITY, f64::min);
            let mut distinct = rest.clone();
            distinct.sort_by(f64::total_cmp);
            distinct.dedup();
            let continuous = distinct.len() >= MIN_DISTINCT_REST;
            let why = if continuous && value < q01 - span / 2.0 {
                Some("lies far below the rest of the column")
            } else if continuous && value > q99 + span / 2.0 {
                Some("lies far above the rest of the column")
            } else if value < 0.0 && rest_min >= 0.0 {
                Some("is the only negative value of the column")
            } else if self.range.is_some_and(|(low, high)| {
                (value < low || value > high) && (value < q01 || value > q99)
            }) {
                Some("lies outside the working range and the rest of the column")
            } else {
                None
            };
            if let Some(why) = why {
                out.push(Suspect {
                    column: self.column.clone(),
                    value,
                    cells,
                    share: cells as f64 / total as f64,
                    why,
                });
            }
        }
        out
    }
}

/// The censuses of a run's raw, reference and temperature columns, the time span and the
/// checks outside the working range: what every replay counts of the samples it gives the
/// monitor.
#[derive(Clone, Debug)]
pub struct RunCensus {
    /// Raw, reference and temperature columns.
    pub columns: [Census; 3],
    /// Raw values of the working range (`origin + low`, `origin + high`).
    pub range: (f64, f64),
    /// Time of the first sample.
    pub first_t: Option<f64>,
    /// Time of the last sample.
    pub last_t: Option<f64>,
    /// Samples counted.
    pub rows: u64,
    /// Samples with a reference.
    pub checks: u64,
    /// Of those, the ones whose raw value lies outside the working range.
    pub checks_outside: u64,
}

/// Share of checks outside the working range above which a run warns (common practice,
/// no source).
pub const OUTSIDE_SHARE: f64 = 0.05;

impl RunCensus {
    /// An empty census; `names` of the raw, reference and temperature columns.
    pub fn new(names: [&str; 3], range: (f64, f64)) -> Self {
        RunCensus {
            columns: [
                Census::new(names[0], Some(range)),
                Census::new(names[1], None),
                Census::new(names[2], None),
            ],
            range,
            first_t: None,
            last_t: None,
            rows: 0,
            checks: 0,
            checks_outside: 0,
        }
    }

    /// Counts one sample: its time, raw value, reference and temperature (or their absence).
    #[inline]
    pub fn push(&mut self, t: f64, raw: f64, reference: Option<f64>, temperature: Option<f64>) {
        if self.rows == 0 {
            self.first_t = Some(t);
        }
        self.rows += 1;
        self.last_t = Some(t);
        self.columns[0].push_value(raw);
        if let Some(value) = reference {
            self.columns[1].push_value(value);
            self.checks += 1;
            if !(raw >= self.range.0 && raw <= self.range.1) {
                self.checks_outside += 1;
            }
        }
        if let Some(value) = temperature {
            self.columns[2].push_value(value);
        }
    }

    /// The suspected undeclared markers of every column (each column has one cell per
    /// sample).
    pub fn suspects(&self) -> Vec<Suspect> {
        self.columns
            .iter()
            .flat_map(|c| c.suspects_among(self.rows))
            .collect()
    }

    /// True when more than [`OUTSIDE_SHARE`] of the checks lie outside the working range.
    pub fn too_many_outside(&self) -> bool {
        self.checks > 0 && self.checks_outside as f64 > OUTSIDE_SHARE * self.checks as f64
    }
}

/// The `p` quantile of `values` (nearest rank on a sorted copy).
fn quantile(values: &[f64], p: f64) -> f64 {
    let mut sorted = values.to_vec();
    sorted.sort_by(f64::total_cmp);
    let rank = ((p * sorted.len() as f64).ceil() as usize).clamp(1, sorted.len());
    sorted[rank - 1]
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn census(values: impl IntoIterator<Item = f64>, range: Option<(f64, f64)>) -> Census {
        let mut c = Census::new("ref", range);
        for v in values {
            c.push(v);
        }
        c
    }

    /// A smooth invented signal between about 0.5 and 8 (a demo shape, not data).
    fn signal(i: usize) -> f64 {
        4.0 + 3.5 * ((i as f64) * 0.01).sin() + 0.01 * (i % 7) as f64
    }

    #[test]
    fn a_frequent_far_value_is_suspected() {
        let values = (0..10_000).map(|i| if i % 25 == 0 { -200.0 } else { signal(i) });
        let suspects = census(values, None).suspects();
        assert_eq!(suspects.len(), 1);
        let s = &suspects[0];
        assert_eq!((s.value, s.cells), (-200.0, 400));
        assert_eq!(s.share, 0.04);
        assert_eq!(
            s.warning(),
            "column `ref`: the value -200 makes up 4.0 % of the cells (400 cells) and lies far below the rest of the column; if it means \"no value\", declare it with --missing=-200 (it was treated as a measurement)"
        );
    }

    #[test]
    fn rare_values_and_values_inside_the_rest_are_not() {
        // 0.5 % of the cells: below the share.
        let rare = (0..10_000).map(|i| if i % 200 == 0 { -200.0 } else { signal(i) });
        assert!(census(rare, None).suspects().is_empty());
        // A frequent value inside the body of the data (a resting level) is data.
        let body = (0..10_000).map(|i| if i % 10 == 0 { 4.0 } else { signal(i) });
        assert!(census(body, None).suspects().is_empty());
        // A frequent zero at the low edge of a positive signal is data too.
        let zeros = (0..10_000).map(|i| if i % 10 == 0 { 0.0 } else { signal(i) });
        assert!(census(zeros, None).suspects().is_empty());
    }

    #[test]
    fn a_value_below_a_wide_rest_is_caught_by_sign_or_range() {
        // A sensor response of 650..2200 with -200 on 4 % of the rows: not far by the span
        // rule (the rest spans about 1,500), but the only negative value.
        let values = (0..5_000).map(|i| {
            if i % 25 == 0 {
                -200.0
            } else {
                1425.0 + 775.0 * ((i as f64) * 0.013).sin()
            }
        });
        let suspects = census(values, None).suspects();
        assert_eq!(suspects.len(), 1);
        assert_eq!(suspects[0].why, "lies far below the rest of the column");
        // Outside the working range and outside the rest's central 98 %.
        let values = (0..5_000).map(|i| {
            if i % 20 == 0 {
                5.0
            } else {
                100.0 + (i % 900) as f64
            }
        });
        let suspects = census(values, Some((10.0, 1000.0))).suspects();
        assert_eq!(suspects.len(), 1, "{suspects:?}");
        assert_eq!(
            suspects[0].why,
            "lies outside the working range and the rest of the column"
        );
    }

    #[test]
    fn check_standards_are_not_markers() {
        // A reference of four test weights, each a quarter of the checks: the top weight
        // is far above the others but the column is discrete.
        let weights = [50.0, 100.0, 200.0, 500.0];
        let values = (0..2_000).map(|i| weights[i % 4]);
        assert!(census(values, None).suspects().is_empty());
        // A negative marker in such a column is still noticed.
        let values = (0..2_000).map(|i| if i % 50 == 0 { -9999.0 } else { weights[i % 4] });
        let suspects = census(values, None).suspects();
        assert_eq!(suspects.len(), 1);
        assert_eq!(suspects[0].why, "is the only negative value of the column");
    }

    #[test]
    fn missing_cells_count_in_the_share_and_non_finite_values_are_ignored() {
        let mut c = Census::new("raw", None);
        for i in 0..1_000 {
            match i % 50 {
                0 => c.push(-9999.0),
                1 => c.push_missing(),
                2 => c.push(f64::NAN),
                _ => c.push(signal(i)),
            }
        }
        assert_eq!(c.cells(), 1_000);
        let suspects = c.suspects();
        assert_eq!(suspects.len(), 1);
        assert_eq!((suspects[0].value, suspects[0].cells), (-9999.0, 20));
    }

    proptest! {
        /// The edge counts are exact: a sentinel planted among random values is counted
        /// exactly, wherever its cells fall and however many distinct values come first.
        #[test]
        fn edge_counts_are_exact(
            values in proptest::collection::vec(0.0f64..100.0, 200..3000),
            every in 5usize..60,
        ) {
            let mut c = Census::new("x", None);
            let mut planted = 0;
            for (i, v) in values.iter().enumerate() {
                if i % every == 0 {
                    c.push(-9999.0);
                    planted += 1;
                } else {
                    c.push(*v);
                }
            }
            let low = c.low.get(&Key::of(-9999.0)).copied();
            prop_assert_eq!(low, Some(planted));
        }

        #[test]
        fn keys_sort_as_numbers(a in -1e12f64..1e12, b in -1e12f64..1e12) {
            prop_assert_eq!(Key::of(a).cmp(&Key::of(b)), a.partial_cmp(&b).unwrap());
            prop_assert_eq!(Key::of(a).value(), if a == 0.0 { 0.0 } else { a });
        }
    }
}
