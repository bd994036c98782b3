//! The SQL assort writes runs in a real database (SQLite, built with the
//! tests) and agrees with assort: the scoring query puts every demo member
//! in the segment `assort assign` gives, except members whose two nearest
//! centres are within 1e-9 of each other, which are counted (none on the
//! demo).

mod common;

use common::case::Case;
use rusqlite::{types::Value, Connection};
use std::collections::HashMap;

/// Loads a CSV file into table `name`: text for `text_columns`, numbers
/// (REAL) for the rest, a blank field as NULL.
fn load(db: &Connection, name: &str, csv: &str, text_columns: &[&str]) {
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let columns: Vec<String> = header
        .iter()
        .map(|h| {
            let kind = if text_columns.contains(h) {
                "TEXT"
            } else {
                "REAL"
            };
            format!("\"{h}\" {kind}")
        })
        .collect();
    db.execute(
        &format!("CREATE TABLE \"{name}\" ({})", columns.join(", ")),
        [],
    )
    .unwrap();
    let marks = vec!["?"; header.len()].join(", ");
    let mut insert = db
        .prepare(&format!("INSERT INTO \"{name}\" VALUES ({marks})"))
        .unwrap();
    for line in lines {
        let values: Vec<Value> = line
            .split(',')
            .zip(&header)
            .map(|(v, h)| match v {
                "" => Value::Null,
                v if text_columns.contains(h) => Value::Text(v.to_string()),
                v => Value::Real(v.parse().unwrap()),
            })
            .collect();
        insert.execute(rusqlite::params_from_iter(values)).unwrap();
    }
}

/// Rows of a CSV file by their first column.
fn by_key(csv: &str) -> HashMap<String, Vec<String>> {
    csv.lines()
        .skip(1)
        .map(|l| {
            let cells: Vec<String> = l.split(',').map(String::from).collect();
            (cells[0].clone(), cells)
        })
        .collect()
}

#[test]
fn the_scoring_query_gives_every_member_the_segment_assort_assign_gives() {
    let case = Case::demo();
    case.run("coop-members.assort").ok();
    case.assort(
        &[
            "assign",
            "out/segment_model.json",
            "data/coop_members.csv",
            "--out",
            "out/scored.csv",
        ],
        &[],
    )
    .ok();
    let assigned = by_key(&case.read("out/scored.csv"));

    let db = Connection::open_in_memory().unwrap();
    load(
        &db,
        "coop_members",
        &case.read("data/coop_members.csv"),
        &["member_id", "home_branch"],
    );
    let query = case.read("out/segment_scoring.sql");
    let mut statement = db.prepare(&query).unwrap();
    let scored: Vec<(String, i64, Option<String>)> = statement
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect();

    assert_eq!(
        scored.len(),
        assigned.len(),
        "the same records get a segment"
    );
    let (mut agree, mut near_ties, mut differ) = (0, 0, Vec::new());
    for (key, segment, label) in &scored {
        let row = &assigned[key];
        // key, segment, label, distance, nearer_by
        let nearer_by: f64 = row[4].parse().unwrap();
        if row[1] == segment.to_string() && row[2] == label.clone().unwrap_or_default() {
            agree += 1;
        } else if nearer_by < 1e-9 {
            near_ties += 1;
        } else {
            differ.push(key.clone());
        }
    }
    assert!(
        differ.is_empty(),
        "{} members differ: {:?}",
        differ.len(),
        &differ[..differ.len().min(5)]
    );
    assert_eq!(near_ties, 0, "no demo member sits on a border within 1e-9");
    assert_eq!(agree, 6000);
}
