//! Each segment's readable rule (see [`crate::engine::rules`]): at most
//! three conditions on the features in original units (gaps filled as the
//! recipe fills them), with the share of the segment it captures
//! (coverage) and the share of the records it picks that are in the
//! segment (precision), both counted over every segmented record.

use super::load::Table;
use super::prepare::{self, Prepared};
use crate::engine::rules::{segment_rule, Condition, Sorted};
use crate::engine::weights::Weights;
use crate::plan::FeatureKind;
use ndarray::Array2;
use rayon::prelude::*;
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
    /// Decimal places that write `value` exactly in the column's display
    /// unit (percentage points for `as percent`): see [`tidy`].
    pub places: u32,
    /// The recipe's fill for the column's gaps, which the rule applies too.
    pub fill: Option<f64>,
    /// An ordered category or a flag: the condition is on its rank (or
    /// 1/0), and reads as levels.
    #[serde(skip_serializing_if = "FeatureKind::is_number")]
    pub kind: FeatureKind,
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

/// Rewrites a condition's threshold as the shortest decimal (in the
/// column's display unit: percentage points when `percent`) that picks
/// exactly the records the fitted threshold picks, and returns its decimal
/// places. A fitted threshold is a midpoint between two observed values
/// `a < t < b` (0.4375 between 0.437 and 0.438); any `t'` with
/// `a <= t' < b` splits the records the same way, for `>` and for `<=`,
/// so a card, the terminal and the SQL can all show the one short value
/// ("above 43.7 %") and mean exactly what the counts measured. Among
/// values with the fewest places, the one nearest the midpoint is taken.
/// Outside the observed range, the threshold is kept. One pass over the
/// column: O(n).
pub fn tidy(c: &mut Condition, values: &[f64], percent: bool) -> u32 {
    let t = c.threshold;
    let below = values
        .iter()
        .copied()
        .filter(|&v| v <= t)
        .fold(f64::NAN, f64::max);
    let above = values
        .iter()
        .copied()
        .filter(|&v| v > t)
        .fold(f64::NAN, f64::min);
    let unit = if percent { 100.0 } else { 1.0 };
    if below.is_finite() && above.is_finite() {
        for places in 0..=12u32 {
            // Candidates n / scale in raw units, scale = 10^places / unit.
            let steps = 10f64.powi(places as i32) * unit;
            let at = |n: f64| n / steps;
            let mut lo = (below * steps).ceil();
            while at(lo) < below {
                lo += 1.0;
            }
            while at(lo - 1.0) >= below {
                lo -= 1.0;
            }
            if at(lo) >= above {
                continue;
            }
            let mut hi = (above * steps).ceil() - 1.0;
            while at(hi) >= above {
                hi -= 1.0;
            }
            while at(hi + 1.0) < above {
                hi += 1.0;
            }
            let best = (t * steps).round().clamp(lo, hi);
            c.threshold = at(best);
            return places;
        }
    }
    // The shortest text that reads back as the threshold, in the unit.
    let text = format!("{:?}", t * unit);
    text.split_once('.')
        .map_or(0, |(_, f)| f.trim_end_matches('0').len() as u32)
}

/// A rule's conditions tidied (see [`tidy`]) and by column name, as they
/// are written in every output.
fn written(
    plan: &crate::plan::Plan,
    prepared: &Prepared,
    columns: &[Vec<f64>],
    conditions: &mut [Condition],
) -> Vec<RuleCondition> {
    conditions
        .iter_mut()
        .map(|c| {
            let feature = &prepared.features[c.feature];
            let percent = plan
                .display
                .get(&feature.column)
                .is_some_and(|d| d.format == crate::plan::NumberFormat::Percent);
            let places = tidy(c, &columns[c.feature], percent);
            RuleCondition {
                column: feature.column.clone(),
                op: if c.above { ">" } else { "<=" },
                value: c.threshold,
                places,
                fill: feature.fill,
                kind: feature.kind.clone(),
            }
        })
        .collect()
}

