//! Replicate groups: observations taken at the same reference value.
//!
//! Two references belong to one group when they are equal to within a relative 1e-12 (a
//! lab run repeats each standard exactly; the tolerance only absorbs decimal round-off).
//! Groups are ordered by increasing reference; members keep the input order.

use serde::Serialize;

/// One reference level and the rows measured at it.
#[derive(Debug, Clone, Serialize)]
pub struct ReplicateGroup {
    /// The reference value of the group (its first member's).
    pub reference: f64,
    /// 0-based row indices, in input order.
    pub members: Vec<usize>,
}

/// All replicate groups of a run, by increasing reference.
#[derive(Debug, Clone, Serialize)]
pub struct ReplicateGroups {
    /// The groups.
    pub groups: Vec<ReplicateGroup>,
}

impl ReplicateGroups {
    /// Groups finite references; non-finite ones are left out.
    pub fn from_reference(reference: &[f64]) -> ReplicateGroups {
        let mut order: Vec<usize> = (0..reference.len())
            .filter(|&i| reference[i].is_finite())
            .collect();
        order.sort_by(|&a, &b| reference[a].total_cmp(&reference[b]).then(a.cmp(&b)));
        let mut groups: Vec<ReplicateGroup> = Vec::new();
        for index in order {
            let value = reference[index];
            match groups.last_mut() {
                Some(group)
                    if (value - group.reference).abs()
                        <= 1e-12 * value.abs().max(group.reference.abs()) =>
                {
                    group.members.push(index)
                }
                _ => groups.push(ReplicateGroup {
                    reference: value,
                    members: vec![index],
                }),
            }
        }
        for group in &mut groups {
            group.members.sort_unstable();
        }
        ReplicateGroups { groups }
    }

    /// True when at least one group has two or more members.
    pub fn has_replicates(&self) -> bool {
        self.groups.iter().any(|g| g.members.len() >= 2)
    }
}

/// Sample mean and standard deviation (n − 1) of `values` at `members`.
pub fn mean_and_sd(values: &[f64], members: &[usize]) -> (f64, f64) {
    let count = members.len() as f64;
    let mean = members.iter().map(|&i| values[i]).sum::<f64>() / count;
    if members.len() < 2 {
        return (mean, f64::NAN);
    }
    let sum_squares: f64 = members.iter().map(|&i| (values[i] - mean).powi(2)).sum();
    (mean, (sum_squares / (count - 1.0)).sqrt())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn groups_sorted_by_reference() {
        let groups = ReplicateGroups::from_reference(&[2.0, 1.0, 2.0, 1.0, 3.0, f64::NAN]);
        assert_eq!(groups.groups.len(), 3);
        assert_eq!(groups.groups[0].members, vec![1, 3]);
        assert_eq!(groups.groups[1].members, vec![0, 2]);
        assert_eq!(groups.groups[2].members, vec![4]);
        assert!(groups.has_replicates());
    }
}
