//! How a method compares a record with another record or with a segment's
//! centre, over the prepared matrix (the numbers, then one indicator column
//! per category level): the Euclidean distance k-means uses, a distance
//! over the rows (k-medoids with `distance manhattan`, say), Gower's
//! dissimilarity (numbers by their range, categories by match), or
//! k-prototypes' cost. The fit, the judge, the assignments and the model
//! all measure through here, so a method is judged and scored on the
//! measure it was fitted on.

use super::prepare::Prepared;
use crate::engine::gower::{self, Gower, Mixed};
use crate::engine::matrix::Condensed;
use crate::engine::{dist2, tree::Metric};
use ndarray::ArrayView2;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// The measure, with what it was fitted on (Gower's ranges).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "measure", rename_all = "kebab-case")]
pub enum Measure {
    /// k-means and trees: the Euclidean distance over the prepared row.
    Euclidean,
    /// A distance over the prepared rows.
    Rows { metric: Metric },
    /// Gower's dissimilarity: ranges and weights of the number columns,
    /// then the categories' weights.
    Gower { gower: Gower },
    /// k-prototypes: squared differences of the numbers plus `gamma[c]`
    /// for each category `c` whose level differs.
    Prototypes { gamma: Vec<f64> },
}

/// Where the categories sit in a prepared row: after `numbers` columns,
/// one block of indicators per category.
#[derive(Debug, Clone, PartialEq)]
pub struct Layout {
    pub numbers: usize,
    pub levels: Vec<usize>,
}

impl Layout {
    pub fn of(prepared: &Prepared) -> Layout {
        Layout {
            numbers: prepared.features.len(),
            levels: prepared.categories.iter().map(|c| c.levels.len()).collect(),
        }
    }

    /// The category codes a prepared row holds: in each block, the level
    /// whose indicator is set; [`gower::GAP`] when none is (a level the
    /// training data did not have).
    pub fn decode(&self, row: &[f64], out: &mut [u32]) {
        let mut at = self.numbers;
        for (&l, code) in self.levels.iter().zip(out) {
            let block = &row[at..at + l];
            at += l;
            *code = block
                .iter()
                .position(|&v| v != 0.0)
                .map_or(gower::GAP, |p| p as u32);
        }
    }
}

/// Prepared rows with their category codes decoded once, record after
/// record in one buffer.
pub struct Decoded<'a> {
    pub x: ArrayView2<'a, f64>,
    codes: Vec<u32>,
    categories: usize,
    numbers: usize,
}

impl<'a> Decoded<'a> {
    pub fn new(x: ArrayView2<'a, f64>, layout: &Layout) -> Decoded<'a> {
        let categories = layout.levels.len();
        let mut codes = vec![gower::GAP; x.nrows() * categories];
        if categories > 0 {
            codes
                .par_chunks_mut(categories)
                .enumerate()
                .for_each(|(i, out)| {
                    let row = x.row(i);
                    match row.to_slice() {
                        Some(r) => layout.decode(r, out),
                        None => layout.decode(&row.to_vec(), out),
                    }
                });
        }
        Decoded {
            x,
            codes,
            categories,
            numbers: layout.numbers,
        }
    }

    /// The prepared records, their codes taken from the level codes
    /// preparing kept (the same as decoding each row: a category's value
    /// is never 0).
    pub fn of_prepared(prepared: &'a Prepared) -> Decoded<'a> {
        let categories = prepared.codes.len();
        let n = prepared.matrix.nrows();
        let mut codes = vec![gower::GAP; n * categories];
        for (c, column) in prepared.codes.iter().enumerate() {
            for (i, &l) in column.iter().enumerate() {
                codes[i * categories + c] = l as u32;
            }
        }
        Decoded {
            x: prepared.matrix.view(),
            codes,
            categories,
            numbers: prepared.features.len(),
        }
    }

    /// Record `i`'s category codes.
    fn codes(&self, i: usize) -> &[u32] {
        &self.codes[i * self.categories..(i + 1) * self.categories]
    }

    pub fn len(&self) -> usize {
        self.x.nrows()
    }

    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    fn row(&self, i: usize) -> std::borrow::Cow<'_, [f64]> {
        let r = self.x.row(i);
        match r.to_slice() {
            Some(s) => std::borrow::Cow::Borrowed(s),
            None => std::borrow::Cow::Owned(r.to_vec()),
        }
    }
}

impl Measure {
    /// What the method minimises for record `i` of `a` against row `j` of
    /// `b` (a centre): the squared distance for k-means and k-prototypes,
    /// the dissimilarity itself for the others.
    pub fn cost(&self, a: &Decoded<'_>, i: usize, b: &Decoded<'_>, j: usize) -> f64 {
        let (ra, rb) = (a.row(i), b.row(j));
        match self {
            Measure::Euclidean => dist2(&ra, &rb),
            Measure::Rows { metric } => metric.distance(&ra, &rb),
            Measure::Gower { gower } => gower.between_values(
                (&ra[..a.numbers], a.codes(i)),
                (&rb[..b.numbers], b.codes(j)),
            ),
            Measure::Prototypes { gamma } => {
                let mut c = dist2(&ra[..a.numbers], &rb[..b.numbers]);
                for ((x, y), g) in a.codes(i).iter().zip(b.codes(j)).zip(gamma) {
                    if x != y || *x == gower::GAP {
                        c += g;
                    }
                }
                c
            }
        }
    }