/// Rules for segments `0..k` (profile order), numbered and labelled as
/// `numbers` and `labels` say.
pub fn rules(
    plan: &crate::plan::Plan,
    prepared: &Prepared,
    table: &Table,
    labels: &[u32],
    numbers: &[usize],
    names: &[Option<String>],
) -> Vec<SegmentRule> {
    let n = prepared.kept.len();
    let d = prepared.features.len();
    // A feature's value of kept record r, as `prepare::original` gives it.
    let value = |f: usize, r: usize| {
        let fill = prepared.features[f].fill;
        table.numeric[f]
            .get(prepared.kept[r])
            .or(fill)
            .unwrap_or(0.0)
    };
    let step = n.div_ceil(FIT_RECORDS).max(1);
    let fit_rows: Vec<usize> = (0..n).step_by(step).collect();
    let x = Array2::from_shape_fn((fit_rows.len(), d), |(i, f)| value(f, fit_rows[i]));
    let sorted = Sorted::new(x.view());
    let w = prepared.weights();
    let fit_weights = w.select(&fit_rows);
    let fit_w = Weights::maybe(fit_weights.as_deref());
    // A leaf holds at least one 200th of the fitted records (members, by
    // weight), and 5.
    let min_leaf = (fit_w.total(fit_rows.len()) / 200.0).floor().max(5.0);
    // Segments' rules are independent: fitted in parallel, each into its
    // own slot.
    let fitted: Vec<Vec<Condition>> = (0..numbers.len())
        .into_par_iter()
        .map(|s| {
            let target: Vec<bool> = fit_rows.iter().map(|&i| labels[i] as usize == s).collect();
            segment_rule(x.view(), &sorted, (&target, fit_w), DEPTH, min_leaf).unwrap_or_default()
        })
        .collect();
    // Only the features some rule names are read in full, for its counts.
    let columns: Vec<Vec<f64>> = (0..d)
        .into_par_iter()
        .map(|f| match fitted.iter().flatten().any(|c| c.feature == f) {
            true => prepare::original(table, &prepared.kept, f, prepared.features[f].fill),
            false => Vec::new(),
        })
        .collect();
    let mut rules: Vec<SegmentRule> = (fitted.into_par_iter().zip(numbers.par_iter()))
        .enumerate()
        .map(|(s, (mut conditions, &number))| {
            let written = written(plan, prepared, &columns, &mut conditions);
            let c = Counted::of(&conditions, &columns, (labels, s), w);
            SegmentRule {
                segment: number,
                label: names.get(s).cloned().flatten(),
                conditions: written,
                matched: c.matched,
                matched_in_segment: c.hits,
                segment_size: c.size,
                coverage: if c.size == 0 {
                    0.0
                } else {
                    c.hits_w / c.size_w
                },
                precision: if c.matched == 0 {
                    0.0
                } else {
                    c.hits_w / c.matched_w
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

/// What a segment's rule picks over every segmented record: records in
/// the segment, picked, and picked in the segment; and the same as
/// members (summed weights, with record weights; the counts without).
struct Counted {
    size: usize,
    matched: usize,
    hits: usize,
    size_w: f64,
    matched_w: f64,
    hits_w: f64,
}

impl Counted {
    fn of(
        conditions: &[Condition],
        columns: &[Vec<f64>],
        (labels, s): (&[u32], usize),
        w: Weights<'_>,
    ) -> Counted {
        let n = labels.len();
        let holds = |i: usize| {
            !conditions.is_empty()
                && conditions
                    .iter()
                    .all(|c: &Condition| c.holds(columns[c.feature][i]))
        };
        let in_s = |i: &usize| labels[*i] as usize == s;
        let size = (0..n).filter(in_s).count();
        let (matched, hits) = (0..n)
            .filter(|&i| holds(i))
            .fold((0, 0), |(m, h), i| (m + 1, h + usize::from(in_s(&i))));
        let weight_of = |it: &mut dyn Iterator<Item = usize>| it.map(|i| w.at(i)).sum::<f64>();
        let (size_w, matched_w, hits_w) = if w.is_weighted() {
            let picked = || (0..n).filter(|&i| holds(i));
            (
                weight_of(&mut (0..n).filter(in_s)),
                weight_of(&mut picked()),
                weight_of(&mut picked().filter(in_s)),
            )
        } else {
            (size as f64, matched as f64, hits as f64)
        };
        Counted {
            size,
            matched,
            hits,
            size_w,
            matched_w,
            hits_w,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tidied(threshold: f64, values: &[f64], percent: bool) -> (f64, u32) {
        let mut c = Condition {
            feature: 0,
            above: true,
            threshold,
        };
        let places = tidy(&mut c, values, percent);
        (c.threshold, places)
    }

    #[test]
    fn a_threshold_is_the_shortest_decimal_that_splits_the_data_the_same_way() {
        // 0.4375 lies between 0.437 and 0.438: 43.7 % splits them alike.
        let shares = [0.2, 0.437, 0.438, 0.9];
        assert_eq!(tidied(0.4375, &shares, true), (0.437, 1));
        // Between 2 and 4 visits, a whole 3 does.
        assert_eq!(tidied(3.0, &[1.0, 2.0, 4.0], false), (3.0, 0));
        // Between 9 and 10 months, 9 (the lower value itself) does:
        // "at most 9" and "above 9" split 9 from 10 as 9.5 does.
        assert_eq!(tidied(9.5, &[8.0, 9.0, 10.0], false), (9.0, 0));
        // Close values need their places: 44.795 between 44.79 and 44.80.
        assert_eq!(tidied(44.795, &[44.79, 44.8], false), (44.79, 2));
    }

    #[test]
    fn the_tidied_threshold_picks_the_same_records() {
        let values: Vec<f64> = (0..500).map(|i| (i as f64 * 0.37).sin().abs()).collect();
        let mut sorted = values.clone();
        sorted.sort_by(f64::total_cmp);
        for w in sorted.windows(2).step_by(7).filter(|w| w[0] < w[1]) {
            let t = (w[0] + w[1]) / 2.0;
            let (tidy_t, _) = tidied(t, &values, true);
            for &v in &values {
                assert_eq!(v > t, v > tidy_t, "{t} -> {tidy_t} at {v}");
            }
        }
    }
}
