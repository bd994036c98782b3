//! `read passes` (src/run/passes.rs): a `kmeans ... sample N by key`
//! recipe over a Parquet input that is never read whole.
//!
//! - The demo's members (numeric features, gaps filled by median, a log
//!   transform, clipping at a quantile, z-scores) read in passes give the
//!   same segments as the same recipe over the CSV read whole: every
//!   member's segment, the centres, the model's parameters and centres to
//!   the last digit, each segment's size, share and means, and the
//!   `tally` columns' counts, means, totals and shares. So do the other
//!   preparations (drops, fills by mean and value, clipping, sqrt, robust
//!   and range scaling), and a value the transform cannot take stops both
//!   at the same line.
//! - The same members as a folder of four parts give every output byte
//!   for byte as the single file, apart from the input's name and digest.
//! - What reading in passes does not take is refused by the check at its
//!   statement; bad records (a value that is not a number, a repeated key,
//!   a blank key) stop the run at their line, with nothing written.
//!
//! Data: the invented demo (recipes/data/coop_members.csv) and its Parquet
//! copies in tests/data/parquet (written by
//! tests/reference/parquet_fixtures.py).

mod common;

use arrow_array::{ArrayRef, RecordBatch, StringArray};
use common::case::Case;
use std::path::Path;
use std::sync::Arc;

/// The demo's numeric recipe, reading `input` with `read`.
fn recipe(input: &str, read: &str) -> String {
    common::passes::recipe_with(
        input,
        read,
        "missing fill median
transform basket_value log1p
transform visits_per_month clip 0..0.995
scale zscore",
    )
}

fn fixture(name: &str) -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("tests/data/parquet")
        .join(name)
}

/// A case with the demo's CSV and its Parquet copies.
fn case() -> Case {
    let case = Case::demo();
    case.copy(&fixture("coop_members.parquet"), "data/members.parquet");
    for p in 0..4 {
        let part = format!("part-{p:05}.parquet");
        case.copy(
            &fixture("coop_members_parts").join(&part),
            &format!("data/members_parts/{part}"),
        );
    }
    case
}

/// The recipe `recipe(input, read)` in passes from Parquet against read
/// whole from the CSV.
/// Returns the records segmented.
fn same_as_read_whole(recipe: impl Fn(&str, &str) -> String) -> usize {
    let case = case();
    case.write("whole.assort", &recipe("data/coop_members.csv", ""));
    case.write(
        "passes.assort",
        &recipe("data/members.parquet", " read passes"),
    );
    common::passes::same_segments(&case, &[])
}

#[test]
fn read_in_passes_the_segments_are_those_read_whole() {
    assert_eq!(same_as_read_whole(recipe), 6_000);
}

/// The other preparations: records dropped for a gap, fills by mean and
/// by a value, clipping at both ends, the square root, and robust and
/// range scaling (order statistics and ends rather than sums).
#[test]
fn other_preparations_in_passes_are_those_read_whole() {
    for prepare in [
        "missing fill mean\nmissing drop for online_ratio\nmissing fill 0.1 for coupon_rate\n\
         transform share_bulk clip 0.01..0.99\nscale robust",
        "missing fill median\nmissing drop for coupon_rate\n\
         transform basket_value sqrt\ntransform tenure_months clip 0.05..1\nscale range",
    ] {
        let kept =
            same_as_read_whole(|input, read| common::passes::recipe_with(input, read, prepare));
        assert!(
            kept < 6_000,
            "the records with a gap are left out: {kept} kept"
        );
    }
}

