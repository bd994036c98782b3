//! Ordered categories (`ordered`) and flags (`flags`), end to end on the
//! demo members (invented data) with a loyalty tier and a newsletter flag
//! added: each is clustered exactly as the number it is coded to (a
//! tier's rank, a flag's 1 or 0), with every method; the outputs name
//! levels; `assign` reads the levels back; values that are no level stop
//! the run or the check at their line, with nothing written.

mod common;

use common::case::Case;
use common::kinds::write_kinds;

/// A recipe over the kinds file: four behaviour features, then `kinds`
/// (the tier and the flag, by kind or as numbers), and `method`.
fn recipe(kinds: &str, method: &str) -> String {
    format!(
        r#"recipe "kinds"
seed 7
input "data/kinds.csv" key member_id
features visits_per_month, basket_value, share_fresh, online_ratio{kinds}
missing fill median
{method}
save assignments "out/a.csv"
save profiles "out/p.json"
save model "out/m.json"
save report "out/r.html"
"#
    )
}

const BY_KIND: &str = r#"
ordered loyalty_tier "seedling" < "sprout" < "harvest"
flags newsletter"#;

const AS_NUMBERS: &str = ", tier_rank, newsletter_code";

/// Runs the recipe with the tier and flag by kind and as numbers; returns
/// both cases.
fn both(method: &str) -> (Case, Case) {
    let by_kind = Case::demo();
    write_kinds(&by_kind);
    by_kind.write("k.assort", &recipe(BY_KIND, method));
    by_kind.run("k.assort").ok();
    let numbers = Case::demo();
    write_kinds(&numbers);
    numbers.write("k.assort", &recipe(AS_NUMBERS, method));
    numbers.run("k.assort").ok();
    (by_kind, numbers)
}

#[test]
fn an_ordered_tier_and_a_flag_cluster_as_their_rank_and_one_or_zero_with_every_method() {
    for method in [
        "kmeans k 4 restarts 5",
        "kmedoids k 4 restarts 2",
        "kprototypes k 4 restarts 2",
        "tree linkage average distance gower k 4",
    ] {
        let (by_kind, numbers) = both(method);
        assert_eq!(
            by_kind.read("out/a.csv"),
            numbers.read("out/a.csv"),
            "{method}: the same members in the same segments"
        );
    }
}

#[test]
fn the_outputs_name_levels_and_shares_where_a_number_would_mislead() {
    let (case, _) = both("kmeans k 4 restarts 5");
    let report = case.read("out/r.html");
    assert!(
        report.contains("ordered &quot;seedling&quot; &lt; &quot;sprout&quot; &lt; &quot;harvest&quot;, clustered by rank"),
        "the report says how the tier was clustered"
    );
    assert!(report.contains("a flag, clustered as 1 set and 0 not"));
    let terminal = case.run("k.assort").ok().stdout();
    assert!(
        terminal.contains("loyalty_tier (ordered \"seedling\" < \"sprout\" < \"harvest\""),
        "{terminal}"
    );
    // Each segment's mean rank is shown between the levels it falls
    // between, or as a level when whole; a flag as the share set.
    let profiles: serde_json::Value = serde_json::from_str(&case.read("out/p.json")).unwrap();
    let model = case.read("out/m.json");
    assert!(model.contains("\"ordered\""), "the model keeps the levels");
    assert!(profiles["segments"].as_array().unwrap().len() == 4);
}

