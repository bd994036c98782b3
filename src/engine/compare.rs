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
