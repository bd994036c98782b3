//! A blank category is a gap, as a blank number is: the recipe says what
//! it means (`missing keep` as a level of its own, `missing drop` to leave
//! the record out), the check names a category whose sample shows blanks
//! without a rule, and the run stops at a blank further down with its line.
//! The rule travels in the model, so `assort assign` and the hand-off say
//! the same. Invented data written here.

mod common;

use common::case::Case;

/// 1,200 members; the branch is blank on line 1,102 only (past the
/// check's 1,000-record sample) or also on lines 3 and 5.
fn members(early_blanks: bool) -> String {
    let mut s = String::from("member_id,branch,visits,basket\n");
    for i in 0..1200 {
        let line = i + 2;
        let blank = line == 1102 || (early_blanks && (line == 3 || line == 5));
        let branch = if blank {
            ""
        } else {
            ["North", "South", "East"][i % 3]
        };
        s.push_str(&format!(
            "M{i:04},{branch},{}.{},{}\n",
            (i * 7) % 11,
            i % 10,
            20 + (i * 13) % 90
        ));
    }
    s
}

fn case(early_blanks: bool, rule: &str) -> Case {
    let case = Case::empty();
    case.write("data/m.csv", &members(early_blanks));
    case.write(
        "r.assort",
        &format!(
            "recipe \"gaps\"\nseed 3\ninput \"data/m.csv\" key member_id\nfeatures visits, basket\ncategories branch\n{rule}\nkmeans k 2 restarts 3\nsave assignments \"out/a.csv\"\nsave handoff \"out/h.csv\"\nsave model \"out/m.json\"\n"
        ),
    );
    case
}

#[test]
fn blanks_in_the_sample_without_a_rule_are_named_at_check() {
    let c = case(true, "");
    c.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("category `branch` has 2 blank values in the first 1000 records")
        .stderr_has("missing keep for branch");
}

#[test]
fn a_blank_past_the_sample_without_a_rule_stops_the_run_at_its_line() {
    let c = case(false, "");
    c.run("r.assort")
        .fails()
        .stderr_has("line 1102")
        .stderr_has("category is blank")
        .stderr_has("missing keep for branch");
    assert!(!c.path("out").exists());
}

#[test]
fn keep_makes_a_blank_a_level_of_its_own() {
    let c = case(true, "missing keep for branch");
    c.run("r.assort").ok();
    assert_eq!(c.segments_by_key("out/a.csv").len(), 1200);
    let model = c.read("out/m.json");
    assert!(model.contains("\"(blank)\""), "the level is in the model");
}

#[test]
fn drop_leaves_the_record_out_and_the_handoff_says_which_column_was_blank() {
    let c = case(true, "missing drop for branch");
    c.run("r.assort")
        .ok()
        .stdout_has("3 dropped for missing values")
        .stdout_has("missing in branch 3");
    assert_eq!(c.segments_by_key("out/a.csv").len(), 1197);
    let handoff = c.read("out/h.csv");
    let line = handoff.lines().find(|l| l.starts_with("M0001,")).unwrap();
    assert!(line.ends_with("branch is blank"), "{line}");
    // The model leaves such records out too, and counts them.
    c.assort(
        &["assign", "out/m.json", "data/m.csv", "--out", "out/s.csv"],
        &[],
    )
    .ok()
    .stderr_has("records left out: a missing value (or a blank category)");
    assert_eq!(c.segments_by_key("out/s.csv").len(), 1197);
}

#[test]
fn a_fill_for_a_category_and_keep_for_a_number_are_refused() {
    let c = case(true, "missing fill median for branch");
    c.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("`missing fill` does not apply to a category `branch`");
    let c = case(true, "missing keep for visits\nmissing keep for branch");
    c.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("`missing keep` does not apply to a number `visits`");
}

#[test]
fn keep_for_every_column_covers_the_categories_and_leaves_the_numbers_to_their_rule() {
    let c = case(true, "missing keep\nmissing fill median");
    c.run("r.assort").ok();
    assert_eq!(c.segments_by_key("out/a.csv").len(), 1200);
}

#[test]
fn under_gower_a_kept_blank_is_compared_as_a_gap_and_assign_agrees() {
    // Gower compares a pair on the columns both records have: a kept
    // blank is such a gap, not a level that matches other blanks.
    let c = case(true, "missing keep for branch");
    c.edit(
        "r.assort",
        "kmeans k 2 restarts 3",
        "kmedoids k 2 restarts 2",
    );
    c.run("r.assort").ok();
    let model: serde_json::Value = serde_json::from_str(&c.read("out/m.json")).unwrap();
    let levels = model["categories"][0]["levels"].as_array().unwrap();
    assert_eq!(
        levels[0], "(blank)",
        "the blank kept as a level, sorted first"
    );
    assert_eq!(
        model["measure"]["gower"]["gap_levels"],
        serde_json::json!([null, null, 0]),
        "and compared as a gap"
    );
    c.assign("out/m.json", "data/m.csv", "out/s.csv").ok();
    assert_eq!(
        c.segments_by_key("out/a.csv"),
        c.segments_by_key("out/s.csv")
    );
}
