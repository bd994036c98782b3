//! Text from a recipe or a data file never becomes markup in the report nor
//! live SQL in a SQL file. Each statement whose text reaches either output
//! carries a hostile value here, and each output is read by the reader it
//! is written for: the report by an XML parser (the report is well-formed
//! XML; a browser would run what the parser sees as elements and event
//! attributes), the SQL by SQLite, which must see one statement only and
//! leave every other table alone.

mod common;

use common::case::Case;
use rusqlite::Connection;

/// Markup a browser would act on: an element with an event attribute,
/// with both quote kinds and an ampersand so that every escape is needed.
const MARKUP: &str = "<img src=x onerror=\"alert(1)\">&'";

/// `MARKUP` as a recipe string's contents (`"` escaped).
fn quoted(s: &str) -> String {
    format!("\"{}\"", s.replace('\\', "\\\\").replace('"', "\\\""))
}

/// A small data file with three plain groups, whose header, key values and
/// category levels all carry `MARKUP`.
fn hostile_data() -> String {
    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record([
        format!("id{MARKUP}"),
        format!("amount{MARKUP}"),
        "visits".to_string(),
        format!("branch{MARKUP}"),
        format!("spend{MARKUP}"),
    ])
    .unwrap();
    for i in 0..90 {
        let group = i % 3;
        let jitter = (i * 7 % 11) as f64 / 10.0;
        w.write_record([
            format!("{MARKUP}{i}"),
            format!("{:.2}", 10.0 + 40.0 * group as f64 + jitter),
            format!("{:.2}", 1.0 + 3.0 * group as f64 + jitter / 3.0),
            format!("{}{MARKUP}", ["north", "south", "east"][(i / 3) % 3]),
            format!("{:.2}", 100.0 + i as f64),
        ])
        .unwrap();
    }
    String::from_utf8(w.into_inner().unwrap()).unwrap()
}

/// A recipe with `MARKUP` in every string a person reads in the report.
fn hostile_recipe(data: &str, extra: &str) -> String {
    let m = quoted(MARKUP);
    let col = |name: &str| quoted(&format!("{name}{MARKUP}"));
    format!(
        "recipe {m} title {m} period {m} records {m}\n\
         seed 7\n\
         input {} key {}\n\
         features {}, visits\n\
         categories {}\n\
         tally {}\n\
         call {} {m} as money unit {m}\n\
         call visits {m}\n\
         missing fill median\n\
         scale zscore\n\
         kmeans k 2..4 restarts 5\n\
         choose k by silhouette\n\
         label 1 {m}\n\
         label 2 {}\n\
         brief 1 {m} action {m}\n\
         {extra}\
         save report \"out/report.html\"\n\
         save scoring \"out/scoring.sql\"\n\
         save rules \"out/rules.sql\"\n\
         save model \"out/model.json\"\n\
         save assignments \"out/assignments.csv\"\n",
        quoted(data),
        col("id"),
        col("amount"),
        col("branch"),
        col("spend"),
        col("amount"),
        quoted(&format!("second {MARKUP}")),
    )
}

/// Every element and attribute of an XML document, failing on any element
/// or attribute a browser would act on, and the number of text nodes that
/// hold `onerror` as plain text (so the test knows the hostile text got
/// there, escaped).
fn inert_markup(xml: &str, what: &str) -> usize {
    let options = roxmltree::ParsingOptions {
        allow_dtd: true,
        ..Default::default()
    };
    let doc = roxmltree::Document::parse_with_options(xml, options)
        .unwrap_or_else(|e| panic!("{what} is not well-formed: {e}"));
    let mut shown = 0;
    for node in doc.descendants() {
        if node.is_element() {
            let tag = node.tag_name().name().to_ascii_lowercase();
            assert!(
                !["img", "script", "iframe", "object", "embed"].contains(&tag.as_str()),
                "{what} holds a <{tag}> element"
            );
            for a in node.attributes() {
                assert!(
                    !a.name().to_ascii_lowercase().starts_with("on"),
                    "{what} holds an event attribute `{}` on <{tag}>",
                    a.name()
                );
            }
        } else if node.is_text() && node.text().is_some_and(|t| t.contains("onerror")) {
            shown += 1;
        }
    }
    shown
}

