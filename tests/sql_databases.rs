//! The scoring and rules queries give `assort assign`'s segments however
//! the table was loaded: typed (numbers as numbers, blanks as NULL, as the
//! `CREATE TABLE` stated in the file makes it) or every column text with
//! blanks as `''` (as sqlite3's `.import` and many CSV loaders make it),
//! in SQLite (built with the tests) and in a real PostgreSQL server
//! started by the test (see common/pg.rs). Also on a file whose category
//! holds numbers (a store number, stored as an integer) and whose values
//! carry tabs, non-breaking spaces and spaces at their ends.

mod common;

use common::case::Case;
use common::pg::Postgres;
use rusqlite::{types::Value, Connection};
use std::collections::HashMap;

/// How a test loads a CSV file into a table.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Loading {
    /// `numbers` as doubles, `integers` as integers, the rest text; a
    /// blank as NULL.
    Typed,
    /// Every column text, a blank as `''`.
    AllText,
}

/// What the test data holds: the CSV text, and which columns are numbers.
struct Data<'a> {
    csv: &'a str,
    integers: &'a [&'a str],
    text: &'a [&'a str],
}

impl Data<'_> {
    fn rows(&self) -> (Vec<String>, Vec<Vec<String>>) {
        let mut reader = csv::Reader::from_reader(self.csv.as_bytes());
        let header = reader.headers().unwrap().iter().map(String::from).collect();
        let rows = reader
            .records()
            .map(|r| r.unwrap().iter().map(String::from).collect())
            .collect();
        (header, rows)
    }

    fn kind(&self, column: &str, loading: Loading) -> &'static str {
        match loading {
            Loading::AllText => "TEXT",
            _ if self.text.contains(&column) => "TEXT",
            _ if self.integers.contains(&column) => "INTEGER",
            _ => "DOUBLE PRECISION",
        }
    }
}

fn quoted(name: &str) -> String {
    format!("\"{}\"", name.replace('"', "\"\""))
}

/// Loads `data` into SQLite table `name`.
fn into_sqlite(db: &Connection, name: &str, data: &Data<'_>, loading: Loading) {
    let (header, rows) = data.rows();
    let columns: Vec<String> = header
        .iter()
        .map(|h| format!("{} {}", quoted(h), data.kind(h, loading)))
        .collect();
    db.execute(
        &format!("CREATE TABLE {} ({})", quoted(name), columns.join(", ")),
        [],
    )
    .unwrap();
    let marks = vec!["?"; header.len()].join(", ");
    let mut insert = db
        .prepare(&format!("INSERT INTO {} VALUES ({marks})", quoted(name)))
        .unwrap();
    for row in rows {
        let values: Vec<Value> = row
            .iter()
            .zip(&header)
            .map(|(v, h)| match loading {
                Loading::AllText => Value::Text(v.clone()),
                Loading::Typed if v.trim().is_empty() => Value::Null,
                Loading::Typed => match data.kind(h, loading) {
                    "TEXT" => Value::Text(v.clone()),
                    "INTEGER" => Value::Integer(v.trim().parse().unwrap()),
                    _ => Value::Real(v.trim().parse().unwrap()),
                },
            })
            .collect();
        insert.execute(rusqlite::params_from_iter(values)).unwrap();
    }
}

/// Runs a query in SQLite: every row's cells as text (NULL as empty).
fn sqlite_rows(db: &Connection, query: &str) -> Vec<Vec<String>> {
    let mut statement = db.prepare(query).unwrap();
    let width = statement.column_count();
    statement
        .query_map([], |r| {
            (0..width)
                .map(|i| {
                    Ok(match r.get::<_, Value>(i)? {
                        Value::Null => String::new(),
                        Value::Integer(v) => v.to_string(),
                        Value::Real(v) => v.to_string(),
                        Value::Text(t) => t,
                        Value::Blob(_) => "blob".into(),
                    })
                })
                .collect()
        })
        .unwrap()
        .map(Result::unwrap)
        .collect()
}

