//! Record weights: how many members each record stands for (a household
//! for its members, a survey weight, the inverse of a sampling
//! probability).
//!
//! A weight of `w` counts a record as `w` identical records: every sum over
//! records is a sum of `w` times the record's term, every count a sum of
//! weights. With whole-number weights every weighted result therefore
//! equals the result on the data with each record repeated `w` times (the
//! property the tests pin), and with no weights (every weight 1) the sums
//! are those of the unweighted code to the last bit, since `1 * x == x`
//! and sums of ones are exact below 2^53.

/// The weight of each record, or none (every record weighs 1).
#[derive(Debug, Clone, Copy, Default)]
pub struct Weights<'a>(Option<&'a [f64]>);

impl<'a> Weights<'a> {
    /// Every record weighs 1.
    pub const NONE: Weights<'static> = Weights(None);

    /// Weights given per record: positive and finite (the run stage
    /// refuses others at their data line before anything reaches here).
    pub fn of(w: &'a [f64]) -> Weights<'a> {
        Weights(Some(w))
    }

    pub fn maybe(w: Option<&'a [f64]>) -> Weights<'a> {
        Weights(w)
    }

    /// Record `i`'s weight.
    #[inline]
    pub fn at(&self, i: usize) -> f64 {
        match self.0 {
            Some(w) => w[i],
            None => 1.0,
        }
    }

    pub fn is_weighted(&self) -> bool {
        self.0.is_some()
    }

    pub fn as_slice(&self) -> Option<&'a [f64]> {
        self.0
    }

    /// The summed weight of the first `n` records, left to right.
    pub fn total(&self, n: usize) -> f64 {
        match self.0 {
            Some(w) => w[..n].iter().sum(),
            None => n as f64,
        }
    }

    /// The weights of the records `rows`, in that order (none when
    /// unweighted).
    pub fn select(&self, rows: &[usize]) -> Option<Vec<f64>> {
        self.0.map(|w| rows.iter().map(|&i| w[i]).collect())
    }

    /// Each segment's summed weight under `labels` (0-based, below `k`).
    pub fn per_segment(&self, labels: &[u32], k: usize) -> Vec<f64> {
        let mut s = vec![0.0; k];
        for (i, &l) in labels.iter().enumerate() {
            s[l as usize] += self.at(i);
        }
        s
    }
}

/// Draws a record with probability proportional to its weight: the first
/// whose running weight exceeds `unit * total` (`unit` in [0, 1)), the last
/// one when rounding leaves the target past the total. O(n).
pub fn draw_by_weight(w: &[f64], unit: f64, total: f64) -> usize {
    let target = unit * total;
    let mut acc = 0.0;
    for (i, &v) in w.iter().enumerate() {
        acc += v;
        if acc > target {
            return i;
        }
    }
    w.len().saturating_sub(1)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn no_weights_count_every_record_once() {
        let w = Weights::NONE;
        assert_eq!(w.at(7), 1.0);
        assert_eq!(w.total(5), 5.0);
        assert_eq!(w.per_segment(&[0, 1, 1], 2), vec![1.0, 2.0]);
        assert!(w.select(&[0, 1]).is_none());
    }

    #[test]
    fn a_draw_lands_on_the_record_whose_share_holds_the_target() {
        // Shares [0, 0.25), [0.25, 0.75), [0.75, 1) of a total of 4.
        let w = [1.0, 2.0, 1.0];
        assert_eq!(draw_by_weight(&w, 0.0, 4.0), 0);
        assert_eq!(draw_by_weight(&w, 0.3, 4.0), 1);
        assert_eq!(draw_by_weight(&w, 0.74, 4.0), 1);
        assert_eq!(draw_by_weight(&w, 0.8, 4.0), 2);
        assert_eq!(draw_by_weight(&w, 1.0, 4.0), 2);
    }
}
