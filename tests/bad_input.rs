//! Bad input, each case named: a clear message naming the file (and line
//! or option), a non-zero exit, and no output written. Cases found by
//! trying the tool as a hostile but realistic user would.

mod common;

use common::case::Case;

const RECIPE: &str = "r.assort";

fn data(rows: &[&str]) -> String {
    let mut s = String::from("id,a,b\n");
    for r in rows {
        s.push_str(r);
        s.push('\n');
    }
    s
}

/// Twelve ordinary records in two groups.
fn ordinary() -> Vec<String> {
    (0..12)
        .map(|i| format!("k{i},{},{}", (i % 2) * 5 + i / 6, (i % 3) as f64 * 0.5))
        .collect()
}

fn case_with(data_text: &str, body: &str) -> Case {
    let case = Case::empty();
    case.write("d.csv", data_text).write(
        RECIPE,
        &format!("input \"d.csv\" key id\n{body}\nsave assignments \"out/a.csv\"\n"),
    );
    case
}

fn nothing_written(case: &Case) {
    assert!(!case.path("out").exists(), "an output was written");
}

#[test]
fn a_header_naming_a_column_twice_is_refused() {
    let rows = ordinary();
    let text =
        data(&rows.iter().map(String::as_str).collect::<Vec<_>>()).replacen("id,a,b", "id,a,a", 1);
    let case = case_with(&text, "features a\nkmeans k 2");
    case.assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("its header names `a` twice (fields 2 and 3)");
    nothing_written(&case);
}

#[test]
fn a_semicolon_file_read_with_commas_gets_the_separator_suggestion() {
    // With decimal commas the field counts disagree first.
    let case = case_with("id;a;b\nk1;1,5;2\nk2;3,5;4\n", "features a, b\nkmeans k 2");
    case.assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("its header line is separated by `;`, not `,`")
        .stderr_has("separator \";\"");
    // Without them every line is one field.
    let case = case_with("id;a;b\nk1;1.5;2\nk2;3.5;4\n", "features a, b\nkmeans k 2");
    case.assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("its header is one column, `id;a;b`")
        .stderr_has("separator \";\"");
}

#[test]
fn a_decimal_comma_is_named_at_its_data_line_and_read_when_declared() {
    let rows = ordinary();
    let points = data(&rows.iter().map(String::as_str).collect::<Vec<_>>());
    let commas = points.replace(',', ";").replace('.', ",");
    let case = case_with(&commas, "features a, b\nkmeans k 2 restarts 3");
    case.edit(RECIPE, "key id", "key id separator \";\"");
    // Undeclared: the message points at the data line, not at categories.
    case.assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("`d.csv` line 3, column 3 (`b`): found `0,5`, expected a number")
        .stderr_has("give `input` the option `decimal \",\"`");
    nothing_written(&case);
    // Declared: the same numbers as the file written with points, so the
    // same segments, byte for byte.
    case.edit(RECIPE, "separator \";\"", "separator \";\" decimal \",\"");
    case.assort(&["run", RECIPE], &[]).ok();
    let with_points = case_with(&points, "features a, b\nkmeans k 2 restarts 3");
    with_points.assort(&["run", RECIPE], &[]).ok();
    assert_eq!(case.read("out/a.csv"), with_points.read("out/a.csv"));
    // A point in a decimal-comma file is refused at its line, not guessed.
    let mixed = commas.replacen("0,5", "0.5", 1);
    case.write("d.csv", &mixed);
    case.assort(&["run", RECIPE], &[])
        .fails()
        .stderr_has("found `0.5`, expected a number")
        .stderr_has("written with a decimal `.` while the file is read with `,`");
    // The decimal mark cannot be the separator.
    case.edit(RECIPE, "separator \";\"", "separator \",\"");
    case.assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("expected a mark other than the separator");
}

#[test]
fn values_too_large_to_scale_stop_the_run_instead_of_flattening_the_feature() {
    let mut rows = ordinary();
    rows[3] = "k3,1e308,0.5".into();
    rows[4] = "k4,-1e308,0.5".into();
    let case = case_with(
        &data(&rows.iter().map(String::as_str).collect::<Vec<_>>()),
        "features a, b\nkmeans k 2",
    );
    case.run(RECIPE)
        .fails()
        .stderr_has("`d.csv` line 5, column 2 (`a`): 1e308 is too large to scale");
    nothing_written(&case);
}

