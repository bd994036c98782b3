//! Parquet input, on files written by a general-purpose tool: pyarrow
//! 18.1.0 wrote tests/data/parquet/ (tests/reference/parquet_fixtures.py,
//! pinned in tests/reference/parquet-requirements.txt) from the same CSV
//! files the other tests read. The same table as CSV and as Parquet must
//! give the same segments and the same outputs, byte for byte, apart from
//! the input's name and digest.
//!
//! Data: wine.csv (outside data, tests/data/ATTRIBUTION.md); the invented
//! demo's members (recipes/data), for a key, a category and gaps.

mod common;

use assort::parquet::{self as pq, As, Column, Kind};
use common::case::Case;
use std::path::{Path, PathBuf};

fn fixture(name: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/parquet")
        .join(name)
}

fn digest(case: &Case, rel: &str) -> String {
    assort::run::load::file_sha256(&case.path(rel)).unwrap()
}

/// Runs the demo from CSV, then from `parquet` (copied into the case's
/// `data/` folder), and compares every output.
fn demo_alike(input: &str) {
    let case = Case::demo();
    let from = fixture(input);
    let to = format!("data/{input}");
    if from.is_dir() {
        std::fs::create_dir_all(case.path(&to)).unwrap();
        for e in std::fs::read_dir(&from).unwrap() {
            let p = e.unwrap().path();
            case.copy(
                &p,
                &format!("{to}/{}", p.file_name().unwrap().to_string_lossy()),
            );
        }
    } else {
        case.copy(&from, &to);
    }
    case.run("coop-members.assort").ok();
    let csv = case.outputs::<&str>(&[]);
    let csv_digests = (
        digest(&case, "data/coop_members.csv"),
        digest(&case, "coop-members.assort"),
    );
    case.edit("coop-members.assort", "data/coop_members.csv", &to);
    case.run("coop-members.assort").ok();
    let parquet = case.outputs(&[
        (to.clone(), "data/coop_members.csv".into()),
        (digest(&case, &to), csv_digests.0),
        (digest(&case, "coop-members.assort"), csv_digests.1),
        // The SQL names its table after the input.
        (
            input.trim_end_matches(".parquet").to_string(),
            "coop_members".into(),
        ),
    ]);
    assert!(csv.len() >= 9, "the demo writes its outputs");
    assert_eq!(csv.len(), parquet.len());
    for ((name, a), (_, b)) in csv.iter().zip(&parquet) {
        assert!(a == b, "{name} differs between the CSV and {input}");
    }
}

#[test]
fn the_demo_from_parquet_writes_what_it_writes_from_csv() {
    demo_alike("coop_members.parquet");
}

/// Shares and ratios stored in single precision (`float32`, as some
/// extracts store them) read as the doubles their shortest text gives
/// (`0.09`, not the single's own 0.09000000357627869), so the outputs are
/// those of the CSV, byte for byte, the model's full digits included.
#[test]
fn single_precision_columns_read_as_their_csv_text_reads() {
    demo_alike("coop_members_single.parquet");
}

#[test]
fn the_demo_from_a_folder_of_four_parts_writes_the_same() {
    // The `_SUCCESS` marker in the folder is not a part.
    demo_alike("coop_members_parts");
}

#[test]
fn assign_scores_a_parquet_file_as_it_scores_its_csv() {
    let case = Case::demo();
    case.copy(
        &fixture("coop_members.parquet"),
        "data/coop_members.parquet",
    );
    case.run("coop-members.assort").ok();
    for (data, out) in [
        ("data/coop_members.csv", "from_csv.csv"),
        ("data/coop_members.parquet", "from_parquet.csv"),
    ] {
        case.assort(
            &["assign", "out/segment_model.json", data, "--out", out],
            &[],
        )
        .ok();
    }
    let (a, b) = (case.read("from_csv.csv"), case.read("from_parquet.csv"));
    assert_eq!(a.lines().count(), 6001);
    assert!(a == b, "assign gives other segments from the Parquet file");
}

#[test]
fn a_keyless_outside_table_segments_the_same_from_parquet() {
    let case = Case::empty();
    let data = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/wine.csv");
    case.copy(&data, "wine.csv");
    case.copy(&fixture("wine.parquet"), "wine.parquet");
    let recipe = |file: &str| {
        format!(
            "seed 3\ninput \"{file}\" no key\nfeatures all except cultivar\nscale zscore\nkmeans k 3 restarts 10\nsave assignments \"out/{file}.csv\"\n"
        )
    };
    case.write("csv.assort", &recipe("wine.csv"))
        .write("parquet.assort", &recipe("wine.parquet"));
    case.run("csv.assort").ok();
    case.run("parquet.assort").ok();
    let a = case.read("out/wine.csv.csv");
    assert_eq!(a.lines().count(), 179);
    assert_eq!(a, case.read("out/wine.parquet.csv"));
}

