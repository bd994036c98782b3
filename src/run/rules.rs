//! Each segment's readable rule (see [`crate::engine::rules`]): at most
//! three conditions on the features in original units (gaps filled as the
//! recipe fills them), with the share of the segment it captures
//! (coverage) and the share of the records it picks that are in the
//! segment (precision), both counted over every segmented record.

use super::load::Table;
use super::prepare::{self, Prepared};
use crate::engine::rules::{segment_rule, Condition, Sorted};
use ndarray::Array2;
use serde::Serialize;

/// Conditions per rule, at most.
pub const DEPTH: usize = 3;
/// Records the trees are fitted on, at most: above it, every m-th record.
pub const FIT_RECORDS: usize = 100_000;

/// One condition, by column name: `column > value` or `column <= value`.
#[derive(Debug, Clone, Serialize)]
pub struct RuleCondition {
    pub column: String,
    /// `">"` or `"<="`.
    pub op: &'static str,
    pub value: f64,
    /// The recipe's fill for the column's gaps, which the rule applies too.
    pub fill: Option<f64>,
}

/// A segment's rule, in the order of the run's profiles.
#[derive(Debug, Clone, Serialize)]
pub struct SegmentRule {
    pub segment: usize,
    pub label: Option<String>,
    /// Empty when no rule separates the segment from the rest.
    pub conditions: Vec<RuleCondition>,
    /// Segmented records the rule picks, and those of them in the segment.
    pub matched: usize,
    pub matched_in_segment: usize,
    pub segment_size: usize,
    pub coverage: f64,
    pub precision: f64,
    /// What the rules query delivers, where a record goes to the first
    /// rule it meets in [`query_order`]: records it gives this segment,
    /// and those of them in the segment. A record two rules pick counts
    /// for the earlier one only, so these can be below `matched`.
    pub delivered: usize,
    pub delivered_in_segment: usize,
}

/// The order the rules query tries the rules in: highest precision first,
/// ties in profile order; rules without conditions are left out.
pub fn query_order(rules: &[SegmentRule]) -> Vec<usize> {
    let mut order: Vec<usize> = (0..rules.len())
        .filter(|&i| !rules[i].conditions.is_empty())
        .collect();
    order.sort_by(|&a, &b| rules[b].precision.total_cmp(&rules[a].precision));
    order
}

/// Fills in what the rules query delivers (see [`SegmentRule::delivered`]).
fn deliver(rules: &mut [SegmentRule], columns: &[Vec<f64>], labels: &[u32], features: &[String]) {
    let order = query_order(rules);
    // Each rule's conditions as (feature, above, threshold), looked up once.
    let tests: Vec<Vec<(usize, bool, f64)>> = rules
        .iter()
        .map(|r| {
            r.conditions
                .iter()
                .map(|c| {
                    let f = features.iter().position(|n| *n == c.column).unwrap_or(0);
                    (f, c.op == ">", c.value)
                })
                .collect()
        })
        .collect();
    let holds = |s: usize, i: usize| {
        tests[s].iter().all(|&(f, above, t)| {
            let v = columns[f][i];
            if above {
                v > t
            } else {
                v <= t
            }
        })
    };
    for (i, &l) in labels.iter().enumerate() {
        if let Some(&s) = order.iter().find(|&&s| holds(s, i)) {
            rules[s].delivered += 1;
            rules[s].delivered_in_segment += usize::from(l as usize == s);
        }
    }
}

/// Rules for segments `0..k` (profile order), numbered and labelled as
/// `numbers` and `labels` say.
pub fn rules(
    prepared: &Prepared,
    table: &Table,
    labels: &[u32],
    numbers: &[usize],
    names: &[Option<String>],
) -> Vec<SegmentRule> {
    let n = prepared.kept.len();
    let d = prepared.features.len();
    let columns: Vec<Vec<f64>> = (0..d)
        .map(|f| prepare::original(table, &prepared.kept, f, prepared.features[f].fill))
        .collect();
    let step = n.div_ceil(FIT_RECORDS).max(1);
    let fit_rows: Vec<usize> = (0..n).step_by(step).collect();
    let x = Array2::from_shape_fn((fit_rows.len(), d), |(i, f)| columns[f][fit_rows[i]]);
    let sorted = Sorted::new(x.view());
    let min_leaf = (fit_rows.len() / 200).max(5);
    let mut rules: Vec<SegmentRule> = numbers
        .iter()
        .enumerate()
        .map(|(s, &number)| {
            let target: Vec<bool> = fit_rows.iter().map(|&i| labels[i] as usize == s).collect();
            let conditions =
                segment_rule(x.view(), &sorted, &target, DEPTH, min_leaf).unwrap_or_default();
            let holds = |i: usize| {
                conditions
                    .iter()
                    .all(|c: &Condition| c.holds(columns[c.feature][i]))
            };
            let size = labels.iter().filter(|&&l| l as usize == s).count();
            let (matched, hits) = if conditions.is_empty() {
                (0, 0)
            } else {
                (0..n).filter(|&i| holds(i)).fold((0, 0), |(m, h), i| {
                    (m + 1, h + usize::from(labels[i] as usize == s))
                })
            };
            SegmentRule {
                segment: number,
                label: names.get(s).cloned().flatten(),
                conditions: conditions
                    .iter()
                    .map(|c| RuleCondition {
                        column: prepared.features[c.feature].column.clone(),
                        op: if c.above { ">" } else { "<=" },
                        value: c.threshold,
                        fill: prepared.features[c.feature].fill,
                    })
                    .collect(),
                matched,
                matched_in_segment: hits,
                segment_size: size,
                coverage: if size == 0 {
                    0.0
                } else {
                    hits as f64 / size as f64
                },
                precision: if matched == 0 {
                    0.0
                } else {
                    hits as f64 / matched as f64
                },
                delivered: 0,
                delivered_in_segment: 0,
            }
        })
        .collect();
    let names: Vec<String> = prepared.features.iter().map(|f| f.column.clone()).collect();
    deliver(&mut rules, &columns, labels, &names);
    rules
}
