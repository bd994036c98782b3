//! Value columns (`tally`): what each segment holds of columns that
//! were not clustered on, such as spend or a consent flag. Gaps are left
//! out, not filled: a member whose spend is unknown adds nothing to a
//! total and is not counted in a mean.

use super::load::Table;
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
pub fn profiles(
    table: &Table,
    features: usize,
    names: &[String],
    kept: &[usize],
    labels: &[u32],
    k: usize,
) -> Vec<ValueProfile> {
    names
        .iter()
        .enumerate()
        .map(|(j, name)| {
            let col = &table.numeric[features + j];
            let mut all = Vec::with_capacity(kept.len());
            let mut groups = vec![Vec::new(); k];
            for (&row, &l) in kept.iter().zip(labels) {
                if let Some(v) = col.get(row) {
                    all.push(v);
                    groups[l as usize].push(v);
                }
            }
            let grand: f64 = all.iter().sum();
            ValueProfile {
                column: name.clone(),
                overall: summary(&all, grand),
                segments: groups.iter().map(|g| summary(g, grand)).collect(),
            }
        })
        .collect()
}

fn summary(values: &[f64], grand_total: f64) -> ValueSummary {
    let sorted = stats::sorted(values);
    let total: f64 = values.iter().sum();
    ValueSummary {
        known: values.len(),
        mean: stats::mean(values),
        median: stats::quantile_sorted(&sorted, 0.5),
        q1: stats::quantile_sorted(&sorted, 0.25),
        q3: stats::quantile_sorted(&sorted, 0.75),
        total,
        share_of_total: (grand_total != 0.0).then(|| total / grand_total),
    }
}
