//! Issue 19's acceptance on a mixed customer table in Parquet: numbers
//! with gaps, a category of 32 levels, an ordered band (dictionary text),
//! a flag (a Parquet boolean), a record weight (`represents household`,
//! a Parquet integer) and a size floor in weighted members, run end to end with each
//! of k-prototypes, k-medoids on Gower's dissimilarity and an
//! average-linkage tree on Gower's dissimilarity: profiles, report,
//! model, `assign` on the Parquet file, a rerun with `previous`, and
//! `verify`.
//!
//! Data: the invented demo members (recipes/data), with the added columns
//! derived from them; written here with the `parquet` crate's Arrow
//! writer (files written by a general-purpose tool are read in
//! tests/parquet_input.rs).

mod common;

use arrow_array::types::Int32Type;
use arrow_array::{
    ArrayRef, BooleanArray, DictionaryArray, Float64Array, Int32Array, RecordBatch, StringArray,
};
use common::case::Case;
use std::sync::Arc;

/// Writes `data/members.parquet`: key, four behaviour numbers (blanks
/// as nulls), `region` (home branch by one of eight districts: 32 levels),
/// `loyalty_tier` (from tenure), `newsletter` (agreed to be contacted, a
/// boolean) and `household` (members the record stands for, 1 to 4 in
/// turn: this test's construction).
fn write_members(case: &Case) {
    let text = case.read("data/coop_members.csv");
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    let header = reader.headers().unwrap().clone();
    let at = |n: &str| header.iter().position(|h| h == n).unwrap();
    let rows: Vec<csv::StringRecord> = reader.records().map(Result::unwrap).collect();
    let number = |name: &str| -> ArrayRef {
        let i = at(name);
        Arc::new(Float64Array::from(
            rows.iter()
                .map(|r| r[i].parse::<f64>().ok())
                .collect::<Vec<_>>(),
        ))
    };
    let region: DictionaryArray<Int32Type> = rows
        .iter()
        .enumerate()
        .map(|(n, r)| format!("{} district {}", &r[at("home_branch")], 1 + n % 8))
        .collect::<Vec<_>>()
        .iter()
        .map(String::as_str)
        .collect();
    let tier: DictionaryArray<Int32Type> = rows
        .iter()
        .map(|r| {
            let months: f64 = r[at("tenure_months")].parse().unwrap();
            common::kinds::TIERS[(months >= 12.0) as usize + (months >= 48.0) as usize]
        })
        .collect();
    let newsletter = BooleanArray::from(
        rows.iter()
            .map(|r| &r[at("contactable")] == "1")
            .collect::<Vec<_>>(),
    );
    let household = Int32Array::from(
        (0..rows.len())
            .map(|n| 1 + (n % 4) as i32)
            .collect::<Vec<_>>(),
    );
    let batch = RecordBatch::try_from_iter(vec![
        (
            "member_id",
            Arc::new(StringArray::from_iter_values(
                rows.iter().map(|r| r[0].to_string()),
            )) as ArrayRef,
        ),
        ("visits_per_month", number("visits_per_month")),
        ("basket_value", number("basket_value")),
        ("share_fresh", number("share_fresh")),
        ("online_ratio", number("online_ratio")),
        ("region", Arc::new(region) as ArrayRef),
        ("loyalty_tier", Arc::new(tier) as ArrayRef),
        ("newsletter", Arc::new(newsletter) as ArrayRef),
        ("household", Arc::new(household) as ArrayRef),
    ])
    .unwrap();
    let file = std::fs::File::create(case.path("data/members.parquet")).unwrap();
    let mut writer = parquet::arrow::ArrowWriter::try_new(file, batch.schema(), None).unwrap();
    writer.write(&batch).unwrap();
    writer.close().unwrap();
}

/// The mixed table's recipe with `method`, a size floor of `floor`
/// weighted members, and `extra` statements.
fn recipe(method: &str, floor: usize, extra: &str) -> String {
    format!(
        r#"recipe "mixed-parquet"
seed 11
input "data/members.parquet" key member_id
features visits_per_month, basket_value, share_fresh, online_ratio
categories region
ordered loyalty_tier "seedling" < "sprout" < "harvest"
flags newsletter
represents household
missing fill median
{method}
choose k by silhouette floor {floor}
save assignments "out/a.csv"
save profiles "out/p.json"
save model "out/m.json"
save report "out/r.html"
{extra}
"#
    )
}