#[test]
fn a_folder_of_parts_writes_what_the_single_file_writes() {
    let case = case();
    case.write(
        "one.assort",
        &recipe("data/members.parquet", " read passes"),
    );
    case.write(
        "parts.assort",
        &recipe("data/members_parts", " read passes"),
    );
    // What the run will hold, stated before it reads (from the footers).
    case.assort(&["run", "--dry-run", "one.assort"], &[])
        .ok()
        .stdout_has("read in passes: 6,000 records in")
        .stdout_has("holding at most about");
    case.run("one.assort")
        .ok()
        .stderr_has("read in passes: 6,000 records in");
    // A rerun in passes is verified against its record, the streamed
    // assignments' digest among the outputs'.
    case.assort(&["verify", "one.assort"], &[])
        .ok()
        .stdout_has("matches its run record");
    let one = case.outputs::<&str>(&[]);
    // The input's digest, as the model records it.
    let digest = || {
        let model = case.read("out/segment_model.json");
        let at = model.find("\"input_sha256\": \"").unwrap() + 17;
        model[at..at + 64].to_string()
    };
    let one_digest = digest();
    case.run("parts.assort").ok();
    let parts_digest = digest();
    // The recipes differ in the input's name, so their digests too.
    let recipe_digest = |name: &str| {
        use sha2::Digest;
        assort::text::hex(&sha2::Sha256::digest(case.read(name).as_bytes()))
    };
    let parts = case.outputs(&[
        ("data/members_parts", "data/members.parquet"),
        // The scoring SQL's table, named after the input.
        ("\"members_parts\"", "\"members\""),
        (parts_digest.as_str(), one_digest.as_str()),
        (
            recipe_digest("parts.assort").as_str(),
            recipe_digest("one.assort").as_str(),
        ),
    ]);
    assert_eq!(one.len(), parts.len());
    for ((name, a), (_, b)) in one.iter().zip(&parts) {
        assert!(a == b, "{name} differs");
    }
}

#[test]
fn what_reading_in_passes_does_not_take_is_refused_at_its_statement() {
    let case = case();
    let with = |extra: &str, input: &str| {
        case.write(
            "r.assort",
            &format!("{}{extra}\n", recipe(input, " read passes")),
        );
        case.assort(&["check", "r.assort"], &[])
    };
    with("categories home_branch", "data/members.parquet")
        .fails()
        .stderr_has("`categories` (text columns) is not available with `read passes`");
    with(
        "compare with \"data/coop_members.csv\"",
        "data/members.parquet",
    )
    .fails()
    .stderr_has("`compare` is not available with `read passes`");
    with("", "data/coop_members.csv")
        .fails()
        .stderr_has("reading in passes takes a Parquet file or a folder of Parquet parts");
    case.write(
        "r.assort",
        &recipe("data/members.parquet", " read passes")
            .replace("sample 2000 by key", "sample 2000"),
    );
    case.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("`read passes` is not available with `kmeans` without `sample N by key`");
    case.write(
        "r.assort",
        &recipe("data/members.parquet", " read sometimes"),
    );
    case.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("`whole` or `passes`");
    with("", "data/members.parquet").ok();
}

/// `cluster NAME` (the rounds on a Ballista cluster) is refused without
/// `read passes`, and in an assort built without the `ballista` feature
/// with how to build one; in one built with it, a `transform` other than
/// `clip` is refused at its statement (the executors would compute the
/// logarithm). The route itself: tests/cluster_rounds.rs.
#[test]
fn a_cluster_is_named_only_with_read_passes_and_the_cluster_engine() {
    let case = case();
    case.write("r.assort", &recipe("data/members.parquet", " cluster lake"));
    case.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("add `read passes`");
    case.write(
        "r.assort",
        &recipe("data/members.parquet", " read passes cluster lake"),
    );
    let checked = case.assort(&["check", "r.assort"], &[]).fails();
    if cfg!(feature = "ballista") {
        checked.stderr_has(
            "a `transform` other than `clip` is not available with rounds on a cluster",
        );
    } else {
        checked
            .stderr_has("built without the cluster engine")
            .stderr_has("--features ballista");
    }
}

/// A value the transform cannot take (`log` of a zero share) stops the
/// run at the record the same recipe read whole stops at.
#[test]
fn a_value_outside_the_transform_is_located_as_read_whole() {
    let case = case();
    let prepare = "missing fill median\ntransform share_fresh log";
    case.write(
        "whole.assort",
        &common::passes::recipe_with("data/coop_members.csv", "", prepare),
    );
    case.write(
        "passes.assort",
        &common::passes::recipe_with("data/members.parquet", " read passes", prepare),
    );
    let place = |run: common::case::Run| {
        let text = common::case::unwrapped(&run.stderr());
        let at = text.find(" line ").expect("a line in the message");
        text[at..].split(')').next().unwrap().to_string()
    };
    let whole = place(case.run("whole.assort").fails());
    let passes = place(case.run("passes.assort").fails());
    assert!(whole.contains("(`share_fresh`"), "{whole}");
    assert_eq!(passes, whole);
}

