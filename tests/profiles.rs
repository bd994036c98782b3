//! Profiles say what drove the segments: the standardised difference of a
//! feature is measured in the space that was clustered (after the
//! transform), beside medians and quartiles in original units. Each value
//! here is recomputed from the demo's data file and its assignments, with
//! arithmetic written out in the test, not taken from assort.

mod common;

use common::case::Case;
use std::collections::HashMap;

/// Column `name` of a CSV file as text, by row.
fn column(text: &str, name: &str) -> Vec<String> {
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let at = header.iter().position(|h| *h == name).unwrap();
    lines
        .map(|l| l.split(',').nth(at).unwrap_or("").to_string())
        .collect()
}

/// Definition 7 of Hyndman and Fan (1996): linear between order statistics.
fn quantile(sorted: &[f64], q: f64) -> f64 {
    let pos = q * (sorted.len() - 1) as f64;
    let lo = pos.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (sorted[hi] - sorted[lo]) * (pos - lo as f64)
}

fn mean(xs: &[f64]) -> f64 {
    xs.iter().sum::<f64>() / xs.len() as f64
}

fn sd(xs: &[f64]) -> f64 {
    let m = mean(xs);
    (xs.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / xs.len() as f64).sqrt()
}

#[test]
fn a_log_transformed_feature_is_profiled_where_it_was_clustered() {
    let case = Case::demo();
    case.run("coop-members.assort").ok();
    let data = case.read("data/coop_members.csv");
    let assigned = case.read("out/member_segments.csv");
    let profiles = case.read("out/segment_profiles.csv");

    // The demo fills basket_value's gaps with its median, then takes
    // log1p (recipes/coop-members.assort).
    let raw: Vec<Option<f64>> = column(&data, "basket_value")
        .iter()
        .map(|v| v.parse().ok())
        .collect();
    let mut known: Vec<f64> = raw.iter().flatten().copied().collect();
    known.sort_by(f64::total_cmp);
    let fill = quantile(&known, 0.5);
    let filled: Vec<f64> = raw.iter().map(|v| v.unwrap_or(fill)).collect();
    let logged: Vec<f64> = filled.iter().map(|v| v.ln_1p()).collect();

    let keys = column(&data, "member_id");
    let segment_of: HashMap<String, String> = column(&assigned, "member_id")
        .into_iter()
        .zip(column(&assigned, "label"))
        .collect();
    let bulk: Vec<usize> = (0..keys.len())
        .filter(|&i| segment_of[&keys[i]] == "bulk planners")
        .collect();
    let pick = |xs: &[f64]| bulk.iter().map(|&i| xs[i]).collect::<Vec<f64>>();

    let expected_diff = (mean(&pick(&logged)) - mean(&logged)) / sd(&logged);
    let mut in_segment = pick(&filled);
    in_segment.sort_by(f64::total_cmp);

    let row = profiles
        .lines()
        .position(|l| l.contains(",bulk planners,"))
        .unwrap();
    let get = |name: &str| -> f64 { column(&profiles, name)[row - 1].parse().unwrap() };
    // Acceptance: the bulk planners' basket value stands above +1 in the
    // clustered space (on the raw scale it read +0.5).
    let diff = get("basket_value_std_diff");
    assert!(diff > 1.0, "{diff}");
    assert!(
        (diff - expected_diff).abs() < 1e-6,
        "{diff} vs {expected_diff}"
    );
    // Means, medians and quartiles stay in original units.
    assert!((get("basket_value_mean") - mean(&in_segment)).abs() < 1e-6);
    assert!((get("basket_value_median") - quantile(&in_segment, 0.5)).abs() < 1e-6);
    assert!((get("basket_value_q1") - quantile(&in_segment, 0.25)).abs() < 1e-6);
    assert!((get("basket_value_q3") - quantile(&in_segment, 0.75)).abs() < 1e-6);
}

#[test]
fn a_described_column_gives_each_segments_share_of_the_total() {
    let case = Case::demo();
    case.run("coop-members.assort").ok();
    let data = case.read("data/coop_members.csv");
    let assigned = case.read("out/member_segments.csv");
    let profiles = case.read("out/segment_profiles.csv");
    let label_of: HashMap<String, String> = column(&assigned, "member_id")
        .into_iter()
        .zip(column(&assigned, "label"))
        .collect();
    let keys = column(&data, "member_id");
    // Gaps are left out: a blank spend adds nothing and is not counted.
    let spend: Vec<Option<f64>> = column(&data, "spend_12m")
        .iter()
        .map(|v| v.parse().ok())
        .collect();
    assert!(
        spend.iter().any(Option::is_none),
        "the demo has gaps in spend"
    );
    let of = |label: &str| -> Vec<f64> {
        (0..keys.len())
            .filter(|&i| label_of[&keys[i]] == label)
            .filter_map(|i| spend[i])
            .collect()
    };
    let all: Vec<f64> = spend.iter().flatten().copied().collect();
    let bulk = of("bulk planners");
    let row = profiles
        .lines()
        .position(|l| l.contains(",bulk planners,"))
        .unwrap();
    let get = |name: &str| -> f64 { column(&profiles, name)[row - 1].parse().unwrap() };
    let share = bulk.iter().sum::<f64>() / all.iter().sum::<f64>();
    assert!((get("spend_12m_share_of_total") - share).abs() < 1e-6);
    assert!((get("spend_12m_total") - bulk.iter().sum::<f64>()).abs() < 1e-3);
    assert_eq!(get("spend_12m_known") as usize, bulk.len());
    let mut sorted = bulk.clone();
    sorted.sort_by(f64::total_cmp);
    assert!((get("spend_12m_median") - quantile(&sorted, 0.5)).abs() < 1e-6);
    // Bulk planners are about a fifth of members and a third of spend.
    assert!(get("share") < 0.25 && share > 0.3, "{share}");
    // A 0/1 flag's mean is the share of members who agreed.
    let flags: Vec<f64> = column(&data, "contactable")
        .iter()
        .zip(&keys)
        .filter(|(_, k)| label_of[*k] == "bulk planners")
        .map(|(v, _)| v.parse().unwrap())
        .collect();
    assert!((get("contactable_mean") - mean(&flags)).abs() < 1e-6);
}
