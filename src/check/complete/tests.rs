//! Completion offers what the checker would accept at each place.

use super::*;
use crate::check::probe::DecimalMark;

/// Columns as a sample of the demo's shape would show them.
fn sample() -> Vec<ColumnInfo> {
    let rows: &[(&str, &[&str])] = &[
        ("member_id", &["M1", "M2"]),
        ("visits_per_month", &["4.5", "1.2"]),
        ("basket_value", &["66", ""]),
        ("home_branch", &["north", "harbour"]),
        ("spend + tips", &["3", "4"]),
    ];
    rows.iter()
        .map(|(name, values)| {
            let mut c = ColumnInfo::new(name);
            for (i, v) in values.iter().enumerate() {
                c.observe(v, i as u64 + 2, DecimalMark::Point);
            }
            c
        })
        .collect()
}

fn labels(before: &str) -> Vec<String> {
    with_folder(before, Path::new("/nonexistent"))
        .items
        .into_iter()
        .map(|i| i.label)
        .collect()
}

fn with_folder(before: &str, folder: &Path) -> Completion {
    let columns = sample();
    let data = DataView {
        columns: &columns,
        sampled: 2,
        key: Some("member_id"),
        folder,
        elsewhere: &[],
    };
    complete(before, &data)
}

#[test]
fn statement_words_at_the_start() {
    assert_eq!(labels("ch"), ["choose"]);
    assert!(labels("").contains(&"kmeans".to_string()));
}

#[test]
fn features_offer_numeric_columns_but_not_the_key_text_or_those_listed() {
    assert_eq!(
        labels("features "),
        ["all", "basket_value", "spend + tips", "visits_per_month"]
    );
    assert_eq!(
        labels("features visits_per_month, "),
        ["basket_value", "spend + tips"]
    );
    assert_eq!(labels("features all "), ["except"]);
    assert_eq!(labels("features all except bas"), ["basket_value"]);
    // After a column with no comma, nothing fits.
    assert!(labels("features basket_value ").is_empty());
}

#[test]
fn a_column_that_is_not_a_word_is_inserted_quoted() {
    let c = with_folder("features sp", Path::new("/nonexistent"));
    assert_eq!(c.items[0].insert, "\"spend + tips\"");
    assert_eq!(c.start, "features ".len());
}

#[test]
fn categories_offer_text_columns_then_their_options() {
    assert_eq!(labels("categories "), ["home_branch"]);
    assert_eq!(labels("categories home_branch "), ["weight"]);
    assert!(labels("categories home_branch weight ").is_empty());
}

#[test]
fn options_not_yet_given_and_the_words_an_option_takes() {
    assert!(!labels("kmeans k 2..8 ").contains(&"k".to_string()));
    assert!(labels("kmeans k 2..8 ").contains(&"restarts".to_string()));
    assert!(labels("kmeans k ").is_empty(), "k takes a number");
    assert_eq!(labels("kmeans seeding "), ["kmeans++", "random-partition"]);
    assert_eq!(labels("tree linkage w"), ["ward", "weighted"]);
    assert_eq!(labels("choose k by s"), ["silhouette", "stability"]);
    assert_eq!(labels("input \"x.csv\" key member"), ["member_id"]);
    assert_eq!(
        labels("input \"x.csv\" key member_id "),
        ["cluster", "database", "decimal", "read", "separator"]
    );
    assert_eq!(
        labels("input \"x.parquet\" key member_id read "),
        ["passes", "whole"]
    );
}

#[test]
fn a_word_with_a_dash_or_plus_is_replaced_whole() {
    let c = with_folder("choose k by calinski-h", Path::new("/x"));
    assert_eq!(c.labels(), ["calinski-harabasz"]);
    assert_eq!(c.start, "choose k by ".len());
    let c = with_folder("kmeans seeding kmeans+", Path::new("/x"));
    assert_eq!(c.labels(), ["kmeans++"]);
    assert_eq!(c.start, "kmeans seeding ".len());
}