/// Runs `method` on the mixed table, scores the Parquet file with the
/// saved model, reruns with `previous`, verifies; returns the members
/// `assign` put in another segment than the run.
fn end_to_end(method: &str, floor: usize) -> usize {
    let case = Case::demo();
    write_members(&case);
    case.write("m.assort", &recipe(method, floor, ""));
    let out = case.run("m.assort").ok().stdout();
    assert!(out.contains("region (32 levels)"), "{method}: {out}");
    let profiles: serde_json::Value = serde_json::from_str(&case.read("out/p.json")).unwrap();
    let segments = profiles["segments"].as_array().unwrap();
    assert!(segments.len() >= 3, "{method}");
    // 6,000 records stand for 15,000 members (1 + n mod 4 summed).
    let members: f64 = segments
        .iter()
        .map(|s| s["weighted_members"].as_f64().unwrap())
        .sum();
    assert_eq!(members, 15_000.0, "{method}");
    for s in segments {
        assert!(
            s["weighted_members"].as_f64().unwrap() >= floor as f64,
            "{method}: the floor holds in weighted members"
        );
    }
    let words = out.split_whitespace().collect::<Vec<_>>().join(" ");
    assert!(
        words.contains("6,000 records stand for 15,000 weighted members"),
        "{method}: {out}"
    );
    let report = case.read("out/r.html");
    assert!(
        report.contains("&quot;seedling&quot; &lt; &quot;sprout&quot;"),
        "{method}"
    );
    assert!(
        report.contains("a flag, clustered as 1 set and 0 not"),
        "{method}"
    );
    assert!(
        report.contains("weighted members</span> ("),
        "{method}: the cards lead with members"
    );
    case.assign("out/m.json", "data/members.parquet", "out/s.csv")
        .ok();
    let run = case.segments_by_key("out/a.csv");
    let scored = case.segments_by_key("out/s.csv");
    assert_eq!((run.len(), scored.len()), (6000, 6000), "{method}");
    let moved = run.iter().filter(|(k, s)| scored[*k] != **s).count();
    std::fs::copy(case.path("out/m.json"), case.path("last_model.json")).unwrap();
    std::fs::copy(case.path("out/a.csv"), case.path("last_a.csv")).unwrap();
    let previous = "previous \"last_model.json\" assignments \"last_a.csv\"";
    case.write("m.assort", &recipe(method, floor, previous));
    case.run("m.assort").ok();
    assert_eq!(
        run,
        case.segments_by_key("out/a.csv"),
        "{method}: numbers kept"
    );
    case.assort(&["verify", "m.assort"], &[]).ok();
    moved
}

#[test]
fn kprototypes_on_a_mixed_parquet_table_end_to_end() {
    assert_eq!(end_to_end("kprototypes k 3..5 restarts 3", 60), 0);
}

#[test]
fn kmedoids_on_gower_on_a_mixed_parquet_table_end_to_end() {
    assert_eq!(end_to_end("kmedoids k 3..5 restarts 2", 60), 0);
}

#[test]
fn an_average_gower_tree_on_a_mixed_parquet_table_end_to_end() {
    // Average linkage isolates a pair of outlying members (standing for 6
    // members) at every k from 3 to 5: a floor of 60 weighted members stops
    // the run and names the methods that take the same columns; a floor of
    // 2 lets it through.
    let case = Case::demo();
    write_members(&case);
    let method = "tree linkage average distance gower k 3..5";
    case.write("m.assort", &recipe(method, 60, ""));
    case.run("m.assort")
        .fails()
        .stderr_has("floor of 60 weighted members: k = 3 has a segment of 6,")
        .stderr_has("(k-medoids or k-prototypes, which take the same columns)");
    assert!(!case.path("out").exists(), "nothing written");
    // A tree's segments are its cut, not nearest medoids, so `assign`
    // (nearest medoid) may move some members; the count is reported.
    let moved = end_to_end(method, 2);
    eprintln!("average Gower tree: assign moved {moved} of 6,000 members");
    assert!(moved < 600, "{moved}");
}