/// A staged assignments file a killed run left (another process's) is
/// removed by the next run's set; the run's own staged file becomes the
/// output.
#[test]
fn a_staged_file_a_killed_run_left_is_removed_by_the_next() {
    let case = case();
    case.write("r.assort", &recipe("data/members.parquet", " read passes"));
    let left = "out/member_segments.csv.4194999.stage-assort";
    case.write(left, "half of an earlier run's assignments");
    case.run("r.assort").ok();
    assert!(!case.path(left).exists(), "the leftover is removed");
    assert_eq!(case.read("out/member_segments.csv").lines().count(), 6_001);
    let staged: Vec<String> = std::fs::read_dir(case.path("out"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with("-assort"))
        .collect();
    assert!(staged.is_empty(), "{staged:?}");
}

/// A Parquet input of `parts` files with a text key `member_id` and two
/// features given as text (`None` a null), written in row groups of 1,000.
fn write_input(
    case: &Case,
    folder: &str,
    keys: &[Option<String>],
    x: &[String],
    y: &[String],
    parts: usize,
) {
    let dir = case.path(folder);
    std::fs::create_dir_all(&dir).unwrap();
    let per = keys.len().div_ceil(parts);
    for p in 0..parts {
        let rows = (p * per)..((p + 1) * per).min(keys.len());
        let batch = RecordBatch::try_from_iter(vec![
            (
                "member_id",
                Arc::new(StringArray::from(keys[rows.clone()].to_vec())) as ArrayRef,
            ),
            (
                "x",
                Arc::new(StringArray::from_iter_values(x[rows.clone()].iter())) as ArrayRef,
            ),
            (
                "y",
                Arc::new(StringArray::from_iter_values(y[rows.clone()].iter())) as ArrayRef,
            ),
        ])
        .unwrap();
        let props = parquet::file::properties::WriterProperties::builder()
            .set_max_row_group_row_count(Some(1_000))
            .build();
        let file = std::fs::File::create(dir.join(format!("part-{p}.parquet"))).unwrap();
        let mut w =
            parquet::arrow::ArrowWriter::try_new(file, batch.schema(), Some(props)).unwrap();
        w.write(&batch).unwrap();
        w.close().unwrap();
    }
}

#[test]
fn bad_records_stop_the_run_at_their_line_and_nothing_is_written() {
    let case = Case::empty();
    let n = 6_000;
    let keys: Vec<Option<String>> = (0..n).map(|i| Some(format!("M{i:05}"))).collect();
    let x: Vec<String> = (0..n).map(|i| format!("{}", (i * 37) % 101)).collect();
    let y: Vec<String> = (0..n).map(|i| format!("{}", (i * 53) % 89)).collect();
    let recipe = r#"recipe "bad"
input "data/m" key member_id read passes
features x, y
kmeans k 2..3 sample 1000 by key
save assignments "out/a.csv"
save report "out/r.html"
"#;
    case.write("r.assort", recipe);
    write_input(&case, "data/m", &keys, &x, &y, 3);
    case.run("r.assort").ok();
    let before = case.read("out/a.csv");
    assert_eq!(before.lines().count(), n + 1);

    // `twice` at record 4,500 (line 4,502), past the check's sample, in
    // the last part.
    let mut bad_y = y.clone();
    bad_y[4_500] = "twice".into();
    std::fs::remove_dir_all(case.path("data/m")).unwrap();
    write_input(&case, "data/m", &keys, &x, &bad_y, 3);
    case.run("r.assort")
        .fails()
        .stderr_has("`data/m` line 4502, column 3 (`y`)")
        .stderr_has("`twice`");
    assert_eq!(case.read("out/a.csv"), before, "earlier outputs intact");

    // A key again, 3,000 records on, in another part.
    let mut again = keys.clone();
    again[5_000] = Some("M02000".into());
    std::fs::remove_dir_all(case.path("data/m")).unwrap();
    write_input(&case, "data/m", &again, &x, &y, 3);
    case.run("r.assort")
        .fails()
        .stderr_has("key `M02000` appears again (first on line 2002)");
    assert_eq!(case.read("out/a.csv"), before);

    // A blank key.
    let mut blank = keys.clone();
    blank[3_210] = None;
    std::fs::remove_dir_all(case.path("data/m")).unwrap();
    write_input(&case, "data/m", &blank, &x, &y, 3);
    case.run("r.assort")
        .fails()
        .stderr_has("line 3212")
        .stderr_has("the key is blank");
    assert_eq!(case.read("out/a.csv"), before);
    let left: Vec<String> = std::fs::read_dir(case.path("out"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("assort"))
        .collect();
    assert!(
        left.is_empty(),
        "no staged or temporary file is left: {left:?}"
    );
}
