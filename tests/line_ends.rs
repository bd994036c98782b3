//! Files saved with Windows line ends (`\r\n`, what spreadsheet exports
//! write), old Macintosh line ends (`\r`) or blank lines between records:
//! every message names the line an editor shows, in the check, the run
//! and `assign`, and records without a key are keyed by that line in the
//! run and in `assign` alike.
//!
//! The `csv` crate alone counts only `\n` and places a record before the
//! line ends it skips; these tests failed with its line numbers (a line
//! early in every Windows file). Data: small invented files whose lines
//! are known as they are written.

mod common;

use common::case::Case;

/// `rows` joined by `end`, after the header `id,a,b`.
fn data(rows: &[String], end: &str) -> String {
    let mut text = format!("id,a,b{end}");
    for r in rows {
        text.push_str(r);
        text.push_str(end);
    }
    text
}

/// 1,200 clean records (the checker's sample passes), then `bad`: on
/// line 1,202 of the file.
fn long_rows(bad: &str) -> Vec<String> {
    let mut rows: Vec<String> = (0..1200)
        .map(|i| format!("{i},{}.5,{}", i % 7, i % 5))
        .collect();
    rows.push(format!("9999,{bad}"));
    rows
}

fn case_with(text: &str) -> Case {
    let case = Case::empty();
    case.write("data.csv", text).write(
        "r.assort",
        "input \"data.csv\" key id\nfeatures a, b\nkmeans k 2\nsave assignments \"out/a.csv\"\n",
    );
    case
}

#[test]
fn windows_line_ends_are_named_at_the_editors_line_in_check_and_run() {
    let rows: Vec<String> = ["1,1.0,2.0", "2,1.5,2.5", "3,oops,3.0", "4,9.0,9.0"]
        .iter()
        .map(|r| r.to_string())
        .collect();
    let case = case_with(&data(&rows, "\r\n"));
    case.assort(&["check", "r.assort"], &[])
        .fails()
        .stderr_has("`data.csv` line 4, column 2 (`a`): found `oops`, expected a number");

    for end in ["\r\n", "\r", "\n"] {
        let case = case_with(&data(&long_rows("oops,3.0"), end));
        case.run("r.assort")
            .fails()
            .stderr_has("`data.csv` line 1202, column 2 (`a`): found `oops`, expected a number");
        assert!(!case.path("out").exists());
    }
}

#[test]
fn blank_lines_count_as_lines() {
    let mut rows = long_rows("oops,3.0");
    rows.insert(600, String::new());
    rows.insert(600, String::new());
    for end in ["\r\n", "\n"] {
        let case = case_with(&data(&rows, end));
        case.run("r.assort")
            .fails()
            .stderr_has("`data.csv` line 1204, column 2 (`a`): found `oops`, expected a number");
    }
}

#[test]
fn a_repeated_key_and_a_short_record_are_named_at_their_lines() {
    let mut rows = long_rows("1.0,2.0");
    rows[1000] = "7,1.0,2.0".into();
    let case = case_with(&data(&rows, "\r\n"));
    case.run("r.assort").fails().stderr_has(
        "`data.csv` line 1002, column 1 (`id`): key `7` appears again (first on line 9)",
    );
    let mut rows = long_rows("1.0,2.0");
    rows[1100] = "x1100,1.0".into();
    let case = case_with(&data(&rows, "\r\n"));
    case.run("r.assort")
        .fails()
        .stderr_has("`data.csv` line 1102: found 2 fields, expected 3 as in the header");
}

#[test]
fn keyless_records_are_keyed_by_the_same_line_in_the_run_and_in_assign() {
    let rows: Vec<String> = (0..300)
        .map(|i| format!("{i},{}.5,{}", i % 7, i % 5))
        .collect();
    let mut text = data(&rows, "\r\n");
    // A blank line after the 100th record: records after it are a line
    // further on.
    text = text.replacen("99,1.5,4\r\n", "99,1.5,4\r\n\r\n", 1);
    let case = Case::empty();
    case.write("data.csv", &text).write(
        "r.assort",
        "input \"data.csv\" no key\nfeatures a, b\nkmeans k 2\nsave assignments \"out/a.csv\"\nsave model \"out/m.json\"\n",
    );
    case.run("r.assort").ok();
    let assigned = case.read("out/a.csv");
    let keys: Vec<&str> = assigned
        .lines()
        .skip(1)
        .map(|l| l.split(',').next().unwrap_or(""))
        .collect();
    let expected: Vec<String> = (2..=101).chain(103..=302).map(|l| l.to_string()).collect();
    assert_eq!(keys, expected);
    case.assort(
        &["assign", "out/m.json", "data.csv", "--out", "out/s.csv"],
        &[],
    )
    .ok();
    assert_eq!(case.read("out/s.csv"), assigned);
}
