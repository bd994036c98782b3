//! Gower's dissimilarity between records of mixed kinds.
//!
//! # Reference
//! J. C. Gower, "A general coefficient of similarity and some of its
//! properties", Biometrics 27(4), 857-871, 1971. Ordered levels as in
//! L. Kaufman and P. J. Rousseeuw, "Finding Groups in Data", Wiley 1990
//! (recalled from memory): level r of M is scored (r - 1)/(M - 1) and then
//! compared as a number.
//!
//! # Definition
//! ```text
//! d(i, j) = Σ_f w_f δ_ijf s_ijf / Σ_f w_f δ_ijf
//!   number (and ordered score):  s = |x_if - x_jf| / R_f, R_f the column's
//!                                range over the records with a value
//!                                (s = 0 when R_f = 0)
//!   category:                    s = 0 when the levels are equal, else 1
//!   δ_ijf = 0 when either record has a gap in f, else 1
//! ```
//! A category level may stand for a gap (a blank kept as a level of its
//! own): it is then compared as a gap.
//!
//! so a pair compares only the columns both records have, and every value
//! is in [0, 1]. A pair with no column in common has no Gower
//! dissimilarity; it is taken as 1 (as far apart as Gower allows) and
//! counted, so the caller can say so.
//!
//! # Cost
//! O(p) per pair for p columns; the matrix over n records is n(n - 1)/2
//! pairs, filled in parallel. The sums run over the columns in their given
//! order in one accumulator, so a value never depends on the thread count.

use super::matrix::Condensed;
use std::sync::atomic::{AtomicUsize, Ordering};

/// A category gap.
pub const GAP: u32 = u32::MAX;

/// One column of a mixed table, by how Gower compares it.
#[derive(Debug, Clone, PartialEq)]
pub enum Column {
    /// Numbers, and ordered levels as their scores; NaN is a gap.
    Interval(Vec<f64>),
    /// Category levels as codes; [`GAP`] is a gap.
    Nominal(Vec<u32>),
}

impl Column {
    fn len(&self) -> usize {
        match self {
            Column::Interval(v) => v.len(),
            Column::Nominal(v) => v.len(),
        }
    }

    /// Whether record `i` has a gap here.
    pub fn is_gap(&self, i: usize) -> bool {
        match self {
            Column::Interval(v) => v[i].is_nan(),
            Column::Nominal(v) => v[i] == GAP,
        }
    }
}

/// Records by columns of mixed kinds.
#[derive(Debug, Clone, PartialEq)]
pub struct Mixed {
    pub columns: Vec<Column>,
    n: usize,
}

impl Mixed {
    /// A table of equally long columns; `None` when they differ in length.
    pub fn new(columns: Vec<Column>) -> Option<Mixed> {
        let n = columns.first().map_or(0, Column::len);
        columns
            .iter()
            .all(|c| c.len() == n)
            .then_some(Mixed { columns, n })
    }

    /// Records.
    pub fn n(&self) -> usize {
        self.n
    }

    /// The same columns for the records at `rows`, in that order.
    pub fn select(&self, rows: &[usize]) -> Mixed {
        let columns = self
            .columns
            .iter()
            .map(|c| match c {
                Column::Interval(v) => Column::Interval(rows.iter().map(|&r| v[r]).collect()),
                Column::Nominal(v) => Column::Nominal(rows.iter().map(|&r| v[r]).collect()),
            })
            .collect();
        Mixed {
            columns,
            n: rows.len(),
        }
    }
}

/// Gower's dissimilarity with its column weights and the ranges of the
/// data it was fitted on (kept, so new records are compared on the same
/// footing).
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Gower {
    /// Per column, its weight (above 0).
    pub weights: Vec<f64>,
    /// Per column, the range of its values; `None` for categories.
    pub ranges: Vec<Option<f64>>,
    /// Per column, the category level that stands for a gap, if one does;
    /// empty when none does.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub gap_levels: Vec<Option<u32>>,
}