#[test]
fn no_recipe_or_data_text_becomes_markup_in_the_report_or_its_charts() {
    let case = Case::empty();
    let data = format!("data/shop{MARKUP}.csv");
    case.write(&data, &hostile_data());
    case.write("r.assort", &hostile_recipe(&data, ""));
    case.run("r.assort").ok();

    let report = case.read("out/report.html");
    let shown = inert_markup(&report, "the report");
    // Title, period, the word for a record, two labels, display names,
    // the unit, the file name, category levels, column names: the hostile
    // text must be there, as text, many times over.
    assert!(
        shown >= 10,
        "only {shown} text nodes of the report show the hostile text"
    );
    let charts = case.path("out/report-charts");
    let mut svgs = 0;
    for entry in std::fs::read_dir(&charts).unwrap() {
        let path = entry.unwrap().path();
        inert_markup(
            &std::fs::read_to_string(&path).unwrap(),
            &path.display().to_string(),
        );
        svgs += 1;
    }
    assert!(svgs >= 3, "only {svgs} chart files beside the report");
}

#[test]
fn the_report_of_a_rerun_with_a_previous_run_keeps_hostile_text_inert() {
    let case = Case::empty();
    let data = format!("data/shop{MARKUP}.csv");
    case.write(&data, &hostile_data());
    case.write("r.assort", &hostile_recipe(&data, ""));
    case.run("r.assort").ok();
    std::fs::rename(case.path("out"), case.path(&format!("last{MARKUP}"))).unwrap();
    let previous = format!(
        "previous {} assignments {}\n",
        quoted(&format!("last{MARKUP}/model.json")),
        quoted(&format!("last{MARKUP}/assignments.csv"))
    );
    case.write("r.assort", &hostile_recipe(&data, &previous));
    case.run("r.assort").ok();
    let report = case.read("out/report.html");
    assert!(
        report.contains("What changed since last run"),
        "the rerun's report has no change section"
    );
    assert!(inert_markup(&report, "the rerun's report") >= 10);
}

/// A file name's line feed must not end the SQL comment it is named in:
/// the rest of the name would be live SQL.
const STATEMENT: &str = "\nDROP TABLE canary;--";

#[test]
fn no_recipe_or_file_name_becomes_live_sql() {
    let case = Case::empty();
    // A recipe string cannot hold a line break, so the data file's name
    // tries the other way out of a comment and an identifier.
    let data = "data/shop\";DROP TABLE canary;--.csv".to_string();
    case.write(&data, &hostile_data());
    // Without a `recipe` statement the recipe is named by its file name.
    let recipe = format!("seg{STATEMENT}.assort");
    let text = hostile_recipe(&data, "");
    let text = text.split_once('\n').unwrap().1;
    case.write(&recipe, text);
    case.run(&recipe).ok();

    for file in ["out/scoring.sql", "out/rules.sql"] {
        let sql = case.read(file);
        let db = Connection::open_in_memory().unwrap();
        db.execute_batch("CREATE TABLE canary (x INTEGER); INSERT INTO canary VALUES (1);")
            .unwrap();
        load(&db, "shop\";DROP TABLE canary;--", &case.read(&data));
        // One statement: SQLite refuses to prepare text holding two.
        let mut stmt = db
            .prepare(&sql)
            .unwrap_or_else(|e| panic!("{file} is not one statement: {e}\n{sql}"));
        let rows = stmt.query_map([], |_| Ok(())).unwrap().count();
        assert_eq!(rows, 90, "{file} does not read every record");
        drop(stmt);
        // Run as a script too, as `sqlite3 < file` would.
        db.execute_batch(&sql).unwrap();
        let canary: i64 = db
            .query_row("SELECT count(*) FROM canary", [], |r| r.get(0))
            .unwrap();
        assert_eq!(canary, 1, "{file} touched another table");
        for line in sql.lines() {
            assert!(
                !line.trim_start().starts_with("DROP"),
                "{file} has a live line from a name: {line}"
            );
        }
    }
}

/// Loads a CSV file into `table`, numbers as REAL where they parse.
fn load(db: &Connection, table: &str, csv_text: &str) {
    let mut r = csv::Reader::from_reader(csv_text.as_bytes());
    let header: Vec<String> = r.headers().unwrap().iter().map(String::from).collect();
    let ident = |s: &str| format!("\"{}\"", s.replace('"', "\"\""));
    let columns: Vec<String> = header.iter().map(|h| ident(h)).collect();
    db.execute(
        &format!("CREATE TABLE {} ({})", ident(table), columns.join(", ")),
        [],
    )
    .unwrap();
    let marks = vec!["?"; header.len()].join(", ");
    let sql = format!("INSERT INTO {} VALUES ({marks})", ident(table));
    for row in r.records() {
        let values: Vec<rusqlite::types::Value> = row
            .unwrap()
            .iter()
            .map(|v| match v.parse::<f64>() {
                Ok(x) => rusqlite::types::Value::Real(x),
                Err(_) => rusqlite::types::Value::Text(v.to_string()),
            })
            .collect();
        db.execute(&sql, rusqlite::params_from_iter(values))
            .unwrap();
    }
}