#[test]
fn each_parquet_type_reads_as_documented() {
    let path = fixture("types.parquet");
    let schema = pq::schema(&path).unwrap();
    assert_eq!(schema.records, 3);
    let kind = |name: &str| {
        let at = schema.names.iter().position(|n| n == name).unwrap();
        (at, schema.kinds[at].clone())
    };
    for n in ["id", "small", "ratio", "price", "member"] {
        assert_eq!(kind(n).1, Kind::Number, "{n}");
    }
    assert_eq!(kind("band").1, Kind::Text);
    assert_eq!(kind("joined").1, Kind::Other("a date".into()));
    assert_eq!(kind("seen").1, Kind::Other("a timestamp".into()));
    assert_eq!(kind("tags").1, Kind::Other("a list".into()));
    let read = |name: &str, how: As| pq::read(&path, &[(kind(name).0, how)], None).unwrap();
    // A 64-bit key above 2^53 keeps every digit as text.
    assert_eq!(
        read("id", As::Texts),
        [Column::Texts(vec![
            Some("9007199254740993".into()),
            Some("2".into()),
            Some("3".into())
        ])]
    );
    assert_eq!(
        read("small", As::Numbers),
        [Column::Numbers(vec![Some(1.0), Some(-2.0), None])]
    );
    assert_eq!(
        read("ratio", As::Numbers),
        [Column::Numbers(vec![Some(0.25), None, Some(1.5)])]
    );
    // A decimal is the double its text parses to.
    assert_eq!(
        read("price", As::Numbers),
        [Column::Numbers(vec![Some(12.34), Some(0.1), None])]
    );
    assert_eq!(
        read("member", As::Numbers),
        [Column::Numbers(vec![Some(1.0), Some(0.0), None])]
    );
    // An empty string is a gap, as a blank CSV field is.
    assert_eq!(
        read("band", As::Texts),
        [Column::Texts(vec![Some("gold".into()), None, None])]
    );
    assert!(matches!(
        pq::read(&path, &[(kind("seen").0, As::Numbers)], None),
        Err(pq::ReadError::Unsupported { .. })
    ));
}

#[test]
fn a_timestamp_used_as_a_feature_is_refused_at_check_with_advice() {
    let case = Case::empty();
    case.copy(&fixture("types.parquet"), "types.parquet");
    case.write(
        "r.assort",
        "input \"types.parquet\" key id\nfeatures small, seen\nmissing fill median\nkmeans k 2\nsave assignments \"out/a.csv\"\n",
    );
    case.run("r.assort")
        .fails()
        .stderr_has("`seen` holds a timestamp in the Parquet file, which assort does not read")
        .stderr_has("derive a number when making the extract");
    assert!(!case.path("out").exists(), "nothing is written");
}

#[test]
fn parts_that_disagree_on_their_columns_are_refused_naming_the_part() {
    let case = Case::empty();
    std::fs::create_dir_all(case.path("mixed")).unwrap();
    case.copy(&fixture("types.parquet"), "mixed/a.parquet");
    case.copy(&fixture("wine.parquet"), "mixed/b.parquet");
    case.write(
        "r.assort",
        "input \"mixed\" no key\nfeatures small\nmissing fill median\nkmeans k 2\nsave assignments \"out/a.csv\"\n",
    );
    case.run("r.assort")
        .fails()
        .stderr_has("part `b.parquet` has other columns than the first part");
    assert!(!case.path("out").exists(), "nothing is written");
}

#[test]
fn a_damaged_parquet_file_is_refused_at_check_not_crashed_on() {
    let case = Case::empty();
    let whole = std::fs::read(fixture("wine.parquet")).unwrap();
    // Cut short (the footer gone), and not Parquet at all.
    std::fs::write(case.path("cut.parquet"), &whole[..whole.len() / 2]).unwrap();
    case.write("text.parquet", "id,a\n1,2\n");
    for file in ["cut.parquet", "text.parquet"] {
        case.write(
            "r.assort",
            &format!("input \"{file}\" no key\nfeatures all\nkmeans k 2\nsave assignments \"out/a.csv\"\n"),
        );
        case.run("r.assort")
            .fails()
            .stderr_has("not a Parquet file assort can read");
        assert!(!case.path("out").exists(), "nothing is written");
    }
}

#[test]
fn features_all_names_the_columns_of_types_it_does_not_read() {
    let case = Case::empty();
    case.copy(&fixture("types.parquet"), "types.parquet");
    case.write(
        "r.assort",
        "input \"types.parquet\" key id\nfeatures all\nmissing fill median\nkmeans k 2\n",
    );
    let out = case.assort(&["check", "r.assort"], &[]).ok().stderr();
    let said = common::case::unwrapped(&out);
    assert!(
        said.contains("took 4 numeric columns: `small`, `ratio`, `price`, `member`"),
        "{said}"
    );
    assert!(said.contains("text columns `band`"), "{said}");
    assert!(
        said.contains("columns of types assort does not read (dates, times, lists...) `joined`, `seen`, `tags`"),
        "{said}"
    );
}