    /// Whether the cost is a squared distance (its root is the distance).
    fn squared(&self) -> bool {
        matches!(self, Measure::Euclidean | Measure::Prototypes { .. })
    }

    /// The distance of record `i` of `a` from row `j` of `b`, as the
    /// assignments and the silhouette show it.
    pub fn distance(&self, a: &Decoded<'_>, i: usize, b: &Decoded<'_>, j: usize) -> f64 {
        let c = self.cost(a, i, b, j);
        if self.squared() {
            c.sqrt()
        } else {
            c
        }
    }

    /// Each record's nearest centre (ties to the lowest), its distance,
    /// and how much farther the second nearest is.
    pub fn nearest_with_margin(
        &self,
        x: &Decoded<'_>,
        centres: &Decoded<'_>,
    ) -> Vec<(u32, f64, f64)> {
        (0..x.len())
            .into_par_iter()
            .map(|i| {
                let (best, d1, d2) = crate::engine::kmeans::two_smallest(
                    (0..centres.len()).map(|j| self.distance(x, i, centres, j)),
                );
                let margin = if d2.is_finite() { d2 - d1 } else { 0.0 };
                (best, d1, margin)
            })
            .collect()
    }

    /// Each record's distance to its own segment's centre, and how much
    /// farther the nearest other centre is.
    pub fn distance_and_margin(
        &self,
        x: &Decoded<'_>,
        centres: &Decoded<'_>,
        labels: &[u32],
    ) -> Vec<(f64, f64)> {
        (0..x.len())
            .into_par_iter()
            .map(|i| {
                let own = labels[i] as usize;
                let d = self.distance(x, i, centres, own);
                let other = (0..centres.len())
                    .filter(|&j| j != own)
                    .map(|j| self.distance(x, i, centres, j))
                    .fold(f64::INFINITY, f64::min);
                (d, if other.is_finite() { other - d } else { 0.0 })
            })
            .collect()
    }

    /// The matrix of every pair of records, for methods that need one,
    /// and how many pairs shared no column (Gower's only).
    pub fn matrix(&self, x: &Decoded<'_>) -> (Condensed, usize) {
        match self {
            Measure::Gower { gower } => gower.matrix(&mixed(x)),
            _ => (
                Condensed::from_fn(x.len(), |i, j| self.distance(x, i, x, j)),
                0,
            ),
        }
    }
}

/// The prepared records as Gower's table: the number columns, then each
/// category's codes.
pub fn mixed(x: &Decoded<'_>) -> Mixed {
    let mut columns: Vec<gower::Column> = (0..x.numbers)
        .map(|f| gower::Column::Interval(x.x.column(f).to_vec()))
        .collect();
    for c in 0..x.categories {
        columns.push(gower::Column::Nominal(
            (0..x.len()).map(|i| x.codes(i)[c]).collect(),
        ));
    }
    // Every column has a value per record, so the lengths agree.
    Mixed::new(columns).expect("columns of one table are equally long")
}