/// Loads `data` into PostgreSQL table `name` through psql's `\copy` (the
/// way a data engineer loads a CSV file there), from `file`.
fn into_postgres(
    pg: &Postgres,
    name: &str,
    data: &Data<'_>,
    file: &std::path::Path,
    loading: Loading,
) {
    let (header, _) = data.rows();
    let columns: Vec<String> = header
        .iter()
        .map(|h| format!("{} {}", quoted(h), data.kind(h, loading)))
        .collect();
    let list: Vec<String> = header.iter().map(|h| quoted(h)).collect();
    let blanks = match loading {
        // In CSV format an unquoted blank is NULL; FORCE_NOT_NULL makes it ''.
        Loading::AllText => format!(", FORCE_NOT_NULL ({})", list.join(", ")),
        Loading::Typed => String::new(),
    };
    pg.psql(&format!(
        "DROP TABLE IF EXISTS {t};\nCREATE TABLE {t} ({});\n\\copy {t} FROM '{}' WITH (FORMAT csv, HEADER true{blanks})\n",
        columns.join(", "),
        file.display(),
        t = quoted(name),
    ))
    .unwrap();
}

/// A query's rows, without the header, as text (NULL as empty).
fn postgres_rows(pg: &Postgres, query: &str) -> Vec<Vec<String>> {
    let rows = pg
        .psql(query)
        .unwrap_or_else(|e| panic!("PostgreSQL refused the query: {e}"));
    rows.iter()
        .skip(1)
        .map(|r| r.iter().map(String::from).collect())
        .collect()
}

/// An assignments or hand-off file by key: its other cells.
fn by_key(csv_text: &str) -> HashMap<String, Vec<String>> {
    let mut reader = csv::Reader::from_reader(csv_text.as_bytes());
    reader
        .records()
        .map(|r| {
            let r = r.unwrap();
            (
                r[0].to_string(),
                r.iter().skip(1).map(String::from).collect(),
            )
        })
        .collect()
}

/// Checks a scoring query's rows (key, segment, label, segment_name)
/// against `assort assign`'s assignments and the run's hand-off: every
/// record the same, none missing, none extra.
#[track_caller]
fn agrees(
    rows: &[Vec<String>],
    assigned: &HashMap<String, Vec<String>>,
    handoff: &HashMap<String, Vec<String>>,
    what: &str,
) {
    let mut agree = 0;
    for row in rows {
        let a = assigned
            .get(&row[0])
            .unwrap_or_else(|| panic!("{what}: key {:?} not in assort's assignments", row[0]));
        assert_eq!(
            (&row[1], &row[2]),
            (&a[0], &a[1]),
            "{what}: key {:?}",
            row[0]
        );
        assert_eq!(
            row[3], handoff[&row[0]][1],
            "{what}: segment name of {:?}",
            row[0]
        );
        agree += 1;
    }
    assert_eq!(agree, assigned.len(), "{what}: every record scored");
}

/// Runs the demo recipe in `case`, scores its data with `assort assign`,
/// and checks the scoring query (and the rules query, against itself
/// across loadings) in SQLite and PostgreSQL, typed and all text;
/// `integers` are the columns a typed table holds as integers.
fn scoring_agrees_everywhere(case: &Case, integers: &[&str]) {
    scoring_agrees_with_text(case, integers, &[]);
}

/// [`scoring_agrees_everywhere`] with `more_text` columns held as text in
/// a typed table too.
fn scoring_agrees_with_text(case: &Case, integers: &[&str], more_text: &[&str]) {
    let (recipe, data_file, table) = (
        "coop-members.assort",
        "data/coop_members.csv",
        "coop_members",
    );
    let csv_text = case.read(data_file);
    let text: Vec<&str> = ["member_id", "home_branch"]
        .into_iter()
        .chain(more_text.iter().copied())
        .collect();
    let data = &Data {
        csv: &csv_text,
        integers,
        text: &text,
    };
    case.run(recipe).ok();
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            data_file,
            "--out",
            "out/scored.csv",
        ],
        &[],
    )
    .ok();
    let assigned = by_key(&case.read("out/scored.csv"));
    let handoff = by_key(&case.read("out/crm_segments.csv"));
    let scoring = case.read("out/segment_scoring.sql");
    let rules = case.read("out/segment_rules.sql");
    let mut rule_results: Vec<(String, Vec<Vec<String>>)> = Vec::new();
    for loading in [Loading::Typed, Loading::AllText] {
        let db = Connection::open_in_memory().unwrap();
        into_sqlite(&db, table, data, loading);
        agrees(
            &sqlite_rows(&db, &scoring),
            &assigned,
            &handoff,
            &format!("SQLite, {loading:?}"),
        );
        rule_results.push((format!("SQLite, {loading:?}"), sqlite_rows(&db, &rules)));
    }
    if let Some(pg) = Postgres::start() {
        for loading in [Loading::Typed, Loading::AllText] {
            into_postgres(&pg, table, data, &case.path(data_file), loading);
            agrees(
                &postgres_rows(&pg, &scoring),
                &assigned,
                &handoff,
                &format!("PostgreSQL, {loading:?}"),
            );
            rule_results.push((
                format!("PostgreSQL, {loading:?}"),
                postgres_rows(&pg, &rules),
            ));
        }
    }
    // The rules query is checked against the rules' own definition in
    // tests/sql.rs (typed SQLite); here every loading gives the same rows.
    let (first, expected) = &rule_results[0];
    assert!(
        expected.iter().any(|r| !r[1].is_empty()),
        "some rule picks someone"
    );
    for (what, rows) in &rule_results[1..] {
        assert_eq!(rows, expected, "rules query: {what} against {first}");
    }
}