impl Gower {
    /// Measures each number column's range over `data` (gaps left out;
    /// 0 when the column has fewer than two values). `weights` has one
    /// entry per column. O(n p).
    pub fn fit(data: &Mixed, weights: &[f64]) -> Gower {
        let ranges = data
            .columns
            .iter()
            .map(|c| match c {
                Column::Interval(v) => {
                    let (lo, hi) = v
                        .iter()
                        .filter(|x| !x.is_nan())
                        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
                            (lo.min(x), hi.max(x))
                        });
                    Some(if hi >= lo { hi - lo } else { 0.0 })
                }
                Column::Nominal(_) => None,
            })
            .collect();
        Gower {
            weights: weights.to_vec(),
            ranges,
            gap_levels: Vec::new(),
        }
    }

    /// The same measure with, per column, a category level compared as a
    /// gap (`None`: none).
    pub fn with_gap_levels(mut self, gap_levels: Vec<Option<u32>>) -> Gower {
        self.gap_levels = if gap_levels.iter().all(Option::is_none) {
            Vec::new()
        } else {
            gap_levels
        };
        self
    }

    /// The level of column `f` that stands for a gap; [`GAP`] when none
    /// does (so comparing a code with it and with [`GAP`] is one test).
    #[inline]
    fn gap_level(&self, f: usize) -> u32 {
        self.gap_levels.get(f).copied().flatten().unwrap_or(GAP)
    }

    /// The weighted sum of the column scores of record `i` of `a` against
    /// record `j` of `b`, and the weight of the columns they share.
    fn sums(&self, a: &Mixed, i: usize, b: &Mixed, j: usize) -> (f64, f64) {
        let mut num = 0.0;
        let mut den = 0.0;
        for (f, (ca, cb)) in a.columns.iter().zip(&b.columns).enumerate() {
            let w = self.weights[f];
            let s = match (ca, cb) {
                (Column::Interval(x), Column::Interval(y)) => {
                    let (x, y) = (x[i], y[j]);
                    if x.is_nan() || y.is_nan() {
                        continue;
                    }
                    match self.ranges[f] {
                        Some(r) if r > 0.0 => ((x - y).abs() / r).min(1.0),
                        _ => 0.0,
                    }
                }
                (Column::Nominal(x), Column::Nominal(y)) => {
                    let (x, y, g) = (x[i], y[j], self.gap_level(f));
                    if x == GAP || y == GAP || x == g || y == g {
                        continue;
                    }
                    if x == y {
                        0.0
                    } else {
                        1.0
                    }
                }
                // Tables of one layout only; a mismatch compares nothing.
                _ => continue,
            };
            num += w * s;
            den += w;
        }
        (num, den)
    }

    /// The dissimilarity of record `i` of `a` and record `j` of `b`, in
    /// [0, 1]; 1 when they share no column. A new record's difference
    /// beyond the fitted range counts as the whole range.
    pub fn between(&self, a: &Mixed, i: usize, b: &Mixed, j: usize) -> f64 {
        let (num, den) = self.sums(a, i, b, j);
        if den > 0.0 {
            num / den
        } else {
            1.0
        }
    }

    /// The dissimilarity of two records given by their values, for tables
    /// whose columns are numbers first, then categories (as the run lays
    /// them out): `a.0` and `b.0` the numbers (NaN a gap), `a.1` and `b.1`
    /// the category codes ([`GAP`] a gap). The same sums in the same order
    /// as [`Gower::between`], so the same bits.
    pub fn between_values(&self, a: (&[f64], &[u32]), b: (&[f64], &[u32])) -> f64 {
        let p = a.0.len();
        let mut num = 0.0;
        let mut den = 0.0;
        for f in 0..p {
            let (x, y) = (a.0[f], b.0[f]);
            if x.is_nan() || y.is_nan() {
                continue;
            }
            let s = match self.ranges[f] {
                Some(r) if r > 0.0 => ((x - y).abs() / r).min(1.0),
                _ => 0.0,
            };
            num += self.weights[f] * s;
            den += self.weights[f];
        }
        for (c, (&x, &y)) in a.1.iter().zip(b.1).enumerate() {
            let g = self.gap_level(p + c);
            if x == GAP || y == GAP || x == g || y == g {
                continue;
            }
            let w = self.weights[p + c];
            num += if x == y { 0.0 } else { w };
            den += w;
        }
        if den > 0.0 {
            num / den
        } else {
            1.0
        }
    }

    /// Whether records `i` of `a` and `j` of `b` share a column.
    pub fn comparable(&self, a: &Mixed, i: usize, b: &Mixed, j: usize) -> bool {
        self.sums(a, i, b, j).1 > 0.0
    }

    /// The matrix over every pair of `data`'s records, and how many pairs
    /// shared no column (each taken as 1).
    pub fn matrix(&self, data: &Mixed) -> (Condensed, usize) {
        let apart = AtomicUsize::new(0);
        let m = Condensed::from_fn(data.n(), |i, j| {
            let (num, den) = self.sums(data, i, data, j);
            if den > 0.0 {
                num / den
            } else {
                apart.fetch_add(1, Ordering::Relaxed);
                1.0
            }
        });
        (m, apart.into_inner())
    }
}

