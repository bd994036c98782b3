//! Comparing two partitions of the same records.

use std::collections::HashMap;

/// Adjusted Rand index of two labellings of the same records (L. Hubert and
/// P. Arabie, "Comparing partitions", Journal of Classification 2, 1985).
///
/// From the contingency table n_ij with row sums a_i and column sums b_j:
/// ```text
/// index    = sum_ij C(n_ij, 2)
/// expected = sum_i C(a_i, 2) * sum_j C(b_j, 2) / C(n, 2)
/// maximum  = (sum_i C(a_i, 2) + sum_j C(b_j, 2)) / 2
/// ARI      = (index - expected) / (maximum - expected)
/// ```
/// Symmetric, 1 for identical partitions whatever the label names. When the
/// denominator is zero (both labellings put every record in one group, or
/// every record in its own) the partitions are identical and 1 is returned.
/// O(n) time, O(number of distinct label pairs) memory. The labellings must
/// be of equal length.
pub fn adjusted_rand_index<A, B>(a: &[A], b: &[B]) -> f64
where
    A: std::hash::Hash + Eq,
    B: std::hash::Hash + Eq,
{
    debug_assert_eq!(a.len(), b.len());
    let n = a.len().min(b.len());
    let comb2 = |m: usize| (m as f64) * (m as f64 - 1.0) / 2.0;
    let mut cells: HashMap<(&A, &B), usize> = HashMap::new();
    let mut rows: HashMap<&A, usize> = HashMap::new();
    let mut cols: HashMap<&B, usize> = HashMap::new();
    for (x, y) in a.iter().zip(b) {
        *cells.entry((x, y)).or_default() += 1;
        *rows.entry(x).or_default() += 1;
        *cols.entry(y).or_default() += 1;
    }
    // Sums of whole numbers below 2^53 are exact, so the hash maps' visiting
    // order cannot change the result.
    let index: f64 = cells.values().map(|&m| comb2(m)).sum();
    let sa: f64 = rows.values().map(|&m| comb2(m)).sum();
    let sb: f64 = cols.values().map(|&m| comb2(m)).sum();
    let expected = sa * sb / comb2(n);
    let maximum = (sa + sb) / 2.0;
    if maximum == expected {
        return 1.0;
    }
    (index - expected) / (maximum - expected)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn identical_partitions_score_one_whatever_the_names() {
        assert_eq!(
            adjusted_rand_index(&[0, 0, 1, 1], &["b", "b", "a", "a"]),
            1.0
        );
    }

    #[test]
    fn one_group_against_many_scores_zero() {
        assert_eq!(adjusted_rand_index(&[0, 0, 1, 1], &[7, 7, 7, 7]), 0.0);
    }
}

/// How records moved between two labellings of the same records.
#[derive(Debug, Clone, PartialEq)]
pub struct Migration {
    /// The first labelling's groups, in order (numeric order when every
    /// name is a number, else text order).
    pub from: Vec<String>,
    pub to: Vec<String>,
    /// `counts[i][j]`: records in `from[i]` and in `to[j]`.
    pub counts: Vec<Vec<usize>>,
}

impl Migration {
    /// Cross-tabulates two labellings of the same records. O(n log n).
    pub fn new(a: &[&str], b: &[&str]) -> Migration {
        let from = ordered(a);
        let to = ordered(b);
        let mut counts = vec![vec![0usize; to.len()]; from.len()];
        for (x, y) in a.iter().zip(b) {
            // Both come from the lists just built.
            let i = from.iter().position(|f| f == x).unwrap_or(0);
            let j = to.iter().position(|t| t == y).unwrap_or(0);
            counts[i][j] += 1;
        }
        Migration { from, to, counts }
    }

    pub fn row_total(&self, i: usize) -> usize {
        self.counts[i].iter().sum()
    }

    pub fn column_total(&self, j: usize) -> usize {
        self.counts.iter().map(|r| r[j]).sum()
    }

    /// For each group of the first labelling, the group of the second with
    /// the highest Jaccard similarity |A ∩ B| / |A ∪ B| (ties to the first
    /// in order), and that similarity.
    pub fn best_matches(&self) -> Vec<(usize, f64)> {
        (0..self.from.len())
            .map(|i| {
                let mut best = (0, 0.0);
                for j in 0..self.to.len() {
                    let both = self.counts[i][j];
                    let union = self.row_total(i) + self.column_total(j) - both;
                    let jac = if union == 0 {
                        0.0
                    } else {
                        both as f64 / union as f64
                    };
                    if jac > best.1 {
                        best = (j, jac);
                    }
                }
                best
            })
            .collect()
    }
}

/// Distinct names, numerically ordered when all are whole numbers.
pub fn ordered(names: &[&str]) -> Vec<String> {
    let mut v: Vec<String> = names.iter().map(|s| s.to_string()).collect();
    v.sort();
    v.dedup();
    if v.iter().all(|s| s.parse::<u64>().is_ok()) {
        v.sort_by_key(|s| s.parse::<u64>().unwrap_or(0));
    }
    v
}

#[cfg(test)]
mod migration_tests {
    use super::*;

    #[test]
    fn a_hand_counted_migration() {
        // Records: old 1,1,1,2,2,10 ; new 1,1,2,2,2,2.
        let m = Migration::new(
            &["1", "1", "1", "2", "2", "10"],
            &["1", "1", "2", "2", "2", "2"],
        );
        assert_eq!(m.from, ["1", "2", "10"]);
        assert_eq!(m.to, ["1", "2"]);
        assert_eq!(m.counts, vec![vec![2, 1], vec![0, 2], vec![0, 1]]);
        // Old 1 vs new 1: 2 / 3; old 2 vs new 2: 2 / 4; old 10 vs new 2: 1 / 4.
        let best = m.best_matches();
        assert_eq!(best[0], (0, 2.0 / 3.0));
        assert_eq!(best[1], (1, 0.5));
        assert_eq!(best[2], (1, 0.25));
    }
}
