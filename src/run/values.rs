//! Value columns (`tally`): what each segment holds of columns that
//! were not clustered on, such as spend or a consent flag. Gaps are left
//! out, not filled: a member whose spend is unknown adds nothing to a
//! total and is not counted in a mean. With record weights (`represents`)
//! a record counts as the members it stands for: the means, quartiles and
//! totals are weighted (a total is the sum of weight times value, what the
//! members hold if each holds the record's value).

use super::load::Table;
use crate::engine::exact::Sum;
use crate::engine::stats;
use serde::Serialize;

/// A described column within a group of records.
#[derive(Debug, Clone, Serialize)]
pub struct ValueSummary {
    /// Records in the group with a value.
    pub known: usize,
    pub mean: Option<f64>,
    pub median: Option<f64>,
    /// First and third quartiles (Hyndman and Fan's definition 7).
    pub q1: Option<f64>,
    pub q3: Option<f64>,
    pub total: f64,
    /// The group's share of the column's total over every segmented record
    /// (`None` when that total is 0).
    pub share_of_total: Option<f64>,
}

/// A described column: all segmented records, then each segment in the
/// order of the run's profiles.
#[derive(Debug, Clone, Serialize)]
pub struct ValueProfile {
    pub column: String,
    pub overall: ValueSummary,
    pub segments: Vec<ValueSummary>,
}

/// Summaries of the described columns, which the table holds after the
/// `features` numeric columns. `kept` are the table rows segmented and
/// `labels` their segments (0-based, profile order), `k` segments.
///
/// O(n log n) per column (the quartiles sort each group).
///
/// `exact` (for `sample ... by key`, unweighted): means, totals and shares
/// from exact sums ([`exact`]), so that they do not depend on the records'
/// order and a run in passes gives them to the bit.
pub fn profiles(
    table: &Table,
    features: usize,
    names: &[String],
    (kept, weights): (&[usize], Option<&[f64]>),
    (labels, k): (&[u32], usize),
    exact: bool,
) -> Vec<ValueProfile> {
    let w = crate::engine::weights::Weights::maybe(weights);
    names
        .iter()
        .enumerate()
        .map(|(j, name)| {
            let col = &table.numeric[features + j];
            let mut all = Group::default();
            let mut groups = vec![Group::default(); k];
            for (i, (&row, &l)) in kept.iter().zip(labels).enumerate() {
                if let Some(v) = col.get(row) {
                    all.push(v, w.at(i));
                    groups[l as usize].push(v, w.at(i));
                }
            }
            let grand = all.total();
            let weighted = w.is_weighted();
            let mut profile = ValueProfile {
                column: name.clone(),
                overall: all.summary(grand, weighted),
                segments: groups.iter().map(|g| g.summary(grand, weighted)).collect(),
            };
            let bound = crate::engine::exact::largest(&all.values);
            let sums: Option<Vec<Sum>> = (groups.iter())
                .map(|g| {
                    let mut sum = Sum::new(bound).ok()?;
                    g.values.iter().for_each(|&v| sum.add(v));
                    Some(sum)
                })
                .collect();
            if let (true, Some(sums)) = (exact && !weighted, sums) {
                self::exact(&mut profile, &sums);
            }
            profile
        })
        .collect()
}

/// Replaces a column's counts, means, totals and shares of the total by
/// those of exact sums, one per segment (`sums`, profile order; the
/// overall is their sum): the medians and quartiles stay.
pub fn exact(profile: &mut ValueProfile, sums: &[Sum]) {
    let mut all = match sums.first() {
        Some(&first) => first,
        None => return,
    };
    sums.iter().skip(1).for_each(|s| all.merge(s));
    let grand = all.total();
    let summarise = |v: &mut ValueSummary, sum: &Sum| {
        v.known = sum.count() as usize;
        v.mean = sum.mean();
        v.total = sum.total();
        v.share_of_total = (grand != 0.0).then(|| v.total / grand);
    };
    summarise(&mut profile.overall, &all);
    for (v, sum) in profile.segments.iter_mut().zip(sums) {
        summarise(v, sum);
    }
}

/// A group's known values and their records' weights.
#[derive(Clone, Default)]
struct Group {
    values: Vec<f64>,
    weights: Vec<f64>,
}

impl Group {
    fn push(&mut self, v: f64, w: f64) {
        self.values.push(v);
        self.weights.push(w);
    }

    /// Σ w v (the plain sum, every weight being 1 without weights).
    fn total(&self) -> f64 {
        (self.values.iter().zip(&self.weights))
            .map(|(v, w)| w * v)
            .sum()
    }

    fn summary(&self, grand_total: f64, weighted: bool) -> ValueSummary {
        let w = weighted.then_some(self.weights.as_slice());
        let q = super::prepare::quartiles(&self.values, w);
        let total = self.total();
        ValueSummary {
            known: self.values.len(),
            mean: match w {
                Some(w) => stats::mean_weighted(&self.values, w),
                None => stats::mean(&self.values),
            },
            median: q.map(|q| q[1]),
            q1: q.map(|q| q[0]),
            q3: q.map(|q| q[2]),
            total,
            share_of_total: (grand_total != 0.0).then(|| total / grand_total),
        }
    }
}
