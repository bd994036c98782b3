//! Has the data moved since the segments were built? Two measures against a
//! reference kept with the model:
//!
//! - the **population stability index** of each feature: the training
//!   values are cut into ten bins at their deciles; the new values are
//!   counted into the same bins; PSI = Σ (a − e) · ln(a / e) over the bins,
//!   with e the training share and a the new share of a bin. A share of 0
//!   is taken as 0.0001 so that an empty bin counts heavily rather than
//!   infinitely (common practice). The usual reading, a rule of thumb of
//!   credit scoring rather than a statistical test: below 0.1 stable,
//!   0.1 to 0.25 some shift, above 0.25 a major shift.
//! - the **share of records far from every centre**: farther from their
//!   nearest centre than 99 % of the training records were. About 1 % on
//!   data like the training data.
//!
//! Bins are right-closed: a value goes to the bin of the first edge it does
//! not exceed (the last bin when it exceeds them all). Edges repeated by
//! tied values are kept once. Cost: O(n log n) to build the reference,
//! O(n log b + n k d) to measure.

use super::stats;
use serde::{Deserialize, Serialize};

/// Bins of the reference distribution.
pub const BINS: usize = 10;
/// The smallest share a bin counts with in the index.
pub const SHARE_FLOOR: f64 = 1e-4;
/// Readings of the index (a rule of thumb of the trade).
pub const PSI_SOME_SHIFT: f64 = 0.1;
pub const PSI_MAJOR_SHIFT: f64 = 0.25;
/// The training quantile of the nearest-centre distance beyond which a
/// record counts as far.
pub const FAR_QUANTILE: f64 = 0.99;

/// One feature's training distribution: interior bin edges and the share
/// of training values in each bin (edges + 1 of them).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Distribution {
    pub edges: Vec<f64>,
    pub shares: Vec<f64>,
}

impl Distribution {
    /// Cuts `values` at their deciles (quantiles by linear interpolation,
    /// [`stats::quantile_sorted`]). `None` when there are no values.
    pub fn of(values: &[f64]) -> Option<Distribution> {
        let sorted = stats::sorted(values);
        let mut edges: Vec<f64> = (1..BINS)
            .filter_map(|i| stats::quantile_sorted(&sorted, i as f64 / BINS as f64))
            .collect();
        if sorted.is_empty() {
            return None;
        }
        edges.dedup();
        let shares = shares(&edges, values);
        Some(Distribution { edges, shares })
    }

    /// The index of `values` against this distribution.
    pub fn psi(&self, values: &[f64]) -> f64 {
        psi(&self.shares, &shares(&self.edges, values))
    }
}

/// The share of `values` in each bin cut at `edges`.
pub fn shares(edges: &[f64], values: &[f64]) -> Vec<f64> {
    let mut counts = vec![0usize; edges.len() + 1];
    for v in values {
        counts[edges.partition_point(|e| e < v)] += 1;
    }
    let n = values.len().max(1) as f64;
    counts.iter().map(|&c| c as f64 / n).collect()
}

/// Population stability index of `actual` shares against `expected`
/// shares (same bins), shares below [`SHARE_FLOOR`] counted at it.
pub fn psi(expected: &[f64], actual: &[f64]) -> f64 {
    expected
        .iter()
        .zip(actual)
        .map(|(&e, &a)| {
            let (e, a) = (e.max(SHARE_FLOOR), a.max(SHARE_FLOOR));
            (a - e) * (a / e).ln()
        })
        .fold(0.0, |acc, v| acc + v)
}

/// Words for an index value.
pub fn reading(psi: f64) -> &'static str {
    if psi > PSI_MAJOR_SHIFT {
        "a major shift"
    } else if psi >= PSI_SOME_SHIFT {
        "some shift"
    } else {
        "stable"
    }
}

/// The share of `distances` above `limit`.
pub fn share_above(distances: &[f64], limit: f64) -> f64 {
    if distances.is_empty() {
        return 0.0;
    }
    distances.iter().filter(|&&d| d > limit).count() as f64 / distances.len() as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_hand_worked_index() {
        // Two bins, expected 50/50, actual 60/40, worked by hand:
        // 0.1 ln(1.2) + (-0.1) ln(0.8) = 0.018232 + 0.022314 = 0.040547.
        let v = psi(&[0.5, 0.5], &[0.6, 0.4]);
        assert!((v - 0.040_546_510_8).abs() < 1e-9, "{v}");
        assert_eq!(psi(&[0.2, 0.8], &[0.2, 0.8]), 0.0);
    }

    #[test]
    fn an_empty_bin_counts_at_the_floor() {
        // (0.0001 - 0.5) ln(0.0001 / 0.5) + (1 - 0.5) ln(1 / 0.5), by hand:
        // 0.4999 * 8.517193 + 0.5 * 0.693147 = 4.257745 + 0.346574 = 4.604319.
        let v = psi(&[0.5, 0.5], &[0.0, 1.0]);
        assert!((v - 4.604_318_5).abs() < 1e-6, "{v}");
    }

    #[test]
    fn deciles_cut_the_training_values_into_tenths() {
        let values: Vec<f64> = (1..=100).map(f64::from).collect();
        let d = Distribution::of(&values).unwrap();
        assert_eq!(d.edges.len(), 9);
        assert!(
            d.shares.iter().all(|&s| (s - 0.1).abs() < 1e-12),
            "{:?}",
            d.shares
        );
        assert_eq!(d.psi(&values), 0.0);
        // Every value moved above the top edge: one bin holds all.
        let moved: Vec<f64> = values.iter().map(|v| v + 1000.0).collect();
        assert!(d.psi(&moved) > PSI_MAJOR_SHIFT);
    }

    #[test]
    fn tied_values_share_an_edge() {
        let d = Distribution::of(&[1.0, 1.0, 1.0, 1.0, 2.0]).unwrap();
        assert!(d.edges.windows(2).all(|w| w[0] < w[1]));
        assert!((d.shares.iter().sum::<f64>() - 1.0).abs() < 1e-12);
    }

    #[test]
    fn the_far_share_counts_strictly_beyond_the_limit() {
        // Worked by hand: of 0.5, 1.0, 1.5 and 2.0, two lie beyond 1.0.
        assert_eq!(share_above(&[0.5, 1.0, 1.5, 2.0], 1.0), 0.5);
        assert_eq!(share_above(&[], 1.0), 0.0);
    }

    #[test]
    fn bins_are_right_closed() {
        assert_eq!(
            shares(&[1.0, 2.0], &[1.0, 1.5, 2.0, 3.0]),
            vec![0.25, 0.5, 0.25]
        );
    }
}