#[test]
fn absurd_restarts_rounds_and_micro_segments_are_refused_at_check() {
    let rows = ordinary();
    let text = data(&rows.iter().map(String::as_str).collect::<Vec<_>>());
    case_with(&text, "features a, b\nkmeans k 2 restarts 1000000000")
        .assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("expected a whole number up to 10,000")
        .stderr_has("1,000,000,000 k-means fits of 12 records");
    case_with(&text, "features a, b\nkmeans k 2 rounds 1000000000")
        .assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("expected a whole number up to 100,000");
    // More micro-segments than records: refused before the run, by name.
    case_with(&text, "features a, b\ntree linkage ward k 2 micro 50")
        .assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("12 records are too few for more than 2 micro-")
        .stderr_has("a tree over every record (no `micro`) is the better route");
    // Micro-segments of about one record each cost a k-means fit with k
    // near n and summarise nothing: the predicted cost is in the message.
    let many: Vec<String> = (0..25_000)
        .map(|i| format!("k{i},{},{}", i % 7, i % 3))
        .collect();
    let text = data(&many.iter().map(String::as_str).collect::<Vec<_>>());
    case_with(&text, "features a, b\ntree linkage ward k 2 micro 24000")
        .assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("expected at most 5,000 for 25,000 records")
        .stderr_has("600,000,000 distance measurements a round");
    // Micro-segments beyond what the linkage's matrix can hold.
    let many: Vec<String> = (0..150_000)
        .map(|i| format!("k{i},{},{}", i % 7, i % 3))
        .collect();
    let text = data(&many.iter().map(String::as_str).collect::<Vec<_>>());
    case_with(&text, "features a, b\ntree linkage average k 2 micro 24000")
        .assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("expected at most 23,170 for `average` linkage");
}

#[test]
fn a_huge_field_is_not_echoed_whole() {
    let mut rows = ordinary();
    let huge = format!("k5,{},1", "x".repeat(200_000));
    rows[5] = huge;
    // Past the checked sample it reaches the run's reader; within it, the
    // checker: both must clip it.
    let text = data(&rows.iter().map(String::as_str).collect::<Vec<_>>());
    let case = case_with(&text, "features a, b\nkmeans k 2");
    let out = case.assort(&["check", RECIPE], &[]).fails();
    assert!(
        out.stderr().len() < 4_000,
        "{} bytes of message",
        out.stderr().len()
    );
    assert!(out.stderr().contains("xxx…"));
}

fn edited_model(case: &Case, edit: impl Fn(&mut serde_json::Value)) {
    let mut m: serde_json::Value = serde_json::from_str(&case.read("out/m.json")).unwrap();
    edit(&mut m);
    case.write("edited.json", &serde_json::to_string(&m).unwrap());
}

#[test]
fn a_hand_edited_model_is_refused_with_what_is_wrong() {
    let rows = ordinary();
    let case = case_with(
        &data(&rows.iter().map(String::as_str).collect::<Vec<_>>()),
        "features a, b\nkmeans k 2\nsave model \"out/m.json\"",
    );
    case.run(RECIPE).ok();
    type Edit = fn(&mut serde_json::Value);
    let cases: [(&str, Edit); 4] = [
        ("field `features[0].divisor` (feature `a`) is 0", |m| {
            m["features"][0]["divisor"] = 0.0.into()
        }),
        ("field `centres[0][0]` holds 1e308", |m| {
            m["centres"][0][0] = 1e308.into()
        }),
        ("3 centres for 2 segments", |m| {
            let extra = m["centres"][0].clone();
            m["centres"].as_array_mut().unwrap().push(extra);
        }),
        ("segment numbers must be distinct", |m| {
            m["segments"][1]["segment"] = 1.into()
        }),
    ];
    for (says, edit) in cases {
        edited_model(&case, edit);
        case.assort(
            &["assign", "edited.json", "d.csv", "--out", "scored.csv"],
            &[],
        )
        .fails()
        .stderr_has("is not a segment model assort can read")
        .stderr_has(says);
        assert!(!case.path("scored.csv").exists());
    }
}