#[test]
fn transform_offers_columns_then_transforms() {
    assert_eq!(
        labels("transform "),
        ["basket_value", "spend + tips", "visits_per_month"]
    );
    assert_eq!(
        labels("transform basket_value "),
        ["clip", "log", "log1p", "sqrt"]
    );
    assert!(labels("transform basket_value log1p ").is_empty());
    assert!(labels("transform basket_value clip ").is_empty());
}

#[test]
fn missing_and_save_follow_their_shape() {
    assert_eq!(labels("missing "), ["drop", "fill", "keep"]);
    // `keep` is for categories: no numeric column is offered after it.
    assert!(!labels("missing keep for ").contains(&"basket_value".to_string()));
    assert_eq!(labels("missing fill "), ["mean", "median"]);
    assert_eq!(labels("missing fill median "), ["for"]);
    assert_eq!(
        labels("missing drop for "),
        ["basket_value", "spend + tips", "visits_per_month"]
    );
    assert!(labels("save ").contains(&"report".to_string()));
    assert!(!labels("save ").contains(&"kmeans".to_string()));
}

#[test]
fn columns_carry_their_kind_and_sample_statistics() {
    let c = with_folder("features bas", Path::new("/x"));
    assert_eq!(c.items[0].kind, ItemKind::Column);
    assert_eq!(
        c.items[0].detail,
        "numeric column: min 66.00, mean 66.00, max 66.00; 1 blank in the first 2 records"
    );
}

#[test]
fn quoted_paths_are_relative_to_the_recipes_folder() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::create_dir_all(dir.path().join("data")).unwrap();
    for f in [
        "data/members.csv",
        "data/members.parquet",
        "data/notes.md",
        "data/.hidden.csv",
        "model.json",
    ] {
        std::fs::write(dir.path().join(f), "").unwrap();
    }
    let c = with_folder("input \"da", dir.path());
    assert_eq!(c.labels(), ["data/"]);
    assert_eq!(c.start, "input \"".len());
    let c = with_folder("input \"data/", dir.path());
    assert_eq!(c.labels(), ["data/members.csv", "data/members.parquet"]);
    // Outside quotes, the quotes come with the path.
    let c = with_folder("input ", dir.path());
    assert_eq!(c.items[0].insert, "\"data/");
    let c = with_folder("previous \"", dir.path());
    assert_eq!(c.labels(), ["data/", "model.json"]);
    // Nothing leads out of the folder.
    assert!(with_folder("input \"../", dir.path()).items.is_empty());
}

#[test]
fn nothing_inside_a_comment() {
    assert!(labels("kmeans k 3 # res").is_empty());
}

#[test]
fn tally_and_call_offer_columns_then_options() {
    assert_eq!(
        labels("tally "),
        ["basket_value", "spend + tips", "visits_per_month"]
    );
    assert!(labels("call ").contains(&"home_branch".to_string()));
    assert_eq!(labels("call basket_value \"basket\" "), ["as", "unit"]);
    assert_eq!(
        labels("call basket_value \"basket\" as "),
        ["count", "money", "number", "percent"]
    );
}

#[test]
fn features_leave_out_columns_other_statements_use() {
    let columns = sample();
    let elsewhere = used_elsewhere("tally basket_value\nrepresents \"spend + tips\"\n");
    let data = DataView {
        columns: &columns,
        sampled: 2,
        key: Some("member_id"),
        folder: Path::new("/nonexistent"),
        elsewhere: &elsewhere,
    };
    let offered: Vec<String> = (complete("features ", &data).items.into_iter())
        .map(|i| i.label)
        .collect();
    assert_eq!(offered, ["all", "visits_per_month"]);
}

#[test]
fn the_key_of_an_input_being_typed_is_offered_from_that_files_header() {
    let dir = std::env::temp_dir().join(format!("assort-key-{}", std::process::id()));
    std::fs::create_dir_all(dir.join("data")).unwrap();
    std::fs::write(dir.join("data/m.csv"), "member_id,visits\nM1,3\n").unwrap();
    let found: Vec<String> = with_folder("input \"data/m.csv\" key ", &dir)
        .items
        .into_iter()
        .map(|i| i.label)
        .collect();
    std::fs::remove_dir_all(&dir).unwrap();
    assert_eq!(found, ["member_id", "visits"]);
}