#[test]
fn the_demo_scores_the_same_in_sqlite_and_postgresql_typed_or_all_text() {
    scoring_agrees_everywhere(&Case::demo(), &[]);
}

/// The demo's data with a store number as a second category (a number
/// column to a database) and home branches written with a tab, a
/// non-breaking space or spaces at an end on some records.
fn awkward_values(csv_text: &str) -> String {
    let mut out = String::new();
    for (i, line) in csv_text.lines().enumerate() {
        if i == 0 {
            out.push_str(&format!("{line},store_no\n"));
            continue;
        }
        let (key, rest) = line.split_once(',').unwrap();
        let (branch, rest) = rest.split_once(',').unwrap();
        let branch = match i % 10 {
            1 => format!("{branch}\t"),
            2 => format!("{branch}\u{a0}"),
            3 => format!("  {branch} "),
            _ => branch.to_string(),
        };
        out.push_str(&format!("{key},{branch},{rest},{}\n", 1 + i % 4));
    }
    out
}

#[test]
fn a_category_of_numbers_and_values_with_tabs_and_odd_spaces_score_the_same_everywhere() {
    let case = Case::demo();
    let csv_text = awkward_values(&case.read("data/coop_members.csv"));
    case.write("data/coop_members.csv", &csv_text);
    case.edit(
        "coop-members.assort",
        "categories home_branch weight 0.5",
        "categories home_branch, store_no weight 0.5",
    );
    scoring_agrees_everywhere(&case, &["store_no"]);
    // A tab or a non-breaking space at an end is kept (SQL's TRIM removes
    // spaces only), and the run says so; spaces are trimmed.
    let run = case.run("coop-members.assort").ok();
    let out = common::case::unwrapped(&run.stdout());
    assert!(out.contains("`home_branch`: 1,200 values have a tab or other white space besides a space at an end (first on line 2: \"Riverside\\t\")"), "{out}");
    let profiles = case.read("out/segment_profiles.csv");
    assert!(
        profiles.contains("home_branch=Riverside\t")
            && profiles.contains("home_branch=Riverside\u{a0}"),
        "levels kept as written"
    );
    assert!(
        !profiles.contains("home_branch=  Riverside"),
        "spaces trimmed"
    );
}

#[test]
fn ordered_categories_and_flags_score_the_same_everywhere() {
    // The demo members (invented) with a loyalty tier in words and as
    // numbers, and a newsletter flag as `Yes`/`no` and as 1/0 (integers
    // in a typed table).
    let case = Case::demo();
    let csv_text = common::kinds::write_kinds(&case);
    case.write("data/coop_members.csv", &csv_text);
    case.edit(
        "coop-members.assort",
        "categories home_branch weight 0.5",
        "categories home_branch weight 0.5\n\
         ordered loyalty_tier \"seedling\" < \"sprout\" < \"harvest\"\n\
         ordered tier_rank 1 < 2 < 3\n\
         flags newsletter, newsletter_code",
    );
    scoring_agrees_with_text(
        &case,
        &["tier_rank", "newsletter_code"],
        &["loyalty_tier", "newsletter"],
    );
}
