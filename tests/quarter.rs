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
    next_quarter_after(case)
}

/// Runs `case`'s recipe as last quarter's run, then puts next quarter's
/// data beside it (see [`last_quarter_then_next`]).
fn next_quarter_after(case: Case) -> Case {
    case.run(DEMO).ok();
    let last = assigned(&case.read("out/member_segments.csv"));
    let data = case.read("data/coop_members.csv");
    let mut lines = data.lines();
    let header = lines.next().unwrap().to_string();
    let rows: Vec<&str> = lines.collect();
    let newcomers: Vec<&str> = rows
        .iter()
        // Segment 5, labelled NEWCOMERS in the demo recipe (a recipe
        // without that label still numbers it 5: numbers follow size).
        .filter(|r| last[r.split(',').next().unwrap()].0 == "5")
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

/// Adds the `previous` line that keeps last run's names on its members.
fn keep_names(case: &Case) {
    case.edit(
        DEMO,
        "scale zscore",
        "previous \"out/segment_model.json\" assignments \"out/member_segments.csv\"\nscale zscore",
    );
}

#[test]
fn with_last_quarters_model_every_name_stays_on_its_members() {
    let case = last_quarter_then_next();
    let last = assigned(&case.read("out/member_segments.csv"));
    keep_names(&case);
    case.run(DEMO)
        .ok()
        .stdout_has("what changed since `out/segment_model.json`")
        .stdout_has("segment 5 \"occasional newcomers\" grew most: +5.3 points")
        .stdout_has("population stability index tenure_months");
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
    // The period was left as last quarter's: the report dates the change
    // by it and says to check the dates.
    assert!(report.contains("What changed since the twelve months to September 2026"));
    assert!(report.contains("<b>Check the dates:</b>"));
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
fn with_the_model_alone_segments_are_matched_on_their_centres() {
    let case = last_quarter_then_next();
    let last = assigned(&case.read("out/member_segments.csv"));
    case.edit(
        DEMO,
        "scale zscore",
        "previous \"out/segment_model.json\"\nscale zscore",
    );
    case.run(DEMO)
        .ok()
        .stdout_has("segments matched on their centres")
        .stdout_has("5 matched one to one");
    let now = assigned(&case.read("out/member_segments.csv"));
    // Centres carry the names: each label still names most of last
    // quarter's members it named (the newcomers' segment grew, so some
    // border members may move; nearly all stay).
    let stayed = last.iter().filter(|(k, v)| &now[*k] == *v).count();
    assert!(
        stayed as f64 > 0.98 * last.len() as f64,
        "{stayed} of {}",
        last.len()
    );
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
fn a_new_name_for_a_segment_last_run_left_unnamed_is_the_analysts_call() {
    // Last quarter named segment 1 only; this quarter the review names the
    // others. Names last run never gave cannot land on other members.
    let case = Case::demo();
    for n in 2..=5 {
        let text = case.read(DEMO);
        let line = text
            .lines()
            .find(|l| l.starts_with(&format!("label {n} ")))
            .unwrap()
            .to_string();
        case.edit(DEMO, &line, "");
    }
    let case = next_quarter_after(case);
    case.write(
        DEMO,
        &(case.read(DEMO)
            + "label 2 \"bulk planners\"\nlabel 3 \"online convenience\"\nlabel 4 \"coupon-driven\"\nlabel 5 \"occasional newcomers\"\n"),
    );
    case.run(DEMO).ok();
}

#[test]
fn the_advice_of_a_stopped_rerun_names_only_files_that_exist() {
    // A recipe that saves no model: `previous` has nothing to read, so the
    // help must not offer it.
    let case = Case::demo();
    case.edit(DEMO, "save model \"out/segment_model.json\"", "");
    let case = next_quarter_after(case);
    let run = case
        .run(DEMO)
        .fails()
        .stderr_has("labels would move to other segments")
        .stderr_has("save model");
    assert!(
        !run.stderr().contains("previous \"out/segment_model.json\""),
        "{}",
        run.stderr()
    );
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

/// The demo data with every tenure 12 months longer and every fresh-food
/// share times 0.7, as tests/reference/drift.py builds it.
fn shifted_demo(data: &str) -> String {
    let mut lines = data.lines();
    let header = lines.next().unwrap();
    let names: Vec<&str> = header.split(',').collect();
    let at = |n: &str| names.iter().position(|h| *h == n).unwrap();
    let (tenure, fresh) = (at("tenure_months"), at("share_fresh"));
    let mut out = vec![header.to_string()];
    for l in lines {
        let mut f: Vec<String> = l.split(',').map(String::from).collect();
        f[tenure] = format!("{}", f[tenure].parse::<f64>().unwrap() + 12.0);
        f[fresh] = format!("{}", f[fresh].parse::<f64>().unwrap() * 0.7);
        out.push(f.join(","));
    }
    out.join("\n") + "\n"
}

/// Scores `data` with the demo run's model, through the library.
fn drift_of(case: &Case, data: &str) -> assort::run::model::Drift {
    let model = assort::run::model::read_model(&case.path("out/segment_model.json")).unwrap();
    let table = assort::run::model::read_for_scoring(&case.path(data), data, &model).unwrap();
    assort::run::model::score(&model, &table, &[])
        .1
        .drift
        .unwrap()
}

#[test]
fn drift_matches_an_independent_computation_and_warns_only_when_shifted() {
    // Reference: tests/data/drift_reference.json, computed with numpy by
    // tests/reference/drift.py on the raw demo values.
    let reference: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
                .join("tests/data/drift_reference.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let case = Case::demo();
    case.run(DEMO).ok();
    case.write(
        "data/shifted.csv",
        &shifted_demo(&case.read("data/coop_members.csv")),
    );
    let same = drift_of(&case, "data/coop_members.csv");
    let moved = drift_of(&case, "data/shifted.csv");
    for f in ["tenure_months", "share_fresh", "share_bulk"] {
        let psi =
            |d: &assort::run::model::Drift| d.features.iter().find(|x| x.column == f).unwrap().psi;
        let want = reference[f]["shifted"].as_f64().unwrap();
        assert!(
            (psi(&moved) - want).abs() < 1e-9,
            "{f}: {} against {want}",
            psi(&moved)
        );
        assert_eq!(
            psi(&same),
            reference[f]["unshifted"].as_f64().unwrap(),
            "{f}"
        );
    }
    // The training data itself, scored with the model read back from its
    // file (every value bit for bit): every index exactly 0, about 1 % far
    // (the 99th percentile's definition), no warning.
    assert!(same.features.iter().all(|f| f.psi == 0.0));
    assert!(same.far_share <= 0.011, "{}", same.far_share);
    assert!(same.warnings.is_empty(), "{:?}", same.warnings);
    assert!(moved
        .warnings
        .iter()
        .any(|w| w.contains("tenure_months") && w.contains("share_fresh")));
    // The far share, from a fixed snapshot of the demo's model, against
    // numpy's count with the same model (tests/reference/drift.py).
    let snapshot = case.path("snapshot.json");
    std::fs::copy(
        std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/demo_model.json"),
        &snapshot,
    )
    .unwrap();
    for (data, which) in [
        ("data/coop_members.csv", "unshifted"),
        ("data/shifted.csv", "shifted"),
    ] {
        let model = assort::run::model::read_model(&snapshot).unwrap();
        let table = assort::run::model::read_for_scoring(&case.path(data), data, &model).unwrap();
        let d = assort::run::model::score(&model, &table, &[])
            .1
            .drift
            .unwrap();
        let want = reference["far_share"][which].as_f64().unwrap();
        assert!(
            (d.far_share - want).abs() < 1e-12,
            "{which}: {} against {want}",
            d.far_share
        );
    }
    // And on the command line.
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "data/shifted.csv",
            "--out",
            "s.csv",
        ],
        &[],
    )
    .ok()
    .stderr_has("warning: the data has moved since the segments were built");
    let plain = case
        .assort(
            &[
                "assign",
                "out/segment_model.json",
                "data/coop_members.csv",
                "--out",
                "p.csv",
            ],
            &[],
        )
        .ok();
    assert!(!plain.stderr().contains("warning"), "{}", plain.stderr());
}

#[test]
fn a_previous_model_made_with_other_settings_is_named_with_the_differences() {
    // Last quarter's model came from a robust-scaled recipe with fewer k;
    // this recipe scales by z-score: the check and the run name both sides.
    let case = Case::demo();
    case.edit(DEMO, "scale zscore", "scale robust").edit(
        DEMO,
        "kmeans k 2..8 restarts 50",
        "kmeans k 2..6 restarts 20",
    );
    case.run(DEMO).ok();
    case.edit(DEMO, "scale robust", "scale zscore")
        .edit(
            DEMO,
            "kmeans k 2..6 restarts 20",
            "kmeans k 2..8 restarts 50",
        )
        .edit(
            DEMO,
            "label 1 ",
            "previous \"out/segment_model.json\" assignments \"out/member_segments.csv\"\nlabel 1 ",
        );
    let said = "last run's model was made with other settings (recipe `coop-member-segments`): it had `scale robust`, `kmeans k 2..6 restarts 20`; this recipe has `scale zscore`, `kmeans k 2..8 restarts 50`";
    case.assort(&["check", DEMO], &[]).ok().stderr_has(said);
    case.run(DEMO).ok().stderr_has(said);
}

#[test]
fn the_same_settings_are_not_named_and_a_model_without_them_is_read_as_before() {
    let case = last_quarter_then_next();
    case.edit(
        DEMO,
        "label 1 ",
        "previous \"out/segment_model.json\" assignments \"out/member_segments.csv\"\nlabel 1 ",
    );
    let check = case.assort(&["check", DEMO], &[]).ok();
    assert!(
        !check.stderr().contains("other settings"),
        "{}",
        check.stderr()
    );
    // The model records the statements that shaped it, one line each.
    let model: serde_json::Value =
        serde_json::from_str(&case.read("out/segment_model.json")).unwrap();
    let settings = model["provenance"]["settings"].as_array().unwrap();
    assert!(settings.iter().any(|s| s == "features tenure_months, visits_per_month, basket_value, share_fresh, share_bulk, share_prepared, online_ratio, coupon_rate"), "{settings:?}");
    assert!(settings.iter().any(|s| s == "scale zscore"), "{settings:?}");
}

#[test]
fn a_second_run_on_the_same_data_says_it_compares_the_data_with_itself() {
    // The README's first next-quarter line points at the recipe's own
    // outputs: after one run on the new data, a second run (a label fixed,
    // say) would compare the quarter with itself.
    let case = last_quarter_then_next();
    case.edit(
        DEMO,
        "label 1 ",
        "previous \"out/segment_model.json\" assignments \"out/member_segments.csv\"\nlabel 1 ",
    );
    let first = case.run(DEMO).ok();
    assert!(
        !first.stdout().contains("this same data"),
        "{}",
        first.stdout()
    );
    // The period was not changed for the new data: said on the first run.
    assert!(
        common::case::unwrapped(&first.stdout()).contains(
            "the recipe's period is still \"the twelve months to September 2026\", as last run's"
        ),
        "{}",
        first.stdout()
    );
    let second = case.run(DEMO).ok();
    assert!(
        common::case::unwrapped(&second.stdout())
            .contains("warning: last run's model was made from this same data"),
        "{}",
        second.stdout()
    );
    let report = case.read("out/segment_report.html");
    assert!(
        report.contains("Nothing to compare: last run&#39;s model was made from this same data")
            || report.contains("Nothing to compare: last run's model was made from this same data"),
        "the report does not show the quarter compared with itself"
    );
    assert!(!report.contains("<table class=\"changes\">"));
}

/// New joiners as the README's weekly workflow scores them: demo members'
/// behaviour under new keys, with the tenure of people who just joined
/// (0 to 2 months).
fn new_joiners(data: &str) -> String {
    let mut lines = data.lines();
    let header = lines.next().unwrap();
    let tenure = header
        .split(',')
        .position(|h| h == "tenure_months")
        .unwrap();
    let mut out = vec![header.to_string()];
    for (i, line) in lines.take(600).enumerate() {
        let mut cells: Vec<String> = line.split(',').map(String::from).collect();
        cells[0] = format!("J{:05}", i + 1);
        cells[tenure] = (i % 3).to_string();
        out.push(cells.join(","));
    }
    out.join("\n") + "\n"
}

#[test]
fn new_joiners_scored_with_their_tenure_expected_to_differ_raise_no_false_alarm() {
    let case = Case::demo();
    case.run(DEMO).ok();
    case.write(
        "data/joiners.csv",
        &new_joiners(&case.read("data/coop_members.csv")),
    );
    let args = [
        "assign",
        "out/segment_model.json",
        "data/joiners.csv",
        "--out",
        "out/joiners.csv",
    ];
    // Without the option, their tenure alone cries wolf.
    let plain = case.assort(&args, &[]).ok();
    assert!(plain.stderr().contains("warning: the data has moved since the segments were built: a major shift in tenure_months"), "{}", plain.stderr());
    let scored = case.read("out/joiners.csv");
    // Told that tenure differs by design: shown, not warned about; the
    // segments are the same (the option changes the check, not the model).
    let told = case
        .assort(
            &[&args[..], &["--expect-shift", "tenure_months"]].concat(),
            &[],
        )
        .ok();
    let err = told.stderr();
    assert!(!err.contains("warning:"), "{err}");
    assert!(
        err.contains("tenure_months") && err.contains("(expected to differ)"),
        "{err}"
    );
    assert!(
        err.contains("measured without tenure_months (expected to differ for these records)"),
        "{err}"
    );
    assert_eq!(case.read("out/joiners.csv"), scored);
    // It silences only what it names: data that moved in another feature
    // (fresh share 30 % lower, tenure 12 months longer) still warns.
    case.write(
        "data/shifted.csv",
        &shifted_demo(&case.read("data/coop_members.csv")),
    );
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "data/shifted.csv",
            "--out",
            "out/s.csv",
            "--expect-shift",
            "tenure_months",
        ],
        &[],
    )
    .ok()
    .stderr_has(
        "warning: the data has moved since the segments were built: a major shift in share_fresh",
    );
    // A feature the model does not have is refused, naming those it has.
    case.assort(&[&args[..], &["--expect-shift", "tenure"]].concat(), &[])
        .fails()
        .stderr_has("the model has no numeric feature `tenure`");
}

#[test]
fn the_report_says_what_changed_in_peoples_words_and_on_each_card() {
    let case = last_quarter_then_next();
    let last = assigned(&case.read("out/member_segments.csv"));
    keep_names(&case);
    case.edit(
        DEMO,
        "the twelve months to September 2026",
        "the twelve months to December 2026",
    );
    case.run(DEMO).ok();
    let now = assigned(&case.read("out/member_segments.csv"));
    let report = case.read("out/segment_report.html");
    let dates = "Then: the twelve months to September 2026, 6,000 members. Now: the twelve months to December 2026, 6,400 members.";
    assert!(report.contains(dates), "the change is dated");
    assert!(!report.contains("Check the dates"));
    // Each card's change, recomputed from the two assignments files.
    let size = |a: &HashMap<String, (String, String)>, seg: &str| {
        a.values().filter(|(s, _)| s == seg).count() as i64
    };
    for seg in ["1", "2", "3", "4", "5"] {
        let card = report
            .split("<div class=\"card\"")
            .find(|c| c.contains(&format!("(segment {seg})")))
            .unwrap();
        let change = size(&now, seg) - size(&last, seg);
        let sign = if change > 0 {
            "+"
        } else if change < 0 {
            "-"
        } else {
            ""
        };
        let said = format!(
            "Since the twelve months to September 2026: {sign}{} members,",
            change.abs()
        );
        assert!(card.contains(&said), "segment {seg}: `{said}` in {card}");
        let joined = (1..=400)
            .filter(|i| now[&format!("N{i:05}")].0 == seg)
            .count();
        if joined > 0 {
            let words = format!("{joined} of its members joined since.");
            assert!(card.contains(&words), "segment {seg}: `{words}`");
        }
    }
    // Where the joiners went, in the movement table; the averages by the
    // names and formats of `call`.
    assert!(report.contains("400 joined since and 0 left"));
    assert!(report.contains("<tr><td>joined since</td>"));
    assert!(report.contains("<td>average basket</td>"));
    assert!(!report.contains("<td>basket_value</td>"));
}