/// The score of ordered level `rank` (1-based) of `levels`: (r - 1)/(M - 1),
/// 0 for a single level.
pub fn ordered_score(rank: usize, levels: usize) -> f64 {
    if levels <= 1 {
        0.0
    } else {
        (rank as f64 - 1.0) / (levels as f64 - 1.0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table() -> Mixed {
        Mixed::new(vec![
            Column::Interval(vec![1.0, 3.0, 5.0, f64::NAN]),
            Column::Nominal(vec![0, 1, 0, 1]),
            Column::Interval(vec![
                ordered_score(1, 3),
                ordered_score(3, 3),
                ordered_score(2, 3),
                ordered_score(2, 3),
            ]),
        ])
        .expect("equal lengths")
    }

    #[test]
    fn a_pair_is_the_weighted_mean_of_its_column_scores() {
        let t = table();
        let g = Gower::fit(&t, &[1.0, 1.0, 1.0]);
        // (2/4 + 1 + 1) / 3, worked by hand from the definition.
        assert!((g.between(&t, 0, &t, 1) - 2.5 / 3.0).abs() < 1e-15);
        // Weights: (2 * 1/2 + 1 * 1 + 1 * 1) / 4.
        let g2 = Gower::fit(&t, &[2.0, 1.0, 1.0]);
        assert!((g2.between(&t, 0, &t, 1) - 3.0 / 4.0).abs() < 1e-15);
    }

    #[test]
    fn a_gap_leaves_its_column_out_of_the_pair() {
        let t = table();
        let g = Gower::fit(&t, &[1.0, 1.0, 1.0]);
        // Record 3 has no number: category 1 vs 0 and ordered 0.5 vs 0.
        assert!((g.between(&t, 0, &t, 3) - (1.0 + 0.5) / 2.0).abs() < 1e-15);
        assert_eq!(g.between(&t, 3, &t, 3), 0.0);
    }

    #[test]
    fn records_with_no_column_in_common_are_counted_and_set_at_one() {
        let t = Mixed::new(vec![
            Column::Interval(vec![1.0, f64::NAN, 2.0]),
            Column::Nominal(vec![GAP, 4, 4]),
        ])
        .expect("equal lengths");
        let g = Gower::fit(&t, &[1.0, 1.0]);
        let (m, apart) = g.matrix(&t);
        assert_eq!(apart, 1);
        assert_eq!(m.get(0, 1), 1.0);
        assert!(!g.comparable(&t, 0, &t, 1));
        assert_eq!(m.get(1, 2), 0.0);
    }

    #[test]
    fn a_level_standing_for_a_gap_compares_as_a_gap() {
        // Numbers first, then a category whose level 2 is a kept blank:
        // marking level 2 as a gap gives, bit for bit, what the same table
        // with real gaps gives, in the matrix and in values.
        let numbers = [vec![1.0, 3.0, 5.0, f64::NAN], vec![0.0, 1.0, 0.5, 0.5]];
        let with = |codes: Vec<u32>| {
            Mixed::new(vec![
                Column::Interval(numbers[0].clone()),
                Column::Interval(numbers[1].clone()),
                Column::Nominal(codes),
            ])
            .expect("equal lengths")
        };
        let (blank, gaps) = (with(vec![0, 2, 0, 2]), with(vec![0, GAP, 0, GAP]));
        let weights = [1.0, 1.0, 2.0];
        let marked = Gower::fit(&blank, &weights).with_gap_levels(vec![None, None, Some(2)]);
        let plain = Gower::fit(&gaps, &weights);
        let (mb, mg) = (marked.matrix(&blank).0, plain.matrix(&gaps).0);
        for (i, j) in [(0, 1), (0, 2), (1, 3), (2, 3)] {
            assert_eq!(mb.get(i, j).to_bits(), mg.get(i, j).to_bits(), "{i} {j}");
            let values = |t: &Mixed, r: usize| {
                let Column::Nominal(c) = &t.columns[2] else {
                    unreachable!("the third column is the category")
                };
                ([numbers[0][r], numbers[1][r]], [c[r]])
            };
            let (a, b) = (values(&blank, i), values(&blank, j));
            let (c, d) = (values(&gaps, i), values(&gaps, j));
            assert_eq!(
                marked.between_values((&a.0, &a.1), (&b.0, &b.1)).to_bits(),
                plain.between_values((&c.0, &c.1), (&d.0, &d.1)).to_bits()
            );
        }
        // Two blanks share nothing in that column: records 1 and 3 are
        // compared on the numbers alone.
        assert!(mb.get(1, 3) < 1.0);
    }

    #[test]
    fn columns_of_unequal_length_are_no_table() {
        assert!(Mixed::new(vec![Column::Interval(vec![1.0]), Column::Nominal(vec![])]).is_none());
    }
}