#[test]
fn assign_reads_the_levels_and_flag_words_back() {
    let case = Case::demo();
    write_kinds(&case);
    case.write("k.assort", &recipe(BY_KIND, "kmeans k 4 restarts 5"));
    case.run("k.assort").ok();
    case.assign("out/m.json", "data/kinds.csv", "out/s.csv")
        .ok();
    let run = case.segments_by_key("out/a.csv");
    let scored = case.segments_by_key("out/s.csv");
    assert_eq!(run.len(), 6000);
    assert_eq!(run, scored);
    // Levels are ranks only to an assort that knows kinds: the model says
    // so by its format, and one claiming an older format is refused.
    let model = case.read("out/m.json");
    assert!(model.contains("\"format\": \"assort-model/4\""));
    case.write(
        "old.json",
        &model.replace("\"assort-model/4\"", "\"assort-model/2\""),
    );
    case.assign("old.json", "data/kinds.csv", "out/o.csv")
        .fails()
        .stderr_has("which only `assort-model/4` holds");
    assert!(!case.path("out/o.csv").exists());
    // A new level in the scored file leaves its record out, counted.
    case.edit("data/kinds.csv", ",harvest,3,", ",evergreen,3,");
    let scoring = case
        .assign("out/m.json", "data/kinds.csv", "out/t.csv")
        .ok();
    let said = scoring.stdout() + &scoring.stderr();
    assert!(said.contains("assigned 5,999 records of 6,000"), "{said}");
    assert!(
        said.contains("none of its levels): loyalty_tier 1"),
        "{said}"
    );
}

#[test]
fn a_value_that_is_no_level_stops_the_run_at_its_line_with_nothing_written() {
    let case = Case::demo();
    let text = write_kinds(&case);
    // Past the checker's sample of 1,000 records: the run finds it.
    let line = 4000;
    let mut lines: Vec<String> = text.lines().map(String::from).collect();
    lines[line - 1] = lines[line - 1].replacen(",sprout,", ",Sprout,", 1);
    lines[line - 1] = lines[line - 1].replacen(",seedling,", ",Seedling,", 1);
    lines[line - 1] = lines[line - 1].replacen(",harvest,", ",Harvest,", 1);
    case.write("data/kinds.csv", &(lines.join("\n") + "\n"));
    case.write("k.assort", &recipe(BY_KIND, "kmeans k 4 restarts 5"));
    case.run("k.assort")
        .fails()
        .stderr_has(&format!(
            "`data/kinds.csv` line {line}, column 13 (`loyalty_tier`)"
        ))
        .stderr_has("which is not one of the levels of `loyalty_tier`")
        .stderr_has("the nearest level is `seedling`");
    assert!(!case.path("out").exists(), "nothing written");
}

#[test]
fn the_check_finds_a_stray_level_or_flag_value_in_the_sample() {
    let case = Case::demo();
    write_kinds(&case);
    case.edit("data/kinds.csv", ",no,0\n", ",maybe,0\n");
    case.write("k.assort", &recipe(BY_KIND, "kmeans k 4"));
    case.assort(&["check", "k.assort"], &[])
        .fails()
        .stderr_has("found `maybe`, which is not a value of the flag `newsletter`")
        .stderr_has("a flag is set by yes");
}

#[test]
fn levels_and_kinds_are_checked_with_the_fix() {
    let case = Case::demo();
    write_kinds(&case);
    for (kinds, expected) in [
        (
            "\nordered loyalty_tier \"seedling\"",
            "`ordered loyalty_tier` needs two levels or more",
        ),
        (
            "\nordered loyalty_tier \"seedling\" < \"sprout\" < \"seedling\"",
            "level `seedling` is named twice",
        ),
        (
            "\nordered loyalty_tier \"seedling\" < \"sprout\" < \"harvest\"\ntransform loyalty_tier log1p",
            "clustered by rank, evenly spaced",
        ),
        (
            "\nflags newsletter\ncategories newsletter",
            "named again here",
        ),
        (
            "\nordered loyalty_tier \"seedling\" < \"sprout\"",
            "found `harvest`, which is not one of the levels of `loyalty_tier`",
        ),
    ] {
        case.write("k.assort", &recipe(kinds, "kmeans k 4"));
        case.assort(&["check", "k.assort"], &[])
            .fails()
            .stderr_has(expected);
    }
}