#[test]
fn comparing_files_without_a_key_in_common_or_with_a_key_twice_is_refused() {
    let case = Case::empty();
    case.write("old.csv", "id,segment\na1,1\na2,2\n")
        .write("new.csv", "id,segment\nb1,1\nb2,2\n")
        .write("dup.csv", "id,segment\na1,1\na2,2\na1,2\n");
    case.assort(&["compare", "old.csv", "new.csv"], &[])
        .fails()
        .stderr_has("have no key in common")
        .stderr_has("`a1` and `b1`");
    // Key columns named differently: joined, and said so.
    case.write("renamed.csv", "member,segment\na1,1\na2,1\n");
    case.assort(&["compare", "old.csv", "renamed.csv"], &[])
        .ok()
        .stdout_has("keyed by different columns, `id` and `member`");
    case.assort(&["compare", "dup.csv", "old.csv"], &[])
        .fails()
        .stderr_has("a1")
        .stderr_has("line 4");
}

#[test]
fn a_second_run_while_another_holds_the_recipe_is_refused_and_writes_nothing() {
    let rows = ordinary();
    let case = case_with(
        &data(&rows.iter().map(String::as_str).collect::<Vec<_>>()),
        "features a, b\nkmeans k 2",
    );
    // Another run of the recipe, as the kernel sees it: a lock on the file.
    let held = std::fs::File::open(case.path(RECIPE)).unwrap();
    held.lock().unwrap();
    case.run(RECIPE)
        .fails()
        .stderr_has("another run of this recipe is writing its outputs");
    nothing_written(&case);
    held.unlock().unwrap();
    case.run(RECIPE).ok();
}

#[test]
fn a_set_left_half_written_by_a_killed_run_is_put_back_first() {
    let rows = ordinary();
    let case = case_with(
        &data(&rows.iter().map(String::as_str).collect::<Vec<_>>()),
        "features a, b\nkmeans k 2",
    );
    case.run(RECIPE).ok();
    let good = case.read("out/a.csv");
    // What a run killed between its renames leaves: a new file in place,
    // the old one in its backup, the journal listing both.
    std::fs::rename(case.path("out/a.csv"), case.path("out/a.csv.99.old-assort")).unwrap();
    case.write("out/a.csv", "half-written");
    let journal = serde_json::json!({"committed": false, "entries": [{
        "target": case.path("out/a.csv"),
        "temp": case.path("out/a.csv.99.tmp-assort"),
        "backup": case.path("out/a.csv.99.old-assort"),
    }]});
    case.write(".r.assort.assort-journal", &journal.to_string());
    case.run(RECIPE)
        .ok()
        .stderr_has("an earlier run of this recipe was interrupted while writing");
    assert_eq!(case.read("out/a.csv"), good);
    assert!(!case.path(".r.assort.assort-journal").exists());
    assert!(!case.path("out/a.csv.99.old-assort").exists());
}

#[test]
fn a_latin1_byte_is_named_as_an_encoding_problem_with_the_fix() {
    let case = Case::empty();
    // `Café` saved in Latin-1: 0xE9 is no UTF-8 text.
    let mut bytes = b"id,a,b\nk1,1,2\nk2,3,4\nk3,5,6\n".to_vec();
    bytes.extend_from_slice(b"Caf\xe9,7,8\n");
    std::fs::write(case.path("d.csv"), bytes).unwrap();
    case.write(
        RECIPE,
        "input \"d.csv\" key id\nfeatures a, b\nkmeans k 2\n",
    );
    case.assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("line 5 is not UTF-8 text")
        .stderr_has("save it as UTF-8")
        .stderr_has("iconv");
}

#[test]
fn a_key_repeated_in_the_sample_is_refused_at_check() {
    let mut rows = ordinary();
    rows[4] = "k2,9,9".into();
    let case = case_with(
        &data(&rows.iter().map(String::as_str).collect::<Vec<_>>()),
        "features a, b\nkmeans k 2",
    );
    case.assort(&["check", RECIPE], &[])
        .fails()
        .stderr_has("key `k2` appears twice in `d.csv`: lines 4 and 6");
    nothing_written(&case);
}
