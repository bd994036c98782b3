//! Quarter to quarter: the demo recipe rerun on next quarter's data, with
//! and without last quarter's model. Next quarter is the demo members plus
//! 400 new members shaped like the "occasional newcomers" segment (copies
//! of that segment's members under new keys), which makes the newcomers
//! the second-largest group: numbers by size would move every name but the
//! first.
//!
//! Data: the invented demo (recipes/data), as the scenario is the demo's.

mod common;

use common::case::Case;
use std::collections::HashMap;

const DEMO: &str = "coop-members.assort";
const NEWCOMERS: &str = "occasional newcomers";

/// Key -> (segment, label) from an assignments file.
fn assigned(text: &str) -> HashMap<String, (String, String)> {
    text.lines()
        .skip(1)
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (f[0].to_string(), (f[1].to_string(), f[2].to_string()))
        })
        .collect()
}

/// Last quarter's run, then next quarter's data beside it: every member,
/// and 400 copies of newcomers under keys `N00001`...
fn last_quarter_then_next() -> Case {
    let case = Case::demo();
    case.run(DEMO).ok();
    let last = assigned(&case.read("out/member_segments.csv"));
    let data = case.read("data/coop_members.csv");
    let mut lines = data.lines();
    let header = lines.next().unwrap().to_string();
    let rows: Vec<&str> = lines.collect();
    let newcomers: Vec<&str> = rows
        .iter()
        .filter(|r| last[r.split(',').next().unwrap()].1 == NEWCOMERS)
        .copied()
        .collect();
    assert!(newcomers.len() > 100, "the demo has a newcomers segment");
    let mut next = vec![header];
    next.extend(rows.iter().map(|r| r.to_string()));
    for i in 0..400 {
        let r = newcomers[i % newcomers.len()];
        let rest = r.split_once(',').unwrap().1;
        next.push(format!("N{:05},{rest}", i + 1));
    }
    case.write("data/coop_members_q4.csv", &(next.join("\n") + "\n"));
    case.edit(DEMO, "data/coop_members.csv", "data/coop_members_q4.csv");
    // The planted grouping covers last quarter's members only.
    case.edit(
        DEMO,
        "validate against \"data/coop_members_planted.csv\" column planted_segment",
        "",
    );
    case
}

#[test]
fn with_last_quarters_model_every_name_stays_on_its_members() {
    let case = last_quarter_then_next();
    let last = assigned(&case.read("out/member_segments.csv"));
    case.edit(
        DEMO,
        "scale zscore",
        "previous \"out/segment_model.json\" assignments \"out/member_segments.csv\"\nscale zscore",
    );
    case.run(DEMO)
        .ok()
        .stdout_has("what changed since `out/segment_model.json`")
        .stdout_has("segment 5 \"occasional newcomers\" grew most: +5.3 points");
    let now = assigned(&case.read("out/member_segments.csv"));
    // Every returning member keeps segment number and name.
    for (key, (seg, label)) in &last {
        assert_eq!(&now[key], &(seg.clone(), label.clone()), "member {key}");
    }
    // The new members joined the newcomers.
    let joined = (1..=400)
        .filter(|i| now[&format!("N{i:05}")].1 == NEWCOMERS)
        .count();
    assert_eq!(joined, 400);
    let report = case.read("out/segment_report.html");
    assert!(report.contains("What changed since last run"));
    assert!(
        report.contains("5 &quot;occasional newcomers&quot;")
            || report.contains("5 \"occasional newcomers\"")
    );
    // The run record names what was carried over, with digests.
    let record = case.read("out/coop-members.run.json");
    assert!(record.contains("\"previous model\""));
    assert!(record.contains("\"matching\""));
}

#[test]
fn without_it_a_rerun_that_would_move_names_stops_and_writes_nothing() {
    let case = last_quarter_then_next();
    let before = case.read("out/member_segments.csv");
    case.run(DEMO)
        .fails()
        .stderr_has("labels would move to other segments")
        .stderr_has("label 2 \"bulk planners\"")
        .stderr_has("previous \"out/segment_model.json\" assignments \"out/member_segments.csv\"");
    assert_eq!(case.read("out/member_segments.csv"), before);
}

#[test]
fn a_rerun_on_the_same_data_is_not_stopped() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.run(DEMO).ok();
}

#[test]
fn new_labels_given_for_the_new_numbering_are_the_analysts_call() {
    // Renaming is deliberate: the guard stops a name that was last run's
    // name for another group, not a name the analyst changed.
    let case = last_quarter_then_next();
    case.edit(DEMO, "label 2 \"bulk planners\"", "label 2 \"new members\"")
        .edit(
            DEMO,
            "label 3 \"online convenience\"",
            "label 3 \"bulk planners\"",
        )
        .edit(
            DEMO,
            "label 4 \"coupon-driven\"",
            "label 4 \"online convenience\"",
        )
        .edit(
            DEMO,
            "label 5 \"occasional newcomers\"",
            "label 5 \"coupon-driven\"",
        );
    case.run(DEMO).ok();
}

#[test]
fn a_previous_model_of_other_columns_is_refused_at_check() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.edit(
        DEMO,
        "scale zscore",
        "previous \"out/segment_model.json\"\nscale zscore",
    )
    .edit(DEMO, "online_ratio, coupon_rate", "online_ratio");
    case.assort(&["check", DEMO], &[])
        .fails()
        .stderr_has("the previous model does not fit this recipe")
        .stderr_has("it clustered on `coupon_rate` too");
}

#[test]
fn a_version_1_model_still_scores_exactly_as_before() {
    let case = Case::demo();
    case.run(DEMO).ok();
    let v2 = case.read("out/segment_model.json");
    assert!(v2.contains("\"assort-model/2\""));
    // Version 1: the same model without the segments' means.
    let mut model: serde_json::Value = serde_json::from_str(&v2).unwrap();
    model["format"] = "assort-model/1".into();
    for s in model["segments"].as_array_mut().unwrap() {
        s.as_object_mut().unwrap().remove("means");
    }
    case.write("v1.json", &serde_json::to_string_pretty(&model).unwrap());
    case.assort(
        &[
            "assign",
            "v1.json",
            "data/coop_members.csv",
            "--out",
            "out/v1.csv",
        ],
        &[],
    )
    .ok();
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "data/coop_members.csv",
            "--out",
            "out/v2.csv",
        ],
        &[],
    )
    .ok();
    assert_eq!(case.read("out/v1.csv"), case.read("out/v2.csv"));
    assert_eq!(
        case.read("out/v1.csv"),
        case.read("out/member_segments.csv")
    );
}
