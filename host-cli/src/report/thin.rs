//! Thinning of long runs so the report stays small (a 10^6-sample replay under 2 MB) while
//! every extreme and every point near an event or alarm is still drawn.
//!
//! - [`scatter`]: a grid of cells (time slices × horizontal bins); in each cell the points
//!   with the smallest and largest value of every key are kept, plus an even stride of
//!   [`STRIDE_POINTS`] points through the whole input (so the body of the cloud is drawn,
//!   not only its edges), plus every point in `keep`.
//! - [`series`]: time buckets; in each the first, last, lowest and highest point of every
//!   key are kept, plus every point in `keep`.
//! - [`near`]: the indices of the points at or just after given data-row indices (the check
//!   nearest each event).
//!
//! # Contract
//! - Output indices are sorted, unique and in range; with at most `limit` input points
//!   nothing is dropped.
//! - Deterministic: ties keep the earlier point.

use std::collections::BTreeSet;

/// Below this many points nothing is thinned.
pub const LIMIT: usize = 4000;

/// Points taken at an even stride by [`scatter`], besides the extremes.
pub const STRIDE_POINTS: usize = 2500;

/// Keeps, in each (time slice, x bin) cell, the points with the extreme values of each key.
///
/// `x` are the plotted horizontal coordinates (already log10 for a log axis), `keys` one
/// slice of values per key (same length as `x`); non-finite x or key values are skipped.
pub fn scatter(
    x: &[f64],
    keys: &[&[f64]],
    slices: usize,
    bins: usize,
    keep: &BTreeSet<usize>,
) -> Vec<usize> {
    let n = x.len();
    if n <= LIMIT {
        return (0..n).collect();
    }
    let (low, high) = super::plot::span(x.iter().copied());
    let width = (high - low).max(f64::MIN_POSITIVE);
    let cells = slices * bins;
    // For each cell and key: (index of min, index of max).
    let mut extremes: Vec<Option<(usize, usize)>> = vec![None; cells * keys.len()];
    for i in 0..n {
        if !x[i].is_finite() {
            continue;
        }
        let slice = (i * slices / n).min(slices - 1);
        let bin = (((x[i] - low) / width) * bins as f64) as usize;
        let cell = slice * bins + bin.min(bins - 1);
        for (k, values) in keys.iter().enumerate() {
            let v = values[i];
            if !v.is_finite() {
                continue;
            }
            let slot = &mut extremes[cell * keys.len() + k];
            *slot = Some(match *slot {
                None => (i, i),
                Some((lo, hi)) => (
                    if v < values[lo] { i } else { lo },
                    if v > values[hi] { i } else { hi },
                ),
            });
        }
    }
    let mut out: BTreeSet<usize> = keep.iter().copied().filter(|&i| i < n).collect();
    for (lo, hi) in extremes.into_iter().flatten() {
        out.insert(lo);
        out.insert(hi);
    }
    let stride = n.div_ceil(STRIDE_POINTS).max(1);
    out.extend((0..n).step_by(stride).filter(|&i| x[i].is_finite()));
    out.into_iter().collect()
}

/// Keeps, in each of `buckets` equal time buckets, the first, last, lowest and highest
/// point of each key.
pub fn series(t: &[f64], keys: &[&[f64]], buckets: usize, keep: &BTreeSet<usize>) -> Vec<usize> {
    let n = t.len();
    if n <= LIMIT {
        return (0..n).collect();
    }
    let (low, high) = super::plot::span(t.iter().copied());
    let width = (high - low).max(f64::MIN_POSITIVE);
    let bucket_of =
        |value: f64| ((((value - low) / width) * buckets as f64) as usize).min(buckets - 1);
    let mut first: Vec<Option<usize>> = vec![None; buckets];
    let mut last: Vec<Option<usize>> = vec![None; buckets];
    let mut extremes: Vec<Option<(usize, usize)>> = vec![None; buckets * keys.len()];
    for i in 0..n {
        if !t[i].is_finite() {
            continue;
        }
        let b = bucket_of(t[i]);
        first[b].get_or_insert(i);
        last[b] = Some(i);
        for (k, values) in keys.iter().enumerate() {
            let v = values[i];
            if !v.is_finite() {
                continue;
            }
            let slot = &mut extremes[b * keys.len() + k];
            *slot = Some(match *slot {
                None => (i, i),
                Some((lo, hi)) => (
                    if v < values[lo] { i } else { lo },
                    if v > values[hi] { i } else { hi },
                ),
            });
        }
    }
    let mut out: BTreeSet<usize> = keep.iter().copied().filter(|&i| i < n).collect();
    out.extend(first.into_iter().flatten());
    out.extend(last.into_iter().flatten());
    for (lo, hi) in extremes.into_iter().flatten() {
        out.insert(lo);
        out.insert(hi);
    }
    out.into_iter().collect()
}

/// For each target data-row index, the position in `seqs` (sorted ascending) of the first
/// point at or after it, and the one just before it.
pub fn near(seqs: &[u64], targets: impl IntoIterator<Item = u64>) -> BTreeSet<usize> {
    let mut out = BTreeSet::new();
    if seqs.is_empty() {
        return out;
    }
    for target in targets {
        let i = seqs.partition_point(|&s| s < target);
        if i < seqs.len() {
            out.insert(i);
        }
        if i > 0 {
            out.insert(i - 1);
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_inputs_are_kept_whole() {
        let x = [1.0, 2.0, 3.0];
        assert_eq!(scatter(&x, &[&x], 4, 4, &BTreeSet::new()), vec![0, 1, 2]);
        assert_eq!(series(&x, &[&x], 4, &BTreeSet::new()), vec![0, 1, 2]);
    }

    #[test]
    fn large_inputs_keep_extremes_and_requested_points() {
        let n = 100_000;
        let x: Vec<f64> = (0..n).map(|i| (i % 1000) as f64).collect();
        let y: Vec<f64> = (0..n).map(|i| ((i * 7919) % 1009) as f64).collect();
        let mut y = y;
        y[54_321] = 1e9; // the global maximum
        let keep: BTreeSet<usize> = [77_777].into_iter().collect();
        let kept = scatter(&x, &[&y], 8, 100, &keep);
        assert!(
            kept.len() <= 2 * 8 * 100 + 1 + STRIDE_POINTS,
            "{}",
            kept.len()
        );
        assert!(kept.contains(&54_321));
        assert!(kept.contains(&77_777));
        assert!(kept.windows(2).all(|w| w[0] < w[1]));
        let t: Vec<f64> = (0..n).map(|i| i as f64).collect();
        let kept = series(&t, &[&y], 500, &keep);
        assert!(kept.contains(&54_321) && kept.contains(&0) && kept.contains(&(n - 1)));
        assert!(kept.len() <= 4 * 500 + 1);
    }

    #[test]
    fn near_finds_neighbours() {
        let seqs = [2, 4, 6, 8];
        let got: Vec<usize> = near(&seqs, [5, 0, 100]).into_iter().collect();
        assert_eq!(got, vec![0, 1, 2, 3]);
    }
}
